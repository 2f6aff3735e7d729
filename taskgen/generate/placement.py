"""Placing the start, the goals and a cue site in a layout by rules (pure functions)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


class PlacementError(ValueError):
    """The placement rules cannot all be met in this layout."""


def cell_distances(neighbour: np.ndarray, source: int) -> np.ndarray:
    """Fewest moves from ``source`` to every cell (−1 where unreachable), breadth-first."""
    dist = -np.ones(neighbour.shape[0], dtype=np.int64)
    dist[source] = 0
    frontier = np.array([source])
    step = 0
    while frontier.size:
        step += 1
        nxt = np.unique(neighbour[frontier].ravel())
        nxt = nxt[(nxt >= 0)]
        nxt = nxt[dist[nxt] < 0]
        dist[nxt] = step
        frontier = nxt
    return dist


def visible_from(neighbour: np.ndarray, cell: int) -> np.ndarray:
    """bool[C]: cells in a straight, unwalled line of sight from ``cell`` (itself included)."""
    seen = np.zeros(neighbour.shape[0], dtype=bool)
    seen[cell] = True
    for d in range(neighbour.shape[1]):
        u = cell
        while neighbour[u, d] >= 0:
            u = int(neighbour[u, d])
            seen[u] = True
    return seen


@dataclass(frozen=True)
class PlacementRules:
    """What the spec asks of the start, goal and cue-site cells."""

    start: str = "random"            # random | corner | dead_end
    goals: int = 2
    goals_in_dead_ends: bool = False
    goals_hidden_from_start: bool = False
    min_start_distance: int = 1      # goal and cue-site distance from the start
    min_goal_spacing: int = 1        # between any two goals
    min_branch_distance: int = 0     # the shortest paths to all goals share this many first steps
    cue_site: str = ""               # "" (none), "random" or "start"
    start_cell: int | None = None    # fixed cells (flat indices), instead of drawing them
    goal_cells: tuple[int, ...] | None = None


def _parents(neighbour: np.ndarray, dist: np.ndarray) -> np.ndarray:
    """A breadth-first tree of shortest paths from the start: each cell's parent (lowest-numbered
    neighbour one step nearer), −1 for the start."""
    parent = -np.ones(neighbour.shape[0], dtype=np.int64)
    for cell in np.flatnonzero(dist > 0):
        options = [int(v) for v in neighbour[cell] if v >= 0 and dist[v] == dist[cell] - 1]
        parent[cell] = min(options)
    return parent


def _below(parent: np.ndarray, dist: np.ndarray, branch: int) -> np.ndarray:
    """bool[C]: cells whose shortest path from the start (in the tree) passes through ``branch``."""
    out = np.zeros(parent.size, dtype=bool)
    for cell in np.flatnonzero(dist > dist[branch]):
        u = int(cell)
        while dist[u] > dist[branch]:
            u = int(parent[u])
        out[cell] = u == branch
    return out


def _spaced(rng: np.random.Generator, neighbour: np.ndarray, ok: np.ndarray, rules: "PlacementRules") -> list[int]:
    """Up to ``rules.goals`` cells from ``ok``, drawn in random order, kept ``min_goal_spacing`` apart."""
    goals: list[int] = []
    spacing = np.ones(ok.size, dtype=bool)    # cells far enough from every goal chosen so far
    for cell in rng.permutation(np.flatnonzero(ok)).tolist():
        if len(goals) == rules.goals:
            break
        if spacing[cell]:
            goals.append(int(cell))
            if rules.min_goal_spacing > 1:
                d = cell_distances(neighbour, int(cell))
                spacing &= (d < 0) | (d >= rules.min_goal_spacing)
    return goals


def place(rng: np.random.Generator, neighbour: np.ndarray, shape: tuple[int, int],
          rules: PlacementRules) -> tuple[int, list[int], int | None]:
    """Draw (start, goals, cue site) meeting every rule, or raise PlacementError saying which failed."""
    C = neighbour.shape[0]
    degree = (neighbour >= 0).sum(axis=1)
    if rules.start == "corner":
        h, w = shape
        candidates = np.array([0, w - 1, (h - 1) * w, h * w - 1])
    elif rules.start == "dead_end":
        candidates = np.flatnonzero(degree == 1)
    else:
        candidates = np.arange(C)
    if rules.start_cell is not None:
        candidates = np.array([rules.start_cell])
    if candidates.size == 0:
        raise PlacementError(f"no cell can be the start ({rules.start})")
    start = int(candidates[int(rng.integers(candidates.size))])
    dist = cell_distances(neighbour, start)
    ok = (dist >= rules.min_start_distance) & (np.arange(C) != start)
    why = [f"at least {rules.min_start_distance} steps from the start"]
    if rules.goals_in_dead_ends:
        ok &= degree == 1
        why.append("in a dead end")
    if rules.goals_hidden_from_start:
        ok &= ~visible_from(neighbour, start)
        why.append("not visible from the start")
    goals: list[int] = []
    if rules.goal_cells is not None:
        goals = list(rules.goal_cells)
        if len(set(goals)) != len(goals) or start in goals:
            raise PlacementError("fixed goal cells must differ from each other and from the start")
    elif rules.min_branch_distance > 0:
        why.append(f"beyond one branch cell at least {rules.min_branch_distance} steps from the start")
        parent = _parents(neighbour, dist)
        for branch in rng.permutation(np.flatnonzero(dist >= rules.min_branch_distance)).tolist():
            beyond = ok & _below(parent, dist, int(branch))
            goals = _spaced(rng, neighbour, beyond, rules)
            if len(goals) == rules.goals:
                break
    else:
        goals = _spaced(rng, neighbour, ok, rules)
    if len(goals) < rules.goals:
        if rules.min_goal_spacing > 1:
            why.append(f"at least {rules.min_goal_spacing} steps apart")
        raise PlacementError(f"only {len(goals)} of {rules.goals} goal cells can be "
                             + ", ".join(why) + f" ({int(ok.sum())} cells qualify)")
    cue_site = None
    if rules.cue_site == "start":
        cue_site = start
    elif rules.cue_site:
        free = np.flatnonzero((dist >= 1) & ~np.isin(np.arange(C), goals))
        if free.size == 0:
            raise PlacementError("no cell is left for the cue site")
        cue_site = int(free[int(rng.integers(free.size))])
    return start, goals, cue_site
