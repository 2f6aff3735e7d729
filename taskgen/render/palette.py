"""Colours of every picture taskgen draws, chosen so each cue colour reads against the floor.

Cue colours are Okabe & Ito's colour-blind-safe palette ("Color Universal Design", 2008) in
the palette's order, without black. Yellow, orange and sky blue lie below 3:1 on white, so
the floor is near-black: every cue colour then has a contrast ratio of at least 3:1 with it
(WCAG 2.1, success criterion 1.4.11), by the relative-luminance formula of WCAG 2.x.
"""

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
FLOOR = (20, 20, 28)
WALL = (150, 150, 160)
AGENT = (255, 255, 255)
# hidden-path fields have no cue colours: a mark is a reddish-purple ring in the agent's view unless
# the spec names another colour (layout.field.mark.colour, which may not be FLOOR, WALL or AGENT:
# spec/schema.py repeats those three and this default, a test keeps them equal); the path (bluish
# green) and its end (yellow) appear only in ground-truth pictures
MARK = (204, 121, 167)
PATH = (0, 158, 115)
PATH_END = (240, 228, 66)


def relative_luminance(rgb: tuple[int, int, int]) -> float:
    """WCAG 2.x relative luminance of an sRGB colour (0 black … 1 white)."""
    def channel(value: int) -> float:
        c = value / 255
        return c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4
    r, g, b = (channel(c) for c in rgb)
    return 0.2126 * r + 0.7152 * g + 0.0722 * b


def contrast_ratio(a: tuple[int, int, int], b: tuple[int, int, int]) -> float:
    """WCAG 2.x contrast ratio (lighter + 0.05) / (darker + 0.05), from 1 to 21."""
    la, lb = sorted((relative_luminance(a), relative_luminance(b)), reverse=True)
    return (la + 0.05) / (lb + 0.05)
