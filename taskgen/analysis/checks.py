"""Solvability, recall distance and the memory checks, gathered in one report per variant."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..errors import AnalysisError
from ..model import TaskModel, distances_from, shortest_success_steps
from .baselines import (CUE_BLIND_CLASS, Baseline, cue_blind_baseline, optimal_baseline, optimal_policy, policy_figures,
                        random_baseline)
from .leaks import TOLERANCE, carried_cue_witness, static_leak
from .memoryless import ObservationTables, best_memoryless

MEMORYLESS_CLASS = ("memoryless, deterministic: acts on the current observation only (noise excluded); "
                    "stochastic memoryless policies can score higher (Singh, Jaakkola & Jordan, ICML 1994)")


@dataclass(frozen=True)
class Check:
    """A named finding: passed (True/False, or None when it cannot run here) and the reason."""

    name: str
    passed: bool | None
    reason: str

    @property
    def failed(self) -> bool:
        """True only for a check that ran and failed."""
        return self.passed is False


def shortest_solutions(model: TaskModel) -> dict[int, int]:
    """Fewest steps to success (the paying goal, or the whole goal sequence) for each cue value
    (−1: unreachable)."""
    starts = model.initial_states()
    steps = shortest_success_steps(model.next_state, model.success, starts)
    return {int(model.hidden[s]): int(d) for s, d in zip(starts, steps)}


def solvability(model: TaskModel) -> Check:
    """Every cue value must be solvable within the step limit."""
    shortest = shortest_solutions(model)
    for cue, steps in sorted(shortest.items()):
        if steps < 0:
            return Check("solvable", False, f"{model.variant_id}: cue {cue}: no way to succeed (a paying goal, "
                         "or the goal sequence, cannot be reached)")
        if steps > model.horizon:
            return Check("solvable", False, f"{model.variant_id}: cue {cue}: shortest solution {steps} steps "
                         f"exceeds the step limit {model.horizon}")
    longest = max(shortest.values())
    return Check("solvable", True, f"every cue solvable; shortest {longest} steps, limit {model.horizon}")


def _optimal_paths(model: TaskModel, policy: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """States of the optimal agent's path for each cue value: ``int[H+1, K]`` and the cues."""
    starts = model.initial_states()
    paths = [starts]
    for t in range(model.horizon):
        paths.append(model.next_state[paths[-1], policy[t, paths[-1]]])
    return np.stack(paths), model.hidden[starts]


def decision_steps(model: TaskModel, policy: np.ndarray | None = None) -> dict[int, int | None]:
    """Per cue value, the first step whose action sends the optimal agent somewhere another cue
    value's agent does not go (None: its path never parts from the others').

    The dynamics are deterministic, so each cue value gives one trajectory; until its decision a
    trajectory shares its cue-blind states with at least one other.
    """
    policy = optimal_policy(model) if policy is None else policy
    paths, cues = _optimal_paths(model, policy)
    blind = model.blind_state[paths]                      # [H+1, K]
    decided: dict[int, int | None] = {}
    for i, c in enumerate(cues):
        others = np.delete(blind, i, axis=1)
        apart = np.flatnonzero((blind[1:, i:i + 1] != others[1:]).all(axis=1)) if others.size else []
        decided[int(c)] = int(apart[0]) if len(apart) else None
    return decided


def recall_distances(model: TaskModel, policy: np.ndarray | None = None) -> dict[int, int | None]:
    """Per cue value: steps between the last observation showing the cue and the decision.

    An action at step t is taken after observation t, so the distance is t − (the last step ≤ t
    whose observation showed the cue). Zero means the cue is in view at the decision; None means
    the path never depends on the cue or never showed it before deciding.
    """
    policy = optimal_policy(model) if policy is None else policy
    paths, cues = _optimal_paths(model, policy)
    shown = model.cue_shown()[paths]
    out: dict[int, int | None] = {}
    for i, (c, t) in enumerate(zip(cues, decision_steps(model, policy).values())):
        seen = np.flatnonzero(shown[: t + 1, i]) if t is not None else []
        out[int(c)] = int(t - seen[-1]) if len(seen) else None
    return out


def recall_distance(model: TaskModel, policy: np.ndarray | None = None) -> int | None:
    """The shortest recall distance over cue values (None: the cue never matters)."""
    values = [d for d in recall_distances(model, policy).values() if d is not None]
    return min(values) if values else None


def layout_statistics(model: TaskModel) -> dict[str, Any]:
    """Cells, dead ends, independent loops (passages − cells + 1 for a connected layout) and the
    fewest steps from the start to each goal."""
    layout = model.layout
    open_moves = layout.neighbour >= 0
    passages = int(open_moves.sum()) // 2
    degree = open_moves.sum(axis=1)
    dist = distances_from(np.where(open_moves, layout.neighbour, np.arange(layout.num_cells)[:, None]),
                          layout.start)
    goals = layout.sites.get("goal", np.array([], dtype=np.int64))
    return {"cells": layout.num_cells, "dead_ends": int((degree == 1).sum()),
            "loops": passages - layout.num_cells + 1,
            "start_to_goal": [int(dist[g]) for g in goals]}


