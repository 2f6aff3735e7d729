"""The cue lamp: its shape, its contrast, and that it is lit only while the cue (or a decoy) is shown,
in top-down and first-person pixels alike."""

from __future__ import annotations

import math

import numpy as np
import pytest

import taskgen
from taskgen.render.first_person import lamp_rows as first_person_rows
from taskgen.render.lamp import LAMP_OFF, lamp_disc
from taskgen.render.palette import CUE_COLOURS, FLOOR, WALL, contrast_ratio
from taskgen.render.topdown import TopDownRenderer, lamp_rows as topdown_rows


@pytest.mark.parametrize("rows", [1, 2, 5, 12, 40])
def test_the_lamp_is_a_disc_at_the_right_end_of_the_strip(rows):
    """The lamp's pixels are the pixel centres inside a circle of diameter ``rows``: their count is
    π r² to within the circle's perimeter (Gauss's circle problem bound, a textbook estimate), it
    touches neither the strip's left half nor, for a strip of 5 rows or more, its right edge."""
    disc = lamp_disc(rows, 200)
    r = rows / 2
    assert abs(int(disc.sum()) - math.pi * r * r) <= 2 * math.pi * r + 1
    assert not disc[:, :100].any() and disc[rows // 2].any()
    if rows >= 5:
        assert not disc[:, -1].any()
        assert np.array_equal(disc, disc[::-1])                   # symmetric about the strip's middle


def test_lit_and_unlit_lamps_read_against_each_other_and_the_strip():
    """Every cue colour lit in the lamp has at least 3:1 against the unlit lamp, and the unlit lamp at
    least 3:1 against the wall strip around it (WCAG 2.1 success criterion 1.4.11, non-text contrast);
    the unlit lamp is never the floor (marks and lures paint floor pixels only)."""
    for colour in CUE_COLOURS:
        assert contrast_ratio(colour, LAMP_OFF) >= 3.0, colour
    assert contrast_ratio(LAMP_OFF, WALL) >= 3.0 and LAMP_OFF != FLOOR


@pytest.mark.parametrize("modality", ["pixels", "first_person"])
def test_the_lamp_is_lit_only_while_the_cue_is_shown(modality):
    """Over episodes of a corridor with a two-step cue, the lamp is the true cue's colour exactly in
    the steps the vector's cue bits are set, and unlit in every other step; the rest of the strip
    is wall-coloured throughout (common practice: a cue seen once, then held)."""
    over = {"observation__" + modality: {"height": 40, "width": 48}, "cue__visible_steps": 2}
    if modality == "first_person":
        over["agent__actions"] = "turns"
    env = taskgen.make("lantern-hall", **over, analysis_info=True)
    rows = (topdown_rows if modality == "pixels" else first_person_rows)(40)
    disc = lamp_disc(rows, 48)
    rng = np.random.default_rng(0)
    lit_steps = 0
    for seed in range(6):
        obs, info = env.reset(seed=seed)
        cue = info["analysis_only"]["cue"]
        for _ in range(12):
            shown = bool(obs["vector"][:env.model.cue.values].any())
            strip = obs[modality][:rows]
            assert (strip[disc] == (CUE_COLOURS[cue] if shown else LAMP_OFF)).all()
            assert (strip[~disc] == WALL).all()
            lit_steps += shown
            obs, _, term, trunc, info = env.step(int(rng.integers(env.action_space.n)))
            if term or trunc:
                break
    assert lit_steps == 12


def test_a_decoy_lights_the_lamp_in_a_uniform_cue_colour():
    """With decoys on every step, after the cue's window the lamp is lit in some cue colour on every
    step and the vector's cue bits name the same value (a decoy shows wherever the cue would);
    the values cover all the cue colours (common practice)."""
    env = taskgen.make("lantern-hall", observation__pixels={"height": 40, "width": 40},
                       observation__distractors={"decoy_probability": 1.0}, analysis_info=True)
    disc = lamp_disc(topdown_rows(40), 40)
    seen = set()
    obs, _ = env.reset(seed=3)
    for _ in range(40):
        obs, _, term, trunc, _ = env.step(1)
        colours = {tuple(c) for c in obs["pixels"][:topdown_rows(40)][disc]}
        assert len(colours) == 1
        colour = colours.pop()
        value = int(np.argmax(obs["vector"][:env.model.cue.values]))
        assert colour == CUE_COLOURS[value]
        seen.add(value)
        if term or trunc:
            obs, _ = env.reset()
    assert seen == set(range(env.model.cue.values))


def test_the_ground_truth_lights_the_true_cue_and_render_only_what_the_agent_sees():
    """ground_truth() (for people) shows the true cue in the lamp at every step; render() shows only
    what the agent could see: the lamp lit while the cue is shown, dark after (common practice)."""
    env = taskgen.make("lantern-hall", render_mode="rgb_array", analysis_info=True)
    _, info = env.reset(seed=5)
    cue = info["analysis_only"]["cue"]
    rows = TopDownRenderer(env.model).lamp_rows * TopDownRenderer(env.model).px
    disc = lamp_disc(rows, env.render().shape[1])
    for step in range(3):
        assert (env.ground_truth()[:rows][disc] == CUE_COLOURS[cue]).all()
        assert (env.render()[:rows][disc] == (CUE_COLOURS[cue] if step == 0 else LAMP_OFF)).all()
        env.step(1)
