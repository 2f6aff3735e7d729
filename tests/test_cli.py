"""The command line: exit codes, JSON shape, located errors without tracebacks."""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

import taskgen

from conftest import corridor_spec_text


def _run(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "taskgen.cli", *args], capture_output=True, text=True)


def test_check_passes_on_every_example(example_spec):
    """`taskgen check` exits 0 on each example (its first variant, as the README's command runs it)
    and ends with 'ok'."""
    out = _run("check", example_spec)
    assert out.returncode == 0, out.stdout + out.stderr
    assert out.stdout.rstrip().endswith("ok")


def test_check_json_has_the_documented_shape():
    """--json prints one object: ok, baselines (optimal/chance/random with success_rate,
    mean_return, method) and a row per variant."""
    path = str(taskgen.bundled_specs()["lantern-hall"])
    out = _run("check", path, "--variants", "2", "--seed", "4", "--json")
    data = json.loads(out.stdout)
    assert data["ok"] is True and len(data["variants"]) == 2
    assert [v["variant_id"] for v in data["variants"]] == ["lantern-hall-s4", "lantern-hall-s5"]
    for name in ("optimal", "chance", "cue_blind", "random"):
        assert {"success_rate", "mean_return", "method"} <= set(data["baselines"][name])
        assert data["baselines"][name]["method"] == "exact"       # chance: proven, not searched
    stochastic = data["baselines"]["chance_stochastic"]
    assert stochastic["method"] == "search lower bound" and stochastic["upper"] is None
    for row in data["variants"]:
        chance = row["baselines"]["chance"]
        assert chance["lower"] == chance["upper"] and chance["solver"]["proven"] is True
        assert row["chance_level"]["reached_by"] in {"deterministic", "stochastic"}
    assert data["baselines"]["chance"]["success_rate"]["mean"] == pytest.approx(0.5)


def test_failed_check_exits_1_and_names_the_variant_and_cue(tmp_path):
    """A step limit below the shortest solution fails solvability, naming variant and cue."""
    spec = tmp_path / "short.yaml"
    spec.write_text(corridor_spec_text(length=6, episode={"max_steps": 4}))
    out = _run("check", str(spec), "--json")
    assert out.returncode == 1
    checks = {c["name"]: c for c in json.loads(out.stdout)["variants"][0]["checks"]}
    assert checks["solvable"]["passed"] is False
    assert checks["solvable"]["reason"].startswith("test-corridor-s0: cue 0: shortest solution 9 steps "
                                                  "exceeds the step limit 4")


@pytest.mark.parametrize("text, message", [
    ("format_version: 1\nname: x\nlayout: {corridor: {length: -3}}\ncue: {values: 2}\n",
     "error: {path}:3:29: layout.corridor.length: expected an integer ≥ 0, got -3"),
    ("name: [\n", "error: {path}:2:1: expected valid YAML"),
])
def test_bad_spec_exits_2_with_a_located_message(tmp_path, text, message):
    """A bad spec prints the located message on stderr, exits 2 and shows no traceback."""
    spec = tmp_path / "bad.yaml"
    spec.write_text(text)
    out = _run("check", str(spec))
    assert out.returncode == 2
    assert out.stderr.startswith(message.format(path=spec))
    assert "Traceback" not in out.stderr and out.stdout == ""


def test_usage_errors_exit_2():
    """A wrong option value is a usage error (exit 2), not a crash."""
    out = _run("check", "x.yaml", "--variants", "0")
    assert out.returncode == 2 and "Traceback" not in out.stderr


def test_schema_and_reference_commands_print_and_write(tmp_path):
    """`taskgen schema` prints the JSON Schema; `--out` writes the same text to a file."""
    from taskgen.spec.reference import json_schema_text, reference_markdown

    out = _run("schema")
    assert out.returncode == 0 and out.stdout == json_schema_text()
    target = tmp_path / "ref" / "spec-reference.md"
    out = _run("reference", "--out", str(target))
    assert out.returncode == 0 and target.read_text() == reference_markdown()
    assert [p.name for p in target.parent.iterdir()] == ["spec-reference.md"]  # no temporary left


