"""Leak and carried-cue checks: they fail on tasks that give the cue away, with a witness."""

from __future__ import annotations

import dataclasses

import numpy as np

from taskgen import compile_variant, load_spec_text, make_variant
from taskgen import analyse, observation_set
from taskgen.analysis import static_leak
from taskgen.tools.check import observation_tables

from conftest import corridor_spec_text

SOUND = {"correct": 1.0, "wrong": -1.0, "step": -0.01, "timeout": -1.0}


def _spec_and_model(text):
    spec = load_spec_text(text)
    return spec, compile_variant(make_variant(spec, 0))


def _cue_left_on_the_wall(model):
    """The same model, but every observation key keeps showing the cue: the bug of a cue panel
    that stays in view after its display window (common practice: the classic leak)."""
    keys, obs_key = np.unique(np.stack([model.cell, model.value], axis=1), axis=0, return_inverse=True)
    return dataclasses.replace(model, source=dataclasses.replace(model.tables, obs_key=obs_key.ravel()),
                               key_cell=keys[:, 0].copy(), key_heading=-np.ones(len(keys), dtype=np.int64),
                               cue=dataclasses.replace(model.cue, key_value=keys[:, 1].copy()))


def test_sound_corridor_has_no_leak():
    """A one-wide corridor shows the cue only in its window: twins look alike afterwards."""
    spec, model = _spec_and_model(corridor_spec_text(length=5, rewards=SOUND))
    assert static_leak(model, observation_tables(model, spec)) is None


def test_cue_that_stays_visible_is_a_leak_named_by_step_and_block():
    """A cue still shown after its window is reported at the first step after the window
    (step 1 for a one-step window), at the cell reached, in the vector's cue block."""
    spec, model = _spec_and_model(corridor_spec_text(length=5, rewards=SOUND))
    leaky = _cue_left_on_the_wall(model)
    leak = static_leak(leaky, observation_tables(leaky, spec))
    assert leak is not None
    assert leak.step == 1 and leak.parts == ("vector.cue",)
    assert leak.describe().startswith("step 1: at cell (row 1, col ")
    report = analyse(leaky, observation_set(leaky, spec.observation))
    check = {c.name: c for c in report.checks}["no cue leak"]
    assert check.passed is False and "vector.cue" in check.reason


def test_leak_hidden_by_the_observation_is_no_leak():
    """With the cue block switched off, different keys render the same vector: nothing leaks."""
    spec, model = _spec_and_model(corridor_spec_text(length=5, rewards=SOUND, vector={"cue": False}))
    leaky = _cue_left_on_the_wall(model)
    assert static_leak(leaky, observation_tables(leaky, spec)) is None


def test_two_wide_corridor_carries_the_cue_in_the_lane():
    """In a two-lane hall a memoryless agent picks its lane by the cue and its arm by the lane:
    the carried-cue check fails and the witness shows the two lanes (rows 1 and 2)."""
    text = corridor_spec_text(length=5, arm_length=1, rewards=SOUND).replace(
        "arm_length: 1", "arm_length: 1\n    width: 2")
    spec, model = _spec_and_model(text)
    report = analyse(model, observation_set(model, spec.observation))
    checks = {c.name: c for c in report.checks}
    assert checks["no carried cue"].passed is False
    assert report.baselines["chance"].success_rate.mean == 1.0
    rows = [line.split() for line in report.details.witness.splitlines()[1:] if line.split()[0].isdigit()]
    hall = [r for r in rows if r[0] in {"2", "3", "4"}]       # mid-hall steps
    assert {r[1][1] for r in hall} != {r[3][1] for r in hall}   # different lane rows
    assert "paths part" in report.details.witness


def test_carried_cue_check_says_when_it_cannot_run():
    """When the cue changes transitions, the cue-blind figure is not exact: the carried-cue check
    reports n/a with the reason instead of passing."""
    spec, model = _spec_and_model(corridor_spec_text(length=3, rewards=SOUND))
    # make cue 1's agent unable to step back west anywhere in the hall: the cue now changes
    # transitions, though not the optimal agent's path (it never steps back)
    ns = model.next_state.copy()
    back = np.flatnonzero((model.value == 1) & ~model.terminal & (ns[:, 3] != np.arange(model.num_states)))
    assert back.size
    ns[back, 3] = back
    broken = dataclasses.replace(model, source=dataclasses.replace(model.tables, next_state=ns))
    report = analyse(broken, observation_set(broken, spec.observation))
    check = {c.name: c for c in report.checks}["no carried cue"]
    assert check.passed is None and check.reason.startswith("cannot run: no exact cue-blind figure")
    assert report.baselines["cue_blind"].method == "unavailable"
