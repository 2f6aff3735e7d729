"""Decoy cues and lure tiles: their rates, and that decoys carry nothing about the real cue."""

from __future__ import annotations

import numpy as np

import taskgen
from taskgen.render.palette import CUE_COLOURS, FLOOR

OVER = dict(observation__grid={"size": 3}, observation__pixels={"height": 30, "width": 40},
            observation__distractors={"decoy_probability": 0.25, "lure_probability": 0.4})


def _run(steps=3000, num_envs=8):
    env = taskgen.make_vec("seed-cache", num_envs, **OVER, analysis_info=True)
    obs, info = env.reset(seed=0)
    rng = np.random.default_rng(1)
    records = []
    for _ in range(steps // num_envs):
        records.append((obs, info))
        obs, _, _, _, info = env.step(rng.integers(4, size=num_envs))
    return env, records


def test_decoys_appear_at_their_rate_and_carry_no_cue():
    """Outside the real cue's window the cue bits light with probability 0.25 (binomial, 4
    standard errors), and the decoy value does not depend on the real cue (each real cue sees
    each decoy value about equally: 4 standard errors)."""
    env, records = _run()
    block = env.observation_blocks["cue"]
    hidden, lit, values, real = 0, 0, [], []
    for obs, info in records:
        steps = info["step"]
        outside = steps >= 2                       # seed-cache shows the cue for 2 steps
        bits = obs["vector"][:, block]
        hidden += int(outside.sum())
        on = outside & (bits.sum(axis=1) > 0)
        lit += int(on.sum())
        values += list(bits[on].argmax(axis=1))
        real += list(info["analysis_only"]["cue"][on])
    p = 0.25
    assert abs(lit / hidden - p) <= 4 * np.sqrt(p * (1 - p) / hidden)
    values, real = np.array(values), np.array(real)
    for cue in range(3):
        chosen = values[real == cue]
        for v in range(3):
            q = 1 / 3
            assert abs((chosen == v).mean() - q) <= 4 * np.sqrt(q * (1 - q) / chosen.size)


def test_lures_light_floor_tiles_at_their_rate():
    """A frame shows a cue colour on a floor tile with probability 0.4 (binomial, 4 standard
    errors); only floor pixels change."""
    env = taskgen.make("seed-cache", **OVER, analysis_info=True)
    obs, info = env.reset(seed=3)
    seen = total = 0
    for _ in range(2000):
        key = env.model.obs_key[info["analysis_only"]["state"]]
        clean = env.observations.pixels[key]
        floor = (clean == np.asarray(FLOOR, dtype=np.uint8)).all(axis=2)
        changed = (obs["pixels"] != clean).any(axis=2) & floor
        colours = {tuple(c) for c in obs["pixels"][changed]}
        assert colours <= set(CUE_COLOURS[:3])
        seen += bool(changed.any())
        total += 1
        obs, _, term, trunc, info = env.step(0)
        if term or trunc:
            obs, info = env.reset()
    p = 0.4
    assert abs(seen / total - p) <= 4 * np.sqrt(p * (1 - p) / total)


def test_distractors_do_not_change_the_analyses():
    """Distractors are noise: the leak check and the chance level read noise-free tables."""
    spec = taskgen.load_spec(taskgen.bundled_specs()["seed-cache"])
    plain = taskgen.check_variant(spec, 0)
    spec_d = taskgen.load_spec_text(open(taskgen.bundled_specs()["seed-cache"]).read(),
                                    observation__distractors={"decoy_probability": 0.5})
    noisy = taskgen.check_variant(spec_d, 0)
    assert noisy.baselines["chance"].mean_return.mean == plain.baselines["chance"].mean_return.mean
    assert noisy.ok == plain.ok
