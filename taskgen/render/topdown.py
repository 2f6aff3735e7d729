"""Observation keys → a plain top-down RGB picture of the layout, the agent and the cue."""

from __future__ import annotations

import numpy as np
from PIL import Image, ImageDraw

from ..model import TaskModel
from .palette import AGENT, CUE_COLOURS, FLOOR, WALL


def _tint(colour: tuple[int, int, int], amount: float) -> tuple[int, int, int]:
    return tuple(int(round(c + (255 - c) * amount)) for c in colour)  # type: ignore[return-value]


class TopDownRenderer:
    """Draws a model's layout once and the agent and cue per frame.

    The grid gets a one-cell wall border and thin walls where a move is blocked; a lamp strip
    above it shows the cue colour while the cue is visible and stays wall-coloured otherwise.
    Goals (arm ends) are tinted with the colour of their cue value, so a viewer can match cue
    and goal; a cue site is marked with a diamond outline.
    """

    def __init__(self, model: TaskModel, cell_px: int = 12) -> None:
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
            left, top, right, bottom = self._box(r, c)
            draw.rectangle((left, top, right, bottom), fill=FLOOR)
            sides = ((left, top, right, top + wall - 1), (right - wall + 1, top, right, bottom),
                     (left, bottom - wall + 1, right, bottom), (left, top, left + wall - 1, bottom))
            for direction, box in enumerate(sides):   # thin walls where a move is blocked
                if layout.neighbour[cell, direction] < 0:
                    draw.rectangle(box, fill=WALL)
        for value, cell in enumerate(layout.sites.get("goal", [])):
            r, c = layout.cells[cell]
            left, top, right, bottom = self._box(r, c)
            draw.rectangle((left + wall, top + wall, right - wall, bottom - wall),
                           fill=_tint(CUE_COLOURS[value], 0.45))
        for cell in layout.sites.get("cue_site", []) if model.cue_visible_steps == 0 else []:
            r, c = layout.cells[cell]
            left, top, right, bottom = self._box(r, c)
            mid_x, mid_y, half = (left + right) // 2, (top + bottom) // 2, max(2, cell_px // 4)
            draw.polygon([(mid_x, mid_y - half), (mid_x + half, mid_y), (mid_x, mid_y + half),
                          (mid_x - half, mid_y)], outline=AGENT)
        self.background = np.asarray(image, dtype=np.uint8)

    def _box(self, row: int, col: int) -> tuple[int, int, int, int]:
        top = (row + 1 + self.lamp_rows) * self.px
        left = (col + 1) * self.px
        return left, top, left + self.px - 1, top + self.px - 1

    def frame(self, key: int) -> np.ndarray:
        """uint8[H, W, 3] picture of observation key ``key``."""
        image = Image.fromarray(self.background.copy())
        draw = ImageDraw.Draw(image)
        cue = int(self.model.key_cue[key])
        if cue >= 0:
            draw.rectangle((0, 0, image.width - 1, self.lamp_rows * self.px - 1), fill=CUE_COLOURS[cue])
        r, c = self.model.layout.cells[self.model.key_cell[key]]
        left, top, right, bottom = self._box(int(r), int(c))
        inset = max(1, self.px // 5)
        draw.ellipse((left + inset, top + inset, right - inset, bottom - inset), fill=AGENT)
        return np.asarray(image, dtype=np.uint8)
