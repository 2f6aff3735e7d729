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
from typing import Any, Protocol, TypedDict

import numpy as np
from pydantic import ConfigDict, with_config

from ..model import HiddenSet, TaskModel, distances_from
from ..model.hidden import HiddenJSON

TOLERANCE = 1e-9


@with_config(ConfigDict(extra="forbid"))
class FigureJSON(TypedDict):
    """A figure as plain data."""

    mean: float
    standard_error: float
    minimum: float
    maximum: float
    method: str
    policy_class: str


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
class BaselineJSON(TypedDict):
    """A baseline as plain data: its three figures (null when unavailable) and how they were found."""

    success_rate: FigureJSON | None
    mean_return: FigureJSON | None
    mean_length: FigureJSON | None
    method: str
    policy_class: str
    method_detail: str


@dataclass(frozen=True)
class Baseline:
    """One reference agent's success rate, return and episode length."""

    success_rate: Figure | None
    mean_return: Figure | None
    mean_length: Figure | None
    method: str
    policy_class: str
    method_detail: str = ""

    @classmethod
    def unavailable(cls, policy_class: str, reason: str) -> "Baseline":
        """A baseline that cannot be computed for this model, with the reason."""
        return cls(None, None, None, "unavailable", policy_class, reason)

    @classmethod
    def of(cls, hidden: HiddenSet, success: np.ndarray, returns: np.ndarray, length: np.ndarray, method: str,
           policy_class: str, method_detail: str = "") -> "Baseline":
        """A baseline from per-value success, return and length."""
        return cls(Figure.over(hidden, success, method, policy_class), Figure.over(hidden, returns, method, policy_class),
                   Figure.over(hidden, length, method, policy_class), method, policy_class, method_detail)

    @property
    def available(self) -> bool:
        """False for a baseline that could not be computed."""
        return self.mean_return is not None

    def to_dict(self) -> BaselineJSON:
        """Plain data for JSON."""
        def plain(f: Figure | None) -> FigureJSON | None:
            return None if f is None else f.to_dict()
        return {"success_rate": plain(self.success_rate), "mean_return": plain(self.mean_return),
                "mean_length": plain(self.mean_length), "method": self.method,
                "policy_class": self.policy_class, "method_detail": self.method_detail}


@with_config(ConfigDict(extra="forbid"))
class CheckJSON(TypedDict):
    """A check as plain data."""

    name: str
    passed: bool | None
    reason: str


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

    def to_dict(self) -> CheckJSON:
        """Plain data for JSON."""
        return {"name": self.name, "passed": self.passed, "reason": self.reason}


@with_config(ConfigDict(extra="forbid"))
class LayoutJSON(TypedDict):
    """A layout's statistics as plain data."""

    cells: int
    dead_ends: int
    loops: int
    start_to_goal: list[int]


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

    def to_dict(self) -> dict[str, Any]:
        """Plain data for JSON (under ``details``)."""

    def text_lines(self) -> list[str]:
        """Lines for the text report, indented by four spaces."""

    def spreads(self) -> dict[str, list[float]]:
        """Numbers a run summarises over its variants as min / median / max (under ``details``)."""


@with_config(ConfigDict(extra="forbid"))
class VariantJSON(TypedDict):
    """One variant's report as plain data: the same keys for every kind, kind-only data under details."""

    kind: str
    variant_id: str
    ok: bool
    params: dict[str, Any]
    states: int
    max_steps: int
    hidden: HiddenJSON
    shortest_solution: FigureJSON
    step_limit_slack: int
    memory_gap: FigureJSON
    layout: LayoutJSON
    baselines: dict[str, BaselineJSON]
    checks: list[CheckJSON]
    details: dict[str, Any]


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
            "memory_gap": self.memory_gap.to_dict(), "layout": self.layout,
            "baselines": {k: b.to_dict() for k, b in self.baselines.items()},
            "checks": [c.to_dict() for c in self.checks],
            "details": self.details.to_dict() if self.details is not None else {},
        }


def memory_gap(model: TaskModel, optimal: np.ndarray, chance: np.ndarray, method: str) -> Figure:
    """Optimal − chance return, per hidden value, summarised (a paired difference for a sample)."""
    return Figure.over(model.hidden, np.asarray(optimal) - np.asarray(chance), method, "optimal − chance")


def memory_gap_check(gap: Figure, min_gap: float, remembered: str, over: str = "") -> Check:
    """Optimal − chance mean return must be positive and at least ``min_gap`` (``over`` says what it
    averages over)."""
    enough = gap.mean > TOLERANCE and gap.mean >= min_gap - TOLERANCE
    return Check("memory gap", enough, f"optimal − chance = {gap.mean:.6g}" + (f" ({over})" if over else "")
                 + (f" (minimum {min_gap:g})" if min_gap else "")
                 + ("" if enough else f": remembering {remembered} does not pay enough"))
