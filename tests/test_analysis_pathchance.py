"""A field's chance level with marks in view: the bounds bracket the marks-aware optimum."""

from __future__ import annotations

import numpy as np
import pytest

from taskgen import compile_variant, load_spec_text, make_variant, observation_set
from taskgen.analysis.memoryless import solve_memoryless
from taskgen.analysis.pathchance import FirstMisstepRollout, MarkRollout, _roll, MarkPolicy, path_chance
from taskgen.analysis.paths import path_parts
from taskgen.analysis.policysearch import search
from taskgen.kinds.field import _seen
from taskgen.render.observations import key_classes

from conftest import field_spec_text


def _parts(paths: int = 6, **fields):
    spec = load_spec_text(field_spec_text(**fields))
    model = compile_variant(make_variant(spec, 0), paths)
    obs = observation_set(model, spec.observation)
    rule, sample = path_parts(model)
    view = key_classes(obs)
    return model, rule, sample, view, _seen(model, obs)


SMALL = dict(width=3, height=3, turns=1, start="random", mark={"steps": "episode"},
             rewards={"step": -0.02, "misstep": -0.2, "timeout": -1.0}, episode={"max_steps": 10})


def test_the_marks_search_value_is_the_value_of_its_policy_rolled_out():
    """The value the marks-aware search claims for its best policy equals an independent roll-out of
    that policy on every sampled path (rollouts.roll, which the analyses already check against exact
    policy evaluation)."""
    model, rule, sample, view, seen = _parts(**SMALL)
    assert seen is not None
    classes = view[model.obs_key]
    blind = solve_memoryless(model, classes)
    found = search(MarkRollout(model, classes, rule, sample, seen))
    assert found.proven
    rolled = _roll(rule, sample, MarkPolicy(view, blind.policy, found.policy, seen))
    assert float(rolled.returns.mean()) == pytest.approx(found.value, abs=1e-9)


def test_the_bounds_bracket_the_proven_marks_aware_optimum():
    """Ignoring the marks is one marks-aware policy (a lower bound); knowing the path after the first
    misstep can only help (an upper bound). On a field small enough to prove the marks-aware optimum,
    blind ≤ optimum ≤ relaxation, and the reported interval contains the optimum whatever the
    budget (the meaning of a relaxation bound; common practice)."""
    model, rule, sample, view, seen = _parts(**SMALL)
    classes = view[model.obs_key]
    blind = solve_memoryless(model, classes)
    optimum = search(MarkRollout(model, classes, rule, sample, seen))
    relaxed = search(FirstMisstepRollout(model, classes, rule, sample))
    assert optimum.proven and relaxed.proven
    assert blind.mean_return <= optimum.value + 1e-9 <= relaxed.value + 2e-9
    for budget in (1, 50, 2_000_000):
        chance, _ = path_chance(model, rule, sample, view, seen, budget)
        low, high = chance.deterministic.interval
        assert high is not None
        assert low - 1e-9 <= optimum.value <= high + 1e-9
        assert chance.deterministic.method in ("exact", "bounded")
        if chance.deterministic.method == "exact":
            assert low == pytest.approx(optimum.value, abs=1e-9)


def test_lasting_marks_lift_the_memoryless_agent():
    """With marks that last the episode, the best marks-reading policy scores more than the best one
    that ignores them on this field (common practice: a lasting mark is external memory)."""
    model, rule, sample, view, seen = _parts(paths=8, **SMALL)
    classes = view[model.obs_key]
    blind = solve_memoryless(model, classes)
    chance, policy = path_chance(model, rule, sample, view, seen)
    assert chance.deterministic.interval[0] > blind.mean_return + 1e-6
    assert policy.table
    assert np.isfinite(chance.upper) and chance.upper >= chance.lower
