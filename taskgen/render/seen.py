"""What the agent saw, made visible for people: every modality of one observation, drawn as it came.

Galleries show this beside the ground truth, so a reader sees exactly the agent's input: its pixels
(scaled up), its grid view as a local window of cells, and its vector as rows of squares, one row
per block (cue bits in their cue colours, position, walls, goals, heading, noise bits, marks).
Everything is drawn from the observation itself, so decoys, lures, noise and marks appear where and
when the agent saw them. Pictures for people, never observations.
"""

from __future__ import annotations

import functools
from pathlib import Path
from typing import Any, Sequence

import numpy as np
from PIL import Image, ImageDraw, ImageFont

from .first_person import lamp_rows as first_person_lamp
from .grid import GRID_CHANNELS
from .observations import ObservationSet
from .palette import AGENT, CUE_COLOURS, FLOOR, MARK, WALL
from .topdown import lamp_rows as topdown_lamp

FONT = Path(__file__).resolve().parent / "fonts" / "DejaVuSans.ttf"   # shipped with taskgen, with its licence
TEXT = 15            # label size in pixels
GAP = 8              # pixels between panels
SQUARE = 14          # a vector element's square, in pixels
PER_ROW = 24         # vector elements per row before a block wraps
INK = (0, 0, 0)
OFF = (236, 236, 240)          # a vector element at 0
ON = (28, 28, 36)              # a vector element at 1 (values between: a grey between the two)
OUTLINE = (170, 170, 178)
NOISE = (120, 120, 130)        # a noise bit at 1
PAD = (255, 255, 255)          # an element that pads a block to the family's width (always 0)

_SIDE_NAMES = "N E S W"
_BLOCK_LABELS = {"walls": f"walls {_SIDE_NAMES}", "heading": f"heading {_SIDE_NAMES}"}


@functools.lru_cache(maxsize=8)
def font(size: int = TEXT) -> Any:
    """DejaVu Sans, shipped with taskgen, so labels are the same pixels on every machine (with one Pillow);
    loaded once per size."""
    return ImageFont.truetype(str(FONT), size)


def _grey(value: float) -> tuple[int, int, int]:
    """OFF at 0, ON at 1, linear between (a coordinate's value)."""
    v = min(max(float(value), 0.0), 1.0)
    return tuple(int(round(a + (b - a) * v)) for a, b in zip(OFF, ON))   # type: ignore[return-value]


