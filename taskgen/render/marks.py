"""A field's observations: the agent's view (never the path), and its feedback marks laid over per step.

The view tables are rendered from the field's model, whose observation keys are its cells and
hold no path, one row per cell. Feedback marks change from step to step, so they are laid over
the gathered rows by :class:`MarkOverlay`, the same way in the single and the batched runtime.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property
from typing import Any

import numpy as np

from ..model import TaskModel
from ..spec.schema import Observation
from .grid import GRID_CHANNELS, grid_table
from .observations import ObservationSet
from .palette import FLOOR, MARK
from .topdown import pixel_table, tile_boxes
from .vector import VectorLayout, vector_layout


#: A field's grid view has one channel more than GRID_CHANNELS: 1 where a mark shows.
FIELD_GRID_CHANNELS = GRID_CHANNELS + ("mark",)
MARK_CHANNEL = len(GRID_CHANNELS)


@dataclass(frozen=True, eq=False)
class MarkOverlay:
    """Where marks go in each modality: a vector block (one bit per cell) and pixel tiles."""

    block: slice | None          # the marks block of the vector, or None
    tiles: np.ndarray | None     # int64[T, P]: flat pixel indices (row · width + column) of the mark's
                                 # ring in each tile, per cell (full view) or per window position
                                 # (window view), padded by repeating its first pixel; None without pixels
    window: int                  # cells across the window view (0: full view)
    cells: np.ndarray            # int64[C, 2] (row, column) of each cell
    floor: np.ndarray | None = None   # bool[C, H·W]: the floor pixels of the agent's frame at each
                                      # cell (marks paint floor only, never walls or the agent)
    grid: int = 0                # cells across the grid view (0: no grid view)
    colour: tuple[int, int, int] = MARK   # of a mark in pixels
    paint: tuple[np.ndarray, np.ndarray] | None = None
    # the floor pixels of every mark ring, made once (see paint_table): (flat pixel indices int32[K, T, P'],
    # padded by repeating the first; their count[K, T]) by (agent cell, window tile) in the window view, by
    # tile (K = 1) in the full view

    def seen(self, agent_cell: int, marked: frozenset[int]) -> tuple[frozenset[Any], ...]:
        """What the agent's noise-free observation shows of the marks on cells ``marked`` when it stands
        on ``agent_cell``, one entry per modality that shows marks: the marked cells (the vector's marks
        block, full-view pixels) or their offsets inside the window (window pixels, the grid view).
        Two situations with the same observation key and the same ``seen`` look alike. (A tile too small
        to hold a floor pixel still counts as shown: such pictures tell the agent no more than this.)"""
        out: list[frozenset[Any]] = []
        if self.block is not None or (self.tiles is not None and not self.window):
            out.append(marked)
        for size in (self.window if self.tiles is not None else 0, self.grid):
            if size:
                half = size // 2
                r0, c0 = self.cells[agent_cell]
                out.append(frozenset((int(r - r0), int(c - c0)) for r, c in (self.cells[m] for m in marked)
                                     if abs(r - r0) <= half and abs(c - c0) <= half))
        return tuple(out)

    @property
    def shown(self) -> bool:
        """True when some modality shows the agent marks at all."""
        return self.block is not None or self.tiles is not None or bool(self.grid)

    def apply(self, parts: dict[str, np.ndarray], agent_cell: np.ndarray, marked: np.ndarray) -> None:
        """Lay the visible marks ``marked`` bool[N, C] over batched observations (in place): the
        pixels of every (environment, marked tile) pair are gathered and painted in one go, so
        there is no loop over environments and the cost grows with the marks shown."""
        if self.block is not None and "vector" in parts:
            parts["vector"][:, self.block] = marked
        if (self.tiles is None or "pixels" not in parts) and not (self.grid and "grid" in parts):
            return
        env, cell = np.divmod(marked.reshape(-1).nonzero()[0], marked.shape[1])   # (2-D nonzero is far slower)
        if not env.size:
            return
        if self.grid and "grid" in parts:
            half = self.grid // 2
            at = self.cells[cell] - self.cells[agent_cell[env]] + half
            inside = ((at >= 0) & (at < self.grid)).all(axis=1)
            parts["grid"][env[inside], at[inside, 0], at[inside, 1], MARK_CHANNEL] = 1
        if self.tiles is None or "pixels" not in parts:
            return
        if self.window:
            half = self.window // 2
            offset = self.cells[cell] - self.cells[agent_cell[env]] + half
            inside = ((offset >= 0) & (offset < self.window)).all(axis=1)
            env, tile = env[inside], offset[inside, 0] * self.window + offset[inside, 1]
        else:
            tile = cell
        frames = parts["pixels"]
        n, h, w, _ = frames.shape
        if self.paint is not None and frames.flags.c_contiguous:
            # the precomputed floor pixels of each (row, tile) ring, one padded row per pair
            table, count = self.paint
            at = agent_cell.take(env) * table.shape[1] + tile if self.window else tile   # the (row, tile)
            if self._empty_rings:       # a ring with no floor pixel paints nothing: leave its pairs out
                keep = (count.reshape(-1).take(at) > 0).nonzero()[0]
                env, at = env.take(keep), at.take(keep)
            where = table.reshape(-1, table.shape[2]).take(at, axis=0) + (env * (h * w))[:, None]
            pixels = frames.reshape(-1).view("V3")          # a view: one 3-byte item per pixel
            pixels[where] = np.asarray([self.colour], dtype=np.uint8).view("V3")[0]   # one scatter
            return
        pixels = self.tiles[tile]                                            # [pairs, P]
        assert self.floor is not None       # pixels come with their floor masks
        paint = self.floor[agent_cell[env][:, None], pixels]
        where = env[:, None] * (h * w) + pixels
        frames.reshape(n * h * w, 3)[where[paint]] = np.asarray(self.colour, dtype=np.uint8)


    def apply_one(self, parts: dict[str, np.ndarray], agent_cell: int, cell: int) -> None:
        """Lay one more mark, on ``cell``, over one environment's observations ``parts`` (no batch axis;
        in place), as :meth:`apply` draws it: a single env adds a step's decoy mark to its kept picture
        of the other marks this way (marks paint floor only, so the order they are laid in is
        irrelevant). Kept to Python numbers and one scatter: it runs on a single env's steps."""
        if self.block is not None and "vector" in parts:
            parts["vector"][self.block.start + cell] = 1.0
        frames = parts.get("pixels")
        if self.paint is None or frames is None or not frames.flags.c_contiguous:
            batched = {name: part[None] for name, part in parts.items() if name in ("grid", "pixels")}
            if batched:
                marked = np.zeros((1, self.cells.shape[0]), dtype=bool)
                marked[0, cell] = True
                self.apply(batched, np.array([agent_cell]), marked)
            return
        (r, c), (r0, c0) = self._cell_list[cell], self._cell_list[agent_cell]
        if self.grid and "grid" in parts:
            half = self.grid // 2
            if abs(r - r0) <= half and abs(c - c0) <= half:
                parts["grid"][r - r0 + half, c - c0 + half, MARK_CHANNEL] = 1
        row, tile = 0, cell
        if self.window:
            half = self.window // 2
            if abs(r - r0) > half or abs(c - c0) > half:
                return
            row, tile = agent_cell, (r - r0 + half) * self.window + c - c0 + half
        frames.reshape(-1, 3)[self.paint[0][row, tile, :self._counts[row][tile]]] = self._colour

    @cached_property
    def _cell_list(self) -> list[tuple[int, int]]:
        return [(int(r), int(c)) for r, c in self.cells]

    @cached_property
    def _counts(self) -> list[list[int]]:
        """The paint table's counts as lists, for :meth:`apply_one`."""
        assert self.paint is not None
        return self.paint[1].tolist()

    @cached_property
    def _empty_rings(self) -> bool:
        """Whether some (row, tile) of the paint table has no floor pixel to paint."""
        return self.paint is not None and bool((self.paint[1] == 0).any())

    @cached_property
    def _colour(self) -> np.ndarray:
        return np.asarray(self.colour, dtype=np.uint8)


