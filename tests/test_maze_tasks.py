"""Maze tasks through the whole pipeline: compile, analyse, check and run."""

from __future__ import annotations

import warnings

import networkx as nx
import numpy as np
import pytest
import yaml
from gymnasium.utils.env_checker import check_env

import taskgen
from taskgen import LayoutError, compile_variant, load_spec_text, make_variant
from taskgen import analyse, observation_set
from taskgen.analysis import shortest_solutions

SOUND = {"correct": 1.0, "wrong": -1.0, "step": -0.01, "timeout": -1.0}


def maze_text(values=2, rule="match", wrong="end", display="start", **maze):
    doc = {"format_version": 1, "name": "test-maze",
           "layout": {"maze": {"width": 6, "height": 6, "goals_in_dead_ends": True, **maze}},
           "cue": {"values": values, "display": display}, "decision": {"rule": rule, "wrong": wrong},
           "rewards": SOUND}
    return yaml.safe_dump(doc)


def _report(seed=0, **kw):
    spec = load_spec_text(maze_text(**kw))
    model = compile_variant(make_variant(spec, seed))
    return model, analyse(model, observation_set(model, spec.observation))


@pytest.mark.parametrize("seed", range(4))
def test_shortest_solutions_match_networkx_on_the_maze(seed):
    """The model's fewest steps to each cue's goal equal networkx shortest_path_length between
    the start and that goal on the maze graph."""
    model, _ = _report(seed=seed, values=3, braid=0.5)
    layout = model.layout
    g = nx.Graph()
    g.add_edges_from((u, int(v)) for u, row in enumerate(layout.neighbour) for v in row if v >= 0)
    for cue, steps in shortest_solutions(model).items():
        assert steps == nx.shortest_path_length(g, layout.start, int(layout.sites["goal"][cue]))


@pytest.mark.parametrize("k", [2, 3, 4])
def test_match_to_sample_chance_is_one_over_k(k):
    """Delayed match-to-sample with k goals: chance success 1/k (common practice), optimal 1."""
    _, report = _report(values=k, width=7, height=7, min_branch_distance=3)
    assert report.baselines["optimal"].success_rate.mean == pytest.approx(1.0)
    assert report.baselines["chance"].success_rate.mean == pytest.approx(1 / k)
    assert report.baselines["cue_blind"].success_rate.mean == pytest.approx(1 / k)
    assert report.ok


@pytest.mark.parametrize("k", [2, 3])
def test_non_match_chance_is_k_minus_one_over_k(k):
    """Non-match-to-sample: every goal but the cue's pays, so a guess succeeds (k−1)/k (common
    practice); the cue's own goal is the one to avoid."""
    _, report = _report(values=k, rule="non_match", width=7, height=7, min_branch_distance=3)
    assert report.baselines["optimal"].success_rate.mean == pytest.approx(1.0)
    assert report.baselines["cue_blind"].success_rate.mean == pytest.approx((k - 1) / k)


def test_cue_site_shows_the_cue_only_there():
    """With display 'site' the cue is in the observation exactly on the cue-site cell; the leak
    check passes and the recall distance counts from the last visit."""
    model, report = _report(display="site", width=7, height=7)
    site = model.layout.sites["cue_site"][0]
    shown = model.cue.key_value[model.obs_key] >= 0
    assert np.array_equal(shown, model.cell == site)
    checks = {c.name: c for c in report.checks}
    assert checks["no cue leak"].passed
    assert all(d is None or d >= 0 for d in report.details.recall.values())


def test_wrong_goal_that_continues_makes_the_carried_cue_check_say_n_a():
    """When a wrong goal only penalises, the cue changes which states end the episode: the exact
    cue-blind figure does not apply and the check says so instead of passing."""
    _, report = _report(wrong="continue")
    check = {c.name: c for c in report.checks}["no carried cue"]
    assert check.passed is None and "cannot run" in check.reason


def test_branch_distance_delays_the_decision():
    """With the goals' paths sharing their first d steps, the optimal agent decides no earlier
    than step d, so the recall distance is at least d (one observation shows the cue)."""
    for seed in range(5):
        _, report = _report(seed=seed, values=3, width=8, height=8, min_branch_distance=4)
        assert min(report.details.recall.values()) >= 4


