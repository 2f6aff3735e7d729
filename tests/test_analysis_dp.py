"""Exact DP on compiled corridors against textbook random-walk and return formulas."""

from __future__ import annotations

import numpy as np
import pytest

from taskgen.analysis import at_reset, hitting_times, optimal_baseline, uniform_policy

from conftest import corridor_model


def _moves(model):
    """Cost 1 for a step that changes the agent's cell, 0 for a bump into a wall."""
    return (model.cell[model.next_state] != model.cell[:, None]).astype(float)


@pytest.mark.parametrize("length", [1, 2, 5, 9])
def test_hall_hitting_time_matches_reflecting_walk(length):
    """Uniform moves along the hall, reflecting at the start and absorbed at the junction:
    expected moves from z are N² − z² (Lovász, "Random Walks on Graphs: A Survey", 1993,
    hitting times on a path). Wall bumps are not moves, so the walk of moves is the simple one."""
    model = corridor_model(length=length, arm_length=2)
    junction = model.layout.sites["junction"][0]
    target = (model.cell == junction) | model.terminal
    h = hitting_times(model, uniform_policy(model), target, cost=_moves(model))
    hall_row = model.layout.cells[model.layout.start][0]
    for z in range(length):
        cell = int(np.flatnonzero((model.layout.cells == (hall_row, z)).all(axis=1))[0])
        states = np.flatnonzero(model.cell == cell)
        assert np.allclose(h[states], length**2 - z**2, atol=1e-9, rtol=0)


@pytest.mark.parametrize("arm_length", [1, 2, 4, 7])
def test_two_arm_hitting_time_matches_gamblers_ruin(arm_length):
    """With the start on the junction, the spine and both arms form a path absorbed at both
    ends, N = 2(arm_length + 1) edges: expected moves from z are z(N − z), and the walk ends
    in the far arm with probability z/N (Feller, An Introduction to Probability Theory and Its
    Applications, vol. 1, ch. XIV, the classical ruin problem)."""
    model = corridor_model(length=0, arm_length=arm_length)
    N = 2 * (arm_length + 1)
    policy = uniform_policy(model)
    h = hitting_times(model, policy, model.terminal, cost=_moves(model))
    end0, end1 = model.layout.sites["goal"]
    # walk the path explicitly: arm 0 end → spine → arm 1 end
    order = [end0]
    while len(order) < N + 1:
        nbrs = [n for n in model.layout.neighbour[order[-1]] if n >= 0 and n not in order]
        order.append(int(nbrs[0]))
    assert order[-1] == end1
    for z, cell in enumerate(order):
        states = np.flatnonzero(model.cell == cell)
        assert np.allclose(h[states], z * (N - z), atol=1e-9, rtol=0)
    # probability of ending at arm 1's end (z/N from arm 0's end) by the same linear solve
    ends_in_1 = (model.cell[model.next_state] == end1) & ~model.terminal[:, None]
    p = hitting_times(model, policy, model.terminal, cost=ends_in_1.astype(float))
    for z, cell in enumerate(order):
        states = np.flatnonzero((model.cell == cell) & ~model.terminal)
        assert np.allclose(p[states], z / N, atol=1e-9, rtol=0)


@pytest.mark.parametrize("gamma", [1.0, 0.9, 0.5])
@pytest.mark.parametrize("length, arm_length", [(0, 1), (3, 2), (8, 3)])
def test_optimal_return_is_discounted_reward(gamma, length, arm_length):
    """A single reward R that is d steps away is worth γ^(d−1)·R (Sutton & Barto, Reinforcement
    Learning, 2nd ed., eq. 3.8); two arms are d = length + 1 + arm_length steps away."""
    R = 2.5
    model = corridor_model(length=length, arm_length=arm_length, episode={"discount": gamma},
                           rewards={"correct": R, "wrong": 0.0, "step": 0.0})
    d = length + 1 + arm_length
    assert optimal_baseline(model).mean_return.mean == pytest.approx(gamma ** (d - 1) * R, abs=1e-12)


def test_discounted_return_with_step_cost_is_a_geometric_sum():
    """A cost c on each of d steps and R at the last: Σ_{k<d} γ^k·c + γ^(d−1)·R (Sutton & Barto,
    eq. 3.8, a finite geometric series)."""
    gamma, c, R = 0.9, -0.1, 1.0
    model = corridor_model(length=4, arm_length=1, episode={"discount": gamma},
                           rewards={"correct": R, "step": c})
    d = 6
    expected = c * (1 - gamma**d) / (1 - gamma) + gamma ** (d - 1) * R
    assert optimal_baseline(model).mean_return.mean == pytest.approx(expected, abs=1e-12)


def test_at_reset_weights_the_cue_prior():
    """The value at reset is the prior-weighted mean over the start states (definition)."""
    model = corridor_model(values=3)
    values = np.arange(model.num_states, dtype=float)
    starts = model.initial_states()
    assert at_reset(model, values) == pytest.approx(values[starts].mean())


def test_finite_horizon_length_converges_to_the_linear_solve():
    """Backward induction over a long horizon gives the same expected episode length as the
    absorbing-chain linear solve (Kemeny & Snell, Finite Markov Chains, 1960: the fundamental
    matrix N = (I − Q)⁻¹), once the tail beyond the horizon is below 1e-9."""
    from taskgen.analysis import Objective, evaluate

    model = corridor_model(length=0, arm_length=1, episode={"max_steps": 3000})
    policy = uniform_policy(model)
    steps = hitting_times(model, policy, model.terminal)
    by_dp = at_reset(model, evaluate(model, policy, Objective.length(model)))
    assert by_dp == pytest.approx(at_reset(model, steps), abs=1e-9)


def test_return_variance_of_a_coin_flip():
    """The cue-blind guess between two arms paying +1 and −1 (no step cost) has return variance
    exactly 1 (a ±1 Bernoulli(½) variable: textbook)."""
    from taskgen.analysis import cue_blind_policy, return_variance

    model = corridor_model(length=3, rewards={"correct": 1.0, "wrong": -1.0, "timeout": -1.0})
    assert return_variance(model, cue_blind_policy(model)) == pytest.approx(1.0, abs=1e-12)
    assert return_variance(model, uniform_policy(model)) > 0