@dataclass
class VariantReport:
    """Every figure and check of one compiled variant."""

    variant_id: str
    params: dict[str, Any]
    num_states: int
    horizon: int
    shortest: dict[int, int]
    recall: dict[int, int | None]
    baselines: dict[str, Baseline]
    checks: list[Check] = field(default_factory=list)
    witness: str = ""
    layout: dict[str, Any] = field(default_factory=dict)

    @property
    def ok(self) -> bool:
        """True when no check failed."""
        return not any(c.failed for c in self.checks)

    @property
    def memory_gap(self) -> float:
        """Optimal minus chance (best memoryless) mean return."""
        return self.baselines["optimal"].mean_return - self.baselines["chance"].mean_return

    @property
    def slack(self) -> int:
        """Steps the limit allows beyond the longest shortest solution."""
        return self.horizon - max(self.shortest.values())

    def to_dict(self) -> dict[str, Any]:
        """Plain-data form for JSON output."""
        return {
            "variant_id": self.variant_id, "ok": self.ok, "params": self.params,
            "states": self.num_states, "max_steps": self.horizon,
            "shortest_solution": {str(k): v for k, v in self.shortest.items()},
            "step_limit_slack": self.slack,
            "recall_distance": {str(k): v for k, v in self.recall.items()},
            "memory_gap": self.memory_gap, "layout": self.layout,
            "baselines": {k: b.to_dict() for k, b in self.baselines.items()},
            "checks": [{"name": c.name, "passed": c.passed, "reason": c.reason} for c in self.checks],
            "witness": self.witness,
        }


def memory_gap_check(gap: float, min_gap: float, remembered: str, over: str = "") -> Check:
    """Optimal − chance must be positive and at least ``min_gap`` (``over`` says what it averages)."""
    enough = gap > TOLERANCE and gap >= min_gap - TOLERANCE
    return Check("memory gap", enough, f"optimal − chance = {gap:.6g}" + (f" ({over})" if over else "")
                 + (f" (minimum {min_gap:g})" if min_gap else "")
                 + ("" if enough else f": remembering {remembered} does not pay enough"))


def _cue_needed(recall: dict[int, int | None], decided: dict[int, int | None]) -> Check:
    if all(d is None for d in recall.values()):
        return Check("cue needed", False, "the optimal agent's path never depends on a cue it has seen")
    for cue, d in sorted(recall.items()):
        if d is not None and d <= 0:
            return Check("cue needed", False, f"cue {cue}: the optimal agent decides at step {decided[cue]} "
                         f"while the cue is still shown (recall distance {d}): no memory is needed")
    known = [d for d in recall.values() if d is not None]
    return Check("cue needed", True, f"recall distance {min(known)}–{max(known)} steps")


def analyse(model: TaskModel, observations: ObservationTables | None = None,
            min_gap: float = 0.0) -> VariantReport:
    """Run every analysis and check on one compiled variant.

    ``observations`` maps each modality the agent receives to ``(table[K, …], blocks)``, the
    noise-free rendering of every observation key; without it the observation keys themselves
    stand for what the agent sees.
    """
    policy = optimal_policy(model)
    memoryless = best_memoryless(model, observations)
    baselines = {
        "optimal": optimal_baseline(model),
        "chance": policy_figures(model, memoryless.state_policy(model.horizon), MEMORYLESS_CLASS,
                                 memoryless.method, memoryless.detail),
        "random": random_baseline(model),
    }
    try:
        baselines["cue_blind"] = cue_blind_baseline(model)
        blind_error = ""
    except AnalysisError as exc:  # the cue changes more than rewards: say so, never pass silently
        blind_error = str(exc)
        baselines["cue_blind"] = Baseline(float("nan"), float("nan"), float("nan"), "unavailable",
                                          CUE_BLIND_CLASS, blind_error)
    recall = recall_distances(model, policy)
    checks = [solvability(model), _cue_needed(recall, decision_steps(model, policy))]

    leak = static_leak(model, observations)
    checks.append(Check("no cue leak", leak is None,
                        "after the display window, cue twins look alike" if leak is None
                        else f"the cue leaks: {leak.describe()}"))

    witness = ""
    beat = baselines["chance"].mean_return - baselines["cue_blind"].mean_return
    if blind_error:
        checks.append(Check("no carried cue", None, f"cannot run: no exact cue-blind figure ({blind_error})"))
    elif beat > TOLERANCE:
        found = carried_cue_witness(model, memoryless)
        witness = found.describe() if found else ""
        checks.append(Check("no carried cue", False,
                            f"a memoryless policy beats the cue-blind agent by {beat:.6g}: the cue is "
                            "carried in position or timing" + (f"; paths part at step {found.diverge_step}"
                                                               if found else "")))
    else:
        how = "none exists" if memoryless.method == "exact" else "none found by the search"
        checks.append(Check("no carried cue", True, f"no memoryless policy beats the cue-blind agent ({how})"))

    gap = baselines["optimal"].mean_return - baselines["chance"].mean_return
    checks.append(memory_gap_check(gap, min_gap, "the cue"))
    return VariantReport(
        variant_id=model.variant_id, params=dict(model.params), num_states=model.num_states,
        horizon=model.horizon, shortest=shortest_solutions(model), recall=recall,
        baselines=baselines, checks=checks, witness=witness, layout=layout_statistics(model),
    )
