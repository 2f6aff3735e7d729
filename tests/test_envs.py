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


@pytest.mark.parametrize("through", ["gym.make", "taskgen.make"])
@pytest.mark.parametrize("spec_name", sorted(taskgen.bundled_specs()))
def test_check_env_passes_on_every_example(spec_name, through):
    """gymnasium.utils.env_checker.check_env accepts the env of each example, with no warning
    (gymnasium's own checker), made through gymnasium.make and through taskgen.make (whose env.spec
    lets the checker test render modes)."""
    if through == "gym.make":
        env = gym.make(f"taskgen/{spec_name}-v1", render_mode="rgb_array").unwrapped
    else:
        env = taskgen.make(spec_name, render_mode="rgb_array")
    assert env.spec is not None
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # the checker reports API problems as warnings
        check_env(env)


def test_bundled_specs_register_as_gymnasium_ids():
    """Every bundled spec can be made through gymnasium.make("taskgen/<name>-v1")."""
    for name in taskgen.bundled_specs():
        env = gym.make(f"taskgen/{name}-v1")
        obs, info = env.reset(seed=0)
        assert env.observation_space.contains(obs)
        assert info == {"variant_id": f"{name}-s0", "step": 0}


def test_info_contract_is_success_and_episode_end():
    """Agents get variant_id and step, and is_success at an episode's end (lantern-hall: +1 for the
    right door, so success is exactly a positive last reward); analysis_only only when asked for.
    Stepping an ended episode, or with a bool action, is refused."""
    env = taskgen.make("lantern-hall", layout__corridor__length=1)
    outcomes = set()
    for seed in range(40):
        env.reset(seed=seed)
        rng = np.random.default_rng(seed)
        while True:
            _, reward, terminated, truncated, info = env.step(int(rng.integers(env.action_space.n)))
            if terminated or truncated:
                assert set(info) == {"variant_id", "step", "is_success"}
                assert info["is_success"] == (reward > 0)
                outcomes.add(info["is_success"])
                break
            assert set(info) == {"variant_id", "step"}
        with pytest.raises(gym.error.ResetNeeded, match="ended"):
            env.step(0)
    assert outcomes == {True, False}
    with pytest.raises(ValueError, match="action must be an integer"):
        env.step(True)
    _, info = taskgen.make("lantern-hall", analysis_info=True).reset(seed=0)
    assert set(info["analysis_only"]) == {"cue", "state"}


def test_env_spec_makes_the_same_env_again():
    """env.spec (gymnasium's EnvSpec) re-creates the env: the same variant, overrides and episodes."""
    env = taskgen.make("lantern-hall", variant=3, layout__corridor__length={"range": [4, 9]})
    again = gym.make(env.spec)
    assert env.spec.id == "taskgen/lantern-hall-v1"
    assert again.unwrapped.model.variant_id == env.model.variant_id
    for seed in (0, 5):
        a, _ = env.reset(seed=seed)
        b, _ = again.reset(seed=seed)
        assert np.array_equal(a, b)
        for action in (1, 1, 2, 0, 1):
            x, y = env.step(action), again.step(action)
            assert np.array_equal(x[0], y[0]) and x[1:] == y[1:]
            if x[2] or x[3]:
                break


def test_variant_keyword_and_seed_refused():
    """variant= picks the variant; seed= (a keyword libraries pass for seeding) is refused with the way
    to seed episodes, through taskgen.make and gymnasium.make alike."""
    lengths = {taskgen.make("lantern-hall", variant=v).model.params.length for v in range(10)}
    assert len(lengths) > 1
    with pytest.raises(TypeError, match=r"variant=N.*reset\(seed"):
        taskgen.make("lantern-hall", seed=3)
    with pytest.raises(TypeError, match="variant=N"):
        gym.make("taskgen/lantern-hall-v1", seed=3)
    with pytest.raises(TypeError, match="variant=N"):
        taskgen.make_vec("lantern-hall", 2, seed=3)


def test_overridden_variants_have_ids_of_their_own():
    """A variant of an overridden spec is named apart from the spec's own; the same overrides, the same id."""
    plain = taskgen.make("lantern-hall", variant=2).model.variant_id
    longer = taskgen.make("lantern-hall", variant=2, layout__corridor__length=20).model.variant_id
    again = taskgen.make("lantern-hall", variant=2, layout__corridor__length=20).model.variant_id
    other = taskgen.make("lantern-hall", variant=2, layout__corridor__length=21).model.variant_id
    assert plain == "lantern-hall-s2"
    assert longer == again and longer.startswith("lantern-hall+") and longer.endswith("-s2")
    assert len({plain, longer, other}) == 3


def test_register_own_spec_and_refuse_another_under_a_taken_id(tmp_path):
    """taskgen.register gives a spec file the id taskgen/<name>-v<format_version>; registering it again
    is a no-op; another spec under that id, or through a bundled id, is refused."""
    path = tmp_path / "porch.yaml"
    path.write_text(corridor_spec_text(length=2, name="porch-test"))
    env_id = taskgen.register(path)
    assert env_id == "taskgen/porch-test-v1" and taskgen.register(path) == env_id
    env = gym.make(env_id, variant=1)
    assert env.unwrapped.model.variant_id == "porch-test-s1"
    other = tmp_path / "other.yaml"
    other.write_text(corridor_spec_text(length=3, name="porch-test"))
    with pytest.raises(ValueError, match="already registered"):
        taskgen.register(other)
    assert taskgen.register(other, id="mine/porch-v2") == "mine/porch-v2"
    with pytest.raises(ValueError, match="registered for"):
        gym.make("taskgen/lantern-hall-v1", spec_or_path=str(path))
    vec = gym.make_vec(env_id, num_envs=3, vectorization_mode="vector_entry_point")
    assert isinstance(vec.unwrapped, taskgen.TaskVectorEnv) and vec.num_envs == 3


