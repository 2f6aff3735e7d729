"""The best memoryless agent: a deterministic map from the current observation to an action, proven.

Observations are the noise-free rows the renderers give each observation key; two states
with equal rows look the same to the agent. The best deterministic memoryless policy is found
by branch and bound over the classes its trajectories reach (policysearch.py): ``exact`` when
the search proves it optimal, ``bounded`` (the policy found and a certified upper bound) when
its node budget ends first. Stochastic memoryless policies can do better than deterministic
ones (Singh, Jaakkola & Jordan, ICML 1994); stochastic.py searches that class.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Mapping

import numpy as np

from .. import limits

from ..model import TaskModel
from .dp import optimise
from .policysearch import NODES, SearchResult, search

JOINT_ENTRIES = 50_000   # memoised joint bounds at most; past it the search reverts to the per-class bound

ObservationTables = Mapping[str, tuple[np.ndarray, Mapping[str, slice]]]


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


class TableRollout:
    """The trajectories of a model whose observation class is a function of the state (a cue task, or a
    field whose agent sees no marks): one per hidden value, walked on the model's tables.

    A trajectory still under way is bounded by the full-information optimum from where it stands
    (the optimum of an agent that sees the state: no memoryless policy does better). After the cue's
    display window, cue twins — trajectories at one cell, time and progress that differ only in the
    cue — see the same observations for ever, so under a memoryless policy they act alike for ever:
    together they are bounded by the best policy they can share (a dynamic program over states with
    the cue forgotten), where the cue changes rewards only. Elsewhere trajectories at one step and one
    class are bounded together by :meth:`joint`: they take one action together for as long as they
    share a class, each knowing the state. Where those do not prune, :meth:`restricted` bounds each
    trajectory under the actions already chosen, wherever and whenever their classes come back.
    """

    def __init__(self, model: TaskModel, classes: np.ndarray, values: np.ndarray | None = None) -> None:
        self.num_actions = model.num_actions
        self.H, self.g, self.timeout = model.horizon, model.discount, model.timeout_reward
        self._next, self._reward = model.next_state.tolist(), model.reward.tolist()
        self._terminal, self._class = model.terminal.tolist(), classes.tolist()
        self._starts = model.starts().tolist()
        self.weights = model.hidden.weights.tolist()
        value = optimise(model)[0] if values is None else values
        self._value = value.tolist()
        self._gains: dict[tuple[int, int], list[float]] = {}
        self._pool = _TwinPool.of(model) if model.cue is not None else None
        # what one restricted bound costs, as the search's work budget counts it (a backward pass)
        self.restricted_cost = model.horizon * max(model.num_states * model.num_actions, limits.STEP_FLOOR)
        self._weight = model.hidden.weights[model.value].tolist()     # a state's hidden value's weight
        self._joint: dict[tuple[int, tuple[int, ...]], float] | None = {}   # None: the per-class bound only
        self._restrict = True          # False where a class is more than the state's (see restricted)
        self._closes: list[list[bool]] | None = None   # [S][A]: moves after which a trajectory closes (walk)
        self._classes, self._num_classes = classes, int(classes.max()) + 1
        self._next_by_action = np.ascontiguousarray(model.next_state.T)
        self._reward_by_action = np.ascontiguousarray(model.reward.T)
        self._last = self._reward_by_action + np.where(model.terminal[self._next_by_action], 0.0, model.timeout_reward)
        self._ended = np.flatnonzero(model.terminal)

    def starts(self) -> list[Any]:
        """(step 0, start state, nothing gained) for each hidden value."""
        return [(0, s, 0.0) for s in self._starts]

    def walk(self, i: int, position: Any, policy: dict[Any, int]) -> tuple[Any, Any]:
        """Follow the policy until the episode ends, the step limit comes, or a class has no action (or,
        where ``_closes`` marks a move, the move is made: the full-information optimum from there is
        added and the trajectory closes)."""
        t, s, gained = position
        ns, rw, term, cls, closes = self._next, self._reward, self._terminal, self._class, self._closes
        H, g = self.H, self.g
        while t < H and not term[s]:
            a = policy.get(cls[s], -1)
            if a < 0:
                return (t, s, gained), cls[s]
            s2 = ns[s][a]
            gained += g ** t * (rw[s][a] + (self.timeout if t == H - 1 and not term[s2] else 0.0))
            if closes is not None and closes[s][a]:
                if t + 1 < H:
                    gained += g ** (t + 1) * self._value[t + 1][s2]
                return (t + 1, s2, gained), None
            s, t = s2, t + 1
        return (t, s, gained), None

    def gains(self, i: int, position: Any) -> list[float]:
        """Per action: its reward, then the full-information optimum (discounted from step 0)."""
        t, s = position[0], position[1]
        key = (t, s)
        row = self._gains.get(key)
        if row is None:
            ns, rw, term, H, g = self._next, self._reward, self._terminal, self.H, self.g
            row = [g ** t * (rw[s][a] + (self.timeout if t == H - 1 and not term[ns[s][a]] else 0.0)
                             + (g * self._value[t + 1][ns[s][a]] if t + 1 < H else 0.0))
                   for a in range(self.num_actions)]
            self._gains[key] = row
        return row

    def pooled(self, opens: list[tuple[int, Any]]) -> tuple[float, list[tuple[int, Any]]]:
        """Cue twins after the display window bounded together, then the others by step and class
        (:meth:`joint`); with no joint bound, the rest is left to the per-class bound."""
        total, rest = self._pool.bound(opens) if self._pool is not None else (0.0, opens)
        if self._joint is None or len(self._joint) > JOINT_ENTRIES:
            return total, rest
        groups: dict[tuple[int, int], list[int]] = {}
        for _, position in rest:
            t, s = position[0], position[1]
            groups.setdefault((t, self._class[s]), []).append(s)
        for (t, _), states in groups.items():
            total += self.g ** t * self.joint(t, tuple(sorted(states)))
        return total, []

    def restricted(self, opens: list[tuple[int, Any]], policy: dict[Any, int]) -> float | None:
        """Backward induction in which a state whose class ``policy`` assigns may take only that action:
        each open trajectory's best from where it stands under the choices made so far (a memoryless
        policy keeps them at every step), weighted and discounted from step 0."""
        if not self._restrict:
            return None
        chosen = np.full(self._num_classes, -1, dtype=np.int64)
        for cls, action in policy.items():
            chosen[cls] = action
        fixed = chosen[self._classes]
        rows = np.flatnonzero(fixed >= 0)
        penalty = np.zeros((self.num_actions, self._classes.size))      # [A, S]: contiguous per action
        penalty[:, rows] = -np.inf
        penalty[fixed[rows], rows] = 0.0
        penalty[:, self._ended] = 0.0
        first = min(position[0] for _, position in opens)
        wanted = {position[0] for _, position in opens}
        values: dict[int, np.ndarray] = {}
        value = np.zeros(self._classes.size)
        q = np.empty_like(penalty)
        for t in range(self.H - 1, first - 1, -1):
            if t == self.H - 1:
                np.add(self._last, penalty, out=q)
            else:
                np.take(value, self._next_by_action, out=q)
                q *= self.g
                q += self._reward_by_action
                q += penalty
            value = np.maximum.reduce(q, axis=0)
            value[self._ended] = 0.0
            if t in wanted:
                values[t] = value
        return sum(self.weights[i] * self.g ** position[0] * float(values[position[0]][position[1]])
                   for i, position in opens)

    def joint(self, t: int, states: tuple[int, ...]) -> float:
        """An upper bound on the weighted return from step ``t`` of trajectories at ``states`` (one class):
        the best they can do if they must take one action together while they share a class and may
        part when their classes part, each knowing its state (a memoryless policy gives one class one
        action, so it can do no better). Discounted to step ``t``; memoised."""
        if len(states) == 1:
            return self._weight[states[0]] * self._value[t][states[0]]
        key = (t, states)
        cached = self._joint.get(key) if self._joint is not None else None
        if cached is not None:
            return cached
        ns, rw, term, cls, H, g, w = self._next, self._reward, self._terminal, self._class, self.H, self.g, self._weight
        best = -np.inf
        for a in range(self.num_actions):
            q = 0.0
            parts: dict[int, list[int]] = {}
            for s in states:
                s2 = ns[s][a]
                q += w[s] * (rw[s][a] + (self.timeout if t == H - 1 and not term[s2] else 0.0))
                if t + 1 < H and not term[s2]:
                    parts.setdefault(cls[s2], []).append(s2)
            for part in parts.values():
                q += g * (w[part[0]] * self._value[t + 1][part[0]] if len(part) == 1
                          else self.joint(t + 1, tuple(sorted(part))))
            best = max(best, q)
        if self._joint is not None:
            self._joint[key] = best
        return best


class _TwinPool:
    """The shared-policy bound of cue twins (see :class:`TableRollout`), cached per set of cue values."""

    def __init__(self, model: TaskModel, blind: np.ndarray, window: int) -> None:
        self.model, self.blind, self.window = model, blind, window
        self._blind, self._value = blind.tolist(), model.value.tolist()
        self._cache: dict[int, list[list[float]]] = {}

    @classmethod
    def of(cls, model: TaskModel) -> "_TwinPool | None":
        """The pool of a cue task where twins stay twins (the cue changes rewards only), else None."""
        cue = model.cue
        if cue is None or cue.by_site:
            return None
        blind = cue.blind_state
        rep = np.zeros(int(blind.max()) + 1, dtype=np.int64)
        rep[blind] = np.arange(model.num_states)
        blind_next = blind[model.next_state]
        if not (blind_next == blind_next[rep[blind]]).all() or not (model.terminal == model.terminal[rep[blind]]).all():
            return None
        return cls(model, blind, cue.sequence_length * cue.visible_steps)

    def bound(self, opens: list[tuple[int, Any]]) -> tuple[float, list[tuple[int, Any]]]:
        """Σ over groups of twins (same step and cue-blind state, after the window) of their shared optimum."""
        groups: dict[tuple[int, int], list[int]] = {}
        rest = []
        for i, position in opens:
            t, s = position[0], position[1]
            if t >= self.window:
                groups.setdefault((t, self._blind[s]), []).append(s)
            else:
                rest.append((i, position))
        total = 0.0
        for (t, b), states in groups.items():
            mask = 0
            for s in states:
                mask |= 1 << self._value[s]
            total += self.model.discount ** t * self._values(mask)[t][b]
        return total, rest

    def _values(self, mask: int) -> list[list[float]]:
        """V[t][b]: the best shared policy's prior-weighted value from cue-blind state b at step t, for
        the cue values in ``mask``."""
        if mask not in self._cache:
            m = self.model
            blind, B, A, H = self.blind, int(self.blind.max()) + 1, m.num_actions, m.horizon
            member = ((mask >> m.value) & 1).astype(bool)
            weight = m.hidden.weights[m.value] * member
            reward = np.zeros((B, A))
            np.add.at(reward, blind, m.reward * weight[:, None])
            timeout = np.zeros((B, A))
            np.add.at(timeout, blind, weight[:, None] * np.where(m.terminal[m.next_state], 0.0, m.timeout_reward))
            rep = np.zeros(B, dtype=np.int64)
            rep[blind] = np.arange(m.num_states)
            next_blind, terminal = blind[m.next_state][rep], m.terminal[rep]
            value = np.zeros((H + 1, B))
            for t in range(H - 1, -1, -1):
                q = reward + (timeout if t == H - 1 else m.discount * value[t + 1][next_blind])
                value[t] = np.where(terminal, 0.0, q.max(axis=1))
            self._cache[mask] = value.tolist()
        return self._cache[mask]


@dataclass(frozen=True)
class MemorylessResult:
    """The best deterministic memoryless policy found, its exact value, and what was proven."""

    policy: np.ndarray        # int[O], action per observation class (0 where no trajectory goes)
    classes: np.ndarray       # int[S]
    mean_return: float
    upper: float              # no deterministic memoryless policy scores more
    method: str               # "exact" or "bounded"
    detail: str
    proof: SearchResult

    def state_policy(self, horizon: int) -> np.ndarray:
        """The policy as ``int[H, S]``, the same action at every step."""
        return np.broadcast_to(self.policy[self.classes], (horizon, self.classes.size)).copy()


def best_memoryless(model: TaskModel, observations: ObservationTables | None = None,
                    budget: int = NODES) -> MemorylessResult:
    """The best deterministic memoryless policy, by branch and bound within ``budget`` nodes."""
    return solve_memoryless(model, observation_classes(model, observations), budget)


def solve_memoryless(model: TaskModel, classes: np.ndarray, budget: int = NODES) -> MemorylessResult:
    """The best deterministic policy over observation classes ``classes`` int[S]."""
    result = search(TableRollout(model, classes), budget)
    policy = np.zeros(int(classes.max()) + 1, dtype=np.int64)
    for cls, action in result.policy.items():
        policy[cls] = action
    value = float(evaluate_memoryless(model, classes, policy)[0])   # the policy's value, computed anew
    return MemorylessResult(policy=policy, classes=classes, mean_return=value, upper=value if result.proven else max(result.upper, value),
                            method=result.method, detail=describe(result), proof=result)


def describe(result: SearchResult) -> str:
    """The proof in a line: what was searched and what it proved (its time is in the solver statistics
    only, so that a report is the same on every run)."""
    what = f"branch and bound over the classes trajectories reach: {result.nodes:,} nodes"
    if result.proven:
        return what + "; optimal (proven)"
    budget = "the work budget (raise --max-work)" if result.out_of_work else "the node budget (raise --chance-budget)"
    return what + f", stopped at {budget}; no policy scores above {result.upper:.6g}"
