"""Policies rolled out on many hidden paths at once, exactly, and the memoryless search built on them.

On one path the dynamics are deterministic, so a deterministic policy (with or without
memory) has one trajectory, and one rollout gives its exact return. :func:`roll` plays K paths
side by side in numpy; the memoryless search here and the explorer (explorer.py) are built on it.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass
from typing import Callable

import numpy as np

from ..model import PathRule
from ..model.paths import Outcome
from .report import TOLERANCE

SEARCH_EVALUATIONS = 600      # candidate policies the chance search evaluates at most


Act = Callable[[int, np.ndarray, np.ndarray, np.ndarray], np.ndarray]
Observe = Callable[[np.ndarray, np.ndarray, Outcome, np.ndarray], None]


@dataclass(frozen=True)
class Rollouts:
    """Exact figures of one deterministic policy on each path."""

    returns: np.ndarray
    success: np.ndarray
    length: np.ndarray
    visited: np.ndarray     # bool[classes]: observation classes a memoryless policy met on some path


def roll(model: PathRule, kind: np.ndarray, start: np.ndarray, act: Act, observe: Observe | None = None,
         visited: np.ndarray | None = None) -> Rollouts:
    """Play a deterministic policy on K paths (``kind`` [K, C], ``start`` [K]) until each ends
    or times out. ``act(t, cell, marked, live)`` gives the K actions at step t from the agents'
    cells and the marks in view; ``observe(cell, action, outcome, live)`` is told what each
    step did (for a policy with memory). Returns, discounted as the analyses discount, include
    the timeout."""
    m, K = model, start.shape[0]
    rows = np.arange(K)
    state = start.copy()
    until = np.zeros((K, m.num_cells), dtype=np.int64)
    live = np.ones(K, dtype=bool)
    returns, success = np.zeros(K), np.zeros(K, dtype=bool)
    length = np.zeros(K, dtype=np.int64)
    for t in range(m.horizon):
        cell = m.state_cell[state]
        action = act(t, cell, until > t, live)
        out = m.outcome(state, action, kind, start)
        gain = out.reward + np.where(~out.terminal & (t == m.horizon - 1), m.timeout_reward, 0.0)
        returns += np.where(live, m.discount ** t * gain, 0.0)
        length += live
        fell = out.fell & live
        m.mark_after(until, fell, out.aim, rows, np.full(K, t + 1))
        if observe is not None:
            observe(cell, action, out, live)
        success |= live & out.success
        state = np.where(live, out.next_state, state)
        live &= ~out.terminal
        if not live.any():
            break
    return Rollouts(returns, success.astype(np.float64), length.astype(np.float64),
                    np.zeros(0, dtype=bool) if visited is None else visited)


class MemorylessRollout:
    """Runs deterministic memoryless policies on many paths at once, marks included.

    ``view_class[c]`` numbers the agent-view observation (noise and marks excluded) of a
    cell; with ``marks_seen`` the policy also reads which neighbours carry a mark, so a class
    is ``view_class · 16 + mark bits``.
    """

    def __init__(self, model: PathRule, kind: np.ndarray, start: np.ndarray, view_class: np.ndarray,
                 marks_seen: bool) -> None:
        self.model, self.kind, self.start = model, kind, start
        self.view_class = np.asarray(view_class, dtype=np.int64)
        self.marks_seen = marks_seen and model.mark_steps > 0
        self.classes = (int(self.view_class.max()) + 1) * (16 if self.marks_seen else 1)

    def classify(self, cell: np.ndarray, marked: np.ndarray) -> np.ndarray:
        """Observation class of agents at ``cell`` [n] whose fields show marks ``marked`` [n, C]."""
        cls = self.view_class[cell]
        if not self.marks_seen:
            return cls
        nb = self.model.layout.neighbour[cell]
        shown = (nb >= 0) & marked[np.arange(cell.shape[0])[:, None], np.maximum(nb, 0)]
        return cls * 16 + shown.astype(np.int64) @ (1 << np.arange(4))

    def run(self, policy: np.ndarray) -> Rollouts:
        """Exact return, success and length of ``policy`` (int[classes]) on every path."""
        visited = np.zeros(self.classes, dtype=bool)

        def act(t: int, cell: np.ndarray, marked: np.ndarray, live: np.ndarray) -> np.ndarray:
            cls = self.classify(cell, marked)
            visited[cls[live]] = True
            return policy[cls]

        return roll(self.model, self.kind, self.start, act, visited=visited)


def _seed_policies(rollout: MemorylessRollout) -> list[np.ndarray]:
    """Starting points of the search: every constant policy and, when marks are seen, every
    order of preference among the four moves ("take the first move whose cell is unmarked")."""
    A, views = rollout.model.num_actions, rollout.classes // (16 if rollout.marks_seen else 1)
    seeds = [np.full(rollout.classes, a, dtype=np.int64) for a in range(A)]
    if rollout.marks_seen:
        bits = (np.arange(16)[:, None] >> np.arange(4)[None, :]) & 1          # [pattern, move]
        for permutation in itertools.permutations(range(A)):
            order = np.asarray(permutation)
            free = bits[:, order] == 0
            choice = np.where(free.any(axis=1), order[np.argmax(free, axis=1)], order[0])
            seeds.append(np.tile(choice, views))
    return seeds


def best_memoryless_paths(rollout: MemorylessRollout, budget: int = SEARCH_EVALUATIONS,
                          starts: int = 3) -> tuple[np.ndarray, Rollouts, int]:
    """Hill-climbing from the best few seed policies. A move sets one action either for one
    mark pattern in every cell at once or for one visited class; the first move that raises
    the mean return over the paths is taken. Returns (policy, its rollouts, policies evaluated)."""
    A = rollout.model.num_actions
    patterns = 16 if rollout.marks_seen else 1
    scored = [(rollout.run(p), p) for p in _seed_policies(rollout)]
    used = len(scored)
    scored.sort(key=lambda pair: -pair[0].returns.mean())
    best, best_policy = scored[0]
    share = max((budget - used) // starts, 1)
    for current, policy in scored[:starts]:
        stop = min(used + share, budget)
        improved = True
        while improved and used < stop:
            improved = False
            seen = np.flatnonzero(current.visited)
            moves = [(None, q) for q in np.unique(seen % patterns)] + [(c, None) for c in seen]
            for cls, q in moves:
                for a in range(A):
                    trial = policy.copy()
                    if cls is None:
                        trial.reshape(-1, patterns)[:, q] = a
                    else:
                        trial[cls] = a
                    if (trial == policy).all() or used >= stop:
                        continue
                    result = rollout.run(trial)
                    used += 1
                    if result.returns.mean() > current.returns.mean() + TOLERANCE:
                        policy, current, improved = trial, result, True
                        break
                if improved:
                    break
        if current.returns.mean() > best.returns.mean() + TOLERANCE:
            best, best_policy = current, policy
    return best_policy, best, used
