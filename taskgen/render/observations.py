"""Every modality a spec asks for, rendered once per observation key (noise-free)."""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import TYPE_CHECKING, Any, Mapping

import numpy as np
from gymnasium import spaces
from gymnasium.spaces import Space

from ..limits import check_bytes
from ..model import TaskModel
from ..spec.schema import Observation
from .first_person import first_person_table
from .grid import GRID_CHANNELS, grid_table
from .topdown import pixel_table, tile_boxes
from .vector import VectorLayout, vector_layout, widened_layout

if TYPE_CHECKING:   # marks.py builds observation sets, so the overlay is imported for types only
    from .marks import MarkOverlay


@dataclass(frozen=True, eq=False)
class ObservationSet:
    """The noise-free table of each requested modality, indexed by observation key.

    Runtimes gather rows of these tables and add noise; analyses compare them (the leak check
    and the chance level see exactly what the agent sees, noise excluded).
    """

    names: tuple[str, ...]
    vector: VectorLayout | None
    grid: np.ndarray | None        # uint8[K, s, s, channels]
    pixels: np.ndarray | None      # uint8[K, H, W, 3]
    pixel_noise: tuple[str, float] | None
    first_person: np.ndarray | None = None   # uint8[K, H, W, 3]
    decoy_probability: float = 0.0
    lure_probability: float = 0.0
    lure_tiles: np.ndarray | None = None     # int[T, 4] pixel boxes a lure may light (top-down)
    cue_values: int = 2
    marks: MarkOverlay | None = None         # where a field's feedback marks are laid over, per step
    used: np.ndarray | None = None           # bool[vector size]: elements this variant fills (None: all); the
                                             # others pad its blocks to its family's widths and stay 0

    @property
    def single(self) -> bool:
        """True when the agent gets one modality (a Box), False for several (a Dict)."""
        return len(self.names) == 1

    def spaces(self) -> dict[str, Space[Any]]:
        """The space of each modality."""
        out: dict[str, Space[Any]] = {}
        if self.vector is not None:
            out["vector"] = spaces.Box(0.0, 1.0, shape=(self.vector.size,), dtype=np.float32)
        if self.grid is not None:   # each channel's true range, so bounds-based scaling is right
            high = np.full(self.grid.shape[1:], 1, dtype=np.uint8)
            values = max(self.cue_values, 1)                  # one goal per cue value; shown values + 1
            high[..., GRID_CHANNELS.index("goal")] = values
            high[..., GRID_CHANNELS.index("cue")] = values
            agent = GRID_CHANNELS.index("agent")
            high[..., agent] = 4 if (self.grid[..., agent] > 1).any() else 1   # heading + 1 with turns
            out["grid"] = spaces.Box(0, high, dtype=np.uint8)
        for name in ("pixels", "first_person"):
            table = getattr(self, name)
            if table is not None:
                out[name] = spaces.Box(0, 255, shape=table.shape[1:], dtype=np.uint8)
        return out

    def space(self) -> Space[Any]:
        """The observation space of a single env."""
        parts = self.spaces()
        return next(iter(parts.values())) if self.single else spaces.Dict(parts)

    def tables(self) -> dict[str, tuple[np.ndarray, dict[str, slice]]]:
        """Noise-free table and block layout of each modality (for the analyses)."""
        out: dict[str, tuple[np.ndarray, dict[str, slice]]] = {}
        if self.vector is not None:
            blocks = {k: v for k, v in self.vector.blocks.items() if k != "noise"}
            out["vector"] = (self.vector.table, blocks)
        for name in ("grid", "pixels", "first_person"):
            table = getattr(self, name)
            if table is not None:
                flat = table.reshape(table.shape[0], -1)
                out[name] = (flat, {name: slice(0, flat.shape[1])})
        return out


def observation_set(model: TaskModel, spec: Observation) -> ObservationSet:
    """Render every modality of ``spec`` for every observation key of ``model``."""
    what = model.variant_id
    vector = vector_layout(model, spec.vector) if spec.vector is not None else None
    grid = pixels = None
    first_person = None
    if spec.grid is not None:
        check_bytes(f"{what}: the grid-view table", model.num_keys * spec.grid.size ** 2 * 8)
        grid = grid_table(model, spec.grid.size, egocentric=spec.grid.frame == "egocentric")
    if spec.first_person is not None:
        f = spec.first_person
        check_bytes(f"{what}: the first-person table", model.num_keys * f.height * f.width * 3)
        first_person = first_person_table(model, f.height, f.width, f.fov)
    if spec.pixels is not None:
        p = spec.pixels
        check_bytes(f"{what}: the pixel table", model.num_keys * p.height * p.width * 3)
        pixels = pixel_table(model, p.height, p.width, p.view, p.window)
    noise = (spec.pixels.noise.kind, spec.pixels.noise.amplitude) if spec.pixels and spec.pixels.noise else None
    tiles = None
    if spec.pixels is not None:
        tiles = tile_boxes(model, spec.pixels.height, spec.pixels.width, spec.pixels.view, spec.pixels.window)
    return ObservationSet(tuple(spec.modalities()), vector, grid, pixels, noise, first_person,
                          spec.distractors.decoy_probability, spec.distractors.lure_probability, tiles,
                          model.cue.values if model.cue is not None else 0)


def observation_bytes(obs: ObservationSet) -> int:
    """Bytes of one observation of every modality (what a batch allocates per environment and step)."""
    total = 4 * obs.vector.size if obs.vector is not None else 0
    for table in (obs.grid, obs.pixels, obs.first_person):
        if table is not None:
            total += int(np.prod(table.shape[1:])) * table.itemsize
    return total


def widened(obs: ObservationSet, widths: Mapping[str, int]) -> ObservationSet:
    """``obs`` with its vector blocks as wide as ``widths`` says (those it names; zeros fill each block
    past the variant's own width), so every variant of a spec family has one observation space. A
    field's mark block moves with the layout. Raises ValueError when a block is wider than allowed."""
    if obs.vector is None or not widths:
        return obs
    vector = widened_layout(obs.vector, widths)
    used = np.zeros(vector.size, dtype=bool)
    for name, own in obs.vector.blocks.items():
        start = vector.blocks[name].start
        used[start:start + own.stop - own.start] = True
    marks = obs.marks
    if marks is not None and marks.block is not None:
        start = vector.blocks["marks"].start
        marks = replace(marks, block=slice(start, start + marks.block.stop - marks.block.start))
    return replace(obs, vector=vector, marks=marks, used=used)


def key_classes(obs: ObservationSet) -> np.ndarray:
    """int[K]: observation keys numbered by what the agent sees there, marks and noise excluded (equal
    numbers: the agent cannot tell the keys apart)."""
    rows = []
    for name, (table, _) in obs.tables().items():
        keep = np.ones(table.shape[1], dtype=bool)
        if name == "vector" and obs.marks is not None and obs.marks.block is not None:
            keep[obs.marks.block] = False
        rows.append(np.asarray(table, dtype=np.float64)[:, keep])
    _, classes = np.unique(np.concatenate(rows, axis=1), axis=0, return_inverse=True)
    return classes.ravel()


def assemble(obs: ObservationSet, parts: dict[str, Any]) -> Any:
    """One modality as its array, several as a dict."""
    return parts[obs.names[0]] if obs.single else parts
