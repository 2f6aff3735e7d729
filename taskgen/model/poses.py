"""Where a grid agent can be and how its actions move it: cells with moves, or (cell, heading) with turns."""

from __future__ import annotations

import numpy as np

from ..generate.grid import MOVE_NAMES, GridLayout

TURN_NAMES = ("forward", "turn_right", "turn_left")   # clockwise first, as the headings run
HEADING_NAMES = ("north", "east", "south", "west")


def action_names(turns: bool) -> tuple[str, ...]:
    """The actions in order: the four moves, or forward, turn right, turn left."""
    return TURN_NAMES if turns else MOVE_NAMES


def poses(layout: GridLayout, turns: bool) -> tuple[np.ndarray, np.ndarray, np.ndarray, int]:
    """The agent's poses and how actions move between them.

    Returns (cell of each pose, heading of each pose (−1 without headings), next pose per
    action [P, A], start pose). With moves a pose is a cell and the actions are the four moves;
    with turns a pose is (cell, heading), and the actions step forward, turn right or turn left.
    The start heading is the first open direction of east, south, west, north.
    """
    C = layout.num_cells
    stay = np.arange(C)[:, None]
    moved = np.where(layout.neighbour >= 0, layout.neighbour, stay)          # [C, 4]
    if not turns:
        return np.arange(C), -np.ones(C, dtype=np.int64), moved, layout.start
    cell, heading = np.divmod(np.arange(4 * C), 4)
    next_pose = np.stack([moved[cell, heading] * 4 + heading, cell * 4 + (heading + 1) % 4,
                          cell * 4 + (heading + 3) % 4], axis=1)
    facing = next((d for d in (1, 2, 3, 0) if layout.neighbour[layout.start, d] >= 0), 1)
    return cell, heading, next_pose, layout.start * 4 + facing
