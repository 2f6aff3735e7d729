"""The best memoryless agent: a deterministic map from the current observation to an action.

Observations are the noise-free rows the renderers give each observation key; two states
with equal rows look the same to the agent. Finding the best memoryless policy of a partially
observable problem is hard in general, so the figure is exact only when every candidate can be
enumerated; otherwise it is a lower bound from coordinate ascent in which each candidate is
evaluated exactly. Stochastic memoryless policies can do better than deterministic ones (Singh,
Jaakkola & Jordan, ICML 1994); this figure covers the deterministic class only.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping

import numpy as np

from ..errors import AnalysisError
from ..model import TaskModel
from .baselines import cue_blind_policy, optimal_policy
from .dp import Objective, backup

ObservationTables = Mapping[str, tuple[np.ndarray, Mapping[str, slice]]]
ENUMERATION_BUDGET = 1 << 16
PAIR_LIMIT = 48   # observations up to which the search also tries changing two at once
SEARCH_WORK = 100_000_000   # policies evaluated × states × steps before the search stops
IMPROVEMENT = 1e-12


def observation_classes(model: TaskModel, observations: ObservationTables | None) -> np.ndarray:
    """int[S]: equal numbers for states the agent cannot tell apart (all modalities together)."""
    if not observations:
        return model.obs_key.copy()
    # distinct rows per observation key first (K ≤ S), compared as raw bytes (exact, and much
    # faster to sort than rows of floats)
    rows = np.ascontiguousarray(np.concatenate(
        [np.asarray(table, dtype=np.float64).reshape(model.num_keys, -1) for table, _ in observations.values()],
        axis=1))
    as_bytes = rows.view(np.dtype((np.void, rows.dtype.itemsize * rows.shape[1]))).ravel()
    _, key_class = np.unique(as_bytes, return_inverse=True)
    return key_class.ravel()[model.obs_key]


def evaluate_memoryless(model: TaskModel, classes: np.ndarray, policies: np.ndarray) -> np.ndarray:
    """Exact expected return at reset of each deterministic memoryless policy (rows of ``policies``)."""
    policies = np.atleast_2d(policies)
    S = model.num_states
    act = policies[:, classes]                                   # [P, S]
    ns = model.next_state[np.arange(S)[None, :], act]
    r = model.reward[np.arange(S)[None, :], act]
    ends = model.terminal[ns] | model.terminal[None, :]
    v = r + np.where(ends, 0.0, model.timeout_reward)             # the last step
    for _ in range(model.horizon - 1):
        v = r + model.discount * np.take_along_axis(v, ns, axis=1)
    return v @ model.initial


@dataclass(frozen=True)
class MemorylessResult:
    """The best deterministic memoryless policy found, its exact value and how it was found."""

    policy: np.ndarray        # int[O], action per observation class
    classes: np.ndarray       # int[S]
    mean_return: float
    method: str               # "exact" or "search lower bound"
    detail: str

    def state_policy(self, horizon: int) -> np.ndarray:
        """The policy as ``int[H, S]``, the same action at every step."""
        return np.broadcast_to(self.policy[self.classes], (horizon, self.classes.size)).copy()


def _projection(model: TaskModel, classes: np.ndarray, policy: np.ndarray) -> np.ndarray:
    """A memoryless policy that copies a state policy ``int[H, S]``: each observation takes the
    action the state policy takes where its paths first meet that observation (the step-0 action
    elsewhere). A good start for the search: it follows the state policy's own paths."""
    num_classes = int(classes.max()) + 1
    votes = np.zeros((num_classes, model.num_actions))
    np.add.at(votes, (classes, policy[0]), 1.0)
    out = votes.argmax(axis=1)
    seen = np.zeros(num_classes, dtype=bool)
    states = model.initial_states()
    for t in range(model.horizon):
        fresh = ~seen[classes[states]]
        out[classes[states[fresh]]] = policy[t, states[fresh]]
        seen[classes[states]] = True
        states = model.next_state[states, policy[t, states]]
    return out


