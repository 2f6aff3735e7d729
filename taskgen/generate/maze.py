"""Maze generators: pure functions of a seeded generator and plain numbers.

A maze is a set of passages between 4-adjacent cells of a ``height × width`` grid, returned as
a boolean array ``open[h, w, 4]`` (one flag per move direction, north, east, south, west, kept
symmetric). Walls are thin: every cell is walkable, passages decide the moves.
"""

from __future__ import annotations

import numpy as np

from .grid import MOVES, GridLayout

OPPOSITE = np.array([2, 3, 0, 1])


class _Draws:
    """Random integers drawn from a Generator in blocks (one numpy call per block, not per step)."""

    def __init__(self, rng: np.random.Generator, high: int, block: int = 4096) -> None:
        self.rng, self.high, self.block = rng, high, block
        self.buffer, self.i = rng.integers(high, size=block), 0

    def next(self) -> int:
        if self.i == self.block:
            self.buffer, self.i = self.rng.integers(self.high, size=self.block), 0
        self.i += 1
        return int(self.buffer[self.i - 1])


def _neighbours(height: int, width: int) -> np.ndarray:
    """int[h*w, 4]: the cell index in each direction, −1 off the grid."""
    r, c = np.divmod(np.arange(height * width), width)
    out = np.full((height * width, 4), -1, dtype=np.int64)
    for d, (dr, dc) in enumerate(MOVES):
        rr, cc = r + dr, c + dc
        inside = (rr >= 0) & (rr < height) & (cc >= 0) & (cc < width)
        out[inside, d] = rr[inside] * width + cc[inside]
    return out


def _carve(passages: np.ndarray, width: int, cell: int, direction: int) -> None:
    r, c = divmod(cell, width)
    dr, dc = MOVES[direction]
    passages[r, c, direction] = True
    passages[r + dr, c + dc, OPPOSITE[direction]] = True


def wilson_maze(rng: np.random.Generator, height: int, width: int) -> np.ndarray:
    """A uniformly random perfect maze: a uniform spanning tree of the grid graph, by Wilson's
    loop-erased random walks (Wilson, "Generating random spanning trees more quickly than the
    cover time", STOC 1996)."""
    n = height * width
    nbr = _neighbours(height, width)
    passages = np.zeros((height, width, 4), dtype=bool)
    in_tree = np.zeros(n, dtype=bool)
    in_tree[int(rng.integers(n))] = True
    exit_dir = np.zeros(n, dtype=np.int64)
    draws = _Draws(rng, 4)
    for start in rng.permutation(n).tolist():
        u = start
        while not in_tree[u]:           # random walk; remembering only the last exit erases loops
            d = draws.next()
            while nbr[u, d] < 0:
                d = draws.next()
            exit_dir[u] = d
            u = int(nbr[u, d])
        u = start
        while not in_tree[u]:
            in_tree[u] = True
            _carve(passages, width, u, int(exit_dir[u]))
            u = int(nbr[u, exit_dir[u]])
    return passages


def backtracker_maze(rng: np.random.Generator, height: int, width: int) -> np.ndarray:
    """A perfect maze with long winding corridors: randomised depth-first search."""
    n = height * width
    nbr = _neighbours(height, width)
    passages = np.zeros((height, width, 4), dtype=bool)
    seen = np.zeros(n, dtype=bool)
    start = int(rng.integers(n))
    seen[start] = True
    stack = [start]
    while stack:
        u = stack[-1]
        options = [d for d in range(4) if nbr[u, d] >= 0 and not seen[nbr[u, d]]]
        if not options:
            stack.pop()
            continue
        d = options[int(rng.integers(len(options)))]
        v = int(nbr[u, d])
        _carve(passages, width, u, d)
        seen[v] = True
        stack.append(v)
    return passages


