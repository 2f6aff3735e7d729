"""Exact dynamic programming on a compiled model: finite-horizon optimisation and evaluation.

Policies are either deterministic, ``int[H, S]`` (an action per step and state), or
stochastic and stationary, ``float[S, A]`` (action probabilities per state).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import AnalysisError
from ..model import TaskModel

TIE_TOLERANCE = 1e-12


@dataclass(frozen=True)
class Objective:
    """What a DP sums: per-step payoff, discount and what reaching the horizon adds."""

    reward: np.ndarray   # float64[S, A]
    discount: float
    timeout: float

    @classmethod
    def task_return(cls, model: TaskModel) -> "Objective":
        """The task's own return: its rewards, discount and timeout reward."""
        return cls(model.reward, model.discount, model.timeout_reward)

    @classmethod
    def success(cls, model: TaskModel) -> "Objective":
        """Probability of entering a success state before the horizon."""
        live = ~model.terminal[:, None]
        return cls((model.success[model.next_state] & live).astype(np.float64), 1.0, 0.0)

    @classmethod
    def length(cls, model: TaskModel) -> "Objective":
        """Expected number of steps the episode lasts."""
        live = np.broadcast_to(~model.terminal[:, None], model.next_state.shape)
        return cls(live.astype(np.float64), 1.0, 0.0)


def backup(next_state: np.ndarray, terminal: np.ndarray, objective: Objective,
           v_next: np.ndarray, last: bool) -> np.ndarray:
    """Q[s, a] for one step, given the values one step later (the last step pays the timeout)."""
    if last:
        tail = np.where(terminal[next_state] | terminal[:, None], 0.0, objective.timeout)
        return objective.reward + tail
    return objective.reward + objective.discount * v_next[next_state]


@dataclass(frozen=True)
class SharedChoice:
    """States that must take one action together: rows with ``unknown`` True act on the
    ``weight``-averaged values of their ``group`` (say, cue twins the agent cannot yet tell apart)."""

    group: np.ndarray     # int[S]
    weight: np.ndarray    # float[S], summing to 1 within each group
    unknown: np.ndarray   # bool[S]

    def pool(self, q: np.ndarray) -> np.ndarray:
        """Replace the rows of unknown states by their group's weighted mean."""
        sums = np.zeros((int(self.group.max()) + 1, q.shape[1]))
        np.add.at(sums, self.group, q * self.weight[:, None])
        return np.where(self.unknown[:, None], sums[self.group], q)


