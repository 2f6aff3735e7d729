"""Observation keys → a local symbolic view: a north-up window of cells centred on the agent."""

from __future__ import annotations

import numpy as np

from ..model import TaskModel

GRID_CHANNELS = ("open", "wall_north", "wall_east", "wall_south", "wall_west", "goal", "cue", "agent")


def grid_table(model: TaskModel, size: int, egocentric: bool = False) -> np.ndarray:
    """uint8[K, size, size, 8]: for every observation key, the ``size × size`` cells around the
    agent (north up), with channels GRID_CHANNELS: 1 for an open cell, a wall bit per side
    (cells outside the map are closed on every side), the goal's cue value + 1, the shown cue
    value + 1 at the agent's cell, and at the agent's cell 1 (or its heading + 1, north = 1 …
    west = 4, when it has one). ``egocentric`` turns the window so
    the agent's heading points up (wall bits then mean ahead, right, behind, left)."""
    layout = model.layout
    rows, cols = layout.shape
    half = size // 2
    index = -np.ones((rows + 2 * half, cols + 2 * half), dtype=np.int64)
    index[layout.cells[:, 0] + half, layout.cells[:, 1] + half] = np.arange(layout.num_cells)
    per_cell = np.zeros((layout.num_cells + 1, len(GRID_CHANNELS)), dtype=np.uint8)
    per_cell[-1, 1:5] = 1                                        # "outside": closed everywhere
    per_cell[:-1, 0] = 1
    per_cell[:-1, 1:5] = layout.neighbour < 0
    goals = layout.sites.get("goal", np.array([], dtype=np.int64))
    per_cell[goals, 5] = np.arange(1, goals.size + 1)
    cells = layout.cells[model.key_cell]                         # [K, 2]
    offsets = np.arange(-half, size - half)
    r = cells[:, 0, None, None] + half + offsets[None, :, None]
    c = cells[:, 1, None, None] + half + offsets[None, None, :]
    window = index[r, c]                                         # [K, size, size]
    out = per_cell[window]                                       # −1 picks the "outside" row
    key_cue = model.shown_cue()
    out[:, half, half, 6] = np.where(key_cue >= 0, key_cue + 1, 0)
    out[:, half, half, 7] = np.where(model.key_heading >= 0, model.key_heading + 1, 1)   # heading + 1
    if egocentric:   # turn each window so the agent's heading is up, wall bits turning with it
        for heading in range(4):
            facing = np.flatnonzero(model.key_heading == heading)
            turned = np.rot90(out[facing], k=heading, axes=(1, 2)).copy()
            walls = turned[..., 1:5].copy()
            turned[..., 1:5] = walls[..., [(heading + d) % 4 for d in range(4)]]
            out[facing] = turned
    return out