def rooms_maze(rng: np.random.Generator, height: int, width: int, room: int) -> np.ndarray:
    """Open square rooms of ``room × room`` cells, joined by one door per edge of a uniform
    spanning tree of the rooms (so every room is reachable and rooms form no loop)."""
    if height % room or width % room:
        raise ValueError(f"a rooms maze needs width and height divisible by the room size {room}, "
                         f"got {width}×{height}")
    passages = np.zeros((height, width, 4), dtype=bool)
    r, c = np.meshgrid(np.arange(height), np.arange(width), indexing="ij")
    for d, (dr, dc) in enumerate(MOVES):   # open every wall inside a room
        rr, cc = r + dr, c + dc
        inside = (rr >= 0) & (rr < height) & (cc >= 0) & (cc < width)
        same = inside & (rr // room == r // room) & (cc // room == c // room)
        passages[..., d] |= same
    tree = wilson_maze(rng, height // room, width // room)
    for R, C, d in zip(*np.nonzero(tree)):
        if d not in (1, 2):          # each tree edge once: from its west or north room
            continue
        offset = int(rng.integers(room))
        if d == 1:   # door in the east wall of room (R, C)
            cell = (R * room + offset) * width + C * room + room - 1
        else:        # door in the south wall
            cell = (R * room + room - 1) * width + C * room + offset
        _carve(passages, width, cell, int(d))
    return passages


def dead_ends(passages: np.ndarray) -> np.ndarray:
    """Flat indices of cells with exactly one passage."""
    return np.flatnonzero(passages.sum(axis=2).ravel() == 1)


def braid(rng: np.random.Generator, passages: np.ndarray, fraction: float) -> np.ndarray:
    """Remove ``fraction`` of the dead ends by opening a wall at each, preferring a wall to
    another dead end (which removes two at once), so the count is met within one."""
    out = passages.copy()
    height, width, _ = out.shape
    nbr = _neighbours(height, width)
    initial = dead_ends(out)
    target = int(round(fraction * initial.size))
    removed = 0
    for cell in rng.permutation(initial).tolist():
        if removed >= target:
            break
        r, c = divmod(cell, width)
        if out[r, c].sum() != 1:
            continue
        closed = [d for d in range(4) if nbr[cell, d] >= 0 and not out[r, c, d]]
        if not closed:
            continue
        degree = out.sum(axis=2).ravel()
        partners = [d for d in closed if degree[nbr[cell, d]] == 1]
        if partners and removed + 2 > target:
            partners = []            # opening onto another dead end would overshoot
        choices = partners or [d for d in closed if degree[nbr[cell, d]] != 1] or closed
        d = choices[int(rng.integers(len(choices)))]
        _carve(out, width, cell, d)
        removed = initial.size - dead_ends(out).size
    return out


def maze_layout(passages: np.ndarray, start: int, goals: list[int], cue_site: int | None = None) -> GridLayout:
    """A GridLayout whose cells are the maze cells and whose moves follow the passages."""
    height, width, _ = passages.shape
    r, c = np.divmod(np.arange(height * width), width)
    nbr = np.where(passages.reshape(-1, 4), _neighbours(height, width), -1)
    sites = {"goal": np.asarray(goals, dtype=np.int64)}
    if cue_site is not None:
        sites["cue_site"] = np.array([cue_site], dtype=np.int64)
    return GridLayout(shape=(height, width), cells=np.stack([r, c], axis=1), neighbour=nbr,
                      start=int(start), sites=sites)


def count_spanning_trees(height: int, width: int) -> int:
    """How many perfect mazes a height × width grid has: the number of spanning trees of the grid
    graph, by Kirchhoff's matrix-tree theorem (any cofactor of the Laplacian), computed exactly
    with fraction-free Bareiss elimination on Python integers."""
    n = height * width
    if n == 1:
        return 1
    nbr = _neighbours(height, width)
    lap = [[0] * n for _ in range(n)]
    for u in range(n):
        for v in nbr[u]:
            if v >= 0:
                lap[u][u] += 1
                lap[u][int(v)] -= 1
    m = [row[1:] for row in lap[1:]]           # delete row and column 0
    size, previous, sign = n - 1, 1, 1
    for k in range(size - 1):
        if m[k][k] == 0:
            swap = next((i for i in range(k + 1, size) if m[i][k] != 0), None)
            if swap is None:
                return 0
            m[k], m[swap] = m[swap], m[k]
            sign = -sign
        for i in range(k + 1, size):
            for j in range(k + 1, size):
                m[i][j] = (m[i][j] * m[k][k] - m[i][k] * m[k][j]) // previous
        previous = m[k][k]
    return sign * m[size - 1][size - 1]


def carve(rng: np.random.Generator, generator: str, height: int, width: int, room_size: int,
          fraction: float) -> np.ndarray:
    """Passages of one maze from the named generator (uniform, backtracker or rooms), braided by ``fraction``."""
    if generator == "uniform":
        passages = wilson_maze(rng, height, width)
    elif generator == "backtracker":
        passages = backtracker_maze(rng, height, width)
    else:
        passages = rooms_maze(rng, height, width, room_size)
    return braid(rng, passages, fraction) if fraction > 0 else passages
