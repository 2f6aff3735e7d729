"""One report contract for every task kind: every number a :class:`Figure`, one :class:`Report` per variant.

A figure is computed for each hidden value the model covers and summarised over them: for an
enumerated hidden set (every cue value) the mean is the exact expectation and its standard error
is 0; for a sample (paths) the mean is the sample mean, with the standard error of that mean.
The JSON shapes below are the contract of ``taskgen check --json``, manifests and galleries,
published as a JSON Schema by ``taskgen schema --report``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Annotated, Any, Literal, Mapping, Protocol

from typing_extensions import NotRequired, TypedDict   # pydantic reads these as JSON shapes; it needs this one before 3.12

import numpy as np
from pydantic import ConfigDict, Field, with_config

from ..model import HiddenSet, TaskModel, distances_from
from ..model.hidden import HiddenJSON

TOLERANCE = 1e-9


@with_config(ConfigDict(extra="forbid"))
class FigureJSON(TypedDict):
    """One number of a report, over the hidden values the model covers."""

    mean: Annotated[float, Field(description="The expectation over the hidden values (exact when they are "
                                 "enumerated, the sample mean when they are sampled).")]
    standard_error: Annotated[float, Field(description="The standard error of the mean: 0 when every hidden "
                                           "value is covered, sample sd / √n for a sample.")]
    minimum: Annotated[float, Field(description="The smallest per-value figure.")]
    maximum: Annotated[float, Field(description="The largest per-value figure.")]
    method: Annotated[str, Field(description="How it was obtained: exact, exact per path, search lower "
                                 "bound, ...")]
    policy_class: Annotated[str, Field(description="Which agent it describes (empty for a layout figure).")]


@dataclass(frozen=True)
class Figure:
    """One number of a report: its mean over the hidden values, the standard error of that mean (0
    when every value is covered), the smallest and largest per-value figure, how it was obtained
    and which agent it describes."""

    mean: float
    standard_error: float
    minimum: float
    maximum: float
    method: str
    policy_class: str = ""

    @classmethod
    def over(cls, hidden: HiddenSet, values: np.ndarray, method: str, policy_class: str = "") -> "Figure":
        """Summarise per-value figures ``values`` [count] by the hidden set's weights."""
        values = np.asarray(values, dtype=np.float64)
        if hidden.exact:
            weights = hidden.weights
            seen = values[weights > 0]
            low, high = float(seen.min()), float(seen.max())
            # a weighted mean lies within the values' range; rounding in the sum must not push it out
            # (a success rate of 1 + 2e-16 has a negative Bernoulli variance)
            mean = min(max(float(np.average(values, weights=weights)), low), high)
            return cls(mean, 0.0, low, high, method, policy_class)
        return cls.sampled(values, method, policy_class)

    @classmethod
    def sampled(cls, values: np.ndarray, method: str, policy_class: str = "") -> "Figure":
        """Mean, standard error (sample sd / √n; 0 for one value), min and max of equally weighted values."""
        values = np.asarray(values, dtype=np.float64)
        se = float(values.std(ddof=1) / math.sqrt(values.size)) if values.size > 1 else 0.0
        return cls(float(values.mean()), se, float(values.min()), float(values.max()), method, policy_class)

    def to_dict(self) -> FigureJSON:
        """Plain data for JSON."""
        return {"mean": self.mean, "standard_error": self.standard_error, "minimum": self.minimum,
                "maximum": self.maximum, "method": self.method, "policy_class": self.policy_class}

    def text(self, digits: int) -> str:
        """``mean`` when exact, ``mean ± standard error`` for a sample."""
        return f"{self.mean:.{digits}f}" + (f" ± {self.standard_error:.{digits}f}" if self.standard_error else "")


@with_config(ConfigDict(extra="forbid"))
class SolverJSON(TypedDict):
    """What the search for a policy cost and proved."""

    nodes: Annotated[int, Field(description="Nodes of the branch and bound.")]
    seconds: NotRequired[Annotated[float, Field(description="Wall-clock time the search took: the one number of a "
                                                "report that differs between runs (absent in manifests, which "
                                                "repeat byte for byte).")]]
    classes: Annotated[int, Field(description="Observation classes the policy found assigns.")]
    proven: Annotated[bool, Field(description="Optimality proven (else the budget ended the search).")]


@with_config(ConfigDict(extra="forbid"))
class BaselineJSON(TypedDict):
    """A reference agent: its three figures (null when it cannot be computed here) and how they were found."""

    success_rate: Annotated[FigureJSON | None, Field(description="Probability of ending in success.")]
    mean_return: Annotated[FigureJSON | None, Field(description="Expected return (discounted as the spec says).")]
    mean_length: Annotated[FigureJSON | None, Field(description="Expected steps an episode lasts.")]
    method: Annotated[str, Field(description="How the policy was found ('unavailable' with the reason in "
                                 "method_detail when it could not be).")]
    policy_class: Annotated[str, Field(description="The class of agents the baseline is the best of, or the agent.")]
    method_detail: Annotated[str, Field(description="The search's size, or why the baseline is unavailable.")]
    lower: Annotated[float | None, Field(description="A certified lower bound on the best return in the policy "
                                         "class (the mean return of the policy found).")]
    upper: Annotated[float | None, Field(description="A certified upper bound on it: equal to lower when exact, "
                                         "larger when bounded, null when no bound is known (a local search).")]
    solver: Annotated[SolverJSON | None, Field(description="The search's statistics, for a searched policy class.")]


