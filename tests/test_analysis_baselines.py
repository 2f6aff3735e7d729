"""Baselines: chance levels of delayed-choice corridors and agreement with Monte Carlo rollouts."""

from __future__ import annotations

import numpy as np
import pytest

import taskgen
from taskgen import analyse, observation_set
from taskgen.analysis import (best_memoryless, cue_blind_baseline, cue_blind_policy, optimal_baseline, optimal_policy,
                              return_variance, uniform_policy)
from taskgen.tools.check import observation_tables

from conftest import CUE_SPECS, corridor_model, corridor_spec_text


@pytest.mark.parametrize("k", [2, 3, 4, 5, 8])
@pytest.mark.parametrize("length", [1, 6])
def test_cue_blind_success_is_one_over_k(k, length):
    """A guess between k arms without the cue succeeds with probability 1/k (common practice for
    delayed-choice tasks); the agent that remembers always succeeds."""
    model = corridor_model(length=length, values=k, rewards={"correct": 1.0, "wrong": 0.0, "step": -0.01})
    assert cue_blind_baseline(model).success_rate.mean == pytest.approx(1 / k, abs=1e-12)
    assert optimal_baseline(model).success_rate.mean == pytest.approx(1.0, abs=1e-12)


def test_cue_blind_policy_ignores_the_cue():
    """The chance policy takes the same action in states that differ only in the cue."""
    model = corridor_model(length=4, values=3)
    policy = cue_blind_policy(model)
    for b in np.unique(model.cue.blind_state):
        members = np.flatnonzero(model.cue.blind_state == b)
        assert (policy[:, members] == policy[:, members[:1]]).all()


def test_cue_blind_avoids_arms_when_guessing_does_not_pay():
    """If a guess is worth less than timing out, the best cue-blind agent never enters an arm
    end (expected guess 1/3·1 + 2/3·(−1) < 0: arithmetic)."""
    model = corridor_model(length=2, values=3, rewards={"correct": 1.0, "wrong": -1.0})
    chance = cue_blind_baseline(model)
    assert chance.success_rate.mean == 0.0 and chance.mean_return.mean == 0.0


def _rollouts(env, choose, episodes, seed):
    """Discounted returns and successes of ``episodes`` episodes; ``choose(t, info)`` acts."""
    returns, successes = np.zeros(episodes), np.zeros(episodes)
    for e in range(episodes):
        obs, info = env.reset(seed=seed + e)
        t, done, total = 0, False, 0.0
        while not done:
            obs, r, term, trunc, info = env.step(choose(t, info))
            total += env.model.discount**t * r
            t += 1
            done = term or trunc
        returns[e] = total
        successes[e] = bool(env.model.success[info["analysis_only"]["state"]])
    return returns, successes


def _within_4_se(samples, exact, variance):
    """Mean of the samples within 4 standard errors of the exact figure, the standard error from
    the exact variance (central limit theorem; common practice)."""
    se = np.sqrt(variance / len(samples))
    return abs(samples.mean() - exact) <= 4 * se + 1e-12


@pytest.mark.parametrize("spec_name", CUE_SPECS)
def test_monte_carlo_agrees_with_every_exact_figure(spec_name):
    """Rolling out the env with each baseline's policy reproduces its exact return and success
    rate within 4 standard errors (central limit theorem; common practice)."""
    env = taskgen.make(spec_name, variant=0, analysis_info=True)
    model = env.model
    rng = np.random.default_rng(7)
    spec = taskgen.load_spec(taskgen.bundled_specs()[spec_name])
    report = analyse(model, observation_set(model, spec.observation))
    memoryless = best_memoryless(model, observation_tables(model, spec)).state_policy(model.horizon)
    exact = report.baselines
    tables = {"optimal": optimal_policy(model), "chance": memoryless, "random": uniform_policy(model)}
    if exact["cue_blind"].method != "unavailable":
        tables["cue_blind"] = cue_blind_policy(model)
    policies = {name: (lambda t, info, p=table: p[t, info["analysis_only"]["state"]])
                for name, table in tables.items() if name != "random"}
    policies["random"] = lambda t, info: int(rng.integers(model.num_actions))
    for name, choose in policies.items():
        returns, successes = _rollouts(env, choose, episodes=1500 if name == "random" else 600, seed=100)
        p = exact[name].success_rate.mean
        assert _within_4_se(returns, exact[name].mean_return.mean, return_variance(model, tables[name])), name
        assert _within_4_se(successes, p, p * (1 - p)), name  # Bernoulli variance


def test_undiscounted_figures_are_what_rollouts_sum():
    """With γ = 1 the exact optimal return equals the plain sum of rewards an episode pays."""
    spec = taskgen.load_spec_text(corridor_spec_text(length=5, rewards={"step": -0.1, "correct": 2.0}))
    env = taskgen.make(spec, analysis_info=True)
    p = optimal_policy(env.model)
    returns, _ = _rollouts(env, lambda t, info: p[t, info["analysis_only"]["state"]], 20, seed=0)
    assert np.allclose(returns, optimal_baseline(env.model).mean_return.mean)


def test_report_flags_a_cue_visible_at_the_decision():
    """A cue kept visible to the junction needs no memory: 'cue needed' fails and names the step
    (three hall steps, so the decision is the action after observation 3)."""
    report = analyse(corridor_model(length=3, visible_steps=10))
    check = {c.name: c for c in report.checks}["cue needed"]
    assert check.passed is False
    assert check.reason.startswith("cue 0: the optimal agent decides at step 3 while the cue is still shown")
    assert not report.ok


def test_report_flags_rewards_that_ignore_the_cue():
    """When both arms pay the same, remembering the cue is worth nothing: the gap check fails."""
    report = analyse(corridor_model(length=3, rewards={"correct": 1.0, "wrong": 1.0}))
    checks = {c.name: c for c in report.checks}
    assert checks["memory gap"].passed is False