def vector_picture(obs: ObservationSet, vector: np.ndarray, mask: np.ndarray | None = None,
                   mark_colour: tuple[int, int, int] = MARK) -> Image.Image:
    """The vector as rows of squares, one labelled row (wrapped at PER_ROW) per block: cue bits in
    their cue colours (an unlit bit outlined in its colour), marks in the mark colour, noise bits grey,
    other elements from light (0) to dark (1), padding (``mask`` False) as blank squares; a block of
    values other than 0 and 1 (coordinates) has its values written after it."""
    assert obs.vector is not None
    typeface = font(TEXT - 2)
    probe = ImageDraw.Draw(Image.new("RGB", (1, 1)))
    blocks = list(obs.vector.blocks.items())
    labels = [_BLOCK_LABELS.get(name, name) for name, _ in blocks]
    label_width = max(int(probe.textlength(text, font=typeface)) for text in labels) + GAP
    step = SQUARE + 2
    rows = [max(1, -(-(block.stop - block.start) // PER_ROW)) for _, block in blocks]
    widest = max(min(block.stop - block.start, PER_ROW) for _, block in blocks)
    table = obs.vector.table          # noise-free: which blocks hold values other than 0 and 1 (coordinates)
    valued = {name for name, block in blocks
              if block.stop <= table.shape[1] and not np.isin(table[:, block], (0, 1)).all()}
    values_width = int(probe.textlength("0.00 " * 3, font=typeface)) if valued else 0
    width = label_width + widest * step + GAP + values_width
    height = sum(r * step + 4 for r in rows)
    image = Image.new("RGB", (width, height), (255, 255, 255))
    draw = ImageDraw.Draw(image)
    y = 0
    for (name, block), label, lines in zip(blocks, labels, rows):
        draw.text((0, y), label, fill=INK, font=typeface)
        values = vector[block]
        for j, value in enumerate(values.tolist()):
            x0 = label_width + (j % PER_ROW) * step
            y0 = y + (j // PER_ROW) * step
            box = (x0, y0, x0 + SQUARE - 1, y0 + SQUARE - 1)
            if mask is not None and not mask[block.start + j]:
                draw.rectangle(box, fill=PAD, outline=(220, 220, 226))
            elif name == "cue":
                colour = CUE_COLOURS[j % len(CUE_COLOURS)]
                draw.rectangle(box, fill=colour if value > 0.5 else OFF, outline=colour, width=2)
            elif name == "marks":
                draw.rectangle(box, fill=mark_colour if value > 0.5 else OFF, outline=OUTLINE)
            elif name == "noise":
                draw.rectangle(box, fill=NOISE if value > 0.5 else OFF, outline=OUTLINE)
            else:
                draw.rectangle(box, fill=_grey(value), outline=OUTLINE)
        if name in valued:
            used = values if mask is None else values[mask[block]]
            words = " ".join(f"{v:.2f}" for v in used[:3])
            draw.text((label_width + min(values.size, PER_ROW) * step + GAP // 2, y), words, fill=INK, font=typeface)
        y += lines * step + 4
    return image


def grid_picture(grid: np.ndarray, cell_px: int, headings: bool, egocentric: bool = False,
                 mark_colour: tuple[int, int, int] = MARK) -> Image.Image:
    """The grid view (uint8[s, s, channels], GRID_CHANNELS and a field's mark channel) as a window of
    cells: closed cells in the wall colour, open ones as floor with their walls drawn, goals in their
    cue colours, a cue value shown in a cell as a disc of its colour (at the agent: the cue or a decoy;
    elsewhere: a lure), marks as rings, the agent white (a wedge pointing its heading when it has one;
    up in an egocentric view)."""
    size = grid.shape[0]
    image = Image.new("RGB", (size * cell_px, size * cell_px), WALL)
    draw = ImageDraw.Draw(image)
    line = max(2, cell_px // 8)
    channel = {name: i for i, name in enumerate(GRID_CHANNELS)}
    for r in range(size):
        for c in range(size):
            x0, y0 = c * cell_px, r * cell_px
            x1, y1 = x0 + cell_px - 1, y0 + cell_px - 1
            here = grid[r, c]
            if not here[channel["open"]]:
                continue
            draw.rectangle((x0, y0, x1, y1), fill=FLOOR)
            for side, (a, b) in enumerate((((x0, y0), (x1, y0 + line - 1)), ((x1 - line + 1, y0), (x1, y1)),
                                           ((x0, y1 - line + 1), (x1, y1)), ((x0, y0), (x0 + line - 1, y1)))):
                if here[channel["wall_north"] + side]:
                    draw.rectangle((*a, *b), fill=WALL)
            inset = cell_px // 5
            if here[channel["goal"]]:
                colour = CUE_COLOURS[(int(here[channel["goal"]]) - 1) % len(CUE_COLOURS)]
                draw.rectangle((x0 + inset, y0 + inset, x1 - inset, y1 - inset), fill=colour)
            if here[channel["cue"]]:
                colour = CUE_COLOURS[(int(here[channel["cue"]]) - 1) % len(CUE_COLOURS)]
                draw.ellipse((x0 + line, y0 + line, x1 - line, y1 - line), fill=colour)
            if grid.shape[2] > len(GRID_CHANNELS) and here[len(GRID_CHANNELS)]:
                draw.ellipse((x0 + inset // 2, y0 + inset // 2, x1 - inset // 2, y1 - inset // 2), outline=mark_colour,
                             width=max(1, cell_px // 6))
            agent = int(here[channel["agent"]])
            if agent:
                inner = cell_px // 3
                if headings or egocentric:
                    heading = 0 if egocentric else agent - 1
                    cx, cy, d = (x0 + x1) / 2, (y0 + y1) / 2, cell_px / 2 - inner / 2
                    tip = [(0, -d), (d, 0), (0, d), (-d, 0)][heading]
                    back = [(-d, d), (-d, -d), (d, -d), (d, d)][heading]
                    fore = [(d, d), (-d, d), (-d, -d), (d, -d)][heading]
                    corners = [(cx + dx, cy + dy) for dx, dy in (tip, back, fore)]
                    draw.polygon(corners, fill=AGENT)
                else:
                    draw.ellipse((x0 + inner, y0 + inner, x1 - inner, y1 - inner), fill=AGENT)
    return image


def observation_picture(obs: ObservationSet, observation: Any, height: int, mask: np.ndarray | None = None,
                        egocentric: bool = False) -> np.ndarray:
    """uint8[H, W, 3]: every modality of ``observation`` (an array, or a dict of several) drawn side by
    side under its name: pixels scaled up to ``height`` (nearest neighbour), the grid view as a window
    about ``height`` high, the vector as rows of squares (``mask``: the elements its variant fills);
    marks in the colour the observations paint them."""
    mark_colour = obs.marks.colour if obs.marks is not None else MARK
    parts = observation if isinstance(observation, dict) else {obs.names[0]: observation}
    typeface = font(TEXT - 2)
    panels: list[tuple[str, Image.Image]] = []
    for name in obs.names:
        part = np.asarray(parts[name])
        if name in ("pixels", "first_person"):
            picture = Image.fromarray(part)
            width = max(1, round(picture.width * height / picture.height))
            words = f"{name.replace('_', '-')} {part.shape[1]}×{part.shape[0]}"
            panels.append((words, picture.resize((width, height), Image.Resampling.NEAREST)))
        elif name == "grid":
            size = part.shape[0]
            headings = obs.grid is not None and bool((obs.grid[..., GRID_CHANNELS.index("agent")] > 1).any())
            words = f"grid {size}×{size}" + (" (heading up)" if egocentric else " (north up)")
            panels.append((words, grid_picture(part, max(12, height // size), headings, egocentric, mark_colour)))
        else:
            panels.append((f"vector ({part.size})", vector_picture(obs, part, mask, mark_colour)))
    return np.asarray(_side_by_side(panels, typeface), dtype=np.uint8)


def seen_swatches(obs: ObservationSet, mask: np.ndarray | None = None) -> list[tuple[tuple[int, int, int], str]]:
    """The legend of the vector drawing: an element at 1 and at 0, a noise bit, padding (when shown)."""
    if obs.vector is None:
        return []
    out = [(ON, "vector element 1"), (OFF, "0")]
    if obs.vector.noise_bits:
        out.append((NOISE, "noise bit 1"))
    if mask is not None and not mask.all():
        out.append((PAD, "padding (always 0)"))
    return out


def _side_by_side(panels: Sequence[tuple[str, Image.Image]], typeface: Any) -> Image.Image:
    """Panels in a row, each under its title, top-aligned, GAP apart."""
    top = TEXT + 4
    probe = ImageDraw.Draw(Image.new("RGB", (1, 1)))
    widths = [max(p.width, int(probe.textlength(t, font=typeface)) + 2) for t, p in panels]
    sheet = Image.new("RGB", (sum(widths) + GAP * (len(panels) - 1), top + max(p.height for _, p in panels)),
                      (255, 255, 255))
    draw = ImageDraw.Draw(sheet)
    x = 0
    for (title, panel), width in zip(panels, widths):
        draw.text((x, 0), title, fill=INK, font=typeface)
        sheet.paste(panel, (x, top))
        x += width + GAP
    return sheet


def distractors_seen(obs: ObservationSet, observation: Any, key: int) -> list[str]:
    """What of a cue task's ``observation`` at observation key ``key`` is a distractor, found by comparing
    it with the noise-free observation of that key: a decoy (another cue value in the cue bits, at the
    grid's agent cell or in a pixel lamp) and lures (a cue value in another grid cell, lit floor in
    top-down pixels). Pixels are compared only without pixel noise; marks and noise bits are never
    distractors, so a field's observations give none."""
    if obs.marks is not None or not (obs.decoy_probability or obs.lure_probability):
        return []
    parts = observation if isinstance(observation, dict) else {obs.names[0]: observation}
    decoys: list[str] = []
    lures: list[str] = []
    if obs.vector is not None and "cue" in obs.vector.blocks and "vector" in parts:
        block = obs.vector.blocks["cue"]
        got = np.asarray(parts["vector"])[block]
        if not np.array_equal(got, obs.vector.table[key, block]) and got.any():
            decoys.append(f"decoy {int(np.argmax(got))}")
    if obs.grid is not None and "grid" in parts:
        cue = GRID_CHANNELS.index("cue")
        got, clean = np.asarray(parts["grid"])[..., cue], obs.grid[key, ..., cue]
        half = got.shape[0] // 2
        for r, c in np.argwhere(got != clean).tolist():
            if (r, c) == (half, half):
                decoys.append(f"decoy {int(got[r, c]) - 1}")
            else:
                lures.append(f"lure {int(got[r, c]) - 1}")
    if obs.pixel_noise is None:
        for name, lamp in (("pixels", topdown_lamp), ("first_person", first_person_lamp)):
            table = getattr(obs, name)
            if table is None or name not in parts:
                continue
            got, strip = np.asarray(parts[name]), lamp(table.shape[1])
            if not np.array_equal(got[:strip], table[key, :strip]):
                decoys.append("decoy")
            if name == "pixels" and not lures and not np.array_equal(got[strip:], table[key, strip:]):
                lures.append("lure")
    return ([max(decoys, key=len)] if decoys else []) + sorted(set(lures))
