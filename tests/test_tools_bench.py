"""`taskgen bench`: every figure and ratio is reported, per spec and for several specs in one table,
with a header that says what each spec observes. No timing is asserted here (speed is measured by
the bench itself, never by a test)."""

from __future__ import annotations

import json

from click.testing import CliRunner

import taskgen
from taskgen.cli import cli
from taskgen.tools.bench import DISTRACTORS, SUMMARY, describe, format_all, run_bench


def _load(name, **overrides):
    return taskgen.load_spec_text(open(taskgen.bundled_specs()[name]).read(), **overrides)


def test_a_bench_reports_every_ratio_and_what_the_spec_observes():
    """A cue task's bench has all nine runtimes, the distractor runs included, and every ratio of the
    summary; the header reads the spec's modalities, noise and distractors (common practice)."""
    spec = _load("seed-cache", observation__pixels={"height": 16, "width": 16},
                 observation__distractors={"decoy_probability": 0.1})
    result = run_bench(spec, num_envs=4, budget=0.02)
    assert {name for _, name in SUMMARY} <= set(result["ratios"]) | {"taskgen single env", "taskgen batched env"}
    assert all(value > 0 for value in result["ratios"].values())
    assert result["observes"] == describe(spec)
    assert result["observes"]["modalities"] == ["vector", "pixels"]
    assert result["observes"]["noise"] == ["8 noise bits (flip 0.2)"]        # as specs/seed-cache.yaml says
    assert result["observes"]["distractors"] == ["decoys 0.1"]
    assert result["distractors_on"]["decoy_probability"] == DISTRACTORS["decoy_probability"]
    assert result["distractors_on"]["lure_probability"] == DISTRACTORS["lure_probability"]


def test_a_field_bench_has_no_lures_and_no_first_person_run():
    """Fields refuse lures and first-person views: the bench switches on decoy marks only and leaves
    the first-person ratio out."""
    result = run_bench(_load("marsh-stones"), num_envs=4, budget=0.02)
    assert result["distractors_on"]["lure_probability"] == 0.0
    assert "first-person / SyncVectorEnv(FrozenLake)" not in result["ratios"]
    assert result["observes"]["kind"] == "field"


def test_several_specs_make_one_markdown_table_with_a_row_each():
    """--all and several SPECS give one row per spec, each with as many cells as the header, a line per
    spec on what it observes, and the note that ratios carry over and absolute numbers do not."""
    results = [run_bench(_load(name), num_envs=4, budget=0.02) for name in ("lantern-hall", "marsh-stones")]
    text = format_all(results, "a title")
    rows = [line for line in text.splitlines() if line.startswith("| `")]
    header = next(line for line in text.splitlines() if line.startswith("| spec |"))
    assert [row.split(" | ")[0] for row in rows] == ["| `lantern-hall`", "| `marsh-stones`"]
    assert all(row.count("|") == header.count("|") for row in rows)
    assert "- `lantern-hall`: cue; vector" in text and "- `marsh-stones`: field; vector" in text
    assert "Ratios carry over between machines, absolute numbers do not." in text
    assert "| – |" in rows[1]       # a field has no first-person figure


def test_the_cli_takes_specs_or_all_and_writes_markdown_or_json(tmp_path):
    """Without SPECS or --all, or with both, the command refuses with exit 2; --out writes Markdown to a
    .md file and JSON (one object per spec) otherwise (common practice)."""
    runner = CliRunner()
    assert runner.invoke(cli, ["bench"]).exit_code == 2
    assert runner.invoke(cli, ["bench", "--all", str(taskgen.bundled_specs()["lantern-hall"])]).exit_code == 2
    specs = [str(taskgen.bundled_specs()[name]) for name in ("lantern-hall", "signal-tower")]
    md, js = tmp_path / "r.md", tmp_path / "r.json"
    for out in (md, js):
        result = runner.invoke(cli, ["bench", *specs, "-n", "4", "--seconds", "0.05", "--out", str(out)])
        assert result.exit_code == 0, result.output
    assert md.read_text().startswith("# taskgen bench, ") and "| `signal-tower` |" in md.read_text()
    assert [r["spec"] for r in json.loads(js.read_text())] == ["lantern-hall", "signal-tower"]
