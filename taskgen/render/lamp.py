"""The cue lamp of pixel frames: a round lamp at the right end of a wall-coloured strip along the
top of the frame, lit in the cue's colour while the cue (or a decoy) is shown and dark otherwise.

Top-down and first-person frames draw the same lamp, and the decoys of ``envs/distractors.py``
light it the same way, so one mask says where the cue can appear in a picture.
"""

from __future__ import annotations

import functools

import numpy as np

#: The unlit lamp: dark, so that every cue colour lit in it and the wall strip around it differ from
#: it by a contrast ratio of at least 3:1 (a test checks it); never the floor colour.
LAMP_OFF = (32, 30, 38)


@functools.lru_cache(maxsize=64)
def lamp_disc(rows: int, width: int) -> np.ndarray:
    """bool[rows, width]: the lamp's pixels in a strip ``rows`` tall: a disc as tall as the strip,
    half its height in from the right end (pixel centres within the radius; at least one pixel).
    The right end leaves the left one to the labels galleries write over a picture. Made once per
    size (read-only): decoys light it on every step they show."""
    radius = rows / 2
    centre_y, centre_x = radius, width - radius - rows // 2
    y = np.arange(rows)[:, None] + 0.5
    x = np.arange(width)[None, :] + 0.5
    disc = (y - centre_y) ** 2 + (x - centre_x) ** 2 <= radius ** 2
    if not disc.any():
        disc[0, max(width - 1 - rows // 2, 0)] = True
    disc.flags.writeable = False
    return disc


def light(frames: np.ndarray, rows: int, which: np.ndarray, colours: np.ndarray) -> None:
    """Light the lamp of frames ``which`` (int[n]) in ``colours`` (uint8[n, 3]), in place; ``frames``
    is uint8[N, H, W, 3] with a lamp strip ``rows`` tall at the top."""
    r, c = _disc_pixels(rows, frames.shape[2])
    frames[which[:, None], r[None, :], c[None, :]] = colours[:, None, :]


@functools.lru_cache(maxsize=64)
def _disc_pixels(rows: int, width: int) -> tuple[np.ndarray, np.ndarray]:
    """The lamp's (row, column) pixel indices, made once per size."""
    r, c = np.nonzero(lamp_disc(rows, width))
    return r, c


def draw_strip(frames: np.ndarray, rows: int, wall: tuple[int, int, int], lamp: bool = True) -> None:
    """Paint the strip (wall colour) over the top ``rows`` of every frame uint8[N, H, W, 3], in place,
    with the unlit lamp when ``lamp`` (a task without a cue, a field, has a plain strip)."""
    frames[:, :rows] = np.asarray(wall, dtype=np.uint8)
    if lamp:
        frames[:, :rows][:, lamp_disc(rows, frames.shape[2])] = np.asarray(LAMP_OFF, dtype=np.uint8)
