"""The batched runtime against gymnasium's own SyncVectorEnv and AsyncVectorEnv."""

from __future__ import annotations

import pickle

import gymnasium as gym
import numpy as np
import pytest
from gymnasium.vector import AutoresetMode

import taskgen

STEPS = 3000


def _parts(obs):
    """An observation's arrays by name (one modality: a Box; several: a Dict)."""
    return obs if isinstance(obs, dict) else {"obs": obs}


def _same_value(x, y, where):
    """Two info values equal as gymnasium builds them: dicts key by key, arrays with their dtypes,
    object arrays element by element (``final_obs`` holds one observation per environment)."""
    if isinstance(x, dict) or isinstance(y, dict):
        assert isinstance(x, dict) and isinstance(y, dict) and set(x) == set(y), (where, x, y)
        for key in x:
            _same_value(x[key], y[key], (where, key))
        return
    x, y = np.asarray(x), np.asarray(y)
    assert x.dtype == y.dtype and x.shape == y.shape, (where, x.dtype, y.dtype, x.shape, y.shape)
    if x.dtype == object:
        for a, b in zip(x, y):
            if isinstance(a, (dict, np.ndarray)) or isinstance(b, (dict, np.ndarray)):
                _same_value(a, b, where)
            else:
                assert a == b, (where, a, b)
    else:
        assert np.array_equal(x, y), where


def _assert_same(ours, theirs, where):
    """Observations, rewards, terminations, truncations and infos equal, dtypes and masks included."""
    assert set(_parts(ours[0])) == set(_parts(theirs[0])), where
    for name, x in _parts(ours[0]).items():
        y = _parts(theirs[0])[name]
        assert x.dtype == y.dtype and np.array_equal(x, y), (where, name)
    for name, x, y in zip(("reward", "terminated", "truncated"), ours[1:4], theirs[1:4]):
        assert x.dtype == y.dtype and np.array_equal(x, y), (where, name)
    _same_value(ours[4], theirs[4], where)


def _compare(spec_name, variants, reset_seed, steps=STEPS, mode=AutoresetMode.NEXT_STEP, analysis_info=True,
             masked=False, **overrides):
    """Step our batch and gymnasium's SyncVectorEnv of single envs with the same actions (with
    autoreset disabled, both reset the ended environments through a reset_mask, sometimes seeded;
    with ``masked``, both also reset random environments through a reset_mask now and then)."""
    n = len(variants)
    ours = taskgen.make_vec(spec_name, n, variants=variants, autoreset_mode=mode, analysis_info=analysis_info,
                            **overrides)
    theirs = gym.vector.SyncVectorEnv([lambda v=v: taskgen.make(spec_name, variant=v, analysis_info=analysis_info,
                                                                 **overrides) for v in variants],
                                      autoreset_mode=mode)
    assert theirs.metadata["autoreset_mode"] == ours.metadata["autoreset_mode"] == mode
    o1, i1 = ours.reset(seed=reset_seed)
    o2, i2 = theirs.reset(seed=reset_seed)
    assert all(np.array_equal(x, _parts(o2)[name]) for name, x in _parts(o1).items())
    _same_value(i1, i2, "reset")
    rng = np.random.default_rng(5)
    for t in range(steps):
        a = rng.integers(ours.single_action_space.n, size=n)
        mine = ours.step(a)
        _assert_same(mine, theirs.step(a), (spec_name, t))
        ended = mine[2] | mine[3]
        if masked and rng.random() < 0.1:
            ended = ended | (rng.random(n) < 0.3)
        if (mode == AutoresetMode.DISABLED or masked) and ended.any():
            seed = [int(s) if rng.random() < 0.3 else None for s in rng.integers(1000, size=n)]
            o1, i1 = ours.reset(seed=seed, options={"reset_mask": ended})
            o2, i2 = theirs.reset(seed=seed, options={"reset_mask": ended.copy()})
            assert all(np.array_equal(x, _parts(o2)[name]) for name, x in _parts(o1).items()), (spec_name, t)
            _same_value(i1, i2, (spec_name, t, "reset_mask"))
    # a later unseeded reset continues every env's stream the same way
    o1, _ = ours.reset()
    o2, _ = theirs.reset()
    assert all(np.array_equal(x, _parts(o2)[name]) for name, x in _parts(o1).items())


