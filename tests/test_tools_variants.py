"""Held-out suites: fingerprints, splits, sweeps, reproducible manifests and loading."""

from __future__ import annotations

import dataclasses
import subprocess
import sys

import gymnasium as gym
import jsonschema
import networkx as nx
import numpy as np
import pytest
import yaml

import taskgen
from taskgen import compile_variant, load_spec_text, make_variant
from taskgen.analysis.fingerprint import fingerprint
from taskgen.generate.maze import maze_layout
from taskgen.tools.variants import SuiteError, SuiteRequest, build_suite, manifest_text, write_manifest
from taskgen.kinds.cue import MazeParams
from taskgen.manifest import describe_space
from taskgen.variant import Variant

LANTERN = str(taskgen.bundled_specs()["lantern-hall"])


def _maze3_spec(**extra):
    return load_spec_text(yaml.safe_dump({
        "format_version": 1, "name": "maze-three",
        "layout": {"maze": {"width": 3, "height": 3, "start_cell": [0, 0], "goal_cells": [[2, 2], [0, 2]],
                            **extra}},
        "cue": {"values": 2}, "rewards": {"correct": 1.0, "wrong": -1.0, "timeout": -1.0}}))


def _permuted(model, rng):
    """The same model with its states renumbered at random."""
    perm = rng.permutation(model.num_states)          # new index of old state s is perm[s]
    inverse = np.argsort(perm)
    tables = dataclasses.replace(model.tables, next_state=perm[model.next_state[inverse]],
                                 **{name: getattr(model.tables, name)[inverse] for name in
                                    ("reward", "terminal", "success", "initial", "value", "local", "cell", "heading",
                                     "obs_key")})
    cue = dataclasses.replace(model.cue, **{name: getattr(model.cue, name)[inverse] for name in
                                            ("window", "known", "knowledge", "blind_state", "timer")})
    return dataclasses.replace(model, source=tables, cue=cue)


def test_fingerprint_ignores_state_numbering():
    """Renumbering the states of a model leaves its fingerprint unchanged (the canonical
    breadth-first labelling; common practice for graph hashing)."""
    rng = np.random.default_rng(0)
    for name in ("lantern-hall", "orchard-hives", "hedge-chimes"):
        model = taskgen.build_model(name, variant=2)
        assert fingerprint(_permuted(model, rng)) == fingerprint(model)


def test_fingerprint_ignores_generation_order():
    """Variants drawn in any order get the fingerprints of their seeds."""
    spec = taskgen.load_spec(taskgen.bundled_specs()["orchard-hives"])
    forward = {s: fingerprint(compile_variant(make_variant(spec, s))) for s in [3, 5, 9]}
    backward = {s: fingerprint(compile_variant(make_variant(spec, s))) for s in [9, 5, 3]}
    assert forward == backward


def test_every_3x3_maze_has_its_own_fingerprint():
    """All 192 spanning trees of the 3×3 grid (networkx SpanningTreeIterator; OEIS A007341) make
    192 different fingerprints: different layouts never collide."""
    spec = _maze3_spec()
    grid = nx.grid_2d_graph(3, 3)
    prints = set()
    for tree in nx.SpanningTreeIterator(grid):
        passages = np.zeros((3, 3, 4), dtype=bool)
        for (r1, c1), (r2, c2) in tree.edges():
            for (ra, ca), (rb, cb) in (((r1, c1), (r2, c2)), ((r2, c2), (r1, c1))):
                d = {(-1, 0): 0, (0, 1): 1, (1, 0): 2, (0, -1): 3}[(rb - ra, cb - ca)]
                passages[ra, ca, d] = True
        layout = maze_layout(passages, 0, [8, 2])
        params = MazeParams(width=3, height=3, generator="uniform", braid=0.0, cue_values=2, visible_steps=1,
                            layout_attempt=0, dead_ends=0)
        variant = Variant(spec=spec, seed=0, params=params, layout=layout)
        prints.add(fingerprint(compile_variant(variant)))
    assert len(prints) == 192


