"""An episode's observation noise for N environments, drawn at its start: every runtime core draws it
the same way.

The vector's noise bits and the decoys are drawn for every step of the episode at once, as tracks
(one row per step, 0 … the step limit), so a step reads its row with one gather instead of hashing
anew (a batch makes the tracks ahead, with its next episodes: see ahead.py). Pixel noise and lures
are drawn per step from their keys, where a track would be as large as the pictures.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from .distractors import decoy_tracks
from .streams import episode_keys, noise_track, subkeys_of

BLOCK = 64                # episodes of one stream whose draws a single env makes at once
BLOCK_BYTES = 1 << 22     # at most about this many bytes of them


class EpisodeNoise:
    """N environments' noise bits and decoys at every step of their episodes, and their episodes' keys
    of pixel noise and lures.

    ``decoy_values`` is the number of values a decoy draws from (cue values, or a field's other cells);
    a track's decoy is −1 at the steps without one. Tracks have ``horizon + 1`` rows.
    """

    def __init__(self, n: int, bits: int, horizon: int, pixel_noise: bool = False, lures: bool = False,
                 decoy_probability: float = 0.0, decoy_values: int = 0) -> None:
        self.bits, self.horizon, self.steps = bits, horizon, horizon + 1
        self.decoy_probability = decoy_probability if decoy_values > 0 else 0.0
        self.decoy_values = decoy_values
        self._decoy_type = np.min_scalar_type(-max(decoy_values, 1))    # holds −1 … decoy_values − 1
        self.track_row = np.arange(n, dtype=np.int64) * self.steps     # env i's step t: row track_row[i] + t
        self.bit_track = np.zeros((n * self.steps if bits else 0, bits), dtype=bool)
        self.decoy_track = np.full(n * self.steps if self.decoy_probability else 0, -1, dtype=self._decoy_type)
        self.pixel_keys = np.zeros(n if pixel_noise else 0, dtype=np.uint64)
        self.distractor_keys = np.zeros(n if lures else 0, dtype=np.uint64)     # lures: drawn per step
        self._pixel_noise, self._lures = pixel_noise, lures
        self._purposes = tuple(purpose for purpose, used in (("pixel_noise", pixel_noise), ("distractor", lures or
                                                             self.decoy_probability > 0)) if used)

    def draws(self, keys: np.ndarray, flip_probability: float | np.ndarray) -> dict[str, np.ndarray]:
        """What the episodes whose keys are ``keys`` [n] draw at their start (one row per key): their noise
        bits and decoys at every step, and the keys of their pixel noise and lures. ``flip_probability``
        is the noise bits' (one, or one per episode)."""
        drawn: dict[str, np.ndarray] = {}
        if self.bits:
            drawn["noise_bits"] = noise_track(keys, self.bits, flip_probability, self.horizon)
        if self._purposes:
            sub = dict(zip(self._purposes, subkeys_of(keys, self._purposes).T))
            if self.decoy_probability:
                drawn["decoys"] = decoy_tracks(sub["distractor"], self.steps, self.decoy_probability,
                                               self.decoy_values).astype(self._decoy_type)
            if self._pixel_noise:
                drawn["pixel_noise"] = sub["pixel_noise"]
            if self._lures:
                drawn["distractor"] = sub["distractor"]
        return drawn

    def begin_drawn(self, rows: np.ndarray, drawn: dict[str, np.ndarray]) -> None:
        """New episodes in ``rows`` from their :meth:`draws`."""
        n = self.track_row.size
        if self.bits:
            self.bit_track.reshape(n, self.steps, self.bits)[rows] = drawn["noise_bits"]
        if self.decoy_probability:
            self.decoy_track.reshape(n, self.steps)[rows] = drawn["decoys"]
        if self._pixel_noise:
            self.pixel_keys[rows] = drawn["pixel_noise"]
        if self._lures:
            self.distractor_keys[rows] = drawn["distractor"]

    def bits_at(self, step: np.ndarray) -> np.ndarray:
        """bool[N, bits]: the noise bits every environment shows at its ``step`` [N] (at most the horizon)."""
        return self.bit_track.take(self.track_row + step, axis=0)

    def decoys_at(self, step: np.ndarray) -> np.ndarray:
        """int[N]: every environment's decoy at its ``step`` [N] (−1: none)."""
        return self.decoy_track.take(self.track_row + step)

    def arrays(self) -> list[np.ndarray]:
        """The arrays held per environment (for memory counts)."""
        return [self.bit_track, self.decoy_track, self.pixel_keys, self.distractor_keys]


@dataclass(frozen=True, eq=False)
class _Block:
    """:meth:`EpisodeNoise.draws` of consecutive episodes ``first …`` of one stream (of one episode alone
    when ``stream`` is None), one row per episode."""

    stream: int | None
    first: int
    keys: list[int]
    drawn: dict[str, np.ndarray]


class EpisodeBlocks:
    """A single env's episode draws made for blocks of its stream's next episodes: one numpy call per
    kind of draw for a block, where one per episode would cost more than the episode's steps.

    A block that follows the last one on the same stream is twice its size, up to BLOCK (and
    BLOCK_BYTES), so an env reseeded at every reset draws one episode at a time."""

    def __init__(self, noise: EpisodeNoise, flip: Callable[[np.ndarray], float | np.ndarray]) -> None:
        self.noise, self.flip = noise, flip   # flip(keys): the noise bits' flip probability of each episode
        self._block: _Block | None = None
        sample = noise.draws(np.zeros(1, dtype=np.uint64), 0.0)
        per_episode = sum(value.nbytes for value in sample.values()) + 8     # and its key
        self._most = max(1, min(BLOCK, BLOCK_BYTES // per_episode))

    def draws(self, key: int, origin: tuple[int, int] | None) -> dict[str, np.ndarray]:
        """The draws of the episode whose key is ``key`` (no batch axis): from the current block when it
        holds it, else from a new one from this episode on (of this episode alone without ``origin``,
        the episode's (stream, number))."""
        block = self._block
        size = 1
        if origin is not None and block is not None and block.stream == origin[0]:
            row = origin[1] - block.first
            if 0 <= row < len(block.keys) and block.keys[row] == key:
                return {name: value[row] for name, value in block.drawn.items()}
            if row == len(block.keys):
                size = 2 * len(block.keys)
        size = min(size, self._most, BLOCK)
        keys = np.array([key], dtype=np.uint64) if origin is None else \
            episode_keys(np.full(size, origin[0], dtype=np.uint64), np.arange(origin[1], origin[1] + size))
        if int(keys[0]) != key:      # not the stream's episode: this episode alone
            keys = np.array([key], dtype=np.uint64)
        drawn = self.noise.draws(keys, self.flip(keys))
        self._block = _Block(origin[0] if origin is not None else None, origin[1] if origin is not None else 0,
                             keys.tolist(), drawn)
        return {name: value[0] for name, value in drawn.items()}
