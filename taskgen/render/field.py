"""Observations of a hidden-path field: the agent's view (never the path) and a ground truth.

The agent-view tables are rendered from ``FieldModel.view_model()``, a model that holds no
path, one row per cell. Feedback marks change from step to step, so they are laid over the
gathered rows by :class:`MarkOverlay`, the same way in the single and the batched runtime.
The ground-truth picture (:meth:`FieldPictures.truth`) draws the path and is for galleries and
debugging only: no runtime puts it in an observation.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from PIL import Image, ImageDraw

from ..model import FieldModel
from ..model.field import GOAL, OFF
from ..spec.schema import Observation
from .observations import ObservationSet
from .palette import AGENT, FLOOR, MARK, PATH, PATH_END
from .topdown import TopDownRenderer, pixel_table, tile_boxes
from .vector import VectorLayout, vector_layout


@dataclass(frozen=True, eq=False)
class MarkOverlay:
    """Where marks go in each modality: a vector block (one bit per cell) and pixel tiles."""

    block: slice | None          # the marks block of the vector, or None
    tiles: np.ndarray | None     # bool[T, H, W]: the pixels of each tile, per cell (full view)
                                 # or per window position (window view); None without pixels
    window: int                  # cells across the window view (0: full view)
    cells: np.ndarray            # int64[C, 2] (row, column) of each cell

    def apply(self, parts: dict[str, np.ndarray], agent_cell: np.ndarray, marked: np.ndarray) -> None:
        """Lay the visible marks ``marked`` bool[N, C] over batched observations (in place):
        one matrix product finds every env's marked pixels, so there is no loop over envs."""
        if self.block is not None and "vector" in parts:
            parts["vector"][:, self.block] = marked
        if self.tiles is None or "pixels" not in parts or not marked.any():
            return
        n = marked.shape[0]
        if self.window:
            half = self.window // 2
            offset = self.cells[None, :, :] - self.cells[agent_cell][:, None, :] + half      # [N, C, 2]
            inside = ((offset >= 0) & (offset < self.window)).all(axis=2) & marked
            lit = np.zeros((n, self.window * self.window), dtype=np.float32)
            env, cell = np.nonzero(inside)
            lit[env, offset[env, cell, 0] * self.window + offset[env, cell, 1]] = 1.0
        else:
            lit = marked.astype(np.float32)
        T, H, W = self.tiles.shape
        covered = (lit @ self.tiles.reshape(T, H * W).astype(np.float32)).reshape(n, H, W) > 0
        frame = parts["pixels"]
        floor = (frame == np.asarray(FLOOR, dtype=np.uint8)).all(axis=3)
        frame[covered & floor] = np.asarray(MARK, dtype=np.uint8)


def _tile_masks(boxes: np.ndarray, height: int, width: int) -> np.ndarray:
    """bool[T, H, W] of pixel boxes (top, bottom, left, right)."""
    r, c = np.arange(height), np.arange(width)
    rows = (r[None, :] >= boxes[:, 0:1]) & (r[None, :] < boxes[:, 1:2])
    cols = (c[None, :] >= boxes[:, 2:3]) & (c[None, :] < boxes[:, 3:4])
    return rows[:, :, None] & cols[:, None, :]


