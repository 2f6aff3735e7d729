"""Grid and pixel observations: exact spaces, contrast, noise statistics, cue windows, leaks."""

from __future__ import annotations

import warnings

import gymnasium as gym
import numpy as np
import pytest
from gymnasium.utils.env_checker import check_env

import taskgen
from taskgen import analyse, observation_set
from taskgen.analysis import static_leak
from taskgen.render.grid import GRID_CHANNELS
from taskgen.render.lamp import LAMP_OFF, lamp_disc
from taskgen.render.palette import (AGENT, CUE_COLOURS, FLOOR, MARK, PATH, PATH_END, WALL, contrast_ratio,
                                    relative_luminance)
from taskgen.tools.check import observation_tables

MODALITIES = {
    "grid": dict(observation__vector=None, observation__grid={"size": 5}),
    "pixels-full": dict(observation__vector=None, observation__pixels={"height": 40, "width": 56}),
    "pixels-window": dict(observation__vector=None,
                          observation__pixels={"height": 32, "width": 32, "view": "window", "window": 5}),
    "all": dict(observation__grid={"size": 3},
                observation__pixels={"height": 24, "width": 24, "noise": {"kind": "salt_pepper", "amplitude": 0.1}}),
}

from conftest import CUE_SPECS


@pytest.mark.parametrize("modality", sorted(MODALITIES))
@pytest.mark.parametrize("spec_name", CUE_SPECS)
def test_every_example_runs_in_every_modality(spec_name, modality):
    """gymnasium's env checker passes and every observation of a long rollout is in the space."""
    env = taskgen.make(spec_name, **MODALITIES[modality], analysis_info=True)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        warnings.filterwarnings("ignore", message=".*render modes.*")   # no registry id: nothing to check
        check_env(env)
    rng = np.random.default_rng(1)
    obs, _ = env.reset(seed=0)
    for _ in range(500):
        assert env.observation_space.contains(obs)
        obs, _, term, trunc, _ = env.step(int(rng.integers(env.action_space.n)))
        if term or trunc:
            obs, _ = env.reset()


def test_wcag_contrast_formula_and_cue_colours():
    """WCAG 2.x: black on white is 21:1 and a colour on itself 1:1; every cue colour and the default
    mark colour have at least 3:1 against the floor they are drawn on (WCAG 2.1 success criterion 1.4.11)."""
    assert contrast_ratio((0, 0, 0), (255, 255, 255)) == pytest.approx(21.0)
    assert contrast_ratio(FLOOR, FLOOR) == pytest.approx(1.0)
    assert relative_luminance((255, 255, 255)) == pytest.approx(1.0)
    for colour in CUE_COLOURS:
        assert contrast_ratio(colour, FLOOR) >= 3.0, colour
    assert contrast_ratio(AGENT, FLOOR) >= 3.0 and contrast_ratio(WALL, FLOOR) >= 3.0
    assert contrast_ratio(MARK, FLOOR) >= 3.0 and MARK not in (FLOOR, WALL, AGENT, PATH, PATH_END)


def _wall_pixels(kind, amplitude, steps=60):
    """Noisy values of the wall-coloured pixels of the first frames of an episode."""
    env = taskgen.make("lantern-hall", observation__vector=None,
                       observation__pixels={"height": 32, "width": 32,
                                            "noise": {"kind": kind, "amplitude": amplitude}}, analysis_info=True)
    clean = env.observations.pixels
    obs, info = env.reset(seed=5)
    values, flags = [], []
    for _ in range(steps):
        key = env.model.obs_key[info["analysis_only"]["state"]]
        wall = (clean[key] == WALL).all(axis=2)
        values.append(obs[wall].astype(float) - np.asarray(WALL, dtype=float))
        flags.append(obs[wall])
        obs, _, terminated, truncated, info = env.step(0)      # a wall: the episode goes on to its time limit
        if terminated or truncated:
            obs, info = env.reset()
    return np.concatenate(values), np.concatenate(flags)


def test_gaussian_pixel_noise_statistics():
    """Gaussian noise has mean 0 and standard deviation amplitude·255: sample mean within 4
    standard errors, sample variance within 4 standard errors of σ² (normal theory:
    Var(s²) = 2σ⁴/(n−1))."""
    amplitude = 0.05
    diff, _ = _wall_pixels("gaussian", amplitude)
    sigma = amplitude * 255
    x = diff.ravel()
    n = x.size
    assert abs(x.mean()) <= 4 * sigma / np.sqrt(n) + 0.5 / np.sqrt(n)   # rounding adds ±0.5 uniform
    variance = sigma ** 2 + 1 / 12                                      # plus rounding variance
    assert abs(x.var(ddof=1) - variance) <= 4 * np.sqrt(2 * variance ** 2 / (n - 1))


