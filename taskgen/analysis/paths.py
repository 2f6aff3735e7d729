"""The analyses of a hidden-path field: exact on each sampled path, summarised over the sample.

The path is the hidden value drawn at every reset, and there are far too many to list, so a
field's model covers a sample of K paths drawn from the variant seed (its hidden set is sampled)
and every figure is exact on each path and reported as the sample mean with its standard error.

- optimal: an agent that knows the path (backward induction);
- random: uniform-random actions (exact policy evaluation), with its expected missteps;
- explorer: a simple agent with memory that does not know the path: a depth-first search of
  the safe cells that remembers where it stepped off, where it has been and the way it got there
  (its deterministic rollout on each path is exact): a reference for what memory alone buys;
- chance: the best deterministic memoryless policy over the sampled paths, proven or bounded,
  and the best stochastic one found beside it (pathchance.py). It acts on what it sees now: its
  cell's view and, when some modality shows them, the marks its missteps have left. The policy is
  chosen on the same paths it is reported on, which can only raise the figure: the memory gap
  it gives is conservative for the field's whole path distribution.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Annotated

import numpy as np
from pydantic import ConfigDict, Field, with_config
from typing_extensions import TypedDict

from .. import limits
from ..errors import AnalysisError
from ..generate.paths import OFF
from ..model import PathRule, PathSample, SampledSet, TaskModel
from .baselines import RANDOM_CLASS, optimal_policy, per_value, policy_figures, shortest_steps
from .dp import Objective, uniform_policy
from .explorer import EXPLORER_CLASS, explore
from .chance import gap, gap_check
from .pathchance import Seen, path_chance
from .policysearch import NODES
from .report import Baseline, Check, Figure, FigureJSON, Report, layout_statistics

FIELD_OPTIMAL_CLASS = "knows the path: walks a shortest safe route (sees position and time)"


def path_parts(model: TaskModel) -> tuple[PathRule, PathSample]:
    """A field model's path rule and the paths its tables cover."""
    sample = model.hidden.sample if isinstance(model.hidden, SampledSet) else None
    if model.paths is None or not isinstance(sample, PathSample):
        raise AnalysisError(f"{model.variant_id} is not a model of hidden paths")
    return model.paths, sample


@with_config(ConfigDict(extra="forbid"))
class PathDetailsJSON(TypedDict):
    """What only a field reports per variant (under ``details``)."""

    path_cells: Annotated[FigureJSON, Field(description="Cells on the sampled paths.")]
    random_missteps: Annotated[FigureJSON, Field(description="The uniform-random agent's expected steps off the path "
                                              "per episode.")]


@dataclass(frozen=True)
class PathDetails:
    """What only a field reports: the sampled paths' sizes and shortest routes, and the random
    agent's expected missteps."""

    paths: int
    path_cells: Figure
    shortest: Figure
    random_missteps: Figure

    def to_dict(self) -> PathDetailsJSON:
        """``path_cells`` and ``random_missteps`` as figures."""
        return {"path_cells": self.path_cells.to_dict(), "random_missteps": self.random_missteps.to_dict()}

    def text_lines(self) -> list[str]:
        """The sample's sizes and the random agent's missteps."""
        s = self.shortest
        return [f"    {self.paths} sampled paths: {self.path_cells.text(1)} cells, shortest route "
                f"{s.text(1)} steps (min {s.minimum:g}, max {s.maximum:g})",
                f"    random agent's expected missteps: {self.random_missteps.text(2)} per episode"]

    def spreads(self) -> dict[str, list[float]]:
        """The mean shortest route of each variant's sampled paths."""
        return {"shortest_route": [self.shortest.mean]}


def analyse_paths(model: TaskModel, view: np.ndarray, seen: Seen | None = None, min_gap: float = 0.0,
                  budget: int = NODES) -> Report:
    """Every figure and check of a field variant over the paths its model covers. ``view[k]`` numbers
    what the agent sees at observation key (cell) ``k``, marks and noise excluded; ``seen`` says what its
    observation shows of the marks (None: no mark is in view); ``budget``: nodes the chance search may visit."""
    rule, sample = path_parts(model)
    K = sample.count
    _check_work(model, K)
    shortest = shortest_steps(model)
    optimal, uniform = optimal_policy(model), uniform_policy(model)
    baselines = {"optimal": policy_figures(model, optimal, FIELD_OPTIMAL_CLASS, "exact per path")}
    explorer = explore(rule, sample.kind, sample.start)
    baselines["explorer"] = Baseline.of(model.hidden, explorer.success, explorer.returns, explorer.length,
                                        "exact per path", EXPLORER_CLASS)
    chance, _ = path_chance(model, rule, sample, np.asarray(view), seen, budget)
    baselines["chance"] = chance.deterministic
    baselines["chance_stochastic"] = chance.stochastic
    baselines["random"] = policy_figures(model, uniform, RANDOM_CLASS, "exact per path")
    missteps = per_value(model, uniform, Objective(rule.missteps(model, sample), 1.0, 0.0))
    optimal_returns = per_value(model, optimal)
    checks = [_solvable(shortest, model.horizon, K),
              gap_check(float(optimal_returns.mean()), chance, min_gap, "where it stepped off", f"mean over {K} paths")]
    shortest_figure = Figure.over(model.hidden, np.maximum(shortest, 0), "exact per path", "fewest steps to the end")
    details = PathDetails(K, Figure.over(model.hidden, (sample.kind != OFF).sum(axis=1), "exact per path"),
                          shortest_figure, Figure.over(model.hidden, missteps, "exact per path", RANDOM_CLASS))
    return Report(
        kind=model.kind, variant_id=model.variant_id, params=model.param_dict(), num_states=model.num_states,
        horizon=model.horizon, hidden=model.hidden.to_dict(), shortest=shortest_figure,
        longest_shortest=int(shortest.max()), baselines=baselines, memory_gap=gap(model, optimal_returns, chance),
        chance_level=chance.level(),
        checks=checks, layout=layout_statistics(model), details=details)


def _check_work(model: TaskModel, paths: int) -> None:
    """Refuse analyses whose dynamic programming over every sampled path would exceed the work cap."""
    states = model.num_states      # the states reachable on each path, summed (the tables are built here)
    work = states * model.num_actions * model.horizon
    cap = limits.current().max_work
    if work > cap:
        raise limits.ResourceLimitError(
            f"{model.variant_id}: {paths} sampled paths need {work:.3g} state-action-steps "
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
        return Check("solvable", False, f"sampled path {i}: shortest route {int(shortest[i])} steps "
                     f"exceeds the step limit {horizon}")
    return Check("solvable", True, f"all {paths} sampled paths traversable; shortest route "
                 f"{int(shortest.min())}–{int(shortest.max())} steps, limit {horizon}")
