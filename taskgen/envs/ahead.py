"""A batch's episode numbers and its next episodes' start draws, made ahead many at a time.

An episode's start (its key, then its cue or path, its noise bits and per-step keys) is a chain of
hashes of its (stream, episode number), a dozen numpy calls or more. Made when an episode starts,
those calls run on the few environments that ended on the last step, and their per-call cost made
the restart the largest part of a batched step. Every draw is a function of (stream, episode)
alone, so the batch makes them ahead instead: for each environment a window of its next episodes,
filled for many environments at once, from which a restart takes its rows with one gather per
array. The values are the ones :meth:`Core.begin` would draw (the SyncVectorEnv equivalence tests
hold the batch to the single envs).
"""

from __future__ import annotations

import numpy as np

from .core import Core
from .streams import episode_keys_of, stream_bases

AHEAD = 64                  # episodes per environment drawn at once, at most
AHEAD_BYTES = 1 << 25       # and at most about this many bytes of them for the whole batch
FILL_EPISODES = 1024        # episodes drawn per call when windows are refilled (their temporaries fit in cache)


class NextEpisodes:
    """Each environment's stream, the episode it plays, and the start draws (:meth:`Core.draws`) of a
    window of its next ``size`` episodes.

    Environment i's window is rows ``i · (size + 1) …`` of every array: episodes ``first[i] …
    first[i] + size − 1`` of its stream where ``ready`` is set, then one row that never is. The next
    episode it starts is the one at row ``cursor[i]``. A restart that meets a row not ready refills,
    from its next episode on, every environment whose window is at least half used or not ready,
    so refills come for many environments at once.
    """

    def __init__(self, core: Core) -> None:
        self.core = core
        n = core.num_envs
        sample = core.draws(np.zeros(1, dtype=np.int64), np.zeros(1, dtype=np.uint64))
        per_episode = max(1, sum(value.nbytes for value in sample.values()))
        self.size = size = int(max(1, min(AHEAD, AHEAD_BYTES // (per_episode * n) - 1)))
        self.arrays = {name: np.zeros((n * (size + 1),) + value.shape[1:], dtype=value.dtype)
                       for name, value in sample.items()}
        self.ready = np.zeros(n * (size + 1), dtype=bool)
        self.streams = np.zeros(n, dtype=np.uint64)
        self.bases = stream_bases(self.streams)          # each stream's hash, for its episodes' keys
        self.base_row = np.arange(n, dtype=np.int64) * (size + 1)
        self.first = np.ones(n, dtype=np.int64)
        self.cursor = self.base_row.copy()
        self._slots = np.arange(size, dtype=np.int64)

    def numbers(self) -> np.ndarray:
        """int64[N]: the episode number each environment plays."""
        return self.first + (self.cursor - self.base_row) - 1

    def begun(self, rows: np.ndarray, streams: np.ndarray, episodes: np.ndarray) -> None:
        """Environments ``rows`` began episodes ``episodes`` of streams ``streams`` elsewhere (a reset):
        their windows follow (a window on another stream, or without the next episode, holds none)."""
        following = episodes + 1
        slot = following - self.first[rows]
        kept = (streams == self.streams[rows]) & (slot >= 0) & (slot < self.size)
        self.cursor[rows[kept]] = self.base_row[rows[kept]] + slot[kept]
        moved = rows[~kept]
        self.streams[moved] = streams[~kept]
        self.bases[moved] = stream_bases(streams[~kept])
        self.first[moved] = following[~kept]
        self.cursor[moved] = self.base_row[moved]
        self.ready.reshape(self.core.num_envs, self.size + 1)[moved] = False

    def restart(self, rows: np.ndarray) -> None:
        """Begin the next episode of each environment in ``rows`` (distinct) on the core."""
        index = self.cursor.take(rows)
        if not self.ready.take(index).all():
            self._refill()
            index = self.cursor.take(rows)
        self.cursor[rows] = index + 1
        self.core.begin_drawn(rows, {name: value.take(index, axis=0) for name, value in self.arrays.items()})

    def _refill(self) -> None:
        """Draw the next ``size`` episodes of every environment whose window is half used or whose next
        row is not ready."""
        size = self.size
        used = self.cursor - self.base_row
        due = ((used >= max(1, size // 2)) | ~self.ready.take(self.cursor)).nonzero()[0]
        following = self.first[due] + used[due]
        step = max(1, FILL_EPISODES // size)     # environments per draw
        for start in range(0, due.size, step):
            rows, first = due[start:start + step], following[start:start + step]
            keys = episode_keys_of(np.repeat(self.bases[rows], size), (first[:, None] + self._slots).ravel())
            drawn = self.core.draws(np.repeat(rows, size), keys)
            index = (self.base_row[rows][:, None] + self._slots).ravel()
            for name, value in drawn.items():
                self.arrays[name][index] = value
            self.ready[index] = True
        self.first[due] = following
        self.cursor[due] = self.base_row[due]

    def memory_bytes(self) -> int:
        """Bytes held: the windows and the per-environment counters."""
        held = [*self.arrays.values(), self.ready, self.streams, self.bases, self.base_row, self.first, self.cursor]
        return sum(value.nbytes for value in held)