def test_disjoint_splits_share_no_fingerprint():
    """With --disjoint, no fingerprint appears in two variants, across or within splits."""
    manifest = build_suite(_maze3_spec(), SuiteRequest(splits=(("train", 40), ("test", 20)), disjoint_layouts=True))
    prints = [v["fingerprint"] for v in manifest["variants"]]
    assert len(prints) == len(set(prints)) == 60
    assert manifest["family_size"] == 192


def test_more_unique_layouts_than_the_family_has_names_the_count():
    """3×3 perfect mazes with fixed start and goals number 192 (OEIS A007341): asking for 193
    unique layouts fails and says 192; asking for all 192 succeeds."""
    with pytest.raises(SuiteError, match=r"asked for 193 unique layouts, but this family has only 192 "):
        build_suite(_maze3_spec(), SuiteRequest(splits=(("train", 150), ("test", 43)), disjoint_layouts=True))
    manifest = build_suite(_maze3_spec(), SuiteRequest(splits=(("all", 192),), disjoint_layouts=True))
    assert len({v["fingerprint"] for v in manifest["variants"]}) == 192


def test_holdout_range_never_reaches_train():
    """Values held out for the test split never occur in train, and test uses only them."""
    spec = taskgen.load_spec(LANTERN)
    manifest = build_suite(spec, SuiteRequest(splits=(("train", 60), ("test", 20)),
                                              holdout=("layout.corridor.length", (11, 12))))
    train = {v["params"]["length"] for v in manifest["variants"] if v["split"] == "train"}
    test = {v["params"]["length"] for v in manifest["variants"] if v["split"] == "test"}
    assert train and not train & {11, 12} and test <= {11, 12}


def test_sweeps_cross_or_zip():
    """Crossed sweeps make every combination, zipped ones pair values in order."""
    spec = taskgen.load_spec(LANTERN)
    sweeps = (("layout.corridor.length", (4, 8)), ("layout.corridor.arm_length", (1, 3)))
    crossed = build_suite(spec, SuiteRequest(splits=(("train", 2),), sweeps=sweeps))
    zipped = build_suite(spec, SuiteRequest(splits=(("train", 2),), sweeps=sweeps, zipped=True))
    pairs = lambda m: {(v["params"]["length"], v["params"]["arm_length"]) for v in m["variants"]}  # noqa: E731
    assert pairs(crossed) == {(4, 1), (4, 3), (8, 1), (8, 3)} and len(crossed["variants"]) == 8
    assert pairs(zipped) == {(4, 1), (8, 3)} and len(zipped["variants"]) == 4


@pytest.mark.parametrize("request_, message", [
    (SuiteRequest(sweeps=(("layout.corridor.lenght", (4,)),)), "did you mean 'length'"),
    (SuiteRequest(holdout=("layout.corridor.length", ())), "held-out range of layout.corridor.length is empty"),
    (SuiteRequest(holdout=("layout.corridor.length", tuple(range(6, 13)))), "leaves no values for the other splits"),
    (SuiteRequest(sweeps=(("layout.corridor.length", (4, 8)), ("cue.values", (2,))), zipped=True),
     "zipped sweeps need equally many values"),
    (SuiteRequest(splits=(("a", 1), ("a", 2))), "distinct names"),
])
def test_bad_requests_say_what_is_wrong(request_, message):
    """Unknown sweep keys, empty or all-consuming held-out ranges and unequal zips are refused."""
    with pytest.raises(SuiteError, match=message):
        build_suite(taskgen.load_spec(LANTERN), request_)


def _cli(*args):
    return subprocess.run([sys.executable, "-m", "taskgen.cli", *args], capture_output=True, text=True)


