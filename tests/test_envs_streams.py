"""Counter-based streams: a column drawn alone and a single env's scalar draw equal the full draws."""

from __future__ import annotations

import numpy as np

from taskgen.envs.streams import draw, subkeys, uniform, uniform_column


def test_a_column_drawn_alone_equals_that_column_of_the_full_draw():
    """uniform_column(keys, step, j) is column j of uniform(keys, step, width) for any width > j,
    so a consumer may draw later columns only for the rows that need them (common practice:
    counter-based generators are random access, Salmon et al., SC 2011)."""
    keys = subkeys(np.arange(1, 200, dtype=np.uint64), "distractor")
    step = np.arange(199) % 13
    full = uniform(keys, step, 6)
    for j in range(6):
        assert np.array_equal(uniform_column(keys, step, j), full[:, j])
        assert np.array_equal(uniform_column(keys, step, j), uniform(keys, step, j + 1)[:, j])


def test_a_single_draw_in_python_integers_equals_numpy_s():
    """draw(key, t, j) — a single env's draw in Python ints — is the float uniform(key, t, width)
    gives in column j, bit for bit, for keys and steps across the uint64 range (common practice:
    splitmix64 is defined on wrapping 64-bit arithmetic, Steele, Lea & Flood, OOPSLA 2014)."""
    rng = np.random.default_rng(3)
    keys = np.concatenate([rng.integers(0, 2**63, size=20, dtype=np.uint64) * np.uint64(2),
                           np.array([0, 2**64 - 1], dtype=np.uint64)])
    for key in keys:
        for t in (0, 1, 5, 999, 2**40):
            full = uniform(np.array([key]), t, 6)[0]
            assert [draw(int(key), t, j) for j in range(6)] == full.tolist(), (key, t)


def test_the_streams_wrap_without_warnings_for_scalars_and_arrays():
    """uint64 hashing wraps by design: with warnings as errors, every stream function runs on 0-d and
    1-d inputs whose products overflow (numpy warns on overflow in scalar math, not in ufunc loops)."""
    import warnings

    from taskgen.envs.streams import episode_keys, flips, noise_track
    big = np.array([2**64 - 1], dtype=np.uint64)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        keys = episode_keys(big, np.array([2**40]))
        for step in (7, np.array([2**50])):
            uniform(subkeys(keys, "cue"), step, 4)
            uniform_column(keys, step, 3)
            flips(keys, step, 9, 1000)
        uniform(np.uint64(2**63 + 5), 2**40)
        noise_track(keys, 5, 0.3, 12)
