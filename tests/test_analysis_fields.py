"""Field analyses: worked examples, the rollout evaluator against exact DP, and the checks."""

from __future__ import annotations

import statistics

import numpy as np
import pytest

import taskgen
from taskgen.analysis import at_reset, evaluate
from taskgen.analysis import Figure
from taskgen.tools.check import check_variant

from conftest import field_model, field_spec_text, sample_paths, timeless


def _spec(**fields):
    return taskgen.load_spec_text(field_spec_text(**fields))


def test_a_straight_path_from_a_fixed_start_needs_no_memory():
    """Worked example: a straight path of 4 steps from a fixed start. The agent that knows the
    path walks north 4 times, 1 − 4 × 0.01 = 0.96; so does the memoryless 'always north', so
    the memory gap check fails."""
    report = check_variant(_spec(width=3, height=5, rewards={"step": -0.01}, episode={"max_steps": 20}), 0,
                                 paths=8)
    assert report.baselines["optimal"].mean_return.mean == pytest.approx(0.96, abs=1e-12)
    assert report.baselines["chance"].mean_return.mean == pytest.approx(0.96, abs=1e-12)
    gap = next(c for c in report.checks if c.name == "memory gap")
    assert gap.passed is False


def test_winding_random_paths_need_memory_and_the_figures_are_ordered():
    """With a random start and turns, knowing the path beats every memoryless policy found, and
    the chance level is a lower bound no higher than the optimal agent (common practice)."""
    spec = _spec(width=5, height=6, turns=2, start="random", mark={"steps": 2},
                 rewards={"step": -0.01, "misstep": -0.05, "timeout": -0.5}, episode={"max_steps": 60})
    report = check_variant(spec, 0, paths=32)
    b = report.baselines
    assert b["optimal"].success_rate.mean == 1.0
    assert b["chance"].mean_return.mean < b["optimal"].mean_return.mean
    assert report.details.random_missteps.mean > 1.0
    assert report.ok and [c.name for c in report.checks] == ["solvable", "memory gap"]


def test_marks_that_never_fade_help_an_agent_without_memory():
    """A memoryless agent that sees marks which last the whole episode can avoid cells it stepped off
    into; hiding the marks from the vector takes that away (common practice: a lasting mark is
    external memory)."""
    fields = dict(width=5, height=6, turns=2, start="random", mark={"steps": "episode"},
                  rewards={"step": -0.01, "misstep": -0.05, "timeout": -0.5}, episode={"max_steps": 80})
    seen = check_variant(_spec(**fields), 0, paths=32)
    hidden = check_variant(_spec(observation={"vector": {"marks": False}}, **fields), 0, paths=32)
    assert seen.baselines["chance"].mean_return.mean > hidden.baselines["chance"].mean_return.mean + 0.3


def test_a_step_limit_below_the_shortest_route_fails_solvability():
    """Six rows need at least five steps: a limit of 3 fails, naming the path and the numbers (common practice)."""
    report = check_variant(_spec(width=3, height=6, episode={"max_steps": 3}), 0, paths=4)
    solvable = report.checks[0]
    assert solvable.passed is False and "shortest route 5 steps exceeds the step limit 3" in solvable.reason


def test_path_averages_match_the_standard_library():
    """Mean and standard error (sample standard deviation over √n) equal statistics.mean and
    statistics.stdev / √n (Python's statistics module)."""
    values = np.array([0.5, 1.25, -0.75, 2.0, 0.0])
    a = Figure.sampled(values, "exact per path")
    assert a.mean == pytest.approx(statistics.mean(values.tolist()))
    assert a.standard_error == pytest.approx(statistics.stdev(values.tolist()) / np.sqrt(5))
    assert (a.minimum, a.maximum) == (-0.75, 2.0)


def test_the_same_seed_gives_the_same_report():
    """Paths for the analyses come from the variant seed: two runs agree exactly (common practice)."""
    spec = _spec(width=5, height=6, turns=2, start="random")
    assert timeless(check_variant(spec, 3, paths=8).to_dict()) == timeless(check_variant(spec, 3, paths=8).to_dict())


def test_pruned_path_models_give_the_same_exact_figures():
    """Keeping only the states reachable from the start changes no exact figure: optimal and
    uniform-random returns at reset agree with the full model's to 1e-12 (common practice)."""
    from taskgen.analysis import optimise, uniform_policy
    model = field_model(width=5, height=6, turns=2, start="random", misstep={"limit": 4},
                        rewards={"step": -0.01, "misstep": -0.2}, episode={"max_steps": 40})
    kind, start = sample_paths(model, 0, 4)
    for k, s in zip(kind, start):
        full, pruned = model.path_model(k, int(s)), model.path_model(k, int(s), reachable_only=True)
        assert pruned.num_states < full.num_states
        values = [(at_reset(m, optimise(m)[0]), at_reset(m, evaluate(m, uniform_policy(m)))) for m in (full, pruned)]
        assert np.allclose(values[0], values[1], atol=1e-12)


def test_analyses_over_the_work_cap_are_refused_with_the_numbers():
    """When the sampled paths' dynamic programming would exceed the work cap, the check stops
    before solving and says how to go on (fewer paths, or a higher cap) (common practice)."""
    from taskgen import limits
    spec = _spec(width=6, height=8, turns=2, start="random", misstep={"limit": 8}, episode={"max_steps": 60})
    with limits.raised(max_work=400_000), pytest.raises(limits.ResourceLimitError, match="--paths"):
        check_variant(spec, 0, paths=64)
    with limits.raised(max_work=400_000):
        assert check_variant(spec, 0, paths=2).hidden["count"] == 2
