"""Decoy cues and lure tiles, drawn per environment and step from the counter-based streams,
applied the same way by the single and the batched runtime.

Each step has six draws per environment (``uniform(key, step, 6)``, purpose 'distractor'): 0 decides
a decoy and 1 its value; 2 decides a lure, 3 its value, 4 its grid cell and 5 its pixel tile. Decoys
are drawn with the episode, for all its steps (:func:`decoy_tracks`). The batch draws the lures'
column 2 for every environment and the rest only for the environments whose lure shows, so the work
follows what is shown; a single env draws its lures one at a time (:func:`~taskgen.envs.streams.draw`)
and calls the painters only on the steps where something shows.
"""

from __future__ import annotations

import numpy as np

from ..render.first_person import lamp_rows as first_person_lamp
from ..render.grid import GRID_CHANNELS
from ..render.lamp import light
from ..render.observations import ObservationSet
from ..render.palette import CUE_COLOURS, FLOOR
from ..render.topdown import lamp_rows as topdown_lamp
from .streams import below, draw, uniform_column

_COLOURS = np.asarray(CUE_COLOURS, dtype=np.uint8)
_FLOOR = np.asarray(FLOOR, dtype=np.uint8)
_CUE = GRID_CHANNELS.index("cue")
_OPEN = GRID_CHANNELS.index("open")
_LAMPS = (("pixels", topdown_lamp), ("first_person", first_person_lamp))


def _value(u: np.ndarray, k: int) -> np.ndarray:
    """A cue value drawn uniformly from ``u``."""
    return np.minimum((u * k).astype(np.int64), k - 1)


def decoy_tracks(keys: np.ndarray, steps: int, probability: float, k: int) -> np.ndarray:
    """int64[E, steps]: the decoy value (of ``k``) of each episode whose 'distractor' key is ``keys`` [E]
    at steps 0 … steps − 1 (−1: no decoy): draw 0 decides a decoy, draw 1 its value, made only where
    one shows. Drawn with the episode: a batch with its next episodes (envs/noise.py), a single env
    with a block of them. A cue decoy shows only where the real cue does not."""
    keys = np.asarray(keys, dtype=np.uint64)
    shown = below(keys[:, None], np.arange(steps)[None, :], 0, probability)
    track = np.full(shown.shape, -1, dtype=np.int64)
    at = shown.reshape(-1).nonzero()[0]             # (a flat nonzero: the 2-D one is many times slower)
    episode, step = np.divmod(at, steps)
    track.reshape(-1)[at] = _value(uniform_column(keys.take(episode), step, 1), k)
    return track


def show_decoys(obs: ObservationSet, parts: dict[str, np.ndarray], rows: np.ndarray, value: np.ndarray) -> None:
    """Show decoy cue ``value`` [n] in environments ``rows`` [n] of batched ``parts`` (in place): the
    vector's cue bits, the grid's cue channel at the agent, the lamp of pixel frames."""
    if "vector" in parts and obs.vector is not None and "cue" in obs.vector.blocks:
        # a decoy shows only where the real cue is not in view, where the cue bits are all 0: setting the
        # decoy's bit is all there is to do (one scatter into the flat rows)
        vector, start = parts["vector"], obs.vector.blocks["cue"].start
        if vector.flags.c_contiguous:
            vector.reshape(-1)[rows * vector.shape[1] + (value + start)] = 1.0
        else:
            vector[rows, start + value] = 1.0
    if "grid" in parts:
        half = parts["grid"].shape[1] // 2
        parts["grid"][rows, half, half, _CUE] = value + 1
    for name, lamp in _LAMPS:
        if name in parts:
            light(parts[name], lamp(parts[name].shape[1]), rows, _COLOURS[value])


