"""Field runtimes: gymnasium's checker, batch against single envs, paths per episode, marks,
no path in any observation, and Monte Carlo against the exact per-path figures."""

from __future__ import annotations

import json
import subprocess
import sys
import warnings

import gymnasium as gym
import numpy as np
import pytest
from gymnasium.utils.env_checker import check_env

import taskgen
from taskgen.analysis import Objective, at_reset, evaluate, uniform_policy

from conftest import field_spec_text, timeless

MODALITIES = {
    "vector": {"vector": {"position": "one_hot", "noise": {"bits": 3, "flip_probability": 0.2}}},
    "pixels": {"vector": None, "pixels": {"height": 40, "width": 32, "noise": {"kind": "gaussian", "amplitude": 0.05}}},
    "window": {"vector": {"position": "coordinates"}, "pixels": {"height": 24, "width": 24, "view": "window",
                                                                 "window": 3}},
    "grid": {"vector": None, "grid": {"size": 5}},
    "decoys": {"vector": {"position": "one_hot"}, "pixels": {"height": 24, "width": 24},
               "distractors": {"decoy_probability": 0.3}},
    "window-decoys": {"vector": None, "pixels": {"height": 24, "width": 24, "view": "window", "window": 3},
                      "distractors": {"decoy_probability": 0.4}},
    "grid-decoys": {"vector": None, "grid": {"size": 3}, "pixels": {"height": 30, "width": 30, "view": "window",
                                                                    "window": 3},
                    "distractors": {"decoy_probability": 0.4}},
}


def _spec(observation=None, **fields):
    return taskgen.load_spec_text(field_spec_text(observation=observation, **fields))


@pytest.mark.parametrize("modality", sorted(MODALITIES))
def test_gymnasium_checker_passes(modality):
    """gymnasium.utils.env_checker.check_env accepts a field env in each modality, with no warning."""
    env = taskgen.make(_spec(MODALITIES[modality], width=5, height=6, turns=2, start="random"),
                       render_mode="rgb_array", analysis_info=True)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        warnings.filterwarnings("ignore", message=".*render modes.*")   # no registry id: nothing to check
        check_env(env)


@pytest.mark.parametrize("modality", sorted(MODALITIES))
def test_batch_equals_sync_vector_env_of_single_envs(modality):
    """Over 1,500 random steps with resets at different times, the batch gives exactly what
    gymnasium's SyncVectorEnv of single envs gives (gymnasium's vector semantics are the reference)."""
    spec = _spec(MODALITIES[modality], width=5, height=6, turns=2, start="random", mark={"steps": 3},
                 misstep={"limit": 4}, rewards={"step": -0.01, "misstep": -0.2}, episode={"max_steps": 30})
    ours = taskgen.make_vec(spec, 4, analysis_info=True)
    theirs = gym.vector.SyncVectorEnv([lambda: taskgen.make(spec, analysis_info=True)] * 4)
    rng = np.random.default_rng(3)
    first = ours.reset(seed=[5, 6, 7, 8]), theirs.reset(seed=[5, 6, 7, 8])
    results = [first]
    for _ in range(1500):
        a = rng.integers(4, size=4)
        results.append((ours.step(a), theirs.step(a)))
    for t, (x, y) in enumerate(results):
        for u, v in zip(x[:-1], y[:-1]):
            if isinstance(u, dict):
                assert all(np.array_equal(u[k], v[k]) for k in u), t
            else:
                assert np.array_equal(u, v), t
        for key in ("path", "start", "state", "missteps"):
            assert np.array_equal(x[-1]["analysis_only"][key], y[-1]["analysis_only"][key]), (t, key)


def test_decoy_marks_on_a_field_of_many_cells_equal_single_envs():
    """On a field of 16 × 8 cells (a decoy mark drawn among the 127 other cells, numbers that fill a signed
    byte, kept in one) the batch shows the same decoy marks as gymnasium's SyncVectorEnv of single envs
    (the reference)."""
    spec = _spec({"vector": {"position": "one_hot"}, "distractors": {"decoy_probability": 0.5}}, width=16, height=8,
                 turns=2, start="random", mark={"steps": 3}, episode={"max_steps": 40})
    ours = taskgen.make_vec(spec, 3)
    theirs = gym.vector.SyncVectorEnv([lambda: taskgen.make(spec)] * 3)
    x, y = ours.reset(seed=1)[0], theirs.reset(seed=1)[0]
    rng = np.random.default_rng(2)
    shown = 0
    for t in range(400):
        assert np.array_equal(x, y), t
        marks = x[:, ours.observation_blocks["marks"]]
        shown += int(marks[:, 120:].sum())        # marks on the last cells show too
        a = rng.integers(4, size=3)
        x, y = ours.step(a)[0], theirs.step(a)[0]
    assert shown > 0


