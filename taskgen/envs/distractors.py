"""Decoy cues and lure tiles, drawn per environment and step from the counter-based streams,
applied the same way by the single and the batched runtime (one numpy pass over N envs)."""

from __future__ import annotations

import numpy as np

from ..render.first_person import lamp_rows as first_person_lamp
from ..render.grid import GRID_CHANNELS
from ..render.lamp import light
from ..render.observations import ObservationSet
from ..render.palette import CUE_COLOURS, FLOOR
from ..render.topdown import lamp_rows as topdown_lamp
from .streams import uniform

_COLOURS = np.asarray(CUE_COLOURS, dtype=np.uint8)
_CUE = GRID_CHANNELS.index("cue")
_OPEN = GRID_CHANNELS.index("open")


def apply_distractors(obs: ObservationSet, parts: dict[str, np.ndarray], keys: np.ndarray, step: np.ndarray,
                      cue_shown: np.ndarray, tile_counts: np.ndarray, tile_offsets: np.ndarray,
                      tiles: np.ndarray | None) -> None:
    """Overlay this step's decoys and lures on batched observations ``parts`` (in place).

    ``keys`` are the environments' 'distractor' subkeys, ``cue_shown`` marks those whose real
    cue is in view (no decoy then); lure tiles of env i are rows ``tile_offsets[i] …
    + tile_counts[i]`` of ``tiles``.
    """
    n = keys.shape[0]
    draws = uniform(keys, step, 6)                                   # [N, 6]
    k = obs.cue_values
    if obs.decoy_probability > 0:
        decoy = (draws[:, 0] < obs.decoy_probability) & ~cue_shown
        value = np.minimum((draws[:, 1] * k).astype(np.int64), k - 1)
        rows = np.flatnonzero(decoy)
        if rows.size:
            if "vector" in parts and obs.vector is not None and "cue" in obs.vector.blocks:
                block = obs.vector.blocks["cue"]
                parts["vector"][rows, block] = 0.0
                parts["vector"][rows, block.start + value[rows]] = 1.0
            if "grid" in parts:
                half = parts["grid"].shape[1] // 2
                parts["grid"][rows, half, half, _CUE] = value[rows] + 1
            for name, lamp in (("pixels", topdown_lamp), ("first_person", first_person_lamp)):
                if name in parts:
                    light(parts[name], lamp(parts[name].shape[1]), rows, _COLOURS[value[rows]])
    if obs.lure_probability > 0:
        lure = draws[:, 2] < obs.lure_probability
        value = np.minimum((draws[:, 3] * k).astype(np.int64), k - 1)
        if "grid" in parts:
            size = parts["grid"].shape[1]
            where = np.minimum((draws[:, 4] * size * size).astype(np.int64), size * size - 1)
            r, c = np.divmod(where, size)
            rows = np.flatnonzero(lure & (parts["grid"][np.arange(n), r, c, _OPEN] == 1))
            parts["grid"][rows, r[rows], c[rows], _CUE] = value[rows] + 1
        if "pixels" in parts and tiles is not None:
            pick = tile_offsets + np.minimum((draws[:, 5] * tile_counts).astype(np.int64), tile_counts - 1)
            top, bottom, left, right = tiles[pick].T
            frame = parts["pixels"]
            h, w = frame.shape[1:3]
            inside = (((np.arange(h)[None, :] >= top[:, None]) & (np.arange(h)[None, :] < bottom[:, None]))[:, :, None]
                      & ((np.arange(w)[None, :] >= left[:, None]) & (np.arange(w)[None, :] < right[:, None]))[:, None, :])
            floor = (frame == np.asarray(FLOOR, dtype=np.uint8)).all(axis=3)
            mask = inside & floor & lure[:, None, None]
            frame[mask] = np.broadcast_to(_COLOURS[value][:, None, None, :], frame.shape)[mask]