def optimise_tables(next_state: np.ndarray, terminal: np.ndarray, horizon: int,
                    objective: Objective, shared: SharedChoice | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Backward induction on bare tables: values ``V[H+1, S]`` and policy ``int[H, S]``.

    Among actions whose value ties the best (within TIE_TOLERANCE) the policy takes the one that
    ends the episode soonest, then the lowest-numbered: an optimal agent that does not dawdle,
    so the step at which it decides is well defined. With ``shared``, the unknown states of a
    group choose one action by the group's pooled values (each state keeps its own value).
    """
    S = next_state.shape[0]
    values = np.zeros((horizon + 1, S))
    lengths = np.zeros((horizon + 1, S))
    policy = np.zeros((horizon, S), dtype=np.int64)
    live = ~terminal[:, None]
    rows = np.arange(S)
    for t in range(horizon - 1, -1, -1):
        q = backup(next_state, terminal, objective, values[t + 1], last=t == horizon - 1)
        steps = live * (1.0 + lengths[t + 1][next_state])
        choose_q, choose_steps = (q, steps) if shared is None else (shared.pool(q), shared.pool(steps))
        near = choose_q >= choose_q.max(axis=1, keepdims=True) - TIE_TOLERANCE
        policy[t] = np.argmin(np.where(near, choose_steps, np.inf), axis=1)
        values[t] = q[rows, policy[t]]
        lengths[t] = steps[rows, policy[t]]
    return values, policy


def optimise(model: TaskModel, objective: Objective | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Best policy of an agent that sees the full state, by backward induction over the horizon."""
    objective = objective or Objective.task_return(model)
    return optimise_tables(model.next_state, model.terminal, model.horizon, objective)


def evaluate(model: TaskModel, policy: np.ndarray, objective: Objective | None = None) -> np.ndarray:
    """Exact values ``V[H+1, S]`` of a policy under an objective (default: the task's return)."""
    objective = objective or Objective.task_return(model)
    H, S = model.horizon, model.num_states
    stochastic = policy.dtype.kind == "f"
    if stochastic and policy.shape != (S, model.num_actions):
        raise AnalysisError(f"a stochastic policy must have shape (S, A) = {(S, model.num_actions)}")
    if not stochastic and policy.shape != (H, S):
        raise AnalysisError(f"a deterministic policy must have shape (H, S) = {(H, S)}")
    values = np.zeros((H + 1, S))
    for t in range(H - 1, -1, -1):
        q = backup(model.next_state, model.terminal, objective, values[t + 1], last=t == H - 1)
        values[t] = (q * policy).sum(axis=1) if stochastic else q[np.arange(S), policy[t]]
    return values


def return_variance(model: TaskModel, policy: np.ndarray) -> float:
    """Exact variance of the return at reset under a policy, from the second moment by backward
    recursion: E[G²] = E[r² + 2γ·r·V' + γ²·W'] (Sobel, "The variance of discounted Markov decision
    processes", J. Appl. Prob. 1982)."""
    objective = Objective.task_return(model)
    H, S = model.horizon, model.num_states
    stochastic = policy.dtype.kind == "f"
    v, w = np.zeros(S), np.zeros(S)
    ns, g = model.next_state, model.discount
    for t in range(H - 1, -1, -1):
        if t == H - 1:   # the last step also pays the timeout
            r, v_next, w_next = backup(ns, model.terminal, objective, v, last=True), 0.0, 0.0
        else:
            r, v_next, w_next = model.reward, v[ns], w[ns]
        first = r + g * v_next
        second = r ** 2 + 2 * g * r * v_next + g ** 2 * w_next
        if stochastic:
            v, w = (first * policy).sum(axis=1), (second * policy).sum(axis=1)
        else:
            rows = np.arange(S)
            v, w = first[rows, policy[t]], second[rows, policy[t]]
    mean = float(model.initial @ v)
    return float(model.initial @ w) - mean ** 2


def at_reset(model: TaskModel, values: np.ndarray) -> float:
    """Expected value at reset (``values`` is ``V[H+1, S]`` or ``V[S]``)."""
    v0 = values[0] if values.ndim == 2 else values
    return float(model.initial @ v0)


def uniform_policy(model: TaskModel) -> np.ndarray:
    """The uniform-random policy as ``float[S, A]``."""
    return np.full((model.num_states, model.num_actions), 1.0 / model.num_actions)


def hitting_times(model: TaskModel, policy: np.ndarray, target: np.ndarray,
                  cost: np.ndarray | None = None) -> np.ndarray:
    """Expected cost accumulated before first entering ``target`` under a stationary stochastic
    policy, with no step limit, per start state (0 on the target). Solved as a linear system.

    ``cost[s, a]`` defaults to 1 (expected steps). Every state must reach the target with
    probability 1, or the expectation does not exist and AnalysisError is raised.
    """
    S = model.num_states
    cost = np.ones((S, model.num_actions)) if cost is None else cost
    transient = np.flatnonzero(~target)
    index = -np.ones(S, dtype=np.int64)
    index[transient] = np.arange(transient.size)
    P = np.zeros((transient.size, transient.size))
    rows = np.repeat(np.arange(transient.size), model.num_actions)
    cols = index[model.next_state[transient]].ravel()
    probs = policy[transient].ravel()
    inside = cols >= 0
    np.add.at(P, (rows[inside], cols[inside]), probs[inside])
    c = (policy[transient] * cost[transient]).sum(axis=1)
    escape = 1.0 - P.sum(axis=1)
    if not _drains(P, escape):
        raise AnalysisError("the target is not reached with probability 1 from every state")
    h = np.zeros(S)
    h[transient] = np.linalg.solve(np.eye(transient.size) - P, c)
    return h


def _drains(P: np.ndarray, escape: np.ndarray) -> bool:
    """True when every transient state can leak out of the transient set."""
    can = escape > 1e-15
    while True:
        more = can | ((P > 0) & can[None, :]).any(axis=1)
        if (more == can).all():
            return bool(can.all())
        can = more