def _paths(seed: int, episodes: int = 6) -> list[list[int]]:
    env = taskgen.make("marsh-stones", analysis_info=True)
    out = []
    for e in range(episodes):
        _, info = env.reset(seed=seed if e == 0 else None)
        out.append(info["analysis_only"]["path"].tolist())
    return out


def test_the_same_seed_gives_the_same_paths_in_a_fresh_process():
    """Every reset draws a new path, and a new interpreter with the same seed draws the same
    sequence of paths (common practice: reproducibility across processes)."""
    here = _paths(11)
    assert len({json.dumps(p) for p in here}) == len(here)
    code = ("import json, taskgen; env = taskgen.make('marsh-stones', analysis_info=True); out = []\n"
            "for e in range(6):\n    _, info = env.reset(seed=11 if e == 0 else None); "
            "out.append(info['analysis_only']['path'].tolist())\nprint(json.dumps(out))")
    there = json.loads(subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                                      check=True).stdout)
    assert there == here
    assert _paths(12) != here


@pytest.mark.parametrize("modality", sorted(MODALITIES))
def test_two_different_paths_look_the_same_at_the_start(modality):
    """With the start fixed in the middle, episodes on different paths begin with identical
    observations in every modality (noise and decoys aside): the path leaks into no observation (common practice)."""
    spec = taskgen.load_spec_text(field_spec_text(width=5, height=6, turns=2, observation={
        k: (v if v is None or k == "grid" else {**v, "noise": None}) for k, v in MODALITIES[modality].items()
        if k != "distractors"}))
    env = taskgen.make(spec, analysis_info=True)
    seen = {}
    for seed in range(40):
        obs, info = env.reset(seed=seed)
        seen[json.dumps(info["analysis_only"]["path"].tolist())] = obs
    assert len(seen) >= 2
    first, *rest = seen.values()
    for obs in rest:
        if isinstance(obs, dict):
            assert all(np.array_equal(obs[k], first[k]) for k in obs)
        else:
            assert np.array_equal(obs, first)


@pytest.mark.parametrize("steps", [1, 3, "episode"])
def test_a_mark_shows_where_the_agent_stepped_off_for_its_steps(steps):
    """After a misstep, the marks block has the aimed cell's bit set in exactly ``steps``
    observations (the one right after the misstep included), or until the episode ends (common practice)."""
    spec = _spec({"vector": {"position": "one_hot", "walls": False}}, width=3, height=6, mark={"steps": steps},
                 episode={"max_steps": 40})
    env = taskgen.make(spec, analysis_info=True)
    obs, info = env.reset(seed=0)
    block = env.observation_blocks["marks"]
    start = info["analysis_only"]["start"]
    obs, _, _, _, info = env.step(1)             # east of the middle column: off the path
    assert info["analysis_only"]["missteps"] == 1
    seen = [obs[block][start + 1] == 1]
    for _ in range(6):
        obs, *_ = env.step(2)                     # south at the start: bump, no new misstep
        seen.append(obs[block][start + 1] == 1)
    expect = [True] * 7 if steps == "episode" else [i < steps for i in range(7)]
    assert seen == expect
    assert obs[block].sum() == (1 if steps == "episode" else 0)


def test_no_mark_means_no_marks_block():
    """mark: null leaves the vector without a marks block (common practice)."""
    env = taskgen.make(_spec(mark=None), analysis_info=True)
    assert "marks" not in env.observation_blocks


@pytest.mark.parametrize("fields", [
    dict(width=4, height=5, turns=2, start="random", mark={"steps": 2}, episode={"max_steps": 25, "discount": 0.97}),
    dict(width=3, height=3, turns=1, start="random", misstep={"limit": 3, "to": "stay"}, episode={"max_steps": 30}),
], ids=["winding", "short with a misstep limit"])
def test_monte_carlo_agrees_with_the_exact_per_path_figures(fields):
    """The mean return and missteps of 3,000 uniform-random episodes agree with the exact figures
    of the paths those episodes were played on within 4 standard errors (the paired difference
    G − V(path) has mean 0; central limit theorem; common practice). The second field is
    finished or ended by missteps in most episodes, so missteps counted after an episode's end would show."""
    spec = _spec({"vector": {"position": "one_hot"}}, rewards={"step": -0.02, "misstep": -0.1, "correct": 1.0,
                                                               "timeout": -0.3}, **fields)
    env = taskgen.make_vec(spec, 64, analysis_info=True)
    model = env.model
    rng = np.random.default_rng(9)
    exact: dict[bytes, tuple[float, float]] = {}
    diffs_g, diffs_f = [], []
    _, info = env.reset(seed=21)
    path, start = info["analysis_only"]["path"], info["analysis_only"]["start"]
    returns, t = np.zeros(64), np.zeros(64, dtype=np.int64)
    pending = np.zeros(64, dtype=bool)         # ended last step: this step resets them (next-step)
    while len(diffs_g) < 3000:
        _, reward, term, trunc, info = env.step(rng.integers(4, size=64))
        live = ~pending
        returns += np.where(live, model.discount ** t * reward, 0.0)
        t += live
        done = (term | trunc) & live
        for i in np.flatnonzero(done):
            key = path[i].tobytes() + int(start[i]).to_bytes(4, "little")
            if key not in exact:
                one = model.paths.path_model(path[i], int(start[i]))
                uniform = uniform_policy(one)
                missteps = Objective(model.paths.path_missteps(path[i]), 1.0, 0.0)
                exact[key] = (at_reset(one, evaluate(one, uniform)), at_reset(one, evaluate(one, uniform, missteps)))
            diffs_g.append(returns[i] - exact[key][0])
            diffs_f.append(info["analysis_only"]["missteps"][i] - exact[key][1])
        path = np.where(pending[:, None], info["analysis_only"]["path"], path)
        start = np.where(pending, info["analysis_only"]["start"], start)
        returns[pending], t[pending] = 0.0, 0
        pending = done
    for d in (np.asarray(diffs_g), np.asarray(diffs_f)):
        assert abs(d.mean()) <= 4 * d.std(ddof=1) / np.sqrt(d.size)
    assert len(exact) >= 6           # many paths, each checked against its own exact figures


