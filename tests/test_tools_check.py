"""`taskgen check`: one JSON contract for every kind, published as a JSON Schema and held to it."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import jsonschema
import pytest

import taskgen
from taskgen.tools.check import report_schema, run_check

DOCS = Path(__file__).resolve().parents[1] / "docs"
ONE_OF_EACH = {"corridor": "lantern-hall", "maze": "orchard-hives", "field": "marsh-stones"}


def _report(name: str, variants: int = 1) -> dict:
    """`taskgen check --json` of a bundled spec, as the JSON text reads back (in process, 16 paths)."""
    path = taskgen.bundled_specs()[name]
    run = run_check(taskgen.load_spec(path), str(path), variants=variants, paths=16)
    return json.loads(json.dumps(run.to_dict()))


def test_the_report_schema_is_valid_draft_2020_12_and_committed():
    """The schema passes the metaschema check (jsonschema.Draft202012Validator.check_schema) and
    docs/taskgen.report.schema.json is `taskgen schema --report` (regenerate with the README command)."""
    schema = report_schema()
    jsonschema.Draft202012Validator.check_schema(schema)
    out = subprocess.run([sys.executable, "-m", "taskgen.cli", "schema", "--report"], capture_output=True, text=True,
                         check=True)
    assert json.loads(out.stdout) == schema
    assert (DOCS / "taskgen.report.schema.json").read_text() == out.stdout


@pytest.mark.parametrize("name", sorted(taskgen.bundled_specs()))
def test_check_json_of_every_bundled_spec_validates_against_the_schema(name):
    """Real output of every bundled spec is valid under the published schema (jsonschema)."""
    jsonschema.Draft202012Validator(report_schema()).validate(_report(name))


def test_a_corridor_a_maze_and_a_field_report_the_same_keys():
    """Top-level keys, variant-row keys, the baselines every kind has and the figure keys are the
    same for a corridor, a maze and a field, so one script reads all three (common practice)."""
    reports = {family: _report(name, variants=1) for family, name in ONE_OF_EACH.items()}
    assert {family: r["kind"] for family, r in reports.items()} == {"corridor": "cue", "maze": "cue",
                                                                    "field": "field"}
    tops = {frozenset(r) for r in reports.values()}
    rows = {frozenset(r["variants"][0]) for r in reports.values()}
    assert len(tops) == 1 and len(rows) == 1
    for r in reports.values():
        for where in (r, r["variants"][0]):
            chance = where["baselines"]["chance"]
            assert {"optimal", "chance", "random"} <= set(where["baselines"])
            assert set(chance["success_rate"]) == {"mean", "standard_error", "minimum", "maximum", "method",
                                                   "policy_class"}
            assert 0.0 <= chance["success_rate"]["mean"] <= 1.0


def test_figures_of_enumerated_cues_are_exact_and_of_sampled_paths_carry_a_standard_error():
    """A cue task covers every cue value (standard error 0); a field covers a sample of paths (the
    standard error of a sample mean, sd / √n, is positive where the paths differ; common practice)."""
    cue, field = _report("lantern-hall", 1)["variants"][0], _report("marsh-stones", 1)["variants"][0]
    assert cue["hidden"] == {"kind": "enumerated", "name": "cue", "count": 2, "seed": None}
    assert field["hidden"] == {"kind": "sampled", "name": "sampled path", "count": 16, "seed": 0}
    assert all(b["mean_return"]["standard_error"] == 0 for b in cue["baselines"].values() if b["mean_return"])
    assert field["baselines"]["optimal"]["mean_return"]["standard_error"] > 0


def test_a_report_of_a_field_converts_to_json_and_analyse_reads_a_field_model():
    """`run_check(field).to_dict()` and `taskgen.analyse(field model)` work as for cue tasks
    (common practice: one contract)."""
    spec = taskgen.load_spec(taskgen.bundled_specs()["marsh-stones"])
    json.dumps(run_check(spec, "marsh", paths=4).to_dict())
    report = taskgen.analyse(taskgen.compile_variant(taskgen.make_variant(spec), samples=4))
    assert report.kind == "field" and report.hidden["count"] == 4