def proposal_gains(model: TaskModel, classes: np.ndarray, policy: np.ndarray) -> np.ndarray:
    """float[O, A]: first-order gain of switching each observation to each action, from the
    performance-difference identity Σ_t γ^t Σ_s d_t(s)·(Q_t(s, a) − V_t(s)) (Kakade & Langford,
    ICML 2002) with the current policy's occupancies d_t. Exact for a change at one step, only a
    guide for a change at every step: candidates are then evaluated exactly."""
    S, H, A = model.num_states, model.horizon, model.num_actions
    rows = np.arange(S)
    act = policy[classes]
    ns_pi = model.next_state[rows, act]
    occupancy = np.zeros((H, S))
    d = model.initial.copy()
    for t in range(H):
        occupancy[t] = d * model.discount ** t
        d = np.bincount(ns_pi, weights=d, minlength=S) * (~model.terminal)[:S]
    O = int(classes.max()) + 1
    # accumulate per state over time, then per observation once (bincount beats add.at)
    advantage = np.zeros((S, A))
    v = np.zeros(S)
    objective = Objective.task_return(model)
    for t in range(H - 1, -1, -1):
        q = backup(model.next_state, model.terminal, objective, v, last=t == H - 1)
        v = q[rows, act]
        advantage += occupancy[t][:, None] * (q - v[:, None])
    return np.stack([np.bincount(classes, weights=advantage[:, a], minlength=O) for a in range(A)], axis=1)


def _try(model: TaskModel, classes: np.ndarray, candidates: np.ndarray,
         best: float) -> tuple[np.ndarray | None, float]:
    """Evaluate candidate policies exactly; the best one if it beats ``best`` (else None)."""
    values = evaluate_memoryless(model, classes, candidates)
    j = int(np.argmax(values))
    if values[j] > best + IMPROVEMENT:
        return candidates[j], float(values[j])
    return None, best


def _best_proposed(model: TaskModel, classes: np.ndarray, policy: np.ndarray, best: float,
                   active: np.ndarray, tries: int = 32, batch: int = 8) -> tuple[np.ndarray, float, int, bool]:
    """Try the changes with the largest first-order gains, exactly, in small batches; keep the
    first batch's best if it improves."""
    gains = proposal_gains(model, classes, policy)
    gains[np.arange(gains.shape[0]), policy] = -np.inf
    mask = np.zeros(gains.shape[0], dtype=bool)
    mask[active] = True
    gains[~mask] = -np.inf
    order = np.argsort(-gains, axis=None)[:tries]
    order = order[gains.ravel()[order] > IMPROVEMENT]
    evaluated = 0
    for first in range(0, order.size, batch):
        o, a = np.divmod(order[first:first + batch], gains.shape[1])
        candidates = np.repeat(policy[None, :], o.size, axis=0)
        candidates[np.arange(o.size), o] = a
        evaluated += o.size
        better, value = _try(model, classes, candidates, best)
        if better is not None:
            return better, value, evaluated, True
    return policy, best, evaluated, False


def _best_single(model: TaskModel, classes: np.ndarray, policy: np.ndarray, best: float,
                 active: np.ndarray, rng: np.random.Generator,
                 allowance: int) -> tuple[np.ndarray, float, int, bool]:
    """One sweep of single-observation changes, taking each strict improvement at once."""
    A, evaluated, improved = model.num_actions, 0, False
    for o in rng.permutation(active):
        if evaluated >= allowance:
            break
        candidates = np.repeat(policy[None, :], A, axis=0)
        candidates[:, o] = np.arange(A)
        evaluated += A
        better, best = _try(model, classes, candidates, best)
        if better is not None:
            policy, improved = better, True
    return policy, best, evaluated, improved


def _best_pair(model: TaskModel, classes: np.ndarray, policy: np.ndarray, best: float,
               active: np.ndarray) -> tuple[np.ndarray, float, int, bool]:
    """The best change of two observations' actions at once: it crosses plateaus where one
    change alone is worthless (say, 'wait here' only pays together with 'wait there')."""
    A, evaluated = model.num_actions, 0
    a1, a2 = (grid.ravel() for grid in np.meshgrid(np.arange(A), np.arange(A), indexing="ij"))
    for i, o1 in enumerate(active[:-1]):
        others = active[i + 1:]
        candidates = np.repeat(policy[None, :], others.size * a1.size, axis=0)
        rows = np.arange(candidates.shape[0])
        candidates[rows, o1] = np.tile(a1, others.size)
        candidates[rows, np.repeat(others, a1.size)] = np.tile(a2, others.size)
        evaluated += candidates.shape[0]
        better, value = _try(model, classes, candidates, best)
        if better is not None:
            return better, value, evaluated, True
    return policy, best, evaluated, False