@pytest.mark.parametrize("spec_name", sorted(taskgen.bundled_specs()))
def test_batch_equals_sync_vector_env_of_single_envs(spec_name):
    """Over thousands of steps, with resets at different times in different envs, the batch
    gives exactly what gymnasium's SyncVectorEnv of our single envs gives (gymnasium's own
    vector semantics, next-step autoreset, are the reference)."""
    _compare(spec_name, variants=[3] * 5, reset_seed=11)


@pytest.mark.parametrize("spec_name, overrides", [
    ("seed-cache", {"observation__grid": {"size": 3}, "observation__pixels": {"height": 24, "width": 24},
                    "observation__distractors": {"decoy_probability": 0.3, "lure_probability": 0.4}}),
    ("lantern-hall", {"observation__distractors": {"decoy_probability": 0.3}}),
    ("seed-cache", {"observation__grid": {"size": 3}, "observation__pixels": {"height": 24, "width": 24},
                    "observation__distractors": {"decoy_probability": 0.4}}),
    ("orchard-hives", {"agent__actions": "turns", "observation__first_person": {"height": 16, "width": 20},
                       "observation__distractors": {"decoy_probability": 0.5}}),
    ("marsh-stones", {"observation__pixels": {"height": 24, "width": 24},
                      "observation__distractors": {"decoy_probability": 0.3}}),
    ("marsh-stones", {"observation__distractors": {"decoy_probability": 0.3}}),
], ids=["cue-all-distractors", "cue-vector-decoys", "cue-pictures-decoys", "first-person-decoys", "field-pixel-decoys", "field-vector-decoys"])
def test_batch_with_distractors_equals_single_envs(spec_name, overrides):
    """Decoys and lures are drawn per environment and step from the episode's stream: the batch
    (column draws) and the single envs (a draw block, a scalar decoy path) show the same ones
    (gymnasium's SyncVectorEnv of our single envs is the reference)."""
    _compare(spec_name, variants=[3] * 4, reset_seed=2, steps=1200, **overrides)


def test_draws_made_one_episode_at_a_time_equal_draws_made_ahead(monkeypatch):
    """With the single envs drawing one episode's noise bits and decoys per reset (a block of one, not
    of the stream's next episodes), they still give what the batch, which draws its environments' next
    episodes in windows, gives (gymnasium's SyncVectorEnv of our single envs is the reference; the test
    above covers blocks of episodes, the one below windows of two)."""
    import taskgen.envs.noise as noise
    monkeypatch.setattr(noise, "BLOCK", 1)
    _compare("seed-cache", variants=[3] * 4, reset_seed=5, steps=600,
             observation__distractors={"decoy_probability": 0.3, "lure_probability": 0.4})
    _compare("marsh-stones", variants=[2] * 4, reset_seed=5, steps=600,
             observation__distractors={"decoy_probability": 0.3})


@pytest.mark.parametrize("spec_name, mode", [("seed-cache", AutoresetMode.NEXT_STEP),
                                             ("marsh-stones", AutoresetMode.NEXT_STEP),
                                             ("tide-pools", AutoresetMode.SAME_STEP)])
def test_episodes_drawn_ahead_in_small_windows_equal_single_envs(spec_name, mode, monkeypatch):
    """With windows of two episodes (refilled many times over) and resets through a reset_mask, some of
    them seeded, the batch, which starts its episodes from draws made ahead, still gives what
    gymnasium's SyncVectorEnv of single envs gives (the reference)."""
    import taskgen.envs.ahead as ahead
    monkeypatch.setattr(ahead, "AHEAD", 2)
    _compare(spec_name, variants=[2] * 4, reset_seed=6, steps=800, mode=mode, masked=True,
             observation__distractors={"decoy_probability": 0.3})


def test_a_padded_field_variant_equals_single_envs():
    """A field variant narrower than its family (marks block moved by the padding) steps in a batch
    exactly as gymnasium's SyncVectorEnv of single envs does."""
    _compare("marsh-stones", variants=[1] * 4, reset_seed=4, steps=600,
             layout__field__width={"range": [3, 5]}, observation__distractors={"decoy_probability": 0.2})