def test_impossible_rules_name_the_variant_and_seed():
    """Rules a layout cannot meet raise LayoutError naming the variant, its seed and the rule."""
    spec = load_spec_text(maze_text(values=5, width=2, height=2))
    with pytest.raises(LayoutError, match=r"test-maze-s7 \(2×2 uniform maze, variant seed 7\): in 50 layouts "
                       r"drawn, the placement rules were never met; in the last, only \d of 5 goal"):
        make_variant(spec, 7)


def test_maze_env_passes_gymnasiums_checker():
    """A maze env is a valid gymnasium.Env (gymnasium's env checker, every warning an error: env.spec
    lets it test the render modes too)."""
    env = taskgen.make(load_spec_text(maze_text(width=5, height=5)), render_mode="rgb_array")
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        check_env(env)


def _corridor_sequence(k, m, **extra):
    doc = {"format_version": 1, "name": "test-sequence", "layout": {"corridor": {"length": 4, "arm_length": 1}},
           "cue": {"values": k, "sequence_length": m}, "rewards": {**SOUND, "correct": 0.5}, **extra}
    spec = load_spec_text(yaml.safe_dump(doc))
    model = compile_variant(make_variant(spec, 0))
    return model, analyse(model, observation_set(model, spec.observation))


@pytest.mark.parametrize("k, m", [(2, 2), (3, 2), (2, 3)])
def test_sequence_chance_is_one_over_k_to_the_m(k, m):
    """A cue sequence of m values from k, arms to visit in that order: a memoryless agent takes
    the same arm at the junction every time, so it succeeds only on the one constant sequence it
    follows, 1/k^m of them (counting; common practice); perfect memory always succeeds."""
    model, report = _corridor_sequence(k, m)
    assert model.hidden.count == k ** m
    assert report.baselines["optimal"].success_rate.mean == pytest.approx(1.0)
    assert report.baselines["chance"].success_rate.mean == pytest.approx(1 / k ** m)


def test_sequence_elements_are_shown_in_turn():
    """Element j of the sequence is the cue block's value in observations j·n … (j+1)·n − 1."""
    env = taskgen.make(load_spec_text(yaml.safe_dump({
        "format_version": 1, "name": "test-sequence", "layout": {"corridor": {"length": 8}},
        "cue": {"values": 3, "sequence_length": 3, "visible_steps": 2}})), analysis_info=True)
    for seed in range(5):
        obs, info = env.reset(seed=seed)
        h = info["analysis_only"]["cue"]
        sequence = [(h // 3 ** j) % 3 for j in range(3)]
        seen = [obs[env.observation_blocks["cue"]]]
        for _ in range(7):
            obs, *_ = env.step(1)
            seen.append(obs[env.observation_blocks["cue"]])
        for t, bits in enumerate(seen):
            expected = np.eye(3)[sequence[t // 2]] if t < 6 else np.zeros(3)
            assert np.array_equal(bits, expected), (seed, t)


def test_sequences_need_the_match_rule():
    """A non-match rule has no meaning for an ordered sequence: the spec is refused."""
    with pytest.raises(taskgen.SpecError, match="expected decision.rule 'match' with a cue sequence"):
        load_spec_text(yaml.safe_dump({"format_version": 1, "name": "x", "layout": {"corridor": {"length": 2}},
                                       "cue": {"values": 2, "sequence_length": 2},
                                       "decision": {"rule": "non_match"}}))


def test_per_goal_rewards_pay_each_goal_its_own():
    """With rewards.per_goal the optimal return is the prior-weighted mean of the goals' rewards
    minus step costs (arithmetic on the corridor's known distances)."""
    doc = {"format_version": 1, "name": "test-goals", "layout": {"corridor": {"length": 3, "arm_length": 1}},
           "cue": {"values": 2}, "rewards": {"per_goal": [1.0, 3.0], "step": 0.0}}
    model = compile_variant(make_variant(load_spec_text(yaml.safe_dump(doc)), 0))
    _, report = model, analyse(model)
    assert report.baselines["optimal"].mean_return.mean == pytest.approx(2.0)
    with pytest.raises(taskgen.SpecError, match=r"rewards.per_goal with one reward per cue value \(2\), got 3"):
        load_spec_text(yaml.safe_dump({**doc, "rewards": {"per_goal": [1.0, 2.0, 3.0]}}))
