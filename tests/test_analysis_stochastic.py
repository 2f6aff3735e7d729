"""Stochastic memoryless policies: the exact gradient, the aliased-row example, and Monte Carlo through the env."""

from __future__ import annotations

import numpy as np
import pytest
import yaml

import taskgen
from taskgen import analyse, compile_variant, load_spec_text, make_variant, observation_set
from taskgen.analysis.memoryless import solve_memoryless
from taskgen.analysis.stochastic import best_stochastic, evaluate_stochastic, value_and_gradient

from test_analysis_policysearch import model_and_classes

#: A one-row maze of five cells seen only through its walls: the two ends look different from the
#: three middle cells, which all look alike. Goals at both ends, the start in the middle, the cue
#: never in view; a wrong goal costs nothing and the episode goes on.
ALIASED_ROW = yaml.safe_dump({
    "format_version": 1, "name": "aliased-row",
    "layout": {"maze": {"width": 5, "height": 1, "start_cell": [0, 2], "goal_cells": [[0, 0], [0, 4]]}},
    "cue": {"values": 2, "visible_steps": 1},
    "decision": {"wrong": "continue"},
    "rewards": {"correct": 1.0, "wrong": 0.0, "step": 0.0, "timeout": 0.0},
    "episode": {"max_steps": 200},
    "observation": {"vector": {"cue": False, "position": "none", "walls": True}},
}, sort_keys=False)


def test_the_gradient_matches_finite_differences():
    """∂J/∂θ from forward occupancies and backward values equals central finite differences of the
    exact return (the policy-gradient theorem; checked numerically, common practice)."""
    model, classes = model_and_classes(yaml.safe_dump({
        "format_version": 1, "name": "fd", "layout": {"corridor": {"length": 2, "arm_length": 1, "width": 2}},
        "cue": {"values": 3}, "rewards": {"correct": 1.0, "wrong": -0.7, "step": -0.03, "timeout": -0.4},
        "episode": {"max_steps": 9, "discount": 0.95}}))
    rng = np.random.default_rng(3)
    theta = rng.normal(0, 1, (int(classes.max()) + 1, model.num_actions))
    _, grad = value_and_gradient(model, classes, theta)
    eps = 1e-6
    for o, a in zip(rng.integers(0, theta.shape[0], 12), rng.integers(0, theta.shape[1], 12)):
        up, down = theta.copy(), theta.copy()
        up[o, a] += eps
        down[o, a] -= eps
        numeric = (value_and_gradient(model, classes, up)[0] - value_and_gradient(model, classes, down)[0]) / (2 * eps)
        assert grad[o, a] == pytest.approx(numeric, abs=1e-6)


def test_a_randomising_policy_beats_every_deterministic_one_in_an_aliased_row():
    """The phenomenon of Singh, Jaakkola & Jordan (ICML 1994), worked for this row.

    Deterministic: the start and its two neighbours look alike, so one action serves all three.
    'West' reaches the west goal; if it is the wrong one the episode goes on, but from the west end
    the only way out is east, and the middle's 'west' walks straight back: the agent shuttles
    between the end and its neighbour until the step limit. So every deterministic memoryless
    policy finds the right goal for at most one of the two equally likely cue values: the best
    return is exactly 1/2.

    Stochastic: in the middle cells step west or east with probability 1/2 each, at either end step
    inwards. This is a fair random walk on five cells; from any middle cell it reaches each end
    with probability 1 (gambler's ruin: from cell i of 0..4 it hits the east end first with
    probability i/4, and a walk that hits the wrong end is sent back in and tries again), so with
    200 steps the return tends to 1. The exact value of that policy, computed here, is the
    reference; the search must find at least that much.
    """
    model, classes = model_and_classes(ALIASED_ROW)
    det = solve_memoryless(model, classes)
    assert det.method == "exact" and det.mean_return == pytest.approx(0.5, abs=1e-12)
    walls = np.unique(classes[~model.terminal])
    assert walls.size == 3
    # the fair walk: find which class is the middle (the start's) and which way each end opens
    start = int(np.flatnonzero(model.initial)[0])
    middle = int(classes[start])
    walk = np.zeros((int(classes.max()) + 1, model.num_actions))
    for cls in walls:
        states = np.flatnonzero((classes == cls) & ~model.terminal)
        moves = [a for a in range(model.num_actions) if model.next_state[states[0], a] != states[0]]
        walk[cls, moves] = 1.0 / len(moves)
    assert np.count_nonzero(walk[middle]) == 2
    fair = evaluate_stochastic(model, classes, walk)
    assert fair > 0.99
    found = best_stochastic(model, classes, [det.policy])
    assert found.mean_return >= fair - 1e-6
    report = analyse(model, observation_set(model, load_spec_text(ALIASED_ROW).observation))
    assert report.chance_level["reached_by"] == "stochastic"
    assert report.chance_level["lower"] == pytest.approx(found.mean_return, abs=1e-9)
    assert report.baselines["chance"].mean_return.mean == pytest.approx(0.5, abs=1e-12)


def test_the_stochastic_figure_is_re_measured_through_the_env():
    """Sampling the found stochastic policy's actions in the Gymnasium env reproduces its exact
    return within 4 standard errors (central limit theorem; common practice)."""
    spec = load_spec_text(ALIASED_ROW.replace("max_steps: 200", "max_steps: 12"))
    model = compile_variant(make_variant(spec, 0))
    _, classes = model_and_classes(ALIASED_ROW.replace("max_steps: 200", "max_steps: 12"))
    det = solve_memoryless(model, classes)
    found = best_stochastic(model, classes, [det.policy])
    env = taskgen.make(spec, variant=0, analysis_info=True)
    rng = np.random.default_rng(11)
    returns = []
    for episode in range(4000):
        _, info = env.reset(seed=episode)
        total, done, t = 0.0, False, 0
        while not done:
            probs = found.policy[classes[info["analysis_only"]["state"]]]
            _, r, term, trunc, info = env.step(int(rng.choice(model.num_actions, p=probs / probs.sum())))
            total += model.discount ** t * r
            t += 1
            done = term or trunc
        returns.append(total)
    samples = np.asarray(returns)
    assert abs(samples.mean() - found.mean_return) <= 4 * samples.std(ddof=1) / np.sqrt(len(samples)) + 1e-12
    assert found.mean_return > det.mean_return + 0.05