def test_manifests_are_byte_identical_across_runs_and_workers(tmp_path):
    """The same command twice, and with 1 and 2 workers, writes the same bytes."""
    outs = []
    for name, workers in (("a", "1"), ("b", "1"), ("c", "2")):
        out = _cli("variants", LANTERN, "--out", str(tmp_path / name), "--split", "train=300", "--split",
                   "test=40", "--holdout", "layout.corridor.length=12:12", "--workers", workers)
        assert out.returncode == 0, out.stderr
        outs.append((tmp_path / name / "manifest.yaml").read_bytes())
    assert outs[0] == outs[1] == outs[2]


def test_manifest_variants_reload_and_run(tmp_path):
    """make(manifest, split, index) rebuilds the listed variant; split draws equal in batch."""
    manifest = build_suite(taskgen.load_spec(taskgen.bundled_specs()["orchard-hives"]),
                           SuiteRequest(splits=(("train", 4), ("test", 2)), disjoint_layouts=True))
    path = write_manifest(manifest, str(tmp_path))
    test1 = [v for v in manifest["variants"] if v["split"] == "test"][1]
    env = taskgen.make(path, split="test", index=1)
    assert env.model.variant_id == test1["id"] and fingerprint(env.model) == test1["fingerprint"]
    vec = taskgen.make_vec(path, 3, split="train")
    ref = gym.vector.SyncVectorEnv([lambda: taskgen.make(path, split="train")] * 3)
    o1, _ = vec.reset(seed=1)
    o2, _ = ref.reset(seed=1)
    assert np.array_equal(o1, o2)
    rng = np.random.default_rng(2)
    seen = set()
    for _ in range(400):
        a = rng.integers(4, size=3)
        r1, r2 = vec.step(a), ref.step(a)
        for x, y in zip(r1[:4], r2[:4]):
            assert np.array_equal(x, y)
        assert list(r1[4]["variant_id"]) == list(r2[4]["variant_id"])
        seen |= set(r1[4]["variant_id"])
    assert seen == {v["id"] for v in manifest["variants"] if v["split"] == "train"}
    with pytest.raises(taskgen.TaskgenError, match="no split 'valid'"):
        taskgen.make(path, split="valid", index=0)


def test_manifest_records_what_it_promises():
    """Spec hash, version and, per variant, id, split, seed, parameters, fingerprint, figures
    and recall distance are all present."""
    manifest = build_suite(taskgen.load_spec(LANTERN), SuiteRequest(splits=(("train", 3),)))
    assert manifest["taskgen_version"] == taskgen.__version__ and len(manifest["spec_sha256"]) == 64
    for v in manifest["variants"]:
        assert {"id", "split", "seed", "params", "fingerprint", "baselines", "details"} <= set(v)
        assert {"optimal", "chance", "random"} <= set(v["baselines"]) and "recall_distance" in v["details"]
    # the figures are the report's own objects: valid under its published schema (jsonschema)
    from taskgen.tools.check import report_schema
    defs = report_schema()["$defs"]
    baseline = jsonschema.Draft202012Validator({"$ref": "#/$defs/BaselineJSON", "$defs": defs})
    for v in manifest["variants"]:
        for figures in v["baselines"].values():
            baseline.validate(figures)
    assert manifest_text(manifest).startswith("taskgen_manifest: 1\n")