@dataclass(frozen=True)
class Baseline:
    """One reference agent's success rate, return and episode length; for the best of a policy class, the
    certified interval on the best return (``lower``, ``upper``) and what the search cost."""

    success_rate: Figure | None
    mean_return: Figure | None
    mean_length: Figure | None
    method: str
    policy_class: str
    method_detail: str = ""
    lower: float | None = None       # None: the mean return (exact)
    upper: float | None = None       # None with a lower: no certified upper bound (a local search)
    solver: SolverJSON | None = None

    @classmethod
    def unavailable(cls, policy_class: str, reason: str) -> "Baseline":
        """A baseline that cannot be computed for this model, with the reason."""
        return cls(None, None, None, "unavailable", policy_class, reason)

    @classmethod
    def of(cls, hidden: HiddenSet, success: np.ndarray, returns: np.ndarray, length: np.ndarray, method: str,
           policy_class: str, method_detail: str = "", upper: float | None = None,
           solver: SolverJSON | None = None) -> "Baseline":
        """A baseline from per-value success, return and length (``upper``: a certified bound above the
        mean return, for the best of a class that was not proven)."""
        figures = [Figure.over(hidden, v, method, policy_class) for v in (success, returns, length)]
        mean = figures[1].mean
        return cls(figures[0], figures[1], figures[2], method, policy_class, method_detail,
                   lower=mean, upper=mean if upper is None else max(upper, mean), solver=solver)

    @property
    def interval(self) -> tuple[float, float | None]:
        """(lower, upper) on the best return of the class (upper None: none certified); the mean return
        twice for an exactly computed agent."""
        mean = self.mean_return.mean if self.mean_return is not None else float("nan")
        return (mean if self.lower is None else self.lower), (mean if self.lower is None else self.upper)

    @property
    def available(self) -> bool:
        """False for a baseline that could not be computed."""
        return self.mean_return is not None

    def to_dict(self) -> BaselineJSON:
        """Plain data for JSON."""
        def plain(f: Figure | None) -> FigureJSON | None:
            return None if f is None else f.to_dict()
        lower, upper = self.interval if self.available else (None, None)
        return {"success_rate": plain(self.success_rate), "mean_return": plain(self.mean_return),
                "mean_length": plain(self.mean_length), "method": self.method,
                "policy_class": self.policy_class, "method_detail": self.method_detail,
                "lower": lower, "upper": upper, "solver": self.solver}


Verdict = Literal["pass", "fail", "undecided", "n/a"]


@with_config(ConfigDict(extra="forbid"))
class CheckJSON(TypedDict):
    """A named finding."""

    name: Annotated[str, Field(description="solvable, memory gap, and per kind: cue needed, no cue leak, no "
                               "carried cue.")]
    verdict: Annotated[Verdict, Field(description="pass, fail, undecided (the certified interval straddles the "
                                      "threshold: exit 1) or n/a (the check cannot run here).")]
    passed: Annotated[bool | None, Field(description="true for pass, false for fail or undecided, null for n/a.")]
    reason: Annotated[str, Field(description="Why, with the numbers.")]


@dataclass(frozen=True)
class Check:
    """A named finding: its verdict and the reason."""

    name: str
    passed: bool | None          # True: pass; False: fail (or undecided); None: cannot run here
    reason: str
    undecided: bool = False      # the bounds neither prove nor refute it

    @property
    def verdict(self) -> Verdict:
        """pass, fail, undecided or n/a."""
        if self.undecided:
            return "undecided"
        return "n/a" if self.passed is None else "pass" if self.passed else "fail"

    @property
    def failed(self) -> bool:
        """True for a check that failed or could not be decided: either way the task is not certified."""
        return self.passed is False

    def to_dict(self) -> CheckJSON:
        """Plain data for JSON."""
        return {"name": self.name, "verdict": self.verdict, "passed": self.passed, "reason": self.reason}


@with_config(ConfigDict(extra="forbid"))
class LayoutJSON(TypedDict):
    """A layout's statistics."""

    cells: Annotated[int, Field(description="Open cells.")]
    dead_ends: Annotated[int, Field(description="Cells with one open side.")]
    loops: Annotated[int, Field(description="Independent loops: passages − cells + 1.")]
    start_to_goal: Annotated[list[int], Field(description="Fewest steps from the start to each goal (none in "
                                              "a field).")]


