"""Analyses of a hidden-path field: exact within each path, averaged over sampled paths.

The path is the hidden variable drawn at every reset, and there are far too many to list, so
each figure is computed exactly on the finite model of each of K paths sampled from the spec
(``FieldModel.path_model``) and reported as the mean over the paths with its standard error
(the sample standard deviation over √K).

- optimal: an agent that knows the path (backward induction on each path's model);
- random: uniform-random actions (exact policy evaluation), with its expected falls;
- explorer: a simple agent with memory that does not know the path: a depth-first search of
  the safe cells that remembers where it fell, where it has been and the way it got there
  (its deterministic rollout on each path is exact): a reference for what memory alone buys;
- chance: the best deterministic memoryless policy found by a search. It acts on what it sees
  now: the agent-view observation class of its cell and, when marks are shown to the agent,
  which of the four cells beside it carry a mark. On one path, the dynamics and such a policy
  are deterministic, so one rollout gives its exact return; the search keeps the best policy
  over the sampled paths. It is a lower bound on the best memoryless score (a policy reading
  marks farther away, or acting at random, can do better). The search chooses its policy on the
  same paths it reports, which can only raise the figure: the memory gap it gives is conservative.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field
from typing import Any

import numpy as np

from .. import limits
from ..model import FieldModel, TaskModel, shortest_success_steps
from .baselines import RANDOM_CLASS, optimal_policy
from .checks import Check, memory_gap_check
from .dp import Objective, at_reset, evaluate, uniform_policy
from .field_policies import EXPLORER_CLASS, MemorylessRollout, best_memoryless_paths, explore

PATHS_STREAM = 3              # the variant seed's stream the analysed paths are drawn from
FIELD_OPTIMAL_CLASS = "knows the path: walks a shortest safe route (sees position and time)"
FIELD_CHANCE_CLASS = ("memoryless, deterministic: acts on its cell's observation and on the marks of the four "
                      "cells beside it (noise excluded); stochastic memoryless policies can score higher "
                      "(Singh, Jaakkola & Jordan, ICML 1994)")
FIELD_BLIND_CHANCE_CLASS = ("memoryless, deterministic: acts on its cell's observation (noise excluded; no mark "
                            "beside it is in view); stochastic memoryless policies can score higher "
                            "(Singh, Jaakkola & Jordan, ICML 1994)")


@dataclass(frozen=True)
class PathAverage:
    """A figure exact on each sampled path, averaged over the paths."""

    mean: float
    standard_error: float
    minimum: float
    maximum: float

    @classmethod
    def of(cls, values: np.ndarray) -> "PathAverage":
        """Mean, standard error (sample sd / √K; 0 for one path), min and max of per-path values."""
        values = np.asarray(values, dtype=np.float64)
        se = float(values.std(ddof=1) / math.sqrt(values.size)) if values.size > 1 else 0.0
        return cls(float(values.mean()), se, float(values.min()), float(values.max()))


@dataclass(frozen=True)
class FieldBaseline:
    """One reference agent over the sampled paths."""

    success_rate: PathAverage
    mean_return: PathAverage
    mean_length: PathAverage
    method: str
    policy_class: str
    falls: PathAverage | None = None
    method_detail: str = ""

    def to_dict(self) -> dict[str, Any]:
        """Plain-data form for JSON output."""
        return asdict(self)


@dataclass
class FieldReport:
    """Every figure and check of one field variant."""

    variant_id: str
    params: dict[str, Any]
    num_states: int
    horizon: int
    paths: int
    shortest: PathAverage
    path_cells: PathAverage
    baselines: dict[str, FieldBaseline]
    checks: list[Check] = field(default_factory=list)

    @property
    def ok(self) -> bool:
        """True when no check failed."""
        return not any(c.failed for c in self.checks)

    @property
    def memory_gap(self) -> float:
        """Optimal minus chance mean return (means over the sampled paths)."""
        return self.baselines["optimal"].mean_return.mean - self.baselines["chance"].mean_return.mean

    def to_dict(self) -> dict[str, Any]:
        """Plain-data form for JSON output."""
        return {"variant_id": self.variant_id, "ok": self.ok, "params": self.params, "states": self.num_states,
                "max_steps": self.horizon, "paths": self.paths, "shortest_crossing": asdict(self.shortest),
                "path_cells": asdict(self.path_cells), "memory_gap": self.memory_gap,
                "baselines": {k: b.to_dict() for k, b in self.baselines.items()},
                "checks": [{"name": c.name, "passed": c.passed, "reason": c.reason} for c in self.checks]}


def sample_paths(model: FieldModel, seed: int, count: int) -> tuple[np.ndarray, np.ndarray]:
    """``count`` paths for the analyses, from the variant seed's own stream (same seed, same paths)."""
    rng = np.random.default_rng(np.random.SeedSequence(entropy=seed, spawn_key=(PATHS_STREAM,)))
    return model.draw(rng.random((count, model.draws)))


