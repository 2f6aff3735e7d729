"""`taskgen evaluate` / `taskgen score`: statistics against textbook values, policies against the
manifest's exactly computed baselines, and the command line round trip."""

from __future__ import annotations

import json
import math
import subprocess
import sys

import numpy as np
import pytest

import taskgen
from taskgen import load_spec_text
from taskgen.tools.evaluate import (Episode, EvaluationError, above_chance_p, clopper_pearson, holm, read_episodes,
                                    run_policy, score)
from taskgen.tools.variants import SuiteRequest, build_suite, write_manifest

from conftest import corridor_spec_text

REWARDS = {"correct": 1.0, "wrong": -1.0, "step": -0.01, "timeout": -1.0}


@pytest.fixture(scope="module")
def suite(tmp_path_factory):
    """A small corridor suite (halls of 1 to 3 steps, arms of 1), three variants per split."""
    spec = load_spec_text(corridor_spec_text(length={"range": [1, 3]}, arm_length=1, rewards=REWARDS,
                                             name="short-hall"))
    manifest = build_suite(spec, SuiteRequest(splits=(("train", 3), ("test", 3))))
    return write_manifest(manifest, str(tmp_path_factory.mktemp("suite"))), manifest


class RandomPolicy:
    """Uniform-random actions: a memoryless agent."""

    def __init__(self, seed=0):
        self.rng = np.random.default_rng(seed)

    def __call__(self, obs):
        return self.rng.integers(4, size=obs.shape[0])


class Remembering:
    """A recurrent agent: keeps the cue it saw first (cue bits 0:2) and walks the shortest way (east to
    the junction, where the east wall stops it, one step north for cue 0 or south for cue 1, then east
    to the arm's end). Its state is cleared through the reset(mask) protocol."""

    def __init__(self):
        self.cue = self.turned = None
        self.resets = 0

    def reset(self, mask):
        if self.cue is None:
            self.cue = np.full(mask.size, -1)
            self.turned = np.zeros(mask.size, dtype=bool)
        self.cue[mask], self.turned[mask] = -1, False
        self.resets += int(mask.sum())

    def __call__(self, obs):
        fresh = self.cue < 0
        self.cue[fresh] = np.argmax(obs[fresh, 0:2], axis=1)
        east_wall = obs[:, -3] > 0                         # walls block: north, east, south, west
        turn = east_wall & ~self.turned
        actions = np.where(turn, np.where(self.cue == 0, 0, 2), 1)
        self.turned |= turn
        return actions


def test_statistics_agree_with_textbook_values():
    """Clopper–Pearson at k = 0 and k = n has the closed form 1 − (α/2)^(1/n) and (α/2)^(1/n)
    (Clopper & Pearson 1934); the one-sided binomial test of n successes in n against p is pⁿ; Holm's
    adjusted p-values of (0.01, 0.04, 0.03, 0.005) are (0.03, 0.06, 0.06, 0.02) (Holm 1979, worked by
    hand: 0.005·4, 0.01·3, 0.03·2, max(0.04·1, 0.06))."""
    low, high = clopper_pearson(0, 10)
    assert low == 0.0 and high == pytest.approx(1 - 0.025 ** (1 / 10), rel=1e-9)
    low, high = clopper_pearson(10, 10)
    assert high == 1.0 and low == pytest.approx(0.025 ** (1 / 10), rel=1e-9)
    assert above_chance_p(8, 8, 0.5) == pytest.approx(0.5 ** 8)
    assert np.allclose(holm([0.01, 0.04, 0.03, 0.005]), [0.03, 0.06, 0.06, 0.02])
    assert np.allclose(holm([0.5, 0.9]), [1.0, 1.0])


def test_a_random_policy_scores_the_exact_random_baseline(suite):
    """Played 600 times per variant, the uniform-random agent's success rate has the exactly computed
    random baseline (dynamic programming over the model) inside its 99.9% exact interval, and its mean
    return is within 4 standard errors of the exact one (common practice); it is not above chance."""
    path, manifest = suite
    played = run_policy(RandomPolicy(1), path, "test", episodes=600, num_envs=50, seed=3)
    result = score(played, manifest, "test")
    assert len(result.variants) == 3 and all(v.episodes == 600 for v in result.variants)
    entries = {v["id"]: v for v in manifest["variants"]}
    for v in result.variants:
        exact = entries[v.variant_id]["baselines"]["random"]
        low, high = clopper_pearson(v.successes, v.episodes, 0.999)
        assert low <= exact["success_rate"]["mean"] <= high, (v, exact)
        assert abs(v.mean_return - exact["mean_return"]["mean"]) < 4 * v.return_se, (v, exact)
    assert result.overall["above_chance"] == 0