def test_vector_is_on_by_default_only_alone():
    """A spec that asks for pixels (or a grid view) gets just them unless it gives vector itself."""
    text = corridor_spec_text(length=2) + "observation:\n  pixels: {height: 24, width: 24}\n"
    pixels = taskgen.make(taskgen.load_spec_text(text))
    assert isinstance(pixels.observation_space, gym.spaces.Box) and pixels.observation_space.shape == (24, 24, 3)
    text = corridor_spec_text(length=2) + "observation:\n  vector: {}\n  grid: {size: 3}\n"
    both = taskgen.make(taskgen.load_spec_text(text))
    assert isinstance(both.observation_space, gym.spaces.Dict) and set(both.observation_space) == {"vector", "grid"}


def test_spaces_are_exact():
    """The Box matches the block layout; four move actions."""
    env = taskgen.make(taskgen.load_spec_text(corridor_spec_text(
        length=3, values=3, vector={"position": "one_hot", "noise": {"bits": 5, "flip_probability": 0.1}})), analysis_info=True)
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
    env = taskgen.make(taskgen.load_spec_text(corridor_spec_text(length=6, values=3, visible_steps=3)), analysis_info=True)
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
    env = taskgen.make(spec, analysis_info=True)
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
    env = taskgen.make(spec, analysis_info=True)
    env.reset(seed=0)
    out = [env.step(3) for _ in range(3)]
    assert [o[2] for o in out] == [False, False, False]
    assert [o[3] for o in out] == [False, False, True]
    assert out[-1][1] == pytest.approx(-2.1)


def test_wrong_action_is_refused():
    """An action outside Discrete(4) raises a ValueError naming the range."""
    env = taskgen.make("lantern-hall", analysis_info=True)
    env.reset(seed=0)
    with pytest.raises(ValueError, match=r"action must be an integer in \[0, 4\)"):
        env.step(7)


def test_render_is_an_rgb_picture():
    """render() returns an RGB uint8 array; the lamp shows the cue only while visible."""
    env = taskgen.make("lantern-hall", render_mode="rgb_array", analysis_info=True)
    env.reset(seed=0)
    first = env.render()
    env.step(1)
    later = env.render()
    assert first.dtype == np.uint8 and first.ndim == 3 and first.shape[2] == 3
    assert not np.array_equal(first[:4], later[:4])


def test_overrides_and_variant_seeds():
    """make() applies overrides; different variant seeds draw different sampled lengths."""
    env = taskgen.make("lantern-hall", layout__corridor__length=3, analysis_info=True)
    assert env.model.params.length == 3
    lengths = {taskgen.make("lantern-hall", variant=s, analysis_info=True).model.params.length for s in range(20)}
    assert lengths <= set(range(6, 13)) and len(lengths) > 3
    with pytest.raises(SpecError, match="override layout__corridor__length"):
        taskgen.make("lantern-hall", layout__corridor__length=-1, analysis_info=True)


EPISODE_SCRIPT = """
import hashlib, numpy as np, taskgen
env = taskgen.make({spec!r}, variant=2, analysis_info=True)
h = hashlib.sha256()
rng = np.random.default_rng(11)
obs, info = env.reset(seed=5)
h.update(obs.tobytes())
for _ in range(300):
    obs, r, term, trunc, info = env.step(int(rng.integers(env.action_space.n)))
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


@pytest.mark.parametrize("spec_name, overrides", [
    ("lantern-hall", {}),
    ("orchard-hives", {"layout__maze__width": {"range": [5, 7]}}),
    ("marsh-stones", {"layout__field__width": {"range": [3, 5]}}),
])
def test_every_variant_of_a_spec_shares_one_observation_space(spec_name, overrides):
    """Variants of different sizes have the one observation space of their spec family (one-hot
    position, goals and marks as wide as at the largest parameters); the elements a variant does not
    fill (observation_mask) stay 0 over an episode (a suite's test checks the rest against the variant's
    own vector)."""
    spaces, masks = set(), set()
    for variant in range(5):
        env = taskgen.make(spec_name, variant=variant, analysis_info=True, **overrides)
        spaces.add(str(env.observation_space))
        obs, _ = env.reset(seed=variant)
        mask = env.observation_mask()
        masks.add(int(mask.sum()))
        rng = np.random.default_rng(variant)
        for _ in range(40):
            assert env.observation_space.contains(obs) and not obs[~mask].any()
            obs, _, terminated, truncated, _ = env.step(int(rng.integers(env.action_space.n)))
            if terminated or truncated:
                obs, _ = env.reset()
    assert len(spaces) == 1 and len(masks) > 1, (spaces, masks)


@pytest.mark.parametrize("spec_name", ["lantern-hall", "marsh-stones"])
def test_step_before_reset_is_refused_by_every_env(spec_name):
    """Stepping before the first reset raises gymnasium's ResetNeeded, single or batched, cue or field,
    and charges nothing (the batch's state is untouched)."""
    with pytest.raises(gym.error.ResetNeeded, match="reset"):
        taskgen.make(spec_name).step(0)
    vec = taskgen.make_vec(spec_name, 3)
    before = vec.core.step_count.copy()
    with pytest.raises(gym.error.ResetNeeded, match="reset"):
        vec.step(np.zeros(3, dtype=np.int64))
    assert np.array_equal(vec.core.step_count, before)