def test_every_split_of_a_suite_has_one_observation_space(tmp_path):
    """A suite whose splits differ in corridor length (a held-out range and a sweep point past the
    spec's range) gives every split, every listed variant and every batch the one observation space
    the manifest records; each variant's own elements (observation_mask) are its unpadded vector."""
    spec = taskgen.load_spec(LANTERN)
    request = SuiteRequest(splits=(("train", 6), ("test", 3)), holdout=("layout.corridor.length", (6,)),
                           sweeps=(("layout.corridor.length", ({"range": [6, 12]}, 15)),))
    manifest = build_suite(spec, request)
    path = write_manifest(manifest, str(tmp_path))
    recorded = manifest["observation"]["space"]
    seen = set()
    for split in ("train", "test"):
        spaces = {str(taskgen.make(path, split=split).observation_space),
                  str(taskgen.make_vec(path, 2, split=split).single_observation_space)}
        for index in range(sum(v["split"] == split for v in manifest["variants"])):
            env = taskgen.make(path, split=split, index=index, analysis_info=True)
            spaces.add(str(env.observation_space))
            assert describe_space(env.observation_space) == recorded
            obs, info = env.reset(seed=index)
            own = taskgen.observation_set(env.model, spec.observation).vector.table
            key = env.model.obs_key[info["analysis_only"]["state"]]
            mask = env.observation_mask()
            assert np.array_equal(obs[mask], own[key]) and not obs[~mask].any()
            seen.add(env.model.params.length)
        assert len(spaces) == 1, spaces
    assert 15 in seen and len(seen) > 2
    # cue bits 2; one-hot cells of the longest hall (15), its spine (2k − 1 = 3 rows) and two arms of 2; walls 4
    assert recorded["box"]["shape"] == [2 + 15 + 3 + 2 * 2 + 4]


def test_a_manifest_is_not_taken_for_a_spec(tmp_path):
    """Giving a manifest where a spec is expected says what it is and how to load it."""
    path = write_manifest(build_suite(taskgen.load_spec(LANTERN), SuiteRequest(splits=(("train", 1),))),
                          str(tmp_path))
    out = _cli("check", path)
    assert out.returncode == 2 and "this is a variant manifest, not a spec" in out.stderr


def test_a_field_suite_holds_out_path_turns_and_reloads_its_variants(tmp_path):
    """A field suite can keep a number of path turns for the test split only; its family is the
    product of the counts of widths, heights and turns (counting rule; common practice); a
    listed variant reloads as a FieldEnv with its fingerprint checked, and a whole split cannot
    be loaded as one env because field variants differ in size."""
    spec = load_spec_text(yaml.safe_dump({
        "format_version": 1, "name": "field-suite",
        "layout": {"field": {"width": {"choice": [3, 4]}, "height": 5, "path": {"turns": {"range": [1, 3]}},
                             "mark": None}},       # small, no marks in view: the chance proof is not this test's subject
        "episode": {"max_steps": 30}}))
    request = SuiteRequest(splits=(("train", 4), ("test", 2)), holdout=("layout.field.path.turns", (3,)))
    manifest = build_suite(spec, request)
    assert manifest["family_size"] == 2 * 1 * 3
    turns = {split: {v["params"]["turns"] for v in manifest["variants"] if v["split"] == split}
             for split in ("train", "test")}
    assert turns["test"] == {3} and 3 not in turns["train"]
    assert all({"mean", "standard_error", "method"} <= set(v["baselines"]["optimal"]["mean_return"])
               for v in manifest["variants"])
    path = write_manifest(manifest, str(tmp_path))
    env = taskgen.make(path, split="test", index=1)
    assert env.model.kind == "field" and env.model.params.turns == 3
    with pytest.raises(taskgen.manifest.ManifestError, match="one at a time"):
        taskgen.make(path, split="train")
    with pytest.raises(SuiteError, match="has only 6"):
        build_suite(spec, SuiteRequest(splits=(("train", 7),), disjoint_layouts=True))


def test_baseline_levels_trade_figures_for_speed():
    """--baselines fast keeps the exact optimal and random baselines (the same numbers as a full suite's)
    and drops the chance search; none writes no figures; scoring such a suite says what is missing."""
    from taskgen.tools.evaluate import Episode, EvaluationError, score

    spec = taskgen.load_spec(LANTERN)
    full, fast, none = (build_suite(spec, SuiteRequest(splits=(("train", 3),), baselines=level))
                        for level in ("full", "fast", "none"))
    for a, b, c in zip(full["variants"], fast["variants"], none["variants"]):
        assert a["id"] == b["id"] == c["id"] and a["fingerprint"] == b["fingerprint"] == c["fingerprint"]
        assert set(b["baselines"]) == {"optimal", "random"} and "chance_level" not in b
        for name in ("optimal", "random"):
            assert b["baselines"][name] == a["baselines"][name]
        assert "baselines" not in c
    assert fast["request"]["baselines"] == "fast"
    with pytest.raises(EvaluationError, match="--baselines fast or none"):
        score([Episode(fast["variants"][0]["id"], 1.0, True, 3)], fast)
    with pytest.raises(SuiteError, match="--baselines must be one of"):
        build_suite(spec, SuiteRequest(splits=(("train", 1),), baselines="some"))


