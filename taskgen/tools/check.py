"""`taskgen check`: compile N variants of a spec, analyse each, and summarise."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from tqdm import tqdm

from ..analysis import VariantReport, analyse
from ..model import compile_variant
from ..spec import Spec
from ..variant import make_variant

BASELINE_ORDER = ("optimal", "chance", "random")


@dataclass
class CheckRun:
    """The reports of one `taskgen check` run, in seed order."""

    source: str
    spec: Spec
    reports: list[VariantReport]

    @property
    def ok(self) -> bool:
        """True when every check of every variant passed."""
        return all(r.ok for r in self.reports)

    def summary(self) -> dict[str, dict[str, Any]]:
        """Each baseline averaged over the variants (variants weigh equally)."""
        out = {}
        for name in BASELINE_ORDER:
            figures = [r.baselines[name] for r in self.reports]
            methods = sorted({b.method for b in figures})
            out[name] = {
                "success_rate": sum(b.success_rate for b in figures) / len(figures),
                "mean_return": sum(b.mean_return for b in figures) / len(figures),
                "method": methods[0] if len(methods) == 1 else "+".join(methods),
                "policy_class": figures[0].policy_class,
            }
        return out

    def to_dict(self) -> dict[str, Any]:
        """The `--json` object: ok, averaged baselines and a row per variant."""
        return {"ok": self.ok, "spec": self.spec.name, "source": self.source,
                "baselines": self.summary(), "variants": [r.to_dict() for r in self.reports]}


def run_check(spec: Spec, source: str, variants: int = 1, seed: int = 0) -> CheckRun:
    """Compile and analyse variants ``seed … seed+variants−1``."""
    reports = []
    for s in tqdm(range(seed, seed + variants), desc=f"checking {spec.name}", unit="variant",
                  disable=None if variants > 1 else True, leave=False):
        reports.append(analyse(compile_variant(make_variant(spec, s))))
    return CheckRun(source=source, spec=spec, reports=reports)


def _baseline_rows(baselines: dict[str, dict[str, Any]]) -> list[str]:
    rows = [f"    {'baseline':<9} {'success':>8} {'return':>9}  method"]
    for name in BASELINE_ORDER:
        b = baselines[name]
        rows.append(f"    {name:<9} {b['success_rate']:>8.3f} {b['mean_return']:>9.4f}  {b['method']}")
    return rows


def format_text(run: CheckRun) -> str:
    """A readable table per variant, then the summary and the verdict."""
    lines = [f"{run.source}: {run.spec.name}, {len(run.reports)} variant(s)"]
    for r in run.reports:
        params = " ".join(f"{k}={v}" for k, v in r.params.items())
        lines += ["", f"  {r.variant_id}  {params}  states={r.num_states}"]
        for c in r.checks:
            lines.append(f"    {'pass' if c.ok else 'FAIL'}  {c.name:<11} {c.detail}")
        lines += _baseline_rows({k: b.to_dict() for k, b in r.baselines.items()})
    summary = run.summary()
    failed = [r.variant_id for r in run.reports if not r.ok]
    lines += ["", f"summary over {len(run.reports)} variant(s) (mean of each variant's exact figure):"]
    lines += _baseline_rows(summary)
    lines += ["", "  chance = " + summary["chance"]["policy_class"],
              "", "ok" if run.ok else f"FAILED: {', '.join(failed)}"]
    return "\n".join(lines)
