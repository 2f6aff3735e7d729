"""Stable-Baselines3 as a real client (the optional extra taskgen[sb3]; skipped where it is not installed):
its env checker, its DummyVecEnv as the reference for our VecEnv adapter, and a short PPO run."""

from __future__ import annotations

import warnings

import numpy as np
import pytest

import taskgen

sb3 = pytest.importorskip("stable_baselines3")

from stable_baselines3.common.env_checker import check_env  # noqa: E402
from stable_baselines3.common.vec_env import DummyVecEnv  # noqa: E402

from taskgen.envs.sb3 import to_sb3_vec  # noqa: E402
from taskgen.tools.variants import SuiteRequest, build_suite, write_manifest  # noqa: E402

from conftest import corridor_spec_text  # noqa: E402


@pytest.mark.parametrize("through", ["taskgen.make", "gym.make"])
@pytest.mark.parametrize("spec_name", sorted(taskgen.bundled_specs()))
def test_sb3_env_checker_is_clean_on_every_bundled_spec(spec_name, through):
    """SB3's own check_env accepts every bundled spec's env, made by taskgen.make and by gymnasium.make,
    with no warning."""
    import gymnasium as gym

    env = taskgen.make(spec_name) if through == "taskgen.make" else gym.make(f"taskgen/{spec_name}-v1")
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        check_env(env, warn=True)


def _same(x, y, where):
    """Equal SB3 step results: arrays with their dtypes, dicts key by key, lists item by item."""
    if isinstance(x, list) or isinstance(y, list):
        assert isinstance(x, list) and isinstance(y, list) and len(x) == len(y), where
        for i, (a, b) in enumerate(zip(x, y)):
            _same(a, b, (where, i))
    elif isinstance(x, dict) or isinstance(y, dict):
        assert isinstance(x, dict) and isinstance(y, dict) and set(x) == set(y), (where, x, y)
        for key in x:
            _same(x[key], y[key], (where, key))
    elif isinstance(x, np.ndarray) or isinstance(y, np.ndarray):
        assert np.asarray(x).dtype == np.asarray(y).dtype and np.array_equal(x, y), where
    else:
        assert type(x) is type(y) and x == y, (where, x, y)


@pytest.mark.parametrize("spec_name, overrides", [
    ("lantern-hall", {"layout__corridor__length": 2}),
    ("marsh-stones", {}),
    ("seed-cache", {"observation__grid": {"size": 3}}),
])
def test_adapter_equals_sb3_dummy_vec_env_step_for_step(spec_name, overrides):
    """to_sb3_vec over the native batch returns what SB3's DummyVecEnv over our single envs returns:
    observations, rewards, dones, infos (terminal_observation, TimeLimit.truncated, is_success) and
    reset infos, with seeds given through seed() (SB3's DummyVecEnv is the reference)."""
    n = 5
    ours = to_sb3_vec(taskgen.make_vec(spec_name, n, variant=1, autoreset_mode="same_step", analysis_info=True,
                                       **overrides))
    theirs = DummyVecEnv([lambda: taskgen.make(spec_name, variant=1, analysis_info=True, **overrides)] * n)
    ours.seed(7)
    theirs.seed(7)
    _same(ours.reset(), theirs.reset(), "reset")
    _same(ours.reset_infos, theirs.reset_infos, "reset infos")
    rng = np.random.default_rng(0)
    ended = 0
    for t in range(300):
        actions = rng.integers(ours.action_space.n, size=n)
        mine, ref = ours.step(actions), theirs.step(actions)
        for k, (x, y) in enumerate(zip(mine, ref)):
            _same(x, y, (t, k))
        _same(ours.reset_infos, theirs.reset_infos, (t, "reset infos"))
        ended += int(mine[2].sum())
    assert ended > 0
    with pytest.raises(ValueError, match="same_step"):
        to_sb3_vec(taskgen.make_vec(spec_name, 2))


def test_a_memoryless_ppo_agent_stays_at_or_below_the_certified_chance_level(tmp_path):
    """PPO with a feed-forward (memoryless) policy, trained a few thousand steps on the native batch through
    the adapter, cannot beat the certified chance level: its evaluated mean return (deterministic actions,
    a memoryless policy) is at most the chance level's proven upper bound plus 4 standard errors
    (common practice), on every test variant."""
    spec = taskgen.load_spec_text(corridor_spec_text(length={"range": [1, 3]}, arm_length=1, name="ppo-hall",
                                                     rewards={"correct": 1.0, "wrong": -1.0, "step": -0.01,
                                                              "timeout": -1.0}))
    manifest = build_suite(spec, SuiteRequest(splits=(("train", 2), ("test", 2))))
    path = write_manifest(manifest, str(tmp_path))
    env = to_sb3_vec(taskgen.make_vec(path, 8, split="train", autoreset_mode="same_step"))
    model = sb3.PPO("MlpPolicy", env, n_steps=64, batch_size=64, n_epochs=4, seed=0, device="cpu", verbose=0)
    model.learn(total_timesteps=3072)
    result = taskgen.evaluate(lambda obs: model.predict(obs, deterministic=True)[0], path, split="test",
                              episodes=200, num_envs=20)
    for v in result.variants:
        assert v.mean_return <= v.chance + 4 * max(v.return_se, 1e-3), v


def test_make_vec_env_over_taskgen_make_logs_success():
    """SB3's make_vec_env over taskgen.make (its Monitor wrapper included) runs, and every finished
    episode's info carries is_success, which SB3's success logging reads, beside Monitor's episode record."""
    from stable_baselines3.common.env_util import make_vec_env

    env = make_vec_env(taskgen.make, n_envs=3, seed=0,
                       env_kwargs={"spec_or_path": "lantern-hall", "layout__corridor__length": 1})
    env.reset()
    rng = np.random.default_rng(0)
    finished = 0
    for _ in range(200):
        _, _, dones, infos = env.step(rng.integers(4, size=3))
        for done, info in zip(dones, infos):
            assert ("is_success" in info) == bool(done) and ("episode" in info) == bool(done)
            finished += int(done)
    assert finished > 0