def show_lures(parts: dict[str, np.ndarray], rows: np.ndarray, value: np.ndarray, grid_u: np.ndarray | None,
               tile_u: np.ndarray | None, tile_counts: np.ndarray, tile_offsets: np.ndarray,
               tiles: np.ndarray | None) -> None:
    """Flash lure cue ``value`` [n] in environments ``rows`` [n] of batched ``parts`` (in place): in the
    grid view, on the open cell drawn by ``grid_u``; in top-down pixels, on the floor of the tile drawn
    by ``tile_u`` among the environment's ``tile_counts`` tiles from ``tile_offsets`` in ``tiles``."""
    if "grid" in parts and grid_u is not None:
        grid = parts["grid"]
        size = grid.shape[1]
        r, c = np.divmod(np.minimum((grid_u * size * size).astype(np.int64), size * size - 1), size)
        open_ = grid[rows, r, c, _OPEN] == 1
        grid[rows[open_], r[open_], c[open_], _CUE] = value[open_] + 1
    if "pixels" in parts and tiles is not None and tile_u is not None:
        count = tile_counts[rows]
        top, bottom, left, right = tiles[tile_offsets[rows] + np.minimum((tile_u * count).astype(np.int64),
                                                                         count - 1)].T
        for i, row in enumerate(rows.tolist()):       # one box per lured environment (about p·N of them)
            box = parts["pixels"][row, top[i]:bottom[i], left[i]:right[i]]
            box[(box == _FLOOR).all(axis=2)] = _COLOURS[value[i]]


def apply_distractors(obs: ObservationSet, parts: dict[str, np.ndarray], decoys: np.ndarray | None,
                      keys: np.ndarray, step: np.ndarray, cue_shown: np.ndarray, tile_counts: np.ndarray,
                      tile_offsets: np.ndarray, tiles: np.ndarray | None) -> None:
    """Overlay this step's decoys and lures on batched observations ``parts`` (in place).

    ``decoys`` are this step's decoy values (−1: none; from the episodes' :func:`decoy_tracks`),
    shown where ``cue_shown``, the real cue in view, is not; lures are drawn now from ``keys``,
    the environments' 'distractor' subkeys, at ``step``; lure tiles of env i are rows
    ``tile_offsets[i] … + tile_counts[i]`` of ``tiles``.
    """
    k = obs.cue_values
    if decoys is not None:
        rows = ((decoys >= 0) > cue_shown).nonzero()[0]       # a decoy, and the real cue not in view
        if rows.size:
            show_decoys(obs, parts, rows, decoys.take(rows).astype(np.int64))   # (tracks keep a narrow type)
    if obs.lure_probability > 0 and ("grid" in parts or "pixels" in parts):
        rows = np.flatnonzero(below(keys, step, 2, obs.lure_probability))
        if rows.size:
            keys, step = keys[rows], step[rows]
            show_lures(parts, rows, _value(uniform_column(keys, step, 3), k),
                       uniform_column(keys, step, 4) if "grid" in parts else None,
                       uniform_column(keys, step, 5) if "pixels" in parts else None,
                       tile_counts, tile_offsets, tiles)


def distract_one(obs: ObservationSet, parts: dict[str, np.ndarray], key: int, step: int, cue_shown: bool,
                 tile_count: np.ndarray, tile_offset: np.ndarray, tiles: np.ndarray | None, decoy: int) -> None:
    """The same overlay for one environment whose 'distractor' key is ``key`` (a Python int), at
    ``step``; ``parts`` carry a batch axis of one. ``decoy`` is this step's decoy value, drawn ahead
    with the episode (−1: none; see :func:`decoy_tracks`); lures are drawn now. Nothing is painted on a
    step where nothing shows."""
    k, row = obs.cue_values, np.zeros(1, dtype=np.int64)
    if decoy >= 0 and not cue_shown:
        show_decoys(obs, parts, row, np.array([decoy]))
    if obs.lure_probability > 0 and ("grid" in parts or "pixels" in parts) and \
            draw(key, step, 2) < obs.lure_probability:
        show_lures(parts, row, _value(np.array([draw(key, step, 3)]), k), np.array([draw(key, step, 4)]),
                   np.array([draw(key, step, 5)]), tile_count, tile_offset, tiles)
