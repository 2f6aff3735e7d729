"""The Gymnasium environment: API conformance, registration, seeding and determinism."""

from __future__ import annotations

import subprocess
import sys
import warnings

import gymnasium as gym
import numpy as np
import pytest
from gymnasium.utils.env_checker import check_env

import taskgen
from taskgen import SpecError

from conftest import corridor_spec_text


@pytest.mark.parametrize("spec_name", sorted(taskgen.bundled_specs()))
def test_check_env_passes_on_every_example(spec_name):
    """gymnasium.utils.env_checker.check_env accepts the env of each example, with no warning
    (gymnasium's own checker; made through gymnasium.make so render modes are checked too)."""
    env = gym.make(f"taskgen/{spec_name}-v0", render_mode="rgb_array").unwrapped
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # the checker reports API problems as warnings
        check_env(env)


def test_bundled_specs_register_as_gymnasium_ids():
    """Every bundled spec can be made through gymnasium.make("taskgen/<name>-v0")."""
    for name in taskgen.bundled_specs():
        env = gym.make(f"taskgen/{name}-v0")
        obs, info = env.reset(seed=0)
        assert env.observation_space.contains(obs)
        assert info["variant_id"] == f"{name}-s0"


def test_spaces_are_exact():
    """The Box matches the block layout; four move actions."""
    env = taskgen.make(taskgen.load_spec_text(corridor_spec_text(
        length=3, values=3, vector={"position": "one_hot", "noise": {"bits": 5, "flip_probability": 0.1}})))
    blocks = env.observation_blocks
    cells = env.model.layout.num_cells
    assert blocks["cue"] == slice(0, 3)
    assert blocks["position"] == slice(3, 3 + cells)
    assert blocks["walls"] == slice(3 + cells, 7 + cells)
    assert blocks["noise"] == slice(7 + cells, 12 + cells)
    assert env.observation_space.shape == (12 + cells,)
    assert env.observation_space.dtype == np.float32
    assert env.action_space == gym.spaces.Discrete(4)


def test_cue_bits_show_only_in_the_display_window():
    """The cue block is one-hot of the true cue for the first N observations, zero after."""
    env = taskgen.make(taskgen.load_spec_text(corridor_spec_text(length=6, values=3, visible_steps=3)))
    cue = env.observation_blocks["cue"]
    for seed in range(6):
        obs, info = env.reset(seed=seed)
        seen = [obs[cue]]
        for _ in range(5):
            obs, *_ , info = env.step(1)
            seen.append(obs[cue])
        true = info["analysis_only"]["cue"]
        for t, bits in enumerate(seen):
            expected = np.eye(3)[true] if t < 3 else np.zeros(3)
            assert np.array_equal(bits, expected), (seed, t)


def test_noise_bits_flip_at_the_given_rate():
    """Each noise bit flips with probability p per step: the observed rate is within 4 standard
    errors of p (binomial proportion; common practice)."""
    p, bits, steps = 0.3, 16, 400
    spec = taskgen.load_spec_text(corridor_spec_text(
        length=2, episode={"max_steps": steps + 1}, vector={"noise": {"bits": bits, "flip_probability": p}}))
    env = taskgen.make(spec)
    obs, _ = env.reset(seed=3)
    noise = env.observation_blocks["noise"]
    flips, prev = 0, obs[noise]
    for _ in range(steps):
        obs, *_ = env.step(0)  # north: a wall, so the episode never ends
        flips += int((obs[noise] != prev).sum())
        prev = obs[noise]
    n = steps * bits
    assert abs(flips / n - p) <= 4 * np.sqrt(p * (1 - p) / n)


def test_truncation_pays_the_timeout_reward():
    """Reaching the step limit truncates (not terminates) and adds the timeout reward."""
    spec = taskgen.load_spec_text(corridor_spec_text(
        length=4, episode={"max_steps": 3}, rewards={"step": -0.1, "timeout": -2.0}))
    env = taskgen.make(spec)
    env.reset(seed=0)
    out = [env.step(3) for _ in range(3)]
    assert [o[2] for o in out] == [False, False, False]
    assert [o[3] for o in out] == [False, False, True]
    assert out[-1][1] == pytest.approx(-2.1)


def test_wrong_action_is_refused():
    """An action outside Discrete(4) raises a ValueError naming the range."""
    env = taskgen.make("lantern-hall")
    env.reset(seed=0)
    with pytest.raises(ValueError, match=r"action must be an integer in \[0, 4\)"):
        env.step(7)


def test_render_is_an_rgb_picture():
    """render() returns an RGB uint8 array; the lamp shows the cue only while visible."""
    env = taskgen.make("lantern-hall", render_mode="rgb_array")
    env.reset(seed=0)
    first = env.render()
    env.step(1)
    later = env.render()
    assert first.dtype == np.uint8 and first.ndim == 3 and first.shape[2] == 3
    assert not np.array_equal(first[:4], later[:4])


def test_overrides_and_variant_seeds():
    """make() applies overrides; different variant seeds draw different sampled lengths."""
    env = taskgen.make("lantern-hall", layout__corridor__length=3)
    assert env.model.params.length == 3
    lengths = {taskgen.make("lantern-hall", seed=s).model.params.length for s in range(20)}
    assert lengths <= set(range(6, 13)) and len(lengths) > 3
    with pytest.raises(SpecError, match="override layout__corridor__length"):
        taskgen.make("lantern-hall", layout__corridor__length=-1)


EPISODE_SCRIPT = """
import hashlib, numpy as np, taskgen
env = taskgen.make({spec!r}, seed=2)
h = hashlib.sha256()
rng = np.random.default_rng(11)
obs, info = env.reset(seed=5)
h.update(obs.tobytes())
for _ in range(300):
    obs, r, term, trunc, info = env.step(int(rng.integers(4)))
    h.update(obs.tobytes()); h.update(np.float64(r).tobytes()); h.update(bytes([term, trunc]))
    if term or trunc:
        obs, info = env.reset()
        h.update(obs.tobytes())
print(h.hexdigest())
"""


@pytest.mark.parametrize("spec_name", sorted(taskgen.bundled_specs()))
def test_same_spec_and_seed_give_the_same_episodes_in_two_processes(spec_name):
    """Two fresh interpreters (with different hash seeds) produce byte-identical episodes
    (common practice: determinism across processes)."""
    script = EPISODE_SCRIPT.format(spec=spec_name)
    digests = set()
    for hash_seed in ("1", "2"):
        env = {"PYTHONHASHSEED": hash_seed, "PATH": ""}
        out = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, env=env, check=True)
        digests.add(out.stdout.strip())
    assert len(digests) == 1
    local = {}
    exec(compile(script.replace("print(h.hexdigest())", "result = h.hexdigest()"), "<episode>", "exec"),
         local)
    assert local["result"] in digests


def test_bundled_specs_are_the_repository_examples():
    """The specs shipped with the package are the files in specs/ (so no example is skipped)."""
    from pathlib import Path

    repo_specs = Path(__file__).resolve().parents[1] / "specs"
    assert sorted(taskgen.bundled_specs()) == sorted(p.stem for p in repo_specs.glob("*.yaml"))
    assert len(taskgen.bundled_specs()) >= 2
