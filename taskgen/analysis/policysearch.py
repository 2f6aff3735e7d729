"""Exact search for the best deterministic memoryless policy: branch and bound over observation classes.

Under a deterministic memoryless policy every hidden value's episode is one trajectory (the
dynamics are deterministic too). The search walks all trajectories together and branches only
when one reaches an observation class the partial policy has not assigned yet, so it enumerates
distinct behaviours, not policy tables. A node is pruned when an admissible bound on everything
below it — the return gathered so far, plus for each trajectory still under way the best it
could do from where it stands, trajectories at one class taking one action together, and where
that does not prune, the best each could do when the actions already chosen stay chosen
wherever and whenever their classes come back — is no better than the best complete policy found. When the search ends the best policy is proven
optimal; when its node budget ends first, the result is an interval: the best policy found
(evaluated exactly) and the largest bound of the nodes left open.

Finding the best memoryless policy of a partially observable problem is NP-hard in general
(Littman, "Memoryless policies: theoretical limitations and practical results", SAB 1994), which
is why there is a budget; the tasks taskgen builds are mostly proven in well under a second.

A :class:`Rollout` supplies the trajectories: where each starts, how it walks under a partial
policy until it ends or reaches an unassigned class, and a bound on what it can still gain.
"""

from __future__ import annotations

import sys
import time
from dataclasses import dataclass
from typing import Any, Protocol, Sequence

import numpy as np

from .. import limits

NODES = 500_000          # default work budget of one search, in nodes (deterministic, unlike a time limit)
TOLERANCE = 1e-12
TRIAL, PAYS = 200, 4       # the dear bound is dropped after TRIAL tries if it pruned fewer than 1 in PAYS


class Rollout(Protocol):
    """Deterministic trajectories of the hidden values under a partial memoryless policy.

    A position is an opaque tuple whose first three entries are (step, state, return so far); a
    trajectory is *open* while it waits at an unassigned class, *closed* once it has ended or run
    to the step limit.
    """

    weights: Sequence[float]
    num_actions: int

    def starts(self) -> list[Any]:
        """The position each trajectory starts from."""

    def walk(self, i: int, position: Any, policy: dict[Any, int]) -> tuple[Any, Any]:
        """Follow ``policy`` from ``position``: the position reached and the class it waits at (None:
        closed)."""

    def gains(self, i: int, position: Any) -> list[float]:
        """Per action, an upper bound on the discounted return still to come from an open position."""

    def pooled(self, opens: list[tuple[int, Any]]) -> tuple[float, list[tuple[int, Any]]]:
        """An optional tighter bound for some open trajectories together: (their bound, the rest)."""

    def restricted(self, opens: list[tuple[int, Any]], policy: dict[Any, int]) -> float | None:
        """An optional bound on what the open trajectories can still gain (weighted, discounted from step
        0) when every class ``policy`` assigns keeps its action wherever and whenever it is met; None:
        no such bound. Dearer than the others: asked only where they do not prune."""


@dataclass(frozen=True)
class SearchResult:
    """The best policy found, its exact value, and what the search proved."""

    policy: dict[Any, int]      # action per observation class the trajectories reach
    value: float                # its exact expected return
    upper: float                # no memoryless policy scores more (= value when proven)
    proven: bool
    nodes: int
    seconds: float
    classes: int                # observation classes assigned by the best policy
    out_of_work: bool = False   # stopped by the work budget (not the node budget)

    @property
    def method(self) -> str:
        """'exact' when optimality is proven, else 'bounded'."""
        return "exact" if self.proven else "bounded"


