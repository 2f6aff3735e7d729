"""`taskgen check`: compile N variants of a spec, analyse each, and summarise — one contract for every kind."""

from __future__ import annotations

import math
import statistics
from dataclasses import dataclass
from typing import Annotated, Any, Sequence

from typing_extensions import TypedDict   # pydantic reads these as JSON shapes; it needs this one before 3.12

from pydantic import ConfigDict, Field, TypeAdapter, with_config

from ..analysis import Baseline, Figure, Report
from ..analysis.policysearch import NODES
from ..analysis.report import BASELINES_EVERY_KIND_HAS, TOLERANCE, BaselineJSON, Verdict, VariantJSON
from ..kinds import SAMPLES, all_kinds, compile_variant, kind_of, make_variant, observation_set
from ..model import TaskModel
from ..manifest import ManifestError
from ..spec import Spec
from .progress import Progress
from .scale import Dask, Pool, runner, spec_from_text, spec_text

DIALECT = "https://json-schema.org/draft/2020-12/schema"


def observation_tables(model: TaskModel, spec: Spec) -> dict[str, Any]:
    """Every modality the spec gives the agent, rendered noise-free for each observation key."""
    return observation_set(model, spec.observation).tables()


def check_variant(spec: Spec, seed: int, min_gap: float = 0.0, paths: int = SAMPLES, budget: int = NODES,
                  fingerprint: str | None = None) -> Report:
    """Compile one variant and run every analysis on what its agent really observes (``paths``: the
    hidden values sampled where they cannot all be listed, as for a field's paths; ``budget``: nodes the
    search for the chance level may visit before the level becomes an interval). With ``fingerprint``
    (a manifest's), a variant that no longer reproduces it is refused."""
    kind = kind_of(spec)
    model = compile_variant(make_variant(spec, seed), paths)
    if fingerprint is not None and kind.fingerprint(model) != fingerprint:
        raise ManifestError(f"{model.variant_id} no longer reproduces the fingerprint its manifest records")
    return kind.analyse(model, kind.observations(model, spec.observation), min_gap, budget)


@with_config(ConfigDict(extra="forbid"))
class SpreadJSON(TypedDict):
    """The smallest, median and largest of a number over the variants."""

    min: float
    median: float
    max: float


@with_config(ConfigDict(extra="forbid"))
class GapJSON(TypedDict):
    """The memory gap over the variants."""

    mean: float
    min: float
    median: float
    max: float


@with_config(ConfigDict(extra="forbid"))
class StatisticsJSON(TypedDict):
    """Numbers every kind summarises over its variants."""

    memory_gap: GapJSON
    step_limit_slack: SpreadJSON


@with_config(ConfigDict(extra="forbid"))
class RunJSON(TypedDict):
    """`taskgen check --json`: the same keys for every kind; what only one kind has sits under details."""

    kind: Annotated[str, Field(description="The task kind: cue (corridors, mazes) or field.")]
    ok: Annotated[bool, Field(description="No check of any variant failed (the exit code is 0).")]
    spec: Annotated[str, Field(description="The spec's name.")]
    source: Annotated[str, Field(description="The spec as given on the command line.")]
    min_gap: Annotated[float, Field(description="The --min-gap the memory gap was held to.")]
    baselines: Annotated[dict[str, BaselineJSON], Field(
        description="Each baseline over the variants: the mean of their means (variants weigh equally), the "
        "standard error of that mean from theirs, and the smallest and largest variant's mean.",
        json_schema_extra={"required": BASELINES_EVERY_KIND_HAS})]
    statistics: StatisticsJSON
    details: Annotated[dict[str, SpreadJSON | None], Field(
        description="Numbers only this kind summarises over its variants (cue: recall_distance; field: "
        "shortest_route).")]
    variants: Annotated[list[VariantJSON], Field(description="One report per variant, in seed order.")]


def _spread(values: list[float]) -> SpreadJSON | None:
    if not values:
        return None
    return {"min": min(values), "median": statistics.median(values), "max": max(values)}


def _mean_figure(figures: list[Figure]) -> Figure:
    """The mean of the variants' figures (variants weigh equally), the standard error of that mean from
    theirs (0 when every hidden value was covered), and the smallest and largest variant's mean."""
    n = len(figures)
    methods = sorted({f.method for f in figures})
    return Figure(sum(f.mean for f in figures) / n, math.sqrt(sum(f.standard_error ** 2 for f in figures)) / n,
                  min(f.mean for f in figures), max(f.mean for f in figures), " + ".join(methods),
                  figures[0].policy_class)


