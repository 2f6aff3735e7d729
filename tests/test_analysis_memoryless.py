"""The chance level: the best deterministic memoryless policy, proven by branch and bound."""

from __future__ import annotations

import itertools

import numpy as np
import pytest

from taskgen import analyse, observation_set
from taskgen.analysis import best_memoryless, evaluate, evaluate_memoryless, observation_classes
from taskgen.tools.check import observation_tables

from conftest import corridor_spec_text
from taskgen import compile_variant, load_spec_text, make_variant


def _model_and_obs(**fields):
    """A corridor's model and what its agent sees (the observation set the full analysis reads)."""
    spec = load_spec_text(corridor_spec_text(**fields))
    model = compile_variant(make_variant(spec, 0))
    return model, observation_set(model, spec.observation)


def _with_width(fields):
    fields = dict(fields)
    width = fields.pop("width", None)
    return fields, width


def _build(fields):
    fields, width = _with_width(fields)
    text = corridor_spec_text(**fields)
    if width:
        text = text.replace("arm_length:", f"width: {width}\n    arm_length:")
    spec = load_spec_text(text)
    model = compile_variant(make_variant(spec, 0))
    return model, observation_tables(model, spec)


def test_enumeration_really_is_exhaustive():
    """Enumeration's best equals a brute force over itertools.product of actions per
    observation (the definition of the best deterministic memoryless policy)."""
    model, obs = _build(dict(length=1, arm_length=1, rewards={"correct": 1.0, "wrong": -1.0, "step": -0.1}))
    classes = observation_classes(model, obs)
    live = np.unique(classes[~model.terminal])
    best = -np.inf
    for actions in itertools.product(range(4), repeat=live.size):
        policy = np.zeros(classes.max() + 1, dtype=np.int64)
        policy[live] = actions
        best = max(best, float(evaluate_memoryless(model, classes, policy)[0]))
    assert best_memoryless(model, obs).mean_return == pytest.approx(best, abs=1e-12)


def test_memoryless_values_agree_with_backward_evaluation():
    """The batched memoryless evaluator equals evaluating the same policy as int[H, S]."""
    model, obs = _model_and_obs(length=4, values=3, rewards={"step": -0.05, "wrong": -0.5})
    result = best_memoryless(model, obs.tables())
    from taskgen.analysis import at_reset
    assert at_reset(model, evaluate(model, result.state_policy(model.horizon))) == pytest.approx(result.mean_return)


def test_one_wide_two_cue_corridor_chance_is_a_coin_flip():
    """In a one-wide corridor the best memoryless agent succeeds half the time and nothing
    leaks (common practice: a memoryless two-way choice is a coin flip)."""
    model, obs = _model_and_obs(length=6, arm_length=2,
                                rewards={"correct": 1.0, "wrong": -1.0, "step": -0.01, "timeout": -1.0})
    report = analyse(model, obs)
    assert report.baselines["chance"].success_rate.mean == pytest.approx(0.5, abs=1e-12)
    checks = {c.name: c for c in report.checks}
    assert checks["no cue leak"].passed and checks["no carried cue"].passed and report.ok


@pytest.mark.parametrize("k", [2, 3, 4])
def test_memory_gap_of_plus_minus_one_corridor(k):
    """With +1 for the right arm and −1 otherwise (a time-out counts as wrong), the memoryless
    agent guesses: 1/k·1 + (1−1/k)·(−1); the gap to the optimum 1 is 2·(1 − 1/k) (worked by
    hand; common practice)."""
    model, obs = _model_and_obs(length=4, arm_length=1, values=k,
                                rewards={"correct": 1.0, "wrong": -1.0, "timeout": -1.0})
    report = analyse(model, obs)
    assert report.baselines["optimal"].mean_return.mean == pytest.approx(1.0)
    assert report.memory_gap.mean == pytest.approx(2 * (1 - 1 / k), abs=1e-12)


def test_waiting_at_the_start_carries_the_cue_when_a_timeout_is_cheap():
    """If timing out costs less than a wrong arm, a memoryless agent can 'answer' one cue value
    by never leaving the start: the carried-cue check fails and the witness shows one path
    waiting at the start cell (hand-worked: 0.5·(1 − 0.01·9) + 0.5·(−0.01·18) beats guessing)."""
    model, obs = _model_and_obs(length=6, arm_length=2, rewards={"correct": 1.0, "wrong": -1.0, "step": -0.01})
    report = analyse(model, obs)
    checks = {c.name: c for c in report.checks}
    assert checks["no carried cue"].passed is False
    assert report.baselines["chance"].success_rate.mean == pytest.approx(0.5)
    assert report.baselines["chance"].mean_return.mean == pytest.approx(0.5 * 0.91 + 0.5 * -0.18)
    assert "time out" in report.details.witness and "success" in report.details.witness