def ring(height: int, width: int) -> np.ndarray:
    """bool[height, width]: a mark's ring in a tile of that size: pixel centres between the outer radius
    (half the tile's shorter side) and an inner one 40% of it in, at least a pixel thick; a tile too
    small for a ring with a hole is filled."""
    outer = min(height, width) / 2
    inner = max(0.0, outer - max(1.0, 0.4 * outer))
    y = np.arange(height)[:, None] + 0.5 - height / 2
    x = np.arange(width)[None, :] + 0.5 - width / 2
    distance = np.hypot(y, x)
    shape = (distance <= outer) & (distance >= inner)
    return shape if shape.any() and not shape.all() else np.ones((height, width), dtype=bool)


def _tile_pixels(boxes: np.ndarray, width: int) -> np.ndarray:
    """int64[T, P]: flat pixel indices of the mark's ring in each pixel box (top, bottom, left, right), padded."""
    rings = [np.flatnonzero(ring(bottom - top, right - left).ravel()) if bottom > top and right > left
             else np.zeros(0, dtype=np.int64) for top, bottom, left, right in boxes]
    out = np.zeros((boxes.shape[0], max(max(r.size for r in rings), 1)), dtype=np.int64)
    for i, ((top, _, left, right), flat) in enumerate(zip(boxes, rings)):    # once per table, not per step
        r, c = np.divmod(flat, right - left) if flat.size else (flat, flat)
        pixels = (r + top) * width + c + left
        out[i] = pixels[0] if pixels.size else 0   # a tile too small to show: pixel 0, in the lamp strip, never floor
        out[i, :pixels.size] = pixels
    return out


