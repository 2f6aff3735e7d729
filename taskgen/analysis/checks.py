"""Solvability and recall distance, and the report that gathers every figure for one variant."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..model import TaskModel, shortest_success_steps
from .baselines import Baseline, chance_baseline, optimal_baseline, optimal_policy, random_baseline

GAP_TOLERANCE = 1e-9


@dataclass(frozen=True)
class Check:
    """A named pass/fail finding with a one-line explanation."""

    name: str
    ok: bool
    detail: str


def shortest_solutions(model: TaskModel) -> dict[int, int]:
    """Fewest steps to the rewarded arm end for each cue value (−1: unreachable)."""
    starts = model.initial_states()
    steps = shortest_success_steps(model.next_state, model.success, starts)
    return {int(model.hidden[s]): int(d) for s, d in zip(starts, steps)}


def solvability(model: TaskModel) -> Check:
    """Every cue value's rewarded arm must be reachable within the step limit."""
    shortest = shortest_solutions(model)
    for cue, steps in sorted(shortest.items()):
        if steps < 0:
            return Check("solvable", False, f"{model.variant_id}: cue {cue}: the rewarded arm cannot be reached")
        if steps > model.horizon:
            return Check("solvable", False, f"{model.variant_id}: cue {cue}: shortest solution {steps} steps "
                         f"exceeds the step limit {model.horizon}")
    longest = max(shortest.values())
    return Check("solvable", True, f"every cue solvable; shortest {longest} steps, limit {model.horizon}")


def decision_step(model: TaskModel, policy: np.ndarray | None = None) -> int | None:
    """First step whose action sends the optimal agent to cue-dependent places (None: never).

    The dynamics are deterministic, so each cue value gives one trajectory; until the decision
    they all pass through the same cue-blind states.
    """
    policy = optimal_policy(model) if policy is None else policy
    states = model.initial_states()
    for t in range(model.horizon):
        states = model.next_state[states, policy[t, states]]
        if np.unique(model.blind_state[states]).size > 1:
            return t
        if model.terminal[states].all():
            return None
    return None


def recall_distance(model: TaskModel, policy: np.ndarray | None = None) -> int | None:
    """Steps between the cue's last visible observation and the decision, under optimal play.

    The cue shows in observations 0 … n−1; an action at step t is taken after observation t,
    so the distance is t − (n − 1). Zero or less means the cue is still in view at the decision.
    """
    t = decision_step(model, policy)
    return None if t is None else t - (model.cue_visible_steps - 1)


@dataclass
class VariantReport:
    """Every figure and check of one compiled variant."""

    variant_id: str
    params: dict[str, Any]
    num_states: int
    horizon: int
    shortest: dict[int, int]
    recall_distance: int | None
    baselines: dict[str, Baseline]
    checks: list[Check] = field(default_factory=list)

    @property
    def ok(self) -> bool:
        """True when every check passed."""
        return all(c.ok for c in self.checks)

    def to_dict(self) -> dict[str, Any]:
        """Plain-data form for JSON output."""
        return {
            "variant_id": self.variant_id, "ok": self.ok, "params": self.params,
            "states": self.num_states, "max_steps": self.horizon,
            "shortest_solution": {str(k): v for k, v in self.shortest.items()},
            "recall_distance": self.recall_distance,
            "baselines": {k: b.to_dict() for k, b in self.baselines.items()},
            "checks": [{"name": c.name, "ok": c.ok, "detail": c.detail} for c in self.checks],
        }


def analyse(model: TaskModel) -> VariantReport:
    """Run every analysis and check on one compiled variant."""
    policy = optimal_policy(model)
    baselines = {"optimal": optimal_baseline(model), "chance": chance_baseline(model),
                 "random": random_baseline(model)}
    distance = recall_distance(model, policy)
    checks = [solvability(model)]
    if distance is None:
        checks.append(Check("cue needed", False, "the optimal agent's path never depends on the cue"))
    elif distance <= 0:
        checks.append(Check("cue needed", False, f"the cue is still visible when the optimal agent decides "
                            f"(recall distance {distance}): no memory is needed"))
    else:
        checks.append(Check("cue needed", True, f"recall distance {distance} steps"))
    gap = baselines["optimal"].mean_return - baselines["chance"].mean_return
    checks.append(Check("memory gap", gap > GAP_TOLERANCE,
                        f"optimal − chance mean return = {gap:.6g}"
                        + ("" if gap > GAP_TOLERANCE else ": remembering the cue does not pay")))
    return VariantReport(
        variant_id=model.variant_id, params=dict(model.params), num_states=model.num_states,
        horizon=model.horizon, shortest=shortest_solutions(model), recall_distance=distance,
        baselines=baselines, checks=checks,
    )
