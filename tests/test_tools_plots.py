"""Plots: the numbers a sweep plot or a strip chart draws equal the manifest's or the check's figures
(the manifest and `check --json` are the reference), the picture draws those numbers, and a run
without matplotlib is refused before it starts."""

from __future__ import annotations

import json
import statistics
from pathlib import Path

import pytest
import yaml
from click.testing import CliRunner

import taskgen
from taskgen.cli import cli
from taskgen.tools import plots
from taskgen.tools.variants import SuiteRequest, build_suite

pytest.importorskip("matplotlib")

LANTERN = str(taskgen.bundled_specs()["lantern-hall"])
SWEEP = Path(__file__).resolve().parents[1] / "gallery" / "sweeps" / "lantern-hall-length"


def _expected(manifest: dict, key: str) -> dict:
    """Each baseline's mean, minimum and maximum of the variants' mean returns at each swept value, read
    straight from the manifest's entries (statistics.fmean, min, max)."""
    out: dict = {}
    for x in manifest["request"]["sweeps"][key]:
        here = [v for v in manifest["variants"] if v["overrides"][key] == x]
        for name in ("optimal", "chance", "cue_blind", "random"):
            returns = [v["baselines"][name]["mean_return"]["mean"] for v in here]
            line = out.setdefault(name, {"mean": [], "low": [], "high": []})
            line["mean"].append(statistics.fmean(returns))
            line["low"].append(min(returns))
            line["high"].append(max(returns))
    return out


def _assert_lines(data: dict, expected: dict) -> None:
    assert set(data["lines"]) == set(expected)
    for name, line in expected.items():
        for part in ("mean", "low", "high"):
            assert data["lines"][name][part] == pytest.approx(line[part], abs=1e-12), (name, part)


def test_a_sweep_plot_draws_the_manifest_numbers(tmp_path):
    """`variants --sweep layout.corridor.length=... --plot` writes a PNG whose embedded numbers are the
    manifest's per-point means and spreads of each baseline, and whose drawn lines (matplotlib's Line2D
    data) are those numbers; the chance band runs from the chance level's lower to its upper end."""
    result = CliRunner().invoke(cli, ["variants", LANTERN, "--out", str(tmp_path), "--split", "train=3",
                                      "--split", "test=1", "--sweep", "layout.corridor.length=4,9,14", "-q", "--plot"])
    assert result.exit_code == 0, result.output
    manifest = yaml.safe_load((tmp_path / "manifest.yaml").read_text())
    data = plots.read_data(tmp_path / "sweep-layout.corridor.length.png")
    assert data["x"] == [4, 9, 14] and data["variants"] == [4, 4, 4]
    _assert_lines(data, _expected(manifest, "layout.corridor.length"))
    for i, x in enumerate(data["x"]):
        here = [v for v in manifest["variants"] if v["overrides"]["layout.corridor.length"] == x]
        assert data["chance_interval"]["lower"][i] == pytest.approx(statistics.fmean(v["chance_level"]["lower"]
                                                                                    for v in here))
    figure = plots.sweep_figure(data)
    drawn = {line.get_label(): list(line.get_ydata()) for line in figure.axes[0].lines}
    for name, line in data["lines"].items():
        assert drawn[plots.LABELS[name]] == pytest.approx(line["mean"])
    # the memory gap shows: optimal above chance at every point
    assert all(o > c for o, c in zip(data["lines"]["optimal"]["mean"], data["lines"]["chance"]["mean"]))


def test_the_committed_sweep_plot_matches_its_manifest():
    """The sweep plot shown in the README carries the numbers of the manifest committed beside it."""
    manifest = yaml.safe_load((SWEEP / "manifest.yaml").read_text())
    data = plots.read_data(SWEEP / "sweep-layout.corridor.length.png")
    assert data == plots.sweep_data(manifest, "layout.corridor.length")
    _assert_lines(data, _expected(manifest, "layout.corridor.length"))


def test_a_check_strip_chart_draws_each_variants_memory_gap_and_recall_distance(tmp_path):
    """`check -n 4 --plot FILE` draws, per variant, the memory gap's mean and range and the recall distance
    that `check --json` reports for it, in the check's order."""
    out = tmp_path / "gap.png"
    result = CliRunner().invoke(cli, ["check", LANTERN, "-n", "4", "-q", "--json", "--plot", str(out)])
    assert result.exit_code == 0, result.output
    report = json.loads(result.stdout)
    data = plots.read_data(out)
    assert data["variants"] == [v["variant_id"] for v in report["variants"]]
    for i, v in enumerate(report["variants"]):
        gap = v["memory_gap"]
        assert (data["memory_gap"]["mean"][i], data["memory_gap"]["low"][i], data["memory_gap"]["high"][i]) == \
            pytest.approx((gap["mean"], gap["minimum"], gap["maximum"]))
        distances = [d for d in v["details"]["recall_distance"].values() if d is not None]
        assert data["recall_distance"]["mean"][i] == pytest.approx(statistics.fmean(distances))
        assert data["recall_distance"]["high"][i] == max(distances)
    figure = plots.strip_figure(data)
    assert len(figure.axes) == 2


def test_a_field_strip_chart_has_no_recall_panel():
    """A field has no cue, so its strip chart draws the memory gap alone; a cue value without a recall
    distance (hedge-chimes' variant 0 has two) is left out of its variant's range."""
    from taskgen.tools.check import check_variant
    report = check_variant(taskgen.load_spec(taskgen.bundled_specs()["marsh-stones"]), 0, paths=8)
    data = plots.strip_data(plots.report_rows([report]), "marsh-stones")
    assert data["recall_distance"] is None and len(plots.strip_figure(data).axes) == 1
    report = check_variant(taskgen.load_spec(taskgen.bundled_specs()["hedge-chimes"]), 0)
    distances = [d for d in report.details.to_dict()["recall_distance"].values() if d is not None]
    data = plots.strip_data(plots.report_rows([report]), "hedge-chimes")
    assert len(distances) < len(report.details.to_dict()["recall_distance"])
    assert (data["recall_distance"]["low"][0], data["recall_distance"]["high"][0]) == (min(distances), max(distances))
    assert len(plots.strip_figure(data).axes) == 2


def test_plots_without_matplotlib_are_refused_before_the_run(tmp_path, monkeypatch):
    """Without matplotlib, `variants --plot` and `check --plot` exit 2 naming the extra, and nothing is
    written; a sweep plot of a suite without sweeps, or a strip chart of a fast suite, is a clear error."""
    from taskgen.cli import main
    import sys

    monkeypatch.setattr(plots, "available", lambda: False)
    for args in (["variants", LANTERN, "--out", str(tmp_path / "s"), "--split", "train=1", "--plot"],
                 ["check", LANTERN, "--plot", str(tmp_path / "c.png")]):
        monkeypatch.setattr(sys, "argv", ["taskgen", *args])
        with pytest.raises(SystemExit) as stop:
            main()
        assert stop.value.code == 2
    assert not (tmp_path / "s" / "manifest.yaml").exists() and not (tmp_path / "c.png").exists()
    manifest = build_suite(taskgen.load_spec(LANTERN), SuiteRequest(splits=(("train", 1),)))
    with pytest.raises(plots.PlotError, match="no sweep"):
        plots.sweep_plots(manifest, tmp_path)
    fast = build_suite(taskgen.load_spec(LANTERN), SuiteRequest(splits=(("train", 1),), baselines="fast"))
    with pytest.raises(plots.PlotError, match="no memory gaps"):
        plots.entry_rows(fast["variants"])
