"""Observation keys → a plain top-down RGB picture of the layout, the agent and the cue."""

from __future__ import annotations

import numpy as np
from PIL import Image, ImageDraw

from ..model import TaskModel
from .lamp import draw_strip, light
from .palette import AGENT, CUE_COLOURS, FLOOR, WALL

#: Pixels per cell of the pictures the top-down tables are resized from (and of render()).
TILE_PX = 12
#: Cells across the window view when the spec does not say (as the grid view's default size).
WINDOW = 5


class TopDownRenderer:
    """Draws a model's layout once and the agent and cue per frame.

    The grid gets a one-cell wall border and thin walls where a move is blocked; the lamp at the
    right end of the strip above it (``render/lamp.py``) is lit in the cue colour while the cue is
    visible and dark otherwise.
    Goals (arm ends) are filled with the colour of their cue value, so a viewer can match cue
    and goal; a cue site is marked with a diamond outline.
    """

    def __init__(self, model: TaskModel, cell_px: int = TILE_PX) -> None:
        self.model = model
        self.px = cell_px
        rows, cols = model.layout.shape
        self.lamp_rows = 1
        height = (rows + 2 + self.lamp_rows) * cell_px
        width = (cols + 2) * cell_px
        image = Image.new("RGB", (width, height), WALL)
        draw = ImageDraw.Draw(image)
        wall = max(1, cell_px // 6)
        layout = model.layout
        for cell, (r, c) in enumerate(layout.cells):
            left, top, right, bottom = self.box(r, c)
            draw.rectangle((left, top, right, bottom), fill=FLOOR)
            sides = ((left, top, right, top + wall - 1), (right - wall + 1, top, right, bottom),
                     (left, bottom - wall + 1, right, bottom), (left, top, left + wall - 1, bottom))
            for direction, box in enumerate(sides):   # thin walls where a move is blocked
                if layout.neighbour[cell, direction] < 0:
                    draw.rectangle(box, fill=WALL)
        for value, cell in enumerate(layout.sites.get("goal", [])):
            r, c = layout.cells[cell]
            left, top, right, bottom = self.box(r, c)
            draw.rectangle((left + wall, top + wall, right - wall, bottom - wall), fill=CUE_COLOURS[value])
        for cell in layout.sites.get("cue_site", []) if model.cue is not None and model.cue.by_site else []:
            r, c = layout.cells[cell]
            left, top, right, bottom = self.box(r, c)
            mid_x, mid_y, half = (left + right) // 2, (top + bottom) // 2, max(2, cell_px // 4)
            draw.polygon([(mid_x, mid_y - half), (mid_x + half, mid_y), (mid_x, mid_y + half),
                          (mid_x - half, mid_y)], outline=AGENT)
        background = np.asarray(image, dtype=np.uint8).copy()
        draw_strip(background[None], self.lamp_rows * cell_px, WALL, lamp=model.cue is not None)
        self.background = background
        self.key_cue = model.shown_cue()

    def box(self, row: int, col: int) -> tuple[int, int, int, int]:
        """Pixel box (left, top, right, bottom) of a grid cell in the full picture."""
        top = (row + 1 + self.lamp_rows) * self.px
        left = (col + 1) * self.px
        return left, top, left + self.px - 1, top + self.px - 1

    def frame(self, key: int) -> np.ndarray:
        """uint8[H, W, 3] picture of observation key ``key``."""
        picture = self.background.copy()
        cue = int(self.key_cue[key])
        if cue >= 0:
            self.light(picture, cue)
        image = Image.fromarray(picture)
        draw = ImageDraw.Draw(image)
        r, c = self.model.layout.cells[self.model.key_cell[key]]
        left, top, right, bottom = self.box(int(r), int(c))
        inset = max(1, self.px // 5)
        draw.ellipse((left + inset, top + inset, right - inset, bottom - inset), fill=AGENT)
        return np.array(image, dtype=np.uint8)          # a writable copy: pictures draw on it

    def light(self, picture: np.ndarray, value: int) -> None:
        """Light the lamp of ``picture`` (uint8[H, W, 3], in place) in cue value ``value``'s colour."""
        light(picture[None], self.lamp_rows * self.px, np.zeros(1, dtype=np.int64),
              np.asarray([CUE_COLOURS[value]], dtype=np.uint8))


def _nearest(size: int, source: int) -> np.ndarray:
    """Source indices of a nearest-neighbour resize from ``source`` to ``size`` pixels."""
    return np.minimum((np.arange(size) * source) // size, source - 1)


def lamp_rows(height: int) -> int:
    """Rows of the lamp strip at the top of a top-down frame (the lamp is as tall as the strip)."""
    return max(1, height // 10)


def tile_boxes(model: TaskModel, height: int, width: int, view: str = "full", window: int = WINDOW) -> np.ndarray:
    """int[T, 4]: (top, bottom, left, right) pixel box of each floor tile a lure may light: every
    layout cell in the full view, every window position in the window view."""
    renderer_px = TILE_PX
    rows, cols = model.layout.shape
    lamp = lamp_rows(height)
    if view == "full":   # every cell but the goals, which already show a cue colour
        src_h, src_w = (rows + 2) * renderer_px, (cols + 2) * renderer_px
        plain = np.setdiff1d(np.arange(model.layout.num_cells), model.layout.sites.get("goal", []))
        tiles = model.layout.cells[plain] + 1
    else:
        src_h = src_w = window * renderer_px
        r, c = np.divmod(np.arange(window * window), window)
        tiles = np.stack([r, c], axis=1)
    ri = _nearest(height - lamp, src_h) // renderer_px
    ci = _nearest(width, src_w) // renderer_px
    out = np.zeros((tiles.shape[0], 4), dtype=np.int64)
    for i, (r, c) in enumerate(tiles):
        hit_r, hit_c = np.flatnonzero(ri == r), np.flatnonzero(ci == c)
        if hit_r.size and hit_c.size:
            out[i] = (hit_r[0] + lamp, hit_r[-1] + 1 + lamp, hit_c[0], hit_c[-1] + 1)
    return out


def pixel_table(model: TaskModel, height: int, width: int, view: str = "full", window: int = WINDOW) -> np.ndarray:
    """uint8[K, height, width, 3]: the top-down picture the agent gets for every observation key.

    The top tenth of the frame is the lamp strip (its lamp lit in the cue colour while the cue is
    shown). Below
    it, ``view='full'`` shows the whole map with the agent as a white square; ``view='window'``
    shows ``window × window`` cells centred on the agent (outside the map is wall). Every key is
    drawn at once with numpy gathers, so the runtime only indexes this table.
    """
    K = model.num_keys
    lamp = lamp_rows(height)
    body_h = height - lamp
    frames = np.empty((K, height, width, 3), dtype=np.uint8)
    renderer = TopDownRenderer(model)
    px = renderer.px
    rows, cols = model.layout.shape
    cells = model.layout.cells[model.key_cell]                       # [K, 2]
    if view == "full":
        # the map without the lamp strip: rows of cells plus the one-cell border
        background = renderer.background[renderer.lamp_rows * px:]
        src_h, src_w = background.shape[:2]
        ri, ci = _nearest(body_h, src_h), _nearest(width, src_w)
        body = background[ri][:, ci]
        frames[:, lamp:] = body[None]
        top = (cells[:, 0] + 1) * px
        left = (cells[:, 1] + 1) * px
        inset = max(1, px // 4)
        in_rows = (ri[None, :] >= (top + inset)[:, None]) & (ri[None, :] < (top + px - inset)[:, None])
        in_cols = (ci[None, :] >= (left + inset)[:, None]) & (ci[None, :] < (left + px - inset)[:, None])
        # a marker at least one pixel wide even where a cell is smaller than a pixel
        keys = np.arange(K)
        in_rows[keys, np.argmin(np.abs(ri[None, :] - (top + px // 2)[:, None]), axis=1)] = True
        in_cols[keys, np.argmin(np.abs(ci[None, :] - (left + px // 2)[:, None]), axis=1)] = True
        marker = in_rows[:, :, None] & in_cols[:, None, :]
        frames[:, lamp:][marker] = AGENT
    else:
        half = window // 2
        pad = half + 1
        full = renderer.background[renderer.lamp_rows * px:]
        padded = np.empty((full.shape[0] + 2 * pad * px, full.shape[1] + 2 * pad * px, 3), dtype=np.uint8)
        padded[:] = WALL
        padded[pad * px:pad * px + full.shape[0], pad * px:pad * px + full.shape[1]] = full
        span = window * px
        ri, ci = _nearest(body_h, span), _nearest(width, span)
        top = (cells[:, 0] + 1 + pad - half) * px
        left = (cells[:, 1] + 1 + pad - half) * px
        frames[:, lamp:] = padded[(top[:, None] + ri[None, :])[:, :, None], (left[:, None] + ci[None, :])[:, None, :]]
        centre_r = (ri >= half * px + px // 4) & (ri < half * px + px - px // 4)
        centre_c = (ci >= half * px + px // 4) & (ci < half * px + px - px // 4)
        if not centre_r.any():
            centre_r[np.argmin(np.abs(ri - (half * px + px // 2)))] = True
        if not centre_c.any():
            centre_c[np.argmin(np.abs(ci - (half * px + px // 2)))] = True
        frames[:, lamp:][:, centre_r[:, None] & centre_c[None, :]] = AGENT
    draw_strip(frames, lamp, WALL, lamp=model.cue is not None)
    key_cue = model.shown_cue()
    shown = np.flatnonzero(key_cue >= 0)
    light(frames, lamp, shown, np.asarray(CUE_COLOURS, dtype=np.uint8)[key_cue[shown]])
    return frames
