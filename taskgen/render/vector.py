"""Observation keys → flat float32 vectors, in named blocks (cue, position, walls, noise)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping, Sequence

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
    if spec.cue and model.cue is not None:     # a task without a cue has no cue block
        key_cue = model.cue.key_value
        cue = np.zeros((K, model.cue.values), dtype=np.float32)
        shown = key_cue >= 0
        cue[np.flatnonzero(shown), key_cue[shown]] = 1.0
        parts.append(("cue", cue))
    layout = model.layout
    if spec.position == "one_hot":
        parts.append(("position", np.eye(layout.num_cells, dtype=np.float32)[model.key_cell]))
    elif spec.position == "coordinates":
        scale = np.maximum(np.asarray(layout.shape, dtype=np.float32) - 1, 1)
        parts.append(("position", (layout.cells[model.key_cell] / scale).astype(np.float32)))
    if spec.walls:
        parts.append(("walls", layout.walls()[model.key_cell].astype(np.float32)))
    goals = layout.sites.get("goal", np.array([], dtype=np.int64))
    if spec.goals and goals.size:            # a layout without goals has no goals block
        goal_of = -np.ones(layout.num_cells, dtype=np.int64)
        goal_of[goals] = np.arange(goals.size)
        flags = np.zeros((K, goals.size), dtype=np.float32)
        on = goal_of[model.key_cell] >= 0
        flags[np.flatnonzero(on), goal_of[model.key_cell][on]] = 1.0
        parts.append(("goals", flags))
    if (model.key_heading >= 0).any():      # an agent with a heading sees which way it faces
        parts.append(("heading", np.eye(4, dtype=np.float32)[np.maximum(model.key_heading, 0)]))
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


def with_noise_columns(table: np.ndarray, bits: int) -> np.ndarray:
    """A vector table's rows with ``bits`` zero columns appended, where a runtime writes each step's
    noise bits after one row gather (the table itself when there are none)."""
    if not bits:
        return table
    return np.concatenate([table, np.zeros((table.shape[0], bits), dtype=table.dtype)], axis=1)


def widened_layout(layout: VectorLayout, widths: Mapping[str, int]) -> VectorLayout:
    """The layout with each block named in ``widths`` that wide (zero-padded at its end); the
    others as they are. Raises ValueError when a variant's block is wider than ``widths`` allows."""
    blocks, start = {}, 0
    for name, own in layout.blocks.items():
        size = own.stop - own.start
        width = widths.get(name, size)
        if size > width:
            raise ValueError(f"the vector block {name!r} is {size} wide in this variant, more than the "
                             f"{width} its spec family allows")
        blocks[name] = slice(start, start + width)
        start += width
    return VectorLayout(blocks=blocks, table=padded_table(layout, blocks), noise_bits=layout.noise_bits,
                        flip_probability=layout.flip_probability)


def common_blocks(layouts: Sequence[VectorLayout]) -> dict[str, slice]:
    """One block layout wide enough for every variant (each block as wide as its widest)."""
    names = list(layouts[0].blocks)
    if any(list(v.blocks) != names for v in layouts):
        raise ValueError("every variant of a batch must have the same observation blocks")
    blocks, start = {}, 0
    for name in names:
        width = max(v.blocks[name].stop - v.blocks[name].start for v in layouts)
        blocks[name] = slice(start, start + width)
        start += width
    return blocks


def padded_table(layout: VectorLayout, blocks: dict[str, slice]) -> np.ndarray:
    """A variant's noise-free table laid out in the common blocks (zeros where it is narrower)."""
    width = max((b.stop for n, b in blocks.items() if n != "noise"), default=0)
    table = np.zeros((layout.table.shape[0], width), dtype=np.float32)
    for name, target in blocks.items():
        if name == "noise":
            continue
        source = layout.blocks[name]
        table[:, target.start:target.start + source.stop - source.start] = layout.table[:, source]
    return table


def scatter_index(layout: VectorLayout, blocks: dict[str, slice]) -> np.ndarray:
    """int[size]: where each element of a variant's own vector goes in the common block layout."""
    out = np.zeros(layout.size, dtype=np.int64)
    for name, source in layout.blocks.items():
        target = blocks[name]
        out[source] = np.arange(target.start, target.start + source.stop - source.start)
    return out
