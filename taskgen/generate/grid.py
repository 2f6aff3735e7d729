"""A layout as plain arrays: open cells on a grid, their neighbours, and the named sites."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

#: Moves in action order: north, east, south, west, as (row, column) offsets.
MOVES = np.array([(-1, 0), (0, 1), (1, 0), (0, -1)], dtype=np.int64)
MOVE_NAMES = ("north", "east", "south", "west")


@dataclass(frozen=True, eq=False)
class GridLayout:
    """Open cells of a grid world. ``neighbour[c, m]`` is the cell a move reaches, or -1 (a wall)."""

    shape: tuple[int, int]
    cells: np.ndarray            # int64[C, 2], (row, column) of each open cell
    neighbour: np.ndarray        # int64[C, 4], per move in MOVES order
    start: int                   # cell index where episodes begin
    sites: dict[str, np.ndarray] = field(default_factory=dict)  # named cell-index arrays

    @property
    def num_cells(self) -> int:
        """How many open cells there are."""
        return int(self.cells.shape[0])

    def walls(self) -> np.ndarray:
        """bool[C, 4]: a wall in each move direction."""
        return self.neighbour < 0


def grid_from_cells(shape: tuple[int, int], cells: list[tuple[int, int]], start: tuple[int, int],
                    sites: dict[str, list[tuple[int, int]]]) -> GridLayout:
    """Build a GridLayout from open (row, column) cells; neighbours are the 4-connected open cells."""
    coords = np.asarray(cells, dtype=np.int64).reshape(-1, 2)
    index = -np.ones(shape, dtype=np.int64)
    index[coords[:, 0], coords[:, 1]] = np.arange(len(coords))
    target = coords[:, None, :] + MOVES[None, :, :]
    inside = ((target >= 0) & (target < np.asarray(shape))).all(axis=2)
    neighbour = np.where(inside, index[np.clip(target[..., 0], 0, shape[0] - 1),
                                       np.clip(target[..., 1], 0, shape[1] - 1)], -1)
    return GridLayout(
        shape=shape, cells=coords, neighbour=neighbour, start=int(index[start]),
        sites={name: index[tuple(np.asarray(v, dtype=np.int64).reshape(-1, 2).T)] for name, v in sites.items()},
    )