def test_check_on_a_field_prints_per_path_figures_and_json():
    """On a field spec, --json gives each variant's baselines as mean, standard error, minimum and
    maximum over --paths sampled paths, the checks, and the random agent's expected missteps."""
    path = str(taskgen.bundled_specs()["marsh-stones"])
    out = _run("check", path, "--paths", "8", "--json")
    assert out.returncode == 0, out.stderr
    data = json.loads(out.stdout)
    assert data["kind"] == "field" and data["ok"] is True
    row = data["variants"][0]
    assert row["hidden"]["count"] == 8 and [c["name"] for c in row["checks"]] == ["solvable", "memory gap"]
    assert set(row["baselines"]) == {"optimal", "explorer", "chance", "chance_stochastic", "random"}
    figure = row["baselines"]["optimal"]["mean_return"]
    assert set(figure) == {"mean", "standard_error", "minimum", "maximum", "method", "policy_class"}
    assert row["details"]["random_missteps"]["mean"] > 0
    text = _run("check", path, "--paths", "8")
    assert "± " in text.stdout and "expected missteps" in text.stdout and text.stdout.rstrip().endswith("ok")


def test_a_chance_budget_too_small_to_decide_exits_1_with_an_interval(tmp_path):
    """With --chance-budget 1 the chance level of a three-lane hall is an interval (bounded) and a check
    it cannot decide is undecided: exit 1, the verdict and the interval in the JSON (the meaning of a
    certified bound; common practice)."""
    spec = tmp_path / "hall.yaml"
    spec.write_text(corridor_spec_text(length=1, arm_length=1, values=4,
                                       rewards={"correct": 1.0, "wrong": -1.0, "step": -0.01, "timeout": -1.0},
                                       episode={"max_steps": 8}).replace("arm_length:", "width: 3\n    arm_length:"))
    out = _run("check", str(spec), "--chance-budget", "1", "--json")
    assert out.returncode == 1, out.stderr
    row = json.loads(out.stdout)["variants"][0]
    chance = row["baselines"]["chance"]
    assert chance["method"] == "bounded" and chance["upper"] > chance["lower"]
    assert chance["solver"]["proven"] is False and chance["solver"]["nodes"] == 1
    assert "undecided" in {c["verdict"] for c in row["checks"]}
    decided = json.loads(_run("check", str(spec), "--json").stdout)["variants"][0]   # the default budget decides
    assert "undecided" not in {c["verdict"] for c in decided["checks"]}
    assert decided["baselines"]["chance"]["method"] == "exact"


def test_set_overrides_a_spec_field_on_check_variants_and_gallery(tmp_path):
    """--set KEY=VALUE (dotted key, YAML value) changes the spec for one run: check reports the overridden
    variant under an id of its own; a suite written with --set loads with the same ids; a gallery goes to a
    folder of its own; a bad key or value is a located error (exit 2)."""
    path = str(taskgen.bundled_specs()["lantern-hall"])
    out = _run("check", path, "--set", "layout.corridor.length=3", "--set", "episode.max_steps=30", "--json")
    assert out.returncode == 0, out.stderr
    data = json.loads(out.stdout)
    (variant,) = data["variants"]
    assert variant["params"]["length"] == 3 and variant["variant_id"].startswith("lantern-hall+")
    suite = _run("variants", path, "--out", str(tmp_path / "suite"), "--split", "train=2",
                 "--set", "layout.corridor.length={range: [2, 4]}")
    assert suite.returncode == 0, suite.stderr
    manifest = tmp_path / "suite" / "manifest.yaml"
    env = taskgen.make(str(manifest), split="train", index=0)
    _, info = env.reset(seed=0)
    assert info["variant_id"].startswith("lantern-hall+") and env.model.params.length in (2, 3, 4)
    assert info["variant_id"] in manifest.read_text()
    shown = _run("gallery", path, "--out", str(tmp_path / "g"), "-n", "1", "--set", "layout.corridor.length=2")
    assert shown.returncode == 0, shown.stderr
    (folder,) = [p for p in (tmp_path / "g").iterdir() if p.is_dir()]
    assert folder.name.startswith("lantern-hall+") and "layout.corridor.length=2" in (folder / "index.md").read_text()
    for bad, message in (("layout.corridor.length=-1", "layout.corridor.length: expected an integer ≥ 0, got -1"),
                         ("layout.corridor.lenght=3", "did you mean 'length'"),
                         ("layout.corridor.length", "expected KEY=VALUE"),
                         ("layout.corridor.length=[1,", "--set layout.corridor.length:1:")):
        refused = _run("check", path, "--set", bad)
        assert refused.returncode == 2 and message in refused.stderr and "Traceback" not in refused.stderr, \
            (bad, refused.stderr)


