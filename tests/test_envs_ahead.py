"""A batch's next episodes drawn ahead in windows: the same draws as made at each start."""

from __future__ import annotations

import numpy as np
import pytest

import taskgen
import taskgen.envs.ahead as ahead
from taskgen.envs.ahead import NextEpisodes
from taskgen.envs.streams import episode_keys
from taskgen.tools.variants import SuiteRequest, build_suite, write_manifest

DISTRACTED = {"observation__distractors": {"decoy_probability": 0.3, "lure_probability": 0.2}}


def _pool(tmp_path):
    """A batch drawing each episode's variant from a split of four (a manifest of orchard-hives)."""
    manifest = build_suite(taskgen.load_spec(taskgen.bundled_specs()["orchard-hives"]),
                           SuiteRequest(splits=(("train", 4),)))
    return taskgen.make_vec(write_manifest(manifest, str(tmp_path)), 6, split="train")


@pytest.mark.parametrize("make", [
    lambda tmp: taskgen.make_vec("seed-cache", 6, **DISTRACTED),             # noise bits, decoys, lures
    lambda tmp: taskgen.make_vec("marsh-stones", 6, observation__distractors={"decoy_probability": 0.3}),  # paths
    lambda tmp: taskgen.make_vec("signal-tower", 6, variants=[0, 1, 2, 3, 4, 5]),   # a variant per env
    _pool,                                                                     # a variant per episode
], ids=["cue-noise-distractors", "field", "variant-per-env", "pool"])
@pytest.mark.parametrize("size", [1, 2, 5])
def test_windows_give_the_draws_made_at_each_start(make, size, tmp_path, monkeypatch):
    """Through restarts in any order, resets that keep or change streams and jumps of episode, and
    refills drawn in pieces, each episode starts from exactly the draws :meth:`Core.draws` makes from its key then (the direct
    computation is the reference; common practice for a cache)."""
    monkeypatch.setattr(ahead, "AHEAD", size)
    monkeypatch.setattr(ahead, "FILL_EPISODES", 4)     # refills drawn a few environments at a time
    env = make(tmp_path)
    core, n = env.core, env.num_envs
    nxt = NextEpisodes(core)
    assert nxt.size == size
    rng = np.random.default_rng(3)
    streams = rng.integers(1, 2**63 - 1, size=n).astype(np.uint64)
    episodes = np.zeros(n, dtype=np.int64)
    nxt.begun(np.arange(n), streams, episodes)
    for t in range(400):
        rows = np.flatnonzero(rng.random(n) < 0.4)
        if t % 37 == 5:          # a reset: some environments on new streams, some jumping ahead or back
            moved = rows[rng.random(rows.size) < 0.5]
            streams[moved] = rng.integers(1, 2**63 - 1, size=moved.size).astype(np.uint64)
            episodes[rows] = np.where(np.isin(rows, moved), 0, episodes[rows] + rng.integers(-2, 4, rows.size))
            episodes[rows] = np.maximum(episodes[rows], 0)
            nxt.begun(rows, streams[rows], episodes[rows])
            continue
        if not rows.size:
            continue
        episodes[rows] += 1
        seen = {}
        core.begin_drawn = lambda r, drawn: seen.update(drawn=drawn)   # what a restart starts from
        nxt.restart(rows)
        del core.begin_drawn
        expected = core.draws(rows, episode_keys(streams[rows], episodes[rows]))
        assert set(seen["drawn"]) == set(expected)
        for name, value in expected.items():
            assert np.array_equal(seen["drawn"][name], value), (t, name)
        assert np.array_equal(nxt.numbers(), episodes)


def test_refills_come_for_many_environments_at_once(monkeypatch):
    """Environments restarting at their own pace refill their windows together: about once per half a
    window of one environment's episodes, not once per environment (common practice: batched work)."""
    monkeypatch.setattr(ahead, "AHEAD", 8)
    env = taskgen.make_vec("lantern-hall", 16)
    env.reset(seed=0)
    nxt = env._next
    refills = []
    fill = nxt._refill
    monkeypatch.setattr(nxt, "_refill", lambda: (refills.append(1), fill()))
    rng = np.random.default_rng(0)
    restarts = 0
    for _ in range(400):
        rows = np.flatnonzero(rng.random(16) < 0.25)
        if rows.size:
            nxt.restart(rows)
            restarts += rows.size
    # about 100 episodes per environment, a refill when the first reaches its window's end (and every
    # window at least half used refilled with it): near restarts / 16 / 4 of them; one environment at a
    # time would be about four times as many
    assert restarts > 1500 and 1 <= len(refills) <= 1.5 * restarts / (16 * 4)


def test_window_size_follows_the_memory_cap(monkeypatch):
    """The windows hold at most AHEAD episodes per environment and about AHEAD_BYTES in all, and at
    least one episode however large the batch (common practice: a bounded cache)."""
    small = taskgen.make_vec("lantern-hall", 4)
    assert small._next.size == ahead.AHEAD
    monkeypatch.setattr(ahead, "AHEAD_BYTES", 1 << 16)
    capped = NextEpisodes(taskgen.make_vec("seed-cache", 64).core)
    held = sum(value.nbytes for value in capped.arrays.values())
    assert 1 <= capped.size < ahead.AHEAD and held <= 1 << 16
    monkeypatch.setattr(ahead, "AHEAD_BYTES", 1)
    assert NextEpisodes(taskgen.make_vec("seed-cache", 64).core).size == 1