def test_render_and_ground_truth_pictures():
    """render() shows what the agent could see (no path colour); ground_truth() draws the path (common practice)."""
    from taskgen.render.palette import PATH
    env = taskgen.make(_spec(width=5, height=6, turns=2), render_mode="rgb_array", analysis_info=True)
    env.reset(seed=0)
    colour = np.asarray(PATH, dtype=np.uint8)
    assert not (env.render() == colour).all(axis=2).any()
    assert (env.ground_truth() == colour).all(axis=2).any()


def test_a_walled_field_runs_and_batches_like_single_envs():
    """A field with maze walls passes gymnasium's checker, its paths follow the passages, and the
    batch equals a SyncVectorEnv of single envs (gymnasium's vector semantics as the reference)."""
    import yaml
    doc = yaml.safe_load(field_spec_text(width=6, height=5, start="random", mark={"steps": 2},
                                         episode={"max_steps": 25}, rewards={"misstep": -0.1}))
    doc["layout"]["field"]["maze"] = {"generator": "uniform", "braid": 0.2}
    spec = taskgen.load_spec_text(yaml.safe_dump(doc))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        warnings.filterwarnings("ignore", message=".*render modes.*")
        check_env(taskgen.make(spec, analysis_info=True))
    ours = taskgen.make_vec(spec, 3, analysis_info=True)
    theirs = gym.vector.SyncVectorEnv([lambda: taskgen.make(spec, analysis_info=True)] * 3)
    o1, i1 = ours.reset(seed=2)
    o2, i2 = theirs.reset(seed=2)
    rng = np.random.default_rng(5)
    for _ in range(600):
        assert np.array_equal(o1, o2) and np.array_equal(i1["analysis_only"]["path"], i2["analysis_only"]["path"])
        a = rng.integers(4, size=3)
        o1, r1, t1, u1, i1 = ours.step(a)
        o2, r2, t2, u2, i2 = theirs.step(a)
        assert np.array_equal(r1, r2) and np.array_equal(t1, t2) and np.array_equal(u1, u2)


def test_decoy_marks_show_at_their_rate_never_on_the_agent_and_not_in_the_figures():
    """A decoy mark shows in a share of observations that matches decoy_probability within 4
    standard errors (binomial; common practice), never on the agent's own cell, and leaves the
    analyses' figures unchanged (they read noise-free observations)."""
    from taskgen.tools.check import check_variant
    fields = dict(width=5, height=6, turns=2, start="random", mark={"steps": 1}, episode={"max_steps": 40})
    spec = _spec({"vector": {"position": "one_hot"}, "distractors": {"decoy_probability": 0.25}}, **fields)
    env = taskgen.make_vec(spec, 32, analysis_info=True)
    block = env.observation_blocks["marks"]
    obs, info = env.reset(seed=4)
    shown, count = 0, 0
    for _ in range(400):
        obs, _, _, _, info = env.step(np.full(32, 2))        # south: bumps at the start, never steps off
        marks = obs[:, block]
        agent = env.model.paths.state_cell[info["analysis_only"]["state"]]
        assert not marks[np.arange(32), agent].any()
        shown += int(marks.any(axis=1).sum())
        count += 32
    p = shown / count
    assert abs(p - 0.25) <= 4 * np.sqrt(0.25 * 0.75 / count)
    plain = _spec({"vector": {"position": "one_hot"}}, **fields)
    assert timeless(check_variant(spec, 0, paths=8).to_dict()) == timeless(check_variant(plain, 0, paths=8).to_dict())
