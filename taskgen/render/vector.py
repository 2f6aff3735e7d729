"""Observation keys → flat float32 vectors, in named blocks (cue, position, walls, noise)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..model import TaskModel
from ..spec.schema import VectorObservation


@dataclass(frozen=True, eq=False)
class VectorLayout:
    """Where each named block sits in the vector, and the noise-free vector of every key."""

    blocks: dict[str, slice]
    table: np.ndarray     # float32[K, D_without_noise]
    noise_bits: int
    flip_probability: float

    @property
    def size(self) -> int:
        """Length of the full vector, noise bits included."""
        return int(self.table.shape[1]) + self.noise_bits


def vector_layout(model: TaskModel, spec: VectorObservation) -> VectorLayout:
    """Build every key's vector once; the runtime then only gathers rows and appends noise."""
    parts: list[tuple[str, np.ndarray]] = []
    K = model.num_keys
    if spec.cue:
        cue = np.zeros((K, model.cue_values), dtype=np.float32)
        shown = model.key_cue >= 0
        cue[np.flatnonzero(shown), model.key_cue[shown]] = 1.0
        parts.append(("cue", cue))
    layout = model.layout
    if spec.position == "one_hot":
        parts.append(("position", np.eye(layout.num_cells, dtype=np.float32)[model.key_cell]))
    elif spec.position == "coordinates":
        scale = np.maximum(np.asarray(layout.shape, dtype=np.float32) - 1, 1)
        parts.append(("position", (layout.cells[model.key_cell] / scale).astype(np.float32)))
    if spec.walls:
        parts.append(("walls", layout.walls()[model.key_cell].astype(np.float32)))
    blocks, start = {}, 0
    for name, block in parts:
        blocks[name] = slice(start, start + block.shape[1])
        start += block.shape[1]
    table = np.concatenate([b for _, b in parts], axis=1) if parts else np.zeros((K, 0), np.float32)
    noise = spec.noise
    if noise is not None:
        blocks["noise"] = slice(start, start + noise.bits)
    return VectorLayout(blocks=blocks, table=table, noise_bits=noise.bits if noise else 0,
                        flip_probability=noise.flip_probability if noise else 0.0)