def test_a_remembering_policy_scores_optimal_and_above_chance(suite):
    """An agent that keeps the cue and walks the shortest way earns exactly the optimal return (the
    manifest's, from the model), so its normalised score is 1; every variant is above chance after
    Holm's correction; its reset(mask) is called once per episode started."""
    path, manifest = suite
    agent = Remembering()
    evaluation = taskgen.evaluate(agent, path, split="train", episodes=40, num_envs=16)
    for v in evaluation.variants:
        assert v.success_rate == 1.0 and v.normalised == pytest.approx(1.0, abs=1e-9)
        assert v.above_chance and v.p_holm < 0.05
    assert evaluation.overall["normalised"] == pytest.approx(1.0)
    assert agent.resets >= 3 * 40 + 3 * 16     # every episode's start, and the first reset of each batch


def _cli(*args, cwd=None):
    return subprocess.run([sys.executable, "-m", "taskgen.cli", *args], capture_output=True, text=True, cwd=cwd)


def test_evaluate_and_score_on_the_command_line(suite, tmp_path):
    """`taskgen evaluate --policy module:factory --out DIR` writes episodes that `taskgen score` turns
    into the same figures; a bad policy reference or episodes line is a located error (exit 2)."""
    path, _ = suite
    (tmp_path / "mypolicy.py").write_text(
        "import numpy as np\n"
        "def make(observation_space, action_space):\n"
        "    rng = np.random.default_rng(0)\n"
        "    return lambda obs: rng.integers(action_space.n, size=obs.shape[0])\n")
    out = _cli("evaluate", path, "--policy", "mypolicy:make", "--episodes", "30", "--num-envs", "8", "--json",
               "--out", str(tmp_path / "run"), cwd=tmp_path)
    assert out.returncode == 0, out.stderr
    evaluated = json.loads(out.stdout)
    scored = _cli("score", str(tmp_path / "run" / "episodes.jsonl"), "--manifest", path, "--json")
    assert scored.returncode == 0, scored.stderr
    again = json.loads(scored.stdout)
    assert again["variants"] == evaluated["variants"] and again["overall"] == evaluated["overall"]
    assert json.loads((tmp_path / "run" / "evaluation.json").read_text()) == evaluated
    table = _cli("evaluate", path, "--policy", "mypolicy:make", "--episodes", "5", cwd=tmp_path)
    assert table.returncode == 0 and "| variant | episodes | success |" in table.stdout
    bad = _cli("evaluate", path, "--policy", "mypolicy", cwd=tmp_path)
    assert bad.returncode == 2 and "expected MODULE:FACTORY" in bad.stderr
    (tmp_path / "bad.jsonl").write_text('{"variant_id": "x", "return": 1.0, "success": true}\n{"return": 2}\n')
    located = _cli("score", str(tmp_path / "bad.jsonl"), "--manifest", path)
    assert located.returncode == 2 and "bad.jsonl:2:" in located.stderr


def test_score_refuses_unknown_variants_and_reads_logged_episodes(suite, tmp_path):
    """Logged episodes are matched to the manifest by id; an id it does not list is an error."""
    _, manifest = suite
    first = manifest["variants"][0]["id"]
    logged = tmp_path / "log.jsonl"
    logged.write_text("".join(json.dumps({"variant_id": first, "return": r, "success": r > 0}) + "\n"
                              for r in (0.97, -1.0, 0.97, 0.97)))
    result = score(read_episodes(logged), manifest)
    (v,) = result.variants
    assert v.episodes == 4 and v.successes == 3 and v.mean_return == pytest.approx((3 * 0.97 - 1) / 4)
    assert v.return_se == pytest.approx(np.std([0.97, -1.0, 0.97, 0.97], ddof=1) / math.sqrt(4))
    with pytest.raises(EvaluationError, match="not in the manifest"):
        score([Episode("nobody-s9", 1.0, True, 3)], manifest)