def search(rollout: Rollout, budget: int = NODES, incumbent: tuple[float, dict[Any, int]] | None = None,
           work: int | None = None) -> SearchResult:
    """Branch and bound to the best deterministic memoryless policy (or an interval, at the budget: ``budget``
    nodes, or ``work`` state-action-steps of the rollout's restricted bounds, by default
    ``limits.search_work()``, so that a long horizon cannot make the search run for minutes)."""
    work = limits.search_work() if work is None else work
    cost = int(getattr(rollout, "restricted_cost", 0))
    spent = [0]
    weights, A = list(rollout.weights), rollout.num_actions
    K = len(weights)
    positions = rollout.starts()
    waiting: list[Any] = [None] * K
    policy: dict[Any, int] = {}
    for i in range(K):
        positions[i], waiting[i] = rollout.walk(i, positions[i], policy)
    best_value, best_policy = incumbent if incumbent is not None else (-np.inf, {})
    best_policy = dict(best_policy)
    nodes = 0
    open_bound = -np.inf         # the largest bound of a node the budget left unexplored
    tried = [0, 0]               # the dear bound: times asked, times it pruned
    start = time.perf_counter()

    def bound() -> float:
        """An admissible bound on every completion of the current partial policy: the cheap one, and
        where it does not prune, the rollout's bound that keeps the actions already chosen."""
        gathered, opens = 0.0, []
        for i in range(K):
            gathered += weights[i] * positions[i][2]
            if waiting[i] is not None:
                opens.append((i, positions[i]))
        extra, rest = rollout.pooled(opens)
        total = gathered + extra
        groups: dict[Any, list[int]] = {}
        for i, _ in rest:
            groups.setdefault(waiting[i], []).append(i)
        for members in groups.values():        # trajectories at one class take one action now
            rows = [rollout.gains(i, positions[i]) for i in members]
            total += max(sum(weights[i] * row[a] for i, row in zip(members, rows)) for a in range(A))
        if total > best_value + TOLERANCE and opens and (tried[0] < TRIAL or tried[1] * PAYS >= tried[0]):
            kept = rollout.restricted(opens, policy)
            spent[0] += cost
            if kept is not None:
                tried[0] += 1
                tried[1] += gathered + kept <= best_value + TOLERANCE
                total = min(total, gathered + kept)
        return total

    def visit() -> bool:
        """Explore below the current node; False when the budget ran out."""
        nonlocal nodes, best_value, best_policy, open_bound
        nodes += 1
        value = bound()
        if value <= best_value + TOLERANCE:
            return True
        if nodes >= budget or spent[0] > work:
            open_bound = max(open_bound, value)
            return False
        unassigned = {waiting[i] for i in range(K) if waiting[i] is not None}
        if not unassigned:
            best_value, best_policy = value, dict(policy)
            return True
        # branch on the class most of the open trajectories wait at, its most promising action first
        weight: dict[Any, float] = {}
        for i in range(K):
            if waiting[i] is not None:
                weight[waiting[i]] = weight.get(waiting[i], 0.0) + weights[i]
        cls = max(weight, key=lambda c: weight[c])
        members = [i for i in range(K) if waiting[i] == cls]
        rows = [rollout.gains(i, positions[i]) for i in members]
        order = sorted(range(A), key=lambda a: -sum(weights[i] * row[a] for i, row in zip(members, rows)))
        saved = [(i, positions[i]) for i in members]
        for k, a in enumerate(order):
            policy[cls] = a
            for i in members:
                positions[i], waiting[i] = rollout.walk(i, positions[i], policy)
            finished = visit()
            for i, position in saved:
                positions[i], waiting[i] = position, cls
            if not finished:
                del policy[cls]
                open_bound = max(open_bound, value) if k + 1 < A else open_bound
                return False
        del policy[cls]
        return True

    limit = sys.getrecursionlimit()
    sys.setrecursionlimit(max(limit, 20_000))
    try:
        proven = visit()
    finally:
        sys.setrecursionlimit(limit)
    upper = best_value if proven else max(open_bound, best_value)
    return SearchResult(best_policy, float(best_value), float(upper), proven, nodes, time.perf_counter() - start,
                        len(best_policy), out_of_work=not proven and spent[0] > work)