def test_an_interrupted_suite_resumes_to_the_same_bytes(tmp_path, monkeypatch):
    """Analyses are written in shards as they finish; a run stopped after its first shard (a test hook,
    not a timer) and resumed reads that shard back (checked by hash: a shard from other inputs is
    redone) and writes the manifest a run without interruption writes."""
    from taskgen.tools import variants as module

    monkeypatch.setattr(module, "SHARD", 4)
    spec = taskgen.load_spec(LANTERN)
    request = SuiteRequest(splits=(("train", 12), ("test", 3)))
    whole = manifest_text(build_suite(spec, request))
    shards = tmp_path / "shards"

    def stop(k):
        if k == 0:
            raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        build_suite(spec, request, shards=str(shards), after_shard=stop)
    assert [p.name for p in shards.iterdir()] == ["figures-00000.json"]
    analysed = []
    real = module._figures
    monkeypatch.setattr(module, "_figures", lambda job: analysed.append(job) or real(job))
    resumed = manifest_text(build_suite(spec, request, shards=str(shards), resume=True))
    assert resumed == whole
    total = len({v["fingerprint"] for v in yaml.safe_load(whole)["variants"]})
    assert len(analysed) == total - 4          # the first shard's four layouts were read back
    (shards / "figures-00000.json").write_text('{"key": "other inputs", "figures": {}}')
    analysed.clear()
    assert manifest_text(build_suite(spec, request, shards=str(shards), resume=True)) == whole
    assert len(analysed) == 4                  # only the shard whose key no longer matched


def test_a_large_suite_keeps_each_split_in_a_file_of_its_own(tmp_path):
    """Past the size where one file is slow to read, each split's variants are a JSON-lines file listed
    (count, sha256) by manifest.yaml: a split loads without the others being read (the train file may
    even be gone), the variants are those of the single-file form, and a changed file is refused."""
    from taskgen.manifest import ManifestError, load_manifest, write_manifest as write_any

    spec = taskgen.load_spec(LANTERN)
    manifest = build_suite(spec, SuiteRequest(splits=(("train", 6), ("test", 3))))
    single = tmp_path / "single"
    write_any(manifest, single)
    split = tmp_path / "split"
    path = write_any(manifest, split, split_files_at=4)
    assert sorted(p.name for p in split.iterdir()) == ["manifest.yaml", "variants-test.jsonl", "variants-train.jsonl"]
    header = yaml.safe_load((split / "manifest.yaml").read_text())
    assert "variants" not in header and header["variant_files"]["test"]["count"] == 3
    whole = load_manifest(path)
    assert whole["variants"] == load_manifest(single / "manifest.yaml")["variants"]
    (split / "variants-train.jsonl").unlink()
    test = load_manifest(path, splits=["test"])
    assert [v["split"] for v in test["variants"]] == ["test"] * 3
    env = taskgen.make(path, split="test", index=2)
    assert env.model.variant_id == test["variants"][2]["id"]
    with pytest.raises(ManifestError, match="cannot be read"):
        load_manifest(path)
    with pytest.raises(ValueError, match="loaded with some of its splits only"):
        write_any(test, tmp_path / "again")
    (split / "variants-test.jsonl").write_text((split / "variants-test.jsonl").read_text().replace("lantern", "Lantern"))
    with pytest.raises(ManifestError, match="do not match the manifest's sha256"):
        load_manifest(path, splits=["test"])
