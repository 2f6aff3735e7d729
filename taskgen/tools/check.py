"""`taskgen check`: compile N variants of a spec, analyse each, and summarise."""

from __future__ import annotations

import statistics
from dataclasses import dataclass
from typing import Any

from tqdm import tqdm

from ..analysis import VariantReport, analyse
from ..analysis.fields import FieldReport
from ..model import TaskModel, compile_variant
from ..render import observation_set
from ..spec import Spec
from ..variant import make_variant
from .field_check import check_field_variant

BASELINE_ORDER = ("optimal", "chance", "cue_blind", "random")


def observation_tables(model: TaskModel, spec: Spec) -> dict[str, Any]:
    """Every modality the spec gives the agent, rendered noise-free for each observation key."""
    return observation_set(model, spec.observation).tables()


def check_variant(spec: Spec, seed: int, min_gap: float = 0.0) -> VariantReport | FieldReport:
    """Compile one variant and run every analysis on what the agent really observes (a field's
    report has its figures over sampled paths: see field_check.py)."""
    if spec.layout.family == "field":
        return check_field_variant(spec, seed, min_gap=min_gap)
    model = compile_variant(make_variant(spec, seed))
    return analyse(model, observation_tables(model, spec), min_gap=min_gap)


@dataclass
class CheckRun:
    """The reports of one `taskgen check` run, in seed order."""

    source: str
    spec: Spec
    reports: list[VariantReport]
    min_gap: float = 0.0

    @property
    def ok(self) -> bool:
        """True when no check of any variant failed."""
        return all(r.ok for r in self.reports)

    def summary(self) -> dict[str, dict[str, Any]]:
        """Each baseline averaged over the variants (variants weigh equally)."""
        out = {}
        for name in BASELINE_ORDER:
            figures = [r.baselines[name] for r in self.reports]
            methods = sorted({b.method for b in figures})
            known = [b for b in figures if b.method != "unavailable"]
            out[name] = {
                "success_rate": _mean([b.success_rate for b in known]),
                "mean_return": _mean([b.mean_return for b in known]),
                "method": methods[0] if len(methods) == 1 else " + ".join(methods),
                "policy_class": figures[0].policy_class,
            }
        return out

    def statistics(self) -> dict[str, Any]:
        """Memory gap, recall distance and step-limit slack over the variants."""
        recall = [d for r in self.reports for d in r.recall.values() if d is not None]
        gaps = [r.memory_gap for r in self.reports]
        slack = [r.slack for r in self.reports]

        def spread(values: list[float]) -> dict[str, float] | None:
            if not values:
                return None
            return {"min": min(values), "median": statistics.median(values), "max": max(values)}

        return {"memory_gap": {"mean": sum(gaps) / len(gaps), **spread(gaps)},
                "recall_distance": spread(recall), "step_limit_slack": spread(slack)}

    def to_dict(self) -> dict[str, Any]:
        """The `--json` object: ok, averaged baselines, statistics and a row per variant."""
        return {"ok": self.ok, "spec": self.spec.name, "source": self.source, "min_gap": self.min_gap,
                "baselines": self.summary(), "statistics": self.statistics(),
                "variants": [r.to_dict() for r in self.reports]}


def _mean(values: list[float]) -> float | None:
    """The mean, or None when no variant has the figure."""
    return sum(values) / len(values) if values else None


def run_check(spec: Spec, source: str, variants: int = 1, seed: int = 0, min_gap: float = 0.0) -> CheckRun:
    """Compile and analyse variants ``seed … seed+variants−1``."""
    reports = []
    for s in tqdm(range(seed, seed + variants), desc=f"checking {spec.name}", unit="variant",
                  disable=None if variants > 1 else True, leave=False):
        reports.append(check_variant(spec, s, min_gap))
    return CheckRun(source=source, spec=spec, reports=reports, min_gap=min_gap)


def _baseline_rows(baselines: dict[str, dict[str, Any]]) -> list[str]:
    rows = [f"    {'baseline':<10} {'success':>8} {'return':>9}  method"]
    for name in BASELINE_ORDER:
        b = baselines[name]
        if b["success_rate"] is None:
            rows.append(f"    {name:<10} {'n/a':>8} {'n/a':>9}  {b['method']}")
        else:
            rows.append(f"    {name:<10} {b['success_rate']:>8.3f} {b['mean_return']:>9.4f}  {b['method']}")
    return rows


def _status(passed: bool | None) -> str:
    return {True: "pass", False: "FAIL", None: "n/a "}[passed]


def format_text(run: CheckRun) -> str:
    """A readable table per variant, then the summary and the verdict."""
    lines = [f"{run.source}: {run.spec.name}, {len(run.reports)} variant(s)"]
    for r in run.reports:
        params = " ".join(f"{k}={v}" for k, v in r.params.items())
        lines += ["", f"  {r.variant_id}  {params}  states={r.num_states}  slack={r.slack}"]
        lay = r.layout
        lines.append(f"    layout: {lay['cells']} cells, {lay['dead_ends']} dead ends, {lay['loops']} loops, "
                     f"start to goals {', '.join(map(str, lay['start_to_goal']))} steps")
        for c in r.checks:
            lines.append(f"    {_status(c.passed)}  {c.name:<14} {c.reason}")
        if r.witness:
            lines += ["    witness: the best memoryless policy's paths for two cue values", r.witness]
        lines += _baseline_rows({k: b.to_dict() for k, b in r.baselines.items()})
    summary, stats = run.summary(), run.statistics()
    failed = [r.variant_id for r in run.reports if not r.ok]
    lines += ["", f"summary over {len(run.reports)} variant(s) (mean of each variant's figure):"]
    lines += _baseline_rows(summary)
    gap = stats["memory_gap"]
    lines.append(f"    memory gap (optimal − chance): mean {gap['mean']:.4f}, min {gap['min']:.4f}, "
                 f"max {gap['max']:.4f}")
    for key, label in (("recall_distance", "recall distance"), ("step_limit_slack", "step-limit slack")):
        s = stats[key]
        if s is not None:
            lines.append(f"    {label}: min {s['min']}, median {s['median']}, max {s['max']} steps")
    lines += ["", "  chance    = " + summary["chance"]["policy_class"],
              "  cue_blind = " + summary["cue_blind"]["policy_class"],
              "  methods: exact = computed on the compiled model; search lower bound = the best of a "
              "policy search, each candidate evaluated exactly",
              "", "ok" if run.ok else f"FAILED: {', '.join(failed)}"]
    return "\n".join(lines)