def layout_statistics(model: TaskModel) -> LayoutJSON:
    """Cells, dead ends, independent loops (passages − cells + 1 for a connected layout) and the
    fewest steps from the start to each goal (none in a field)."""
    layout = model.layout
    open_moves = layout.neighbour >= 0
    passages = int(open_moves.sum()) // 2
    degree = open_moves.sum(axis=1)
    dist = distances_from(np.where(open_moves, layout.neighbour, np.arange(layout.num_cells)[:, None]),
                          layout.start)
    goals = layout.sites.get("goal", np.array([], dtype=np.int64))
    return {"cells": layout.num_cells, "dead_ends": int((degree == 1).sum()),
            "loops": passages - layout.num_cells + 1, "start_to_goal": [int(dist[g]) for g in goals]}


class Details(Protocol):
    """What only one task kind reports (cue: recall distances and the carried-cue witness; field:
    path sizes and the random agent's missteps)."""

    def to_dict(self) -> Mapping[str, Any]:
        """Plain data for JSON (under ``details``; its shape is the kind's ``details_json``)."""

    def text_lines(self) -> list[str]:
        """Lines for the text report, indented by four spaces."""

    def spreads(self) -> dict[str, list[float]]:
        """Numbers a run summarises over its variants as min / median / max (under ``details``)."""


BASELINES_EVERY_KIND_HAS = ["optimal", "chance", "chance_stochastic", "random"]


@with_config(ConfigDict(extra="forbid"))
class ChanceLevelJSON(TypedDict):
    """The chance level the checks use: the better of the two memoryless figures, as an interval."""

    lower: Annotated[float, Field(description="The best mean return a memoryless policy found reaches (the larger "
                                  "of chance's and chance_stochastic's lower bounds).")]
    upper: Annotated[float, Field(description="No deterministic memoryless policy scores more (certified), and no "
                                  "stochastic one found did; equal to lower when exact.")]
    reached_by: Annotated[Literal["deterministic", "stochastic"], Field(
        description="Which class of memoryless policies reached the lower bound.")]


@with_config(ConfigDict(extra="forbid"))
class VariantJSON(TypedDict):
    """One variant's report: the same keys for every kind; what only one kind has sits under details."""

    kind: Annotated[str, Field(description="The task kind: cue (corridors, mazes) or field.")]
    variant_id: Annotated[str, Field(description="<spec name>-s<variant seed>.")]
    ok: Annotated[bool, Field(description="No check failed.")]
    params: Annotated[dict[str, Any], Field(description="The variant's drawn parameters and its step limit.")]
    states: Annotated[int, Field(description="States of the analysed model, over all the hidden values it covers.")]
    max_steps: Annotated[int, Field(description="The step limit.")]
    hidden: HiddenJSON
    shortest_solution: Annotated[FigureJSON, Field(description="Fewest steps to success, over the hidden values "
                                                   "that can succeed.")]
    step_limit_slack: Annotated[int, Field(description="Step limit − the longest shortest solution.")]
    memory_gap: Annotated[FigureJSON, Field(description="Optimal − chance return, per hidden value (chance: the "
                                            "policy reaching the chance level's lower bound).")]
    chance_level: ChanceLevelJSON
    layout: LayoutJSON
    baselines: Annotated[dict[str, BaselineJSON], Field(
        description="Reference agents by name: optimal, chance and random for every kind; cue_blind (cue) and "
        "explorer (field) besides.", json_schema_extra={"required": BASELINES_EVERY_KIND_HAS})]
    checks: list[CheckJSON]
    details: Annotated[dict[str, Any], Field(description="What only this kind reports (see the kind's shape "
                                             "in $defs).")]


@dataclass
class Report:
    """Every figure and check of one compiled variant."""

    kind: str
    variant_id: str
    params: dict[str, Any]
    num_states: int
    horizon: int
    hidden: HiddenJSON
    shortest: Figure              # fewest steps to success, over the hidden values that can succeed
    longest_shortest: int         # the largest of them (−1 when none can)
    baselines: dict[str, Baseline]
    memory_gap: Figure
    chance_level: ChanceLevelJSON
    checks: list[Check] = field(default_factory=list)
    layout: LayoutJSON = field(default_factory=lambda: LayoutJSON(cells=0, dead_ends=0, loops=0, start_to_goal=[]))
    details: Details | None = None

    @property
    def ok(self) -> bool:
        """True when no check failed."""
        return not any(c.failed for c in self.checks)

    @property
    def slack(self) -> int:
        """Steps the limit allows beyond the longest shortest solution."""
        return self.horizon - self.longest_shortest

    def to_dict(self) -> VariantJSON:
        """Plain data for JSON."""
        return {
            "kind": self.kind, "variant_id": self.variant_id, "ok": self.ok, "params": self.params,
            "states": self.num_states, "max_steps": self.horizon, "hidden": self.hidden,
            "shortest_solution": self.shortest.to_dict(), "step_limit_slack": self.slack,
            "memory_gap": self.memory_gap.to_dict(), "chance_level": self.chance_level, "layout": self.layout,
            "baselines": {k: b.to_dict() for k, b in self.baselines.items()},
            "checks": [c.to_dict() for c in self.checks],
            "details": dict(self.details.to_dict()) if self.details is not None else {},
        }