@pytest.mark.parametrize("spec_name", ["seed-cache", "signal-tower"])
def test_batch_across_variants_equals_single_envs(spec_name):
    """Each env may hold its own variant (specs whose vector size does not depend on layout)."""
    _compare(spec_name, variants=[0, 1, 2, 3, 4, 5], reset_seed=[7, 1, 9, 4, 4, 0], steps=1500)


@pytest.mark.parametrize("mode", [AutoresetMode.SAME_STEP, AutoresetMode.DISABLED])
@pytest.mark.parametrize("spec_name", ["lantern-hall", "marsh-stones"])
def test_every_autoreset_mode_equals_sync_vector_env(spec_name, mode):
    """Same-step autoreset (final_obs, final_info) and disabled autoreset with reset_mask resets give
    exactly what gymnasium's SyncVectorEnv in that mode gives over our single envs (gymnasium's own
    vector env is the reference); infos without analysis_only, as agents get them."""
    _compare(spec_name, variants=[1] * 5, reset_seed=3, steps=400, mode=mode, analysis_info=False,
             masked=mode == AutoresetMode.SAME_STEP)


def test_next_step_reset_mask_and_is_success():
    """A reset_mask in next-step mode resets only the masked environments, as SyncVectorEnv does;
    is_success is reported exactly for the environments whose episode ended, and agrees with the
    reward of the correct arm (lantern-hall: +1 correct, −1 wrong, −1 timeout, −0.01 per step)."""
    _compare("lantern-hall", variants=[2] * 4, reset_seed=9, steps=300, analysis_info=False, masked=True)
    env = taskgen.make_vec("lantern-hall", 64, layout__corridor__length=1)
    env.reset(seed=0)
    rng = np.random.default_rng(0)
    seen = 0
    for _ in range(300):
        _, reward, terminated, truncated, info = env.step(rng.integers(4, size=64))
        ended = terminated | truncated
        assert "analysis_only" not in info
        if ended.any():
            assert np.array_equal(info["_is_success"], ended)
            assert np.array_equal(info["is_success"][ended], reward[ended] > 0)
            seen += int(info["is_success"].sum())
        else:
            assert "is_success" not in info
    assert seen > 0
    mask = np.zeros(64, dtype=bool)
    mask[[3, 5]] = True
    before = env.step(np.zeros(64, dtype=np.int64))[4]["step"].copy()
    _, info = env.reset(options={"reset_mask": mask})
    assert np.array_equal(info["_step"], mask) and (info["step"][mask] == 0).all()
    assert (env.core.step_count[~mask] == before[~mask]).all()
    for bad in (mask.astype(int), np.zeros(64, dtype=bool), mask[:3], [True] * 64):
        with pytest.raises(ValueError, match="reset_mask"):
            env.reset(options={"reset_mask": bad})


def test_disabled_autoreset_refuses_to_step_an_ended_environment():
    """With autoreset disabled, stepping an ended environment before its reset is an error (gymnasium's
    SyncVectorEnv asserts the same); so is a reset_mask before the first full reset."""
    env = taskgen.make_vec("lantern-hall", 2, autoreset_mode="disabled", layout__corridor__length=0)
    with pytest.raises(ValueError, match="first reset"):
        env.reset(options={"reset_mask": np.array([True, False])})
    env.reset(seed=0)
    for _ in range(50):
        _, _, terminated, truncated, _ = env.step(np.array([1, 1]))
        if (terminated | truncated).any():
            break
    with pytest.raises(ValueError, match="autoreset disabled"):
        env.step(np.array([1, 1]))
    with pytest.raises(ValueError, match="autoreset_mode must be one of"):
        taskgen.make_vec("lantern-hall", 2, autoreset_mode="sometimes")


def test_one_hot_blocks_are_padded_across_variants():
    """With one-hot position, variants of different sizes share one block layout: each env's
    observation is its single env's, each block zero-padded at its end."""
    variants = [0, 1, 2]
    vec = taskgen.make_vec("lantern-hall", 3, variants=variants, analysis_info=True)
    singles = [taskgen.make("lantern-hall", variant=v, analysis_info=True) for v in variants]
    obs, _ = vec.reset(seed=2)
    for i, env in enumerate(singles):
        single, _ = env.reset(seed=2 + i)
        for name, block in env.observation_blocks.items():
            wide = vec.observation_blocks[name]
            width = block.stop - block.start
            assert np.array_equal(obs[i, wide.start:wide.start + width], single[block])
            assert not obs[i, wide.start + width:wide.stop].any()