def field_observation_set(model: FieldModel, spec: Observation) -> tuple[ObservationSet, MarkOverlay]:
    """Every modality of ``spec`` for every cell of a field, with the overlay of its marks."""
    view = model.view_model()
    vector = block = None
    if spec.vector is not None:
        plain = vector_layout(view, spec.vector.model_copy(update={"cue": False, "goals": False, "noise": None}))
        blocks, table = dict(plain.blocks), plain.table
        if spec.vector.marks and model.mark_steps > 0:
            block = slice(table.shape[1], table.shape[1] + model.num_cells)
            blocks["marks"] = block
            table = np.concatenate([table, np.zeros((table.shape[0], model.num_cells), dtype=np.float32)], axis=1)
        noise = spec.vector.noise
        if noise is not None:
            blocks["noise"] = slice(table.shape[1], table.shape[1] + noise.bits)
        vector = VectorLayout(blocks=blocks, table=table, noise_bits=noise.bits if noise else 0,
                              flip_probability=noise.flip_probability if noise else 0.0)
    pixels = tiles = None
    window = 0
    if spec.pixels is not None:
        p = spec.pixels
        pixels = pixel_table(view, p.height, p.width, p.view, p.window)
        if model.mark_steps > 0:
            tiles = _tile_masks(tile_boxes(view, p.height, p.width, p.view, p.window), p.height, p.width)
            window = p.window if p.view == "window" else 0
    noise = (spec.pixels.noise.kind, spec.pixels.noise.amplitude) if spec.pixels and spec.pixels.noise else None
    obs = ObservationSet(tuple(spec.modalities()), vector, None, pixels, noise, cue_values=0)
    return obs, MarkOverlay(block, tiles, window, model.layout.cells)


def marks_seen(overlay: MarkOverlay) -> bool:
    """True when some modality shows the agent the marks."""
    return overlay.block is not None or overlay.tiles is not None


def view_classes(obs: ObservationSet, overlay: MarkOverlay) -> np.ndarray:
    """int[C]: cells numbered by what the agent sees there, marks and noise excluded (equal
    numbers: the agent cannot tell the cells apart)."""
    rows = []
    for name, (table, blocks) in obs.tables().items():
        keep = np.ones(table.shape[1], dtype=bool)
        if name == "vector" and overlay.block is not None:
            keep[overlay.block] = False
        rows.append(np.asarray(table, dtype=np.float64)[:, keep])
    _, classes = np.unique(np.concatenate(rows, axis=1), axis=0, return_inverse=True)
    return classes.ravel()


class FieldPictures:
    """Larger top-down pictures of a field for people (render(), galleries): the agent's view
    (agent and marks) or the ground truth (the path and its end drawn as well)."""

    def __init__(self, model: FieldModel, cell_px: int = 12) -> None:
        self.model = model
        self.renderer = TopDownRenderer(model.view_model(), cell_px)
        self.px = cell_px

    def _cell_box(self, cell: int, inset: int) -> tuple[int, int, int, int]:
        r, c = self.model.layout.cells[cell]
        left, top, right, bottom = self.renderer.box(int(r), int(c))
        return left + inset, top + inset, right - inset, bottom - inset

    def agent(self, agent_cell: int, marked: np.ndarray) -> np.ndarray:
        """uint8[H, W, 3]: what the agent's view shows, drawn larger: no path."""
        return self._draw(None, agent_cell, marked)

    def truth(self, kind: np.ndarray, agent_cell: int, marked: np.ndarray) -> np.ndarray:
        """uint8[H, W, 3]: the ground truth, path and its end included (never an observation)."""
        return self._draw(kind, agent_cell, marked)

    def _draw(self, kind: np.ndarray | None, agent_cell: int, marked: np.ndarray) -> np.ndarray:
        image = Image.fromarray(self.renderer.background.copy())
        draw = ImageDraw.Draw(image)
        inset = max(1, self.px // 6)
        if kind is not None:
            for cell in np.flatnonzero(kind != OFF):
                draw.rectangle(self._cell_box(int(cell), inset), fill=PATH_END if kind[cell] == GOAL else PATH)
        for cell in np.flatnonzero(marked):
            if kind is None:
                draw.rectangle(self._cell_box(int(cell), inset), fill=MARK)
            else:   # an outline, so the path under a mark stays visible
                draw.rectangle(self._cell_box(int(cell), inset), outline=MARK, width=max(1, self.px // 5))
        draw.ellipse(self._cell_box(agent_cell, max(1, self.px // 4)), fill=AGENT)
        return np.asarray(image, dtype=np.uint8)
