"""An episode's noise bits and decoys drawn for all its steps at its start equal the draws step by step."""

from __future__ import annotations

import numpy as np

from taskgen.envs.distractors import decoy_tracks
from taskgen.envs.noise import EpisodeNoise
from taskgen.envs.streams import (below, episode_keys, flip_threshold, flips, noise_init, subkeys, uniform_column)


def _keys(n: int) -> np.ndarray:
    return episode_keys(np.arange(3, 3 + n, dtype=np.uint64), np.arange(n))


def test_noise_bit_tracks_equal_flips_step_by_step():
    """Row t of an episode's bit track is its first bits flipped by every step's flips up to t, each
    step's draws made from the counter alone (the definition in streams.py; common practice:
    counter-based draws are random access, Salmon et al., SC 2011), one flip probability per episode."""
    keys = _keys(6)
    flip = np.array([0.0, 0.05, 0.3, 0.5, 1.0, 0.2])
    noise = EpisodeNoise(6, bits=7, horizon=30)
    noise.begin_drawn(np.arange(6), noise.draws(keys, flip))
    now = noise_init(keys, 7)
    flip_keys = subkeys(keys, "noise_flip")
    thresholds = np.array([flip_threshold(p) for p in flip])
    for t in range(31):
        if t:
            now = now ^ flips(flip_keys, t, 7, thresholds)
        assert np.array_equal(noise.bits_at(np.full(6, t)), now), t
    # environments at different steps read their own rows
    steps = np.array([0, 30, 4, 17, 9, 1])
    assert np.array_equal(noise.bits_at(steps)[1], noise.draws(keys, flip)["noise_bits"][1, 30])


def test_decoy_tracks_equal_the_draws_at_each_step():
    """A decoy shows at step t when draw 0 of (key, t) is below the probability, with the value draw 1
    gives (the definition in distractors.py); values are drawn only where one shows."""
    keys = subkeys(_keys(40), "distractor")
    track = decoy_tracks(keys, 25, 0.3, 5)
    for t in range(25):
        shown = below(keys, t, 0, 0.3)
        value = np.minimum((uniform_column(keys, t, 1) * 5).astype(np.int64), 4)
        assert np.array_equal(track[:, t], np.where(shown, value, -1)), t
    assert 0.2 < (track >= 0).mean() < 0.4 and set(track[track >= 0].tolist()) == set(range(5))


def test_tracks_start_anew_only_in_the_rows_begun():
    """Beginning some environments' episodes leaves the others' tracks as they were (common practice)."""
    noise = EpisodeNoise(4, bits=3, horizon=10, decoy_probability=0.5, decoy_values=3)
    keys = _keys(4)
    noise.begin_drawn(np.arange(4), noise.draws(keys, 0.2))
    before_bits, before_decoys = noise.bit_track.copy(), noise.decoy_track.copy()
    noise.begin_drawn(np.array([2]), noise.draws(_keys(9)[8:], 0.2))
    rows = noise.track_row
    for i in (0, 1, 3):
        span = slice(rows[i], rows[i] + 11)
        assert np.array_equal(noise.bit_track[span], before_bits[span])
        assert np.array_equal(noise.decoy_track[span], before_decoys[span])
    assert not np.array_equal(noise.bit_track[rows[2]:rows[2] + 11], before_bits[rows[2]:rows[2] + 11])
