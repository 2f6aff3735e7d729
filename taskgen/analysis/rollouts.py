"""Policies rolled out on many hidden paths at once, exactly.

On one path the dynamics are deterministic, so a deterministic policy (with or without
memory) has one trajectory, and one rollout gives its exact return. :func:`roll` plays K paths
side by side in numpy; the explorer (explorer.py) and the check of a field's memoryless policy
(pathchance.py) are built on it.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from ..model import PathRule
from ..model.paths import Outcome


Act = Callable[[int, np.ndarray, np.ndarray, np.ndarray], np.ndarray]
Observe = Callable[[np.ndarray, np.ndarray, Outcome, np.ndarray], None]


@dataclass(frozen=True)
class Rollouts:
    """Exact figures of one deterministic policy on each path."""

    returns: np.ndarray
    success: np.ndarray
    length: np.ndarray


def roll(model: PathRule, kind: np.ndarray, start: np.ndarray, act: Act, observe: Observe | None = None) -> Rollouts:
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
        misstep = out.misstep & live
        m.mark_after(until, misstep, out.aim, rows, np.full(K, t + 1))
        if observe is not None:
            observe(cell, action, out, live)
        success |= live & out.success
        state = np.where(live, out.next_state, state)
        live &= ~out.terminal
        if not live.any():
            break
    return Rollouts(returns, success.astype(np.float64), length.astype(np.float64))