def _ascend(model: TaskModel, classes: np.ndarray, policy: np.ndarray, active: np.ndarray,
            rng: np.random.Generator, pair_limit: int, allowance: int) -> tuple[np.ndarray, float, int]:
    """Local search to a policy that no change of one observation's action improves (nor of
    two, when there are at most ``pair_limit`` observations), or until about ``allowance``
    policies have been evaluated."""
    best = float(evaluate_memoryless(model, classes, policy)[0])
    evaluated = 1
    while evaluated < allowance:
        policy, best, n, improved = _best_proposed(model, classes, policy, best, active)
        evaluated += n + 2          # the proposal costs about two evaluations
        if improved:
            continue
        policy, best, n, improved = _best_single(model, classes, policy, best, active, rng,
                                                 allowance - evaluated)
        evaluated += n
        if improved:
            continue
        if active.size > pair_limit:
            break
        policy, best, n, improved = _best_pair(model, classes, policy, best, active)
        evaluated += n
        if not improved:
            break
    return policy, best, evaluated


def best_memoryless(model: TaskModel, observations: ObservationTables | None = None,
                    restarts: int = 6, seed: int = 0,
                    enumeration_budget: int = ENUMERATION_BUDGET,
                    pair_limit: int = PAIR_LIMIT) -> MemorylessResult:
    """Best deterministic memoryless policy: enumerated when at most ``enumeration_budget``
    candidates exist, else searched (coordinate ascent from the projections of the cue-blind
    and optimal policies and from ``restarts`` random policies)."""
    classes = observation_classes(model, observations)
    O, A = int(classes.max()) + 1, model.num_actions
    live = np.zeros(O, dtype=bool)
    live[classes[~model.terminal]] = True                       # actions matter only here
    active = np.flatnonzero(live)
    if A ** active.size <= enumeration_budget:
        return _enumerate(model, classes, active)
    rng = np.random.default_rng(seed)
    starts = [_projection(model, classes, optimal_policy(model))]
    try:
        starts.append(_projection(model, classes, cue_blind_policy(model)))
    except AnalysisError:
        pass  # no cue-blind policy for this model: the other starts remain
    starts += [rng.integers(A, size=O) for _ in range(restarts)]
    allowance = max(64, SEARCH_WORK // (model.num_states * model.horizon))
    best_policy, best_value, evaluated, used = starts[0], -np.inf, 0, 0
    for start in starts:
        if evaluated >= allowance:
            break
        policy, value, n = _ascend(model, classes, start.astype(np.int64), active, rng, pair_limit,
                                   allowance - evaluated)
        evaluated += n
        used += 1
        if value > best_value + IMPROVEMENT:
            best_policy, best_value = policy, value
    return MemorylessResult(
        policy=best_policy, classes=classes, mean_return=best_value, method="search lower bound",
        detail=f"local search (gain-guided, then {'one and two observations' if active.size <= pair_limit else 'one observation'} "
        f"at a time) from {used} starts over {active.size} observations, {evaluated} policies "
        "evaluated exactly" + (", stopped at the work budget" if evaluated >= allowance else ""),
    )


def _enumerate(model: TaskModel, classes: np.ndarray, active: np.ndarray) -> MemorylessResult:
    """Evaluate every assignment of actions to the observations where actions matter."""
    O, A = int(classes.max()) + 1, model.num_actions
    total = A ** active.size
    best_value, best_policy = -np.inf, np.zeros(O, dtype=np.int64)
    chunk = 4096
    for first in range(0, total, chunk):
        index = np.arange(first, min(first + chunk, total))
        digits = (index[:, None] // A ** np.arange(active.size)[None, :]) % A
        policies = np.zeros((index.size, O), dtype=np.int64)
        policies[:, active] = digits
        values = evaluate_memoryless(model, classes, policies)
        i = int(np.argmax(values))
        if values[i] > best_value + IMPROVEMENT:
            best_value, best_policy = float(values[i]), policies[i]
    return MemorylessResult(
        policy=best_policy, classes=classes, mean_return=best_value, method="exact",
        detail=f"enumeration of all {total} deterministic memoryless policies",
    )
