"""Reachability and shortest paths on a model's transition table (breadth-first, numpy frontiers)."""

from __future__ import annotations

import numpy as np


def reachable(next_state: np.ndarray, sources: np.ndarray) -> np.ndarray:
    """bool[S]: states reachable from ``sources`` by any actions."""
    seen = np.zeros(next_state.shape[0], dtype=bool)
    frontier = np.unique(np.asarray(sources, dtype=np.int64))
    seen[frontier] = True
    while frontier.size:
        successors = np.unique(next_state[frontier].ravel())
        frontier = successors[~seen[successors]]
        seen[frontier] = True
    return seen


def distances_from(next_state: np.ndarray, source: int) -> np.ndarray:
    """int64[S]: fewest steps from ``source`` to each state (−1 where unreachable)."""
    dist = -np.ones(next_state.shape[0], dtype=np.int64)
    dist[source] = 0
    frontier = np.array([source], dtype=np.int64)
    step = 0
    while frontier.size:
        step += 1
        successors = np.unique(next_state[frontier].ravel())
        frontier = successors[dist[successors] < 0]
        dist[frontier] = step
    return dist


def shortest_success_steps(next_state: np.ndarray, success: np.ndarray, starts: np.ndarray) -> np.ndarray:
    """Fewest steps from each start state to a success state (−1 where none is reachable)."""
    out = []
    for s in starts:
        dist = distances_from(next_state, int(s))
        hits = dist[success & (dist >= 0)]
        out.append(int(hits.min()) if hits.size else -1)
    return np.asarray(out, dtype=np.int64)
