"""Observation keys → first-person pictures by raycasting on the grid (no GPU).

Each column casts one ray from the centre of the agent's cell, direction = heading + plane ·
(2x/W − 1) with |plane| = tan(fov/2), and walks the grid cell by cell with the traversal of
Amanatides & Woo ("A Fast Voxel Traversal Algorithm for Ray Tracing", Eurographics 1987)
until a move it crosses is blocked. Because the heading component of the ray is a unit
vector, the traversal's parameter at the hit is the perpendicular distance d, so a column is
H/d pixels tall with no fisheye distortion. All rays of all keys advance together in numpy.
"""

from __future__ import annotations

import numpy as np

from ..model import TaskModel
from .lamp import draw_strip, light
from .palette import CUE_COLOURS, FLOOR, WALL

# unit vectors (row, column) of the four headings north, east, south, west
_HEADING = np.array([(-1.0, 0.0), (0.0, 1.0), (1.0, 0.0), (0.0, -1.0)])
SKY = (8, 8, 12)


def lamp_rows(height: int) -> int:
    """Rows of the lamp strip at the top of a first-person frame."""
    return max(1, height // 12)


def cast(model: TaskModel, cells: np.ndarray, headings: np.ndarray, width: int, fov: float,
         max_steps: int | None = None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Cast ``width`` rays from each (cell, heading): perpendicular distance [N, W], the cell
    whose wall was hit [N, W] and whether the wall was crossed along rows (1) or columns (0)."""
    layout = model.layout
    n = cells.size
    direction = _HEADING[headings]                                    # [N, 2]
    # the camera plane points to the agent's right (east when facing north)
    plane = np.stack([direction[:, 1], -direction[:, 0]], axis=1) * np.tan(np.radians(fov) / 2)
    camera = 2.0 * (np.arange(width) + 0.5) / width - 1.0              # [W]
    ray = direction[:, None, :] + plane[:, None, :] * camera[None, :, None]   # [N, W, 2]
    ray[np.abs(ray) < 1e-12] = 1e-12
    position = layout.cells[cells].astype(np.float64) + 0.5            # centre of the cell
    cell = np.repeat(cells[:, None], width, axis=1)
    step = np.sign(ray).astype(np.int64)                               # −1 or +1 per axis
    delta = np.abs(1.0 / ray)                                          # parameter per cell crossed
    frac = position[:, None, :] - np.floor(position[:, None, :])
    t_max = np.where(step > 0, (1.0 - frac) * delta, frac * delta)
    # moves by direction index: rows step ±1 → south (2) / north (0); columns → east (1) / west (3)
    move_row = np.where(step[..., 0] > 0, 2, 0)
    move_col = np.where(step[..., 1] > 0, 1, 3)
    distance = np.zeros((n, width))
    hit_cell = cell.copy()
    side = np.zeros((n, width), dtype=np.int64)
    alive = np.ones((n, width), dtype=bool)
    limit = max_steps or (layout.shape[0] + layout.shape[1] + 2)
    for _ in range(limit):
        if not alive.any():
            break
        along_rows = t_max[..., 0] < t_max[..., 1]
        move = np.where(along_rows, move_row, move_col)
        target = layout.neighbour[cell, move]
        blocked = alive & (target < 0)
        t_hit = np.where(along_rows, t_max[..., 0], t_max[..., 1])
        distance[blocked] = t_hit[blocked]
        hit_cell[blocked] = cell[blocked]
        side[blocked] = along_rows[blocked]
        alive &= ~blocked
        cell = np.where(alive, target, cell)
        t_max[..., 0] += np.where(alive & along_rows, delta[..., 0], 0.0)
        t_max[..., 1] += np.where(alive & ~along_rows, delta[..., 1], 0.0)
    distance[alive] = np.inf
    return distance, hit_cell, side


def first_person_table(model: TaskModel, height: int, width: int, fov: float) -> np.ndarray:
    """uint8[K, height, width, 3]: the first-person view of every observation key.

    Walls are shaded by distance (and darker when crossed along rows, so corners read), walls
    of a goal cell take the goal's cue colour, and a strip along the top of the view holds the cue
    lamp (``render/lamp.py``), lit in the cue colour while the cue is shown."""
    K = model.num_keys
    distance, hit, side = cast(model, model.key_cell, model.key_heading, width, fov)
    goal_of = -np.ones(model.layout.num_cells, dtype=np.int64)
    goals = model.layout.sites.get("goal", np.array([], dtype=np.int64))
    goal_of[goals] = np.arange(goals.size)
    colours = np.asarray(CUE_COLOURS, dtype=np.float64)
    base = np.where(goal_of[hit][..., None] >= 0, colours[np.maximum(goal_of[hit], 0)],
                    np.asarray(WALL, dtype=np.float64))                          # [K, W, 3]
    shade = np.clip(1.2 / (1.0 + 0.25 * distance), 0.25, 1.0) * np.where(side == 1, 0.8, 1.0)
    wall = np.clip(base * shade[..., None], 0, 255).astype(np.uint8)
    column = np.minimum(height, np.floor(height / np.maximum(distance, 1e-9))).astype(np.int64)
    top = (height - column) // 2
    rows = np.arange(height)[None, :, None]
    is_wall = (rows >= top[:, None, :]) & (rows < (top + column)[:, None, :])     # [K, H, W]
    frames = np.empty((K, height, width, 3), dtype=np.uint8)
    frames[:] = np.asarray(SKY, dtype=np.uint8)
    frames[:, height // 2:] = np.asarray(FLOOR, dtype=np.uint8)
    frames[is_wall] = np.broadcast_to(wall[:, None, :, :], (K, height, width, 3))[is_wall]
    lamp = lamp_rows(height)
    draw_strip(frames, lamp, WALL, lamp=model.cue is not None)
    key_cue = model.shown_cue()
    shown = np.flatnonzero(key_cue >= 0)
    light(frames, lamp, shown, np.asarray(CUE_COLOURS, dtype=np.uint8)[key_cue[shown]])
    return frames
