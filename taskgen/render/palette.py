"""Colours of the top-down picture. Cue colours follow Okabe & Ito's colour-blind-safe palette
("Color Universal Design", 2008), in that palette's order without black."""

from __future__ import annotations

CUE_COLOURS: tuple[tuple[int, int, int], ...] = (
    (230, 159, 0),    # orange
    (86, 180, 233),   # sky blue
    (0, 158, 115),    # bluish green
    (240, 228, 66),   # yellow
    (0, 114, 178),    # blue
    (213, 94, 0),     # vermillion
    (204, 121, 167),  # reddish purple
    (120, 120, 120),  # grey, for an eighth value
)
WALL = (40, 40, 48)
FLOOR = (226, 226, 220)
AGENT = (20, 20, 20)