def test_spaces_metadata_and_registration():
    """Spaces batch the single spaces; gymnasium.make_vec uses the native batch for our IDs."""
    env = gym.make_vec("taskgen/seed-cache-v1", num_envs=4, analysis_info=True)
    assert isinstance(env.unwrapped, taskgen.TaskVectorEnv)
    assert env.observation_space.shape == (4, env.single_observation_space.shape[0])
    assert env.action_space == gym.spaces.MultiDiscrete([4] * 4)
    obs, info = env.reset(seed=0)
    assert env.observation_space.contains(obs)
    assert info["_variant_id"].all() and info["analysis_only"]["_cue"].all()


def test_bad_actions_are_refused():
    """Wrong shape, type or range of actions is a ValueError, not a silent wrap-around."""
    env = taskgen.make_vec("lantern-hall", 3, analysis_info=True)
    env.reset(seed=0)
    for bad in (np.array([0, 1]), np.array([0, 1, 4]), np.array([0, -1, 2]), np.array([0.0, 1.0, 2.0])):
        with pytest.raises(ValueError, match=r"actions must be 3 integers in \[0, 4\)"):
            env.step(bad)


def test_cue_draws_are_uniform():
    """Over many resets each of three cue values appears with frequency 1/3 within 4 standard
    errors (binomial proportion; common practice) — a check of the counter-based streams."""
    n = 4096
    env = taskgen.make_vec("seed-cache", n, analysis_info=True)
    _, info = env.reset(seed=123)
    cues = info["analysis_only"]["cue"]
    for v in range(3):
        assert abs((cues == v).mean() - 1 / 3) <= 4 * np.sqrt((1 / 3) * (2 / 3) / n)


def _make_lantern():
    return taskgen.make("lantern-hall", variant=1, analysis_info=True)


def test_single_envs_pickle_and_run_under_async_vector_env():
    """Single envs pickle, and gymnasium's AsyncVectorEnv with the spawn context runs them in
    fresh processes with the same results as in this one (gymnasium's AsyncVectorEnv)."""
    env = _make_lantern()
    clone = pickle.loads(pickle.dumps(env))
    assert np.array_equal(clone.reset(seed=4)[0], env.reset(seed=4)[0])
    async_env = gym.vector.AsyncVectorEnv([_make_lantern] * 2, context="spawn")
    sync_env = gym.vector.SyncVectorEnv([_make_lantern] * 2)
    try:
        o1, _ = async_env.reset(seed=3)
        o2, _ = sync_env.reset(seed=3)
        assert np.array_equal(o1, o2)
        rng = np.random.default_rng(0)
        for _ in range(60):
            a = rng.integers(4, size=2)
            r1, r2 = async_env.step(a), sync_env.step(a)
            for x, y in zip(r1[:4], r2[:4]):
                assert np.array_equal(x, y)
    finally:
        async_env.close()
        sync_env.close()


@pytest.mark.parametrize("spec_name", ["lantern-hall", "tide-pools"])
def test_batch_equals_single_envs_in_every_modality(spec_name):
    """Grid views and (noisy) pixels from the batch equal those of a SyncVectorEnv of single envs."""
    over = dict(observation__grid={"size": 3},
                observation__pixels={"height": 24, "width": 32, "view": "window",
                                     "noise": {"kind": "gaussian", "amplitude": 0.1}})
    ours = taskgen.make_vec(spec_name, 4, **over, analysis_info=True)
    theirs = gym.vector.SyncVectorEnv([lambda: taskgen.make(spec_name, **over, analysis_info=True)] * 4)
    o1, _ = ours.reset(seed=3)
    o2, _ = theirs.reset(seed=3)
    rng = np.random.default_rng(9)
    for t in range(600):
        for key in ("vector", "grid", "pixels"):
            assert o1[key].dtype == o2[key].dtype and np.array_equal(o1[key], o2[key]), (t, key)
        a = rng.integers(4, size=4)
        (o1, r1, te1, tr1, _), (o2, r2, te2, tr2, _) = ours.step(a), theirs.step(a)
        assert np.array_equal(r1, r2) and np.array_equal(te1, te2) and np.array_equal(tr1, tr2)