def test_environment_caps_are_read_as_options_never_at_import(tmp_path):
    """TASKGEN_MAX_WORK / TASKGEN_MAX_BYTES set to inf, nan or text leave --help and `import taskgen`
    working; a command that uses the caps exits 2 naming the variable; --max-work nan is refused so too."""
    import os

    path = str(taskgen.bundled_specs()["lantern-hall"])
    for value in ("inf", "abc"):
        env = {**os.environ, "TASKGEN_MAX_WORK": value}
        run = lambda *args: subprocess.run([sys.executable, *args], capture_output=True, text=True, env=env)  # noqa: E731
        assert run("-m", "taskgen.cli", "--help").returncode == 0
        assert run("-c", "import taskgen").returncode == 0
        out = run("-m", "taskgen.cli", "check", path)
        assert out.returncode == 2 and f"TASKGEN_MAX_WORK: expected a finite number ≥ 1, got '{value}'" in out.stderr
    out = _run("check", path, "--max-work", "nan")
    assert out.returncode == 2 and "--max-work: expected a finite number ≥ 1, got 'nan'" in out.stderr


def test_variants_refuses_to_overwrite_and_bounds_workers(tmp_path):
    """A second `variants` into the same folder is refused unless --force; --workers above the CPU count is
    refused unless --force; a split count in other digits ('²') is a usage error, not a crash."""
    import os

    path = str(taskgen.bundled_specs()["lantern-hall"])
    args = ("variants", path, "--out", str(tmp_path), "--split", "train=2")
    assert _run(*args).returncode == 0
    again = _run(*args)
    assert again.returncode == 2 and "manifest.yaml already exists" in again.stderr and "--force" in again.stderr
    assert _run(*args, "--force").returncode == 0
    many = _run(*args, "--force", "--workers", str((os.cpu_count() or 1) + 1))
    assert many.returncode == 0, many.stderr
    refused = _run("variants", path, "--out", str(tmp_path / "b"), "--workers", str((os.cpu_count() or 1) + 1))
    assert refused.returncode == 2 and "CPUs of this machine" in refused.stderr
    odd = _run("variants", path, "--out", str(tmp_path / "c"), "--split", "train=²")
    assert odd.returncode == 2 and "a split is name=count" in odd.stderr


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="reads worker processes from /proc")
def test_sigterm_stops_variants_and_its_workers(tmp_path):
    """SIGTERM to `variants --workers 2` ends it, no worker process survives it, and no temporary file or
    manifest is left in --out."""
    import signal
    import time
    from pathlib import Path

    path = str(taskgen.bundled_specs()["orchard-hives"])
    proc = subprocess.Popen([sys.executable, "-m", "taskgen.cli", "variants", path, "--out", str(tmp_path),
                             "--split", "train=400", "--workers", "2", "--force"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)

    def children():
        found = set()
        for task in Path(f"/proc/{proc.pid}/task").glob("*/children"):
            found |= {int(p) for p in task.read_text().split()}
        return found

    workers = set()
    for _ in range(600):                     # wait until the pool's workers exist (at most a minute)
        workers = children() if proc.poll() is None else set()
        if len(workers) >= 2 or proc.poll() is not None:
            break
        time.sleep(0.1)
    assert len(workers) >= 2 and proc.poll() is None, "the workers never started"
    proc.send_signal(signal.SIGTERM)
    proc.wait(timeout=30)
    alive = set(workers)
    for _ in range(100):
        alive = {pid for pid in alive if Path(f"/proc/{pid}").exists() and
                 "Z" not in (Path(f"/proc/{pid}/stat").read_text().split()[2:3] or ["Z"])}
        if not alive:
            break
        time.sleep(0.1)
    assert not alive, f"workers {alive} outlived their parent"
    assert proc.returncode != 0
    assert not list(tmp_path.glob("*.tmp")) and not list(tmp_path.glob(".*.tmp"))
    assert not (tmp_path / "manifest.yaml").exists()


def test_caps_are_checked_before_the_work_they_bound(tmp_path):
    """Each cap refuses from an estimate, before the work: a long step limit over few states (each step
    counted as at least 4,096 state-actions), a field's sampled paths (--paths), a batch's arrays
    (--num-envs) and a sweep's values; each refusal names the number, the cap and what raises it."""
    long_hall = tmp_path / "long.yaml"
    long_hall.write_text(corridor_spec_text(length=24, episode={"max_steps": 100_000}, name="long-hall"))
    out = _run("check", str(long_hall))
    assert out.returncode == 2 and "step limit 100000, each step counted as at least 4,096" in out.stderr
    field = tmp_path / "field.yaml"
    field.write_text("format_version: 1\nname: wide-field\nlayout: {field: {width: 31, height: 31}}\n")
    out = _run("check", str(field), "--paths", "100000")
    assert out.returncode == 2 and "100000 sampled paths" in out.stderr and "(--paths)" in out.stderr
    out = _run("bench", str(taskgen.bundled_specs()["lantern-hall"]), "--num-envs", "10000000")
    assert out.returncode == 2 and "a batch of 10,000,000 environments" in out.stderr and "--max-bytes" in out.stderr
    out = _run("variants", str(taskgen.bundled_specs()["lantern-hall"]), "--out", str(tmp_path / "s"),
               "--sweep", "layout.corridor.length=0:10000000")
    assert out.returncode == 2 and "10,000,001 values, more than the 10,000" in out.stderr


def test_a_fast_suite_gets_its_test_figures_later(tmp_path):
    """`variants --baselines fast`, then `check MANIFEST --split test --update`: the test split's entries
    become exactly those of a suite written with full baselines (the same objects, byte for byte), the
    train split keeps its fast figures, and `evaluate` can score the test split."""
    import yaml

    path = str(taskgen.bundled_specs()["lantern-hall"])
    for name, level in (("full", "full"), ("fast", "fast")):
        out = _run("variants", path, "--out", str(tmp_path / name), "--split", "train=3", "--split", "test=2",
                   "--baselines", level, "-q")
        assert out.returncode == 0, out.stderr
    fast = str(tmp_path / "fast" / "manifest.yaml")
    out = _run("check", fast, "--split", "test", "--update", "-q")
    assert out.returncode == 0 and "updated 2 variants of split test" in out.stderr, out.stderr
    full = yaml.safe_load((tmp_path / "full" / "manifest.yaml").read_text())
    updated = yaml.safe_load(open(fast).read())
    for a, b in zip(full["variants"], updated["variants"]):
        if a["split"] == "test":
            assert a == b
        else:
            assert set(b["baselines"]) == {"optimal", "random"}
    (tmp_path / "walk.py").write_text("import numpy as np\n"
                                      "def make(o, a):\n    return lambda obs: np.ones(obs.shape[0], dtype=int)\n")
    scored = subprocess.run([sys.executable, "-m", "taskgen.cli", "evaluate", fast, "--policy", "walk:make",
                             "--episodes", "3"], capture_output=True, text=True, cwd=tmp_path)
    assert scored.returncode == 0, scored.stderr
    assert _run("check", fast, "--update").returncode == 2