@dataclass
class CheckRun:
    """The reports of one `taskgen check` run, in seed order."""

    source: str
    spec: Spec
    reports: list[Report]
    min_gap: float = 0.0

    @property
    def ok(self) -> bool:
        """True when no check of any variant failed."""
        return all(r.ok for r in self.reports)

    def summary(self) -> dict[str, Baseline]:
        """Each baseline averaged over the variants where it could be computed."""
        out = {}
        for name, first in self.reports[0].baselines.items():
            baselines = [r.baselines[name] for r in self.reports]
            known = [b for b in baselines if b.available]
            methods = sorted({b.method for b in baselines})
            method = methods[0] if len(methods) == 1 else " + ".join(methods)
            if not known:
                out[name] = Baseline(None, None, None, method, first.policy_class, first.method_detail)
                continue
            figures = [[f for f in (b.success_rate, b.mean_return, b.mean_length) if f is not None] for b in known]
            success, returns, length = (_mean_figure([row[i] for row in figures]) for i in range(3))
            bounds = [b.interval for b in known]      # the mean of the variants' intervals bounds the mean
            uppers = [high for _, high in bounds]
            out[name] = Baseline(success, returns, length, method, first.policy_class, first.method_detail,
                                 lower=sum(low for low, _ in bounds) / len(bounds),
                                 upper=None if None in uppers else sum(h for h in uppers if h is not None) / len(bounds))
        return out

    def statistics(self) -> StatisticsJSON:
        """Memory gap and step-limit slack over the variants."""
        gaps = [r.memory_gap.mean for r in self.reports]
        gap = _spread(gaps)
        slack = _spread([float(r.slack) for r in self.reports])
        assert gap is not None and slack is not None
        return {"memory_gap": {"mean": sum(gaps) / len(gaps), **gap}, "step_limit_slack": slack}

    def details(self) -> dict[str, SpreadJSON | None]:
        """What only this kind summarises over its variants (a cue task: the recall distance)."""
        values: dict[str, list[float]] = {}
        for r in self.reports:
            for name, numbers in (r.details.spreads() if r.details is not None else {}).items():
                values.setdefault(name, []).extend(numbers)
        return {name: _spread(numbers) for name, numbers in values.items()}

    def to_dict(self) -> RunJSON:
        """The `--json` object: the same keys for every kind (see :func:`report_schema`)."""
        return {"kind": kind_of(self.spec).name, "ok": self.ok, "spec": self.spec.name, "source": self.source,
                "min_gap": self.min_gap, "baselines": {k: b.to_dict() for k, b in self.summary().items()},
                "statistics": self.statistics(), "details": self.details(),
                "variants": [r.to_dict() for r in self.reports]}


def report_schema() -> dict[str, Any]:
    """The JSON Schema (draft 2020-12) of `taskgen check --json`; its ``$defs`` also describe the
    baselines and figures that manifests record."""
    template = "#/$defs/{model}"
    schema = TypeAdapter(RunJSON).json_schema(ref_template=template)
    defs, shapes = schema["$defs"], []
    for kind in all_kinds():     # each kind's details, one of which a variant's details must be
        shape = TypeAdapter(kind.details_json).json_schema(ref_template=template)
        defs.update(shape.pop("$defs", {}))
        defs[kind.details_json.__name__] = shape
        shapes.append({"$ref": template.format(model=kind.details_json.__name__)})
    details = defs["VariantJSON"]["properties"]["details"]
    defs["VariantJSON"]["properties"]["details"] = {"description": details["description"], "anyOf": shapes}
    return {"$schema": DIALECT, "title": "taskgen check report",
            "description": "The output of `taskgen check --json`: one object per run, the same keys for every "
            "task kind; kind-only data sits under `details`.", **schema}


def run_check(spec: Spec, source: str, variants: int = 1, seed: int = 0, min_gap: float = 0.0,
              paths: int = SAMPLES, budget: int = NODES, workers: int = 1, scheduler: str | None = None,
              progress: bool | None = None, listed: Sequence[tuple[Spec, int, str]] | None = None) -> CheckRun:
    """Compile and analyse variants ``seed … seed+variants−1`` (in ``workers`` processes, or on a Dask
    ``scheduler``; the reports are the same wherever they run), or the ``listed`` variants of a manifest
    (spec with its overrides, seed, fingerprint)."""
    jobs: list[tuple[tuple[str, str], int, float, int, int, str | None]]
    if listed is None:
        text = spec_text(spec)
        jobs = [(text, s, min_gap, paths, budget, None) for s in range(seed, seed + variants)]
    else:
        jobs = [(spec_text(one), s, min_gap, paths, budget, fp) for one, s, fp in listed]
        variants = len(jobs)
    where = runner(workers, scheduler)
    try:
        with Progress(variants, f"checking {spec.name}", quiet=progress is False or variants == 1) as bar:
            reports = where.map(_check_job, jobs, bar.update)
    except BaseException:
        if isinstance(where, (Pool, Dask)):
            where.close(wait=False)
        raise
    where.close()
    return CheckRun(source=source, spec=spec, reports=reports, min_gap=min_gap)


