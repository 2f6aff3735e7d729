"""`taskgen check` on a hidden-path field: per variant, figures exact per path and averaged
over sampled paths (mean ± standard error)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from tqdm import tqdm

from ..analysis.fields import FieldReport, PathAverage, analyse_field
from ..envs import build_field
from ..render.field import marks_seen, view_classes
from ..spec import Spec

FIELD_BASELINES = ("optimal", "explorer", "chance", "random")


def check_field_variant(spec: Spec, seed: int, paths: int = 64, min_gap: float = 0.0) -> FieldReport:
    """Compile one field variant and analyse it on what its agent really observes."""
    model, observations, overlay = build_field(spec, seed)
    return analyse_field(model, seed, view_classes(observations, overlay), marks_seen(overlay),
                         paths=paths, min_gap=min_gap)


@dataclass
class FieldCheckRun:
    """The reports of one `taskgen check` run of a field spec, in seed order."""

    source: str
    spec: Spec
    reports: list[FieldReport]
    min_gap: float = 0.0

    @property
    def ok(self) -> bool:
        """True when no check of any variant failed."""
        return all(r.ok for r in self.reports)

    def to_dict(self) -> dict[str, Any]:
        """The `--json` object: ok and a row per variant."""
        return {"ok": self.ok, "spec": self.spec.name, "source": self.source, "min_gap": self.min_gap,
                "kind": "field", "variants": [r.to_dict() for r in self.reports]}


def run_field_check(spec: Spec, source: str, variants: int = 1, seed: int = 0, min_gap: float = 0.0,
                    paths: int = 64) -> FieldCheckRun:
    """Compile and analyse field variants ``seed … seed+variants−1``."""
    reports = [check_field_variant(spec, s, paths, min_gap)
               for s in tqdm(range(seed, seed + variants), desc=f"checking {spec.name}", unit="variant",
                             disable=None if variants > 1 else True, leave=False)]
    return FieldCheckRun(source=source, spec=spec, reports=reports, min_gap=min_gap)


def _figure(a: PathAverage, digits: int) -> str:
    return f"{a.mean:.{digits}f} ± {a.standard_error:.{digits}f}"


def format_field_text(run: FieldCheckRun) -> str:
    """A readable table per variant and the verdict."""
    lines = [f"{run.source}: {run.spec.name}, {len(run.reports)} field variant(s)"]
    status = {True: "pass", False: "FAIL", None: "n/a "}
    for r in run.reports:
        params = " ".join(f"{k}={v}" for k, v in r.params.items())
        lines += ["", f"  {r.variant_id}  {params}  states={r.num_states}",
                  f"    {r.paths} sampled paths: {_figure(r.path_cells, 1)} cells, shortest crossing "
                  f"{_figure(r.shortest, 1)} steps (min {r.shortest.minimum:g}, max {r.shortest.maximum:g})"]
        for c in r.checks:
            lines.append(f"    {status[c.passed]}  {c.name:<14} {c.reason}")
        lines.append(f"    {'baseline':<10} {'success':>15} {'return':>17}  method")
        for name in FIELD_BASELINES:
            b = r.baselines[name]
            lines.append(f"    {name:<10} {_figure(b.success_rate, 3):>15} {_figure(b.mean_return, 4):>17}  {b.method}")
        falls = r.baselines["random"].falls
        lines.append(f"    random agent's expected falls: {_figure(falls, 2)} per episode")
    first = run.reports[0].baselines
    lines += ["", "  figures: mean ± standard error over the sampled paths, exact on each path",
              "  optimal  = " + first["optimal"].policy_class,
              "  explorer = " + first["explorer"].policy_class,
              "  chance   = " + first["chance"].policy_class + "; " + first["chance"].method_detail,
              "", "ok" if run.ok else "FAILED: " + ", ".join(r.variant_id for r in run.reports if not r.ok)]
    return "\n".join(lines)
