"""Stage 2 of the pipeline: layout generators, pure functions of numbers (and a seeded generator)."""

from .corridor import corridor_layout
from .grid import MOVE_NAMES, MOVES, GridLayout, grid_from_cells

__all__ = ["MOVES", "MOVE_NAMES", "GridLayout", "corridor_layout", "grid_from_cells"]