def _check_job(job: tuple[tuple[str, str], int, float, int, int, str | None]) -> Report:
    """One variant's report (runs wherever the runner sends it)."""
    text, seed, min_gap, paths, budget, fingerprint = job
    return check_variant(spec_from_text(*text), seed, min_gap, paths, budget, fingerprint)


def _baseline_rows(baselines: dict[str, Baseline]) -> list[str]:
    width = max(len(name) for name in baselines)
    rows = [f"    {'baseline':<{width}} {'success':>15} {'return':>17}  method"]
    for name, b in baselines.items():
        if b.success_rate is None or b.mean_return is None:
            rows.append(f"    {name:<{width}} {'n/a':>15} {'n/a':>17}  {b.method}")
        else:
            rows.append(f"    {name:<{width}} {b.success_rate.text(3):>15} {b.mean_return.text(4):>17}  "
                        f"{b.method}{_bounds(b)}")
    return rows


def _bounds(b: Baseline) -> str:
    """The best return of a searched class as an interval, where it is not exact."""
    low, high = b.interval
    if high is None:
        return f" (the best found: return ≥ {low:.4f})"
    return "" if high - low <= TOLERANCE else f" (best return in [{low:.4f}, {high:.4f}])"


def _status(verdict: Verdict) -> str:
    return {"pass": "pass", "fail": "FAIL", "undecided": "UNDECIDED", "n/a": "n/a "}[verdict]


def _hidden_words(report: Report) -> str:
    hidden = report.hidden
    if hidden["kind"] == "enumerated":
        return f"{hidden['count']} {hidden['name']} values, all enumerated: figures are exact expectations"
    return (f"{hidden['count']} {hidden['name']}s drawn from variant seed {hidden['seed']}: figures are exact on "
            "each and shown as mean ± standard error")


def format_text(run: CheckRun) -> str:
    """A readable table per variant, then the summary and the verdict."""
    lines = [f"{run.source}: {run.spec.name}, {len(run.reports)} variant(s)"]
    for r in run.reports:
        params = " ".join(f"{k}={v}" for k, v in r.params.items())
        lay = r.layout
        goals = f", start to goals {', '.join(map(str, lay['start_to_goal']))} steps" if lay["start_to_goal"] else ""
        lines += ["", f"  {r.variant_id}  {params}  states={r.num_states}  slack={r.slack}",
                  f"    layout: {lay['cells']} cells, {lay['dead_ends']} dead ends, {lay['loops']} loops{goals}",
                  f"    hidden: {_hidden_words(r)}"]
        lines += [f"    {_status(c.verdict)}  {c.name:<14} {c.reason}" for c in r.checks]
        level = r.chance_level
        lines.append(f"    chance level: {level['lower']:.4f}" + ("" if level["upper"] - level["lower"] <= TOLERANCE else
                     f" to {level['upper']:.4f}") + f", reached by a {level['reached_by']} memoryless policy")
        lines += r.details.text_lines() if r.details is not None else []
        lines += _baseline_rows(r.baselines)
    summary, stats, details = run.summary(), run.statistics(), run.details()
    failed = [r.variant_id for r in run.reports if not r.ok]
    lines += ["", f"summary over {len(run.reports)} variant(s) (mean of each variant's figure):"]
    lines += _baseline_rows(summary)
    gap = stats["memory_gap"]
    lines.append(f"    memory gap (optimal − chance): mean {gap['mean']:.4f}, min {gap['min']:.4f}, "
                 f"max {gap['max']:.4f}")
    spreads: dict[str, SpreadJSON | None] = {**details, "step_limit_slack": stats["step_limit_slack"]}
    for key, s in spreads.items():
        if s is not None:
            lines.append(f"    {key.replace('step_limit', 'step-limit').replace('_', ' ')}: min {s['min']:g}, "
                         f"median {s['median']:g}, max {s['max']:g} steps")
    width = max(len(name) for name in summary)
    lines += [""] + [f"  {name:<{width}} = {b.policy_class}" + (f"; {b.method_detail}" if b.method_detail and
                                                              b.method != "exact" else "")
                     for name, b in summary.items()]
    lines += ["  methods: exact = computed on the compiled model (for the best of a class: optimality proven); "
              "per path = on each sampled path's model; bounded = the best policy found within --chance-budget, "
              "with a certified upper bound; search lower bound = the best policy a local search found, evaluated "
              "exactly, with no upper bound",
              "", "ok" if run.ok else f"FAILED: {', '.join(failed)}"]
    return "\n".join(lines)
