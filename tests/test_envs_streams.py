"""Counter-based streams: a column drawn alone and a single env's scalar draw equal the full draws."""

from __future__ import annotations

import numpy as np

from taskgen.envs.streams import draw, subkeys, subkeys_of, uniform, uniform_column


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


def test_subkeys_of_several_purposes_in_one_hash_equal_each_purpose_s():
    """Column j of subkeys_of(keys, purposes) is subkeys(keys, purposes[j]), for keys across the uint64
    range (common practice: the same hash of the same counter)."""
    keys = np.concatenate([np.random.default_rng(4).integers(0, 2**63, size=50, dtype=np.uint64) * np.uint64(2),
                           np.array([0, 2**64 - 1], dtype=np.uint64)])
    purposes = ("noise_flip", "pixel_noise", "distractor", "cue")
    stacked = subkeys_of(keys, purposes)
    assert stacked.shape == (keys.size, len(purposes))
    for j, purpose in enumerate(purposes):
        assert np.array_equal(stacked[:, j], subkeys(keys, purpose))


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


def test_below_compares_draws_with_a_probability_exactly():
    """below(keys, t, j, p) is uniform_column(keys, t, j) < p for every draw, including probabilities
    that are draws themselves (the boundary) and 0 and 1 (common practice: an integer threshold
    for a 53-bit uniform, as in the conversion m · 2⁻⁵³)."""
    from taskgen.envs.streams import below
    keys = subkeys(np.arange(1, 4001, dtype=np.uint64), "distractor")
    step = np.arange(4000) % 17
    u = uniform_column(keys, step, 1)
    for p in (0.0, 0.2, 1 / 3, 0.5, 1.0, float(u[7]), float(u[9]) + 1e-17, np.nextafter(u[11], 1.0)):
        assert np.array_equal(below(keys, step, 1, p), u < p), p


def test_the_single_env_draws_in_python_integers_equal_the_numpy_ones():
    """episode_key, subkey, uniform_one and categorical_one (a single env's reset, in Python ints)
    give bit for bit what episode_keys, subkeys, uniform and categorical give (common practice)."""
    from taskgen.envs.streams import (categorical, categorical_one, episode_key, episode_keys, subkey,
                                      uniform_one)
    rng = np.random.default_rng(8)
    for stream, episode in zip(rng.integers(0, 2**63 - 1, size=30), rng.integers(0, 2**40, size=30)):
        key = episode_key(int(stream), int(episode))
        assert key == int(episode_keys(np.array([stream]), np.array([episode]))[0])
        for purpose in ("cue", "variant", "distractor", "pixel_noise"):
            sub = subkey(key, purpose)
            assert sub == int(subkeys(np.array([key], dtype=np.uint64), purpose)[0])
            for t in (0, 3):
                assert uniform_one(sub, t) == float(uniform(np.array([sub], dtype=np.uint64), t)[0])
    cumulative = np.cumsum(rng.random(5))
    cumulative /= cumulative[-1]
    for u in np.concatenate([rng.random(200), cumulative, [0.0, 0.999999]]):
        assert categorical_one(float(u), cumulative.tolist()) == int(categorical(np.array([u]), cumulative[None])[0])


def test_picking_by_integer_thresholds_equals_picking_by_floats():
    """categorical_bits on uniform_bits equals categorical on uniform (the float path, numpy's
    comparison the reference) for one shared row (a sorted search) and for a row per draw, with
    probabilities padded with 1.0 and draws placed exactly on a threshold."""
    from taskgen.envs.streams import categorical, categorical_bits, uniform_bits, unit_thresholds

    rng = np.random.default_rng(3)
    keys = subkeys(rng.integers(0, 2**63, size=4000, dtype=np.uint64), "cue")
    u, m = uniform(keys), uniform_bits(keys)
    assert np.array_equal(u, m.astype(np.float64) * 2.0**-53)
    for width in (1, 2, 3, 7):
        probs = rng.dirichlet(np.ones(width), size=4000)
        cumulative = np.concatenate([np.cumsum(probs, axis=1), np.ones((4000, 2))], axis=1)   # padded
        assert np.array_equal(categorical_bits(m, unit_thresholds(cumulative)), categorical(u, cumulative))
        row = cumulative[0]
        assert np.array_equal(categorical_bits(m, unit_thresholds(row)),
                              categorical(u, np.broadcast_to(row, cumulative.shape)))
        exact = unit_thresholds(row)[:-2]           # draws exactly on each threshold and one below it
        on = np.concatenate([exact, exact - 1]).astype(np.uint64)
        assert np.array_equal(categorical_bits(on, unit_thresholds(row)),
                              categorical(on.astype(np.float64) * 2.0**-53, np.broadcast_to(row, (on.size, row.size))))


def test_flips_with_one_threshold_equal_flips_with_one_per_environment():
    """A single threshold for every environment (compared as 16-bit numbers) flips exactly the bits that a
    threshold per environment flips (the array path, numpy's comparison, is the reference), at 0, at
    65,536 (probability 1) and between."""
    from taskgen.envs.streams import flips

    keys = subkeys(np.arange(1, 2049, dtype=np.uint64), "noise_flip")
    step = np.arange(2048) % 23
    for threshold in (0, 1, 13107, 32768, 65535, 65536):
        per_env = np.full(2048, threshold, dtype=np.uint64)
        for bits in (1, 4, 7, 9):
            assert np.array_equal(flips(keys, step, bits, threshold), flips(keys, step, bits, per_env))