PAINT_ENTRIES = 4_000_000   # the largest paint table made; past it marks are painted from the tiles


def paint_table(tiles: np.ndarray, floor: np.ndarray, window: int) -> tuple[np.ndarray, np.ndarray] | None:
    """The floor pixels of every mark ring, so that painting marks is one gather and one scatter: by (agent cell,
    window position) in the window view, where what lies under a window tile depends on the agent's
    cell; by tile alone in the full view, where the floor of a tile changes only when the agent stands
    on it, which never happens to a marked cell (marks lie off the path, decoys never on the agent).
    None when the table would exceed PAINT_ENTRIES."""
    T, P = tiles.shape
    C = floor.shape[0]
    rows = C if window else 1
    if rows * T * P > PAINT_ENTRIES:
        return None
    valid = np.ones((T, P), dtype=bool)
    valid[:, 1:] = tiles[:, 1:] != tiles[:, :1]         # _tile_pixels pads by repeating the first pixel
    if window:
        chosen = floor[:, tiles] & valid                 # [C, T, P]
    else:   # tile t: the floor of a frame whose agent stands elsewhere
        chosen = (floor[(np.arange(T) + 1) % C][np.arange(T)[:, None], tiles] & valid)[None]
    count = chosen.sum(axis=2)
    # each (row, tile)'s floor pixels first (a stable sort keeps their order), padded to the longest by
    # repeating the first: painting a pixel twice in the same colour paints it once
    order = np.argsort(~chosen, axis=2, kind="stable")[:, :, :max(int(count.max()), 1)]
    pixels = np.take_along_axis(np.broadcast_to(tiles, chosen.shape), order, axis=2)
    pixels = np.where(np.arange(pixels.shape[2]) < count[:, :, None], pixels, pixels[:, :, :1])
    return pixels.astype(np.int32), count


def path_observation_set(model: TaskModel, spec: Observation) -> ObservationSet:
    """Every modality of ``spec`` for every cell of a field (its observation keys are its cells, and
    hold no path), with the overlay of its marks."""
    rule = model.paths
    if rule is None:
        raise ValueError(f"{model.variant_id} is not a model of hidden paths")
    vector: VectorLayout | None = None
    block: slice | None = None
    if spec.vector is not None:
        plain = vector_layout(model, spec.vector.model_copy(update={"noise": None}))
        blocks, table = dict(plain.blocks), plain.table
        if spec.vector.marks and rule.mark_steps > 0:
            block = slice(table.shape[1], table.shape[1] + rule.num_cells)
            blocks["marks"] = block
            table = np.concatenate([table, np.zeros((table.shape[0], rule.num_cells), dtype=np.float32)], axis=1)
        noise = spec.vector.noise
        if noise is not None:
            blocks["noise"] = slice(table.shape[1], table.shape[1] + noise.bits)
        vector = VectorLayout(blocks=blocks, table=table, noise_bits=noise.bits if noise else 0,
                              flip_probability=noise.flip_probability if noise else 0.0)
    grid = None
    if spec.grid is not None:   # north-up (fields have no headings), plus the mark channel
        view = grid_table(model, spec.grid.size)
        grid = np.concatenate([view, np.zeros(view.shape[:3] + (1,), dtype=np.uint8)], axis=3)
    pixels = tiles = floor = None
    window = 0
    if spec.pixels is not None:
        p = spec.pixels
        pixels = pixel_table(model, p.height, p.width, p.view, p.window)
        if rule.mark_steps > 0:
            tiles = _tile_pixels(tile_boxes(model, p.height, p.width, p.view, p.window), p.width)
            window = p.window if p.view == "window" else 0
            floor = (pixels == np.asarray(FLOOR, dtype=np.uint8)).all(axis=3).reshape(pixels.shape[0], -1)
    pixel_noise = (spec.pixels.noise.kind, spec.pixels.noise.amplitude) if spec.pixels and spec.pixels.noise else None
    marks = rule.mark_steps > 0
    paint = paint_table(tiles, floor, window) if tiles is not None and floor is not None else None
    overlay = MarkOverlay(block, tiles, window, model.layout.cells, floor=floor,
                          grid=spec.grid.size if marks and spec.grid is not None else 0,
                          colour=rule.mark_colour, paint=paint)
    return ObservationSet(tuple(spec.modalities()), vector, grid, pixels, pixel_noise, cue_values=0,
                          decoy_probability=spec.distractors.decoy_probability, marks=overlay)