def _per_path(models: list[TaskModel], falls: list[np.ndarray]) -> dict[str, FieldBaseline]:
    """Exact optimal and random figures on each path's model."""
    rows: dict[str, list[list[float]]] = {"optimal": [], "random": []}
    fall_counts = []
    for model, fall in zip(models, falls):
        for name, policy in (("optimal", optimal_policy(model)), ("random", uniform_policy(model))):
            rows[name].append([at_reset(model, evaluate(model, policy, Objective.success(model))),
                               at_reset(model, evaluate(model, policy)),
                               at_reset(model, evaluate(model, policy, Objective.length(model)))])
            if name == "random":
                fall_counts.append(at_reset(model, evaluate(model, policy, Objective(fall, 1.0, 0.0))))
    out = {}
    for name, cls in (("optimal", FIELD_OPTIMAL_CLASS), ("random", RANDOM_CLASS)):
        v = np.asarray(rows[name])
        out[name] = FieldBaseline(PathAverage.of(v[:, 0]), PathAverage.of(v[:, 1]), PathAverage.of(v[:, 2]),
                                  "exact per path", cls,
                                  falls=PathAverage.of(np.asarray(fall_counts)) if name == "random" else None)
    return out


def analyse_field(model: FieldModel, seed: int, view_class: np.ndarray, marks_seen: bool,
                  paths: int = 64, min_gap: float = 0.0) -> FieldReport:
    """Every figure and check of a field variant over ``paths`` sampled paths."""
    kind, start = sample_paths(model, seed, paths)
    models = [model.path_model(kind[i], int(start[i]), reachable_only=True) for i in range(paths)]
    _check_work(model, models)
    falls = [model.path_falls(kind[i])[m.params["field_states"]] for i, m in enumerate(models)]
    shortest = np.array([shortest_success_steps(m.next_state, m.success, m.initial_states())[0] for m in models])
    cells = np.array([m.params["path_cells"] for m in models])
    baselines = _per_path(models, falls)
    rollout = MemorylessRollout(model, kind, start, view_class, marks_seen)
    _, chance, used = best_memoryless_paths(rollout)
    baselines["chance"] = FieldBaseline(
        PathAverage.of(chance.success), PathAverage.of(chance.returns), PathAverage.of(chance.length),
        "search lower bound", FIELD_CHANCE_CLASS if rollout.marks_seen else FIELD_BLIND_CHANCE_CLASS,
        method_detail=f"hill-climbing, {used} policies evaluated exactly on {paths} paths")
    explorer = explore(model, kind, start)
    baselines["explorer"] = FieldBaseline(
        PathAverage.of(explorer.success), PathAverage.of(explorer.returns), PathAverage.of(explorer.length),
        "exact per path", EXPLORER_CLASS)
    checks = [_solvable(shortest, model.horizon, paths)]
    gap = baselines["optimal"].mean_return.mean - baselines["chance"].mean_return.mean
    checks.append(memory_gap_check(gap, min_gap, "where it fell", f"mean over {paths} paths"))
    return FieldReport(
        variant_id=model.variant_id, params=dict(model.params), num_states=model.num_states,
        horizon=model.horizon, paths=paths, shortest=PathAverage.of(np.maximum(shortest, 0)),
        path_cells=PathAverage.of(cells), baselines=baselines, checks=checks)


def _check_work(model: FieldModel, models: list[TaskModel]) -> None:
    """Refuse analyses whose dynamic programming over every sampled path would exceed the work cap."""
    states = sum(m.num_states for m in models)
    work = states * model.num_actions * model.horizon
    cap = limits.current().max_work
    if work > cap:
        raise limits.ResourceLimitError(
            f"{model.variant_id}: {len(models)} sampled paths need {work:.3g} state-action-steps "
            f"(≈{states:.3g} reachable states over the paths × {model.num_actions} actions × step limit "
            f"{model.horizon}), over the cap of {cap:.3g}; analyse fewer paths (--paths) or raise the cap "
            "with --max-work or TASKGEN_MAX_WORK")


def _solvable(shortest: np.ndarray, horizon: int, paths: int) -> Check:
    """Every sampled path must join start to end within the step limit."""
    if (shortest < 0).any():
        i = int(np.flatnonzero(shortest < 0)[0])
        return Check("solvable", False, f"sampled path {i}: its end cannot be reached from its start")
    if (shortest > horizon).any():
        i = int(np.argmax(shortest))
        return Check("solvable", False, f"sampled path {i}: shortest crossing {int(shortest[i])} steps "
                     f"exceeds the step limit {horizon}")
    return Check("solvable", True, f"all {paths} sampled paths crossable; shortest crossing "
                 f"{int(shortest.min())}–{int(shortest.max())} steps, limit {horizon}")