def test_salt_and_pepper_fraction():
    """Each pixel turns black or white with probability amplitude (binomial, 4 standard errors)."""
    p = 0.1
    _, pixels = _wall_pixels("salt_pepper", p)
    hit = (pixels == 0).all(axis=1) | (pixels == 255).all(axis=1)
    n = hit.size
    assert abs(hit.mean() - p) <= 4 * np.sqrt(p * (1 - p) / n)


def test_pixels_and_grid_show_the_cue_only_in_its_window():
    """The lamp is the cue colour and the grid's cue channel is value + 1 in the first
    visible_steps observations, and neither shows the cue afterwards."""
    env = taskgen.make("seed-cache", observation__grid={"size": 3},
                       observation__pixels={"height": 30, "width": 30}, analysis_info=True)
    cue_channel = GRID_CHANNELS.index("cue")
    for seed in range(4):
        obs, info = env.reset(seed=seed)
        cue = info["analysis_only"]["cue"]
        for t in range(4):
            lamp = obs["pixels"][:3][lamp_disc(3, 30)]              # a 30-px frame's strip is 3 rows
            shown = t < 2
            assert (lamp == (CUE_COLOURS[cue] if shown else LAMP_OFF)).all()
            assert obs["grid"][1, 1, cue_channel] == (cue + 1 if shown else 0)
            obs, *_ = env.step(1)


def test_grid_walls_follow_the_layout():
    """The grid view's wall bits at the centre are the agent cell's blocked moves."""
    env = taskgen.make("orchard-hives", observation__vector=None, observation__grid={"size": 5}, analysis_info=True)
    model = env.model
    for key in range(model.num_keys):
        walls = env.observations.grid[key, 2, 2, 1:5].astype(bool)
        assert np.array_equal(walls, model.layout.neighbour[model.key_cell[key]] < 0)


def test_leak_check_reads_the_pixels():
    """A cue left in view after its window is found in the pixel modality (the lamp)."""
    import dataclasses

    env = taskgen.make("lantern-hall", observation__vector=None, observation__pixels={"height": 20, "width": 40}, analysis_info=True)
    model = env.model
    keys, obs_key = np.unique(np.stack([model.cell, model.value], axis=1), axis=0, return_inverse=True)
    leaky = dataclasses.replace(model, source=dataclasses.replace(model.tables, obs_key=obs_key.ravel()),
                                key_cell=keys[:, 0].copy(), key_heading=-np.ones(len(keys), dtype=np.int64),
                                cue=dataclasses.replace(model.cue, key_value=keys[:, 1].copy()))
    spec = taskgen.load_spec_text(open(taskgen.bundled_specs()["lantern-hall"]).read(), observation__vector=None,
                                  observation__pixels={"height": 20, "width": 40})
    leak = static_leak(leaky, observation_tables(leaky, spec))
    assert leak is not None and leak.parts == ("pixels.pixels",) and leak.step == 1
    assert analyse(model, observation_set(model, spec.observation)).ok


@pytest.mark.parametrize("spec_name", ["lantern-hall", "orchard-hives", "seed-cache", "marsh-stones"])
def test_grid_space_bounds_are_the_true_channel_ranges(spec_name):
    """The grid view's Box has each channel's real maximum as its high (goal and cue: the number of cue
    values; agent: 1, or 4 with headings; the rest 1), so a library's bounds-based scaling is right:
    for a cue task every bound is reached somewhere in the table, and every row lies inside it."""
    for turns in (False, True):
        extra = {"agent__actions": "turns"} if turns and spec_name != "marsh-stones" else {}
        env = taskgen.make(spec_name, observation__grid={"size": 3}, **extra)
        space = env.observation_space["grid"] if isinstance(env.observation_space, gym.spaces.Dict) \
            else env.observation_space
        table = env.observations.grid
        assert all(space.contains(row) for row in table)
        high = space.high.reshape(-1, table.shape[-1]).max(axis=0)
        reached = table.reshape(-1, table.shape[-1]).max(axis=0)
        if spec_name != "marsh-stones":
            assert np.array_equal(high[:8], reached[:8]), (spec_name, turns, high, reached)
        assert high.max() <= max(4, env.observations.cue_values)
