"""Rollouts of deterministic policies on many paths: exact against dynamic programming, and the
explorer against worked examples and the completeness of depth-first search."""

from __future__ import annotations

import numpy as np
import pytest

import taskgen
from taskgen.analysis import at_reset, evaluate
from taskgen.analysis.rollouts import roll

from conftest import field_model, field_spec_text, sample_paths


def test_rollouts_equal_exact_policy_evaluation_when_marks_are_unseen():
    """Without marks in view a memoryless policy is a policy of the cell, so its rollout return
    on each path equals dynamic programming's exact value on that path's model (common practice)."""
    model = field_model(width=4, height=5, turns=1, start="random", rewards={"step": -0.03, "misstep": -0.2},
                        episode={"max_steps": 15, "discount": 0.9})
    kind, start = sample_paths(model, 0, 12)
    policy = np.random.default_rng(2).integers(4, size=model.num_cells)
    result = roll(model, kind, start, lambda t, cell, marked, live: policy[cell])
    for i in range(12):
        path = model.path_model(kind[i], int(start[i]))
        table = np.broadcast_to(policy[path.cell], (path.horizon, path.num_states))
        assert result.returns[i] == pytest.approx(at_reset(path, evaluate(path, np.ascontiguousarray(table))),
                                                  abs=1e-12)


def test_the_explorer_on_a_one_turn_path_worked_example():
    """Worked example: 3 columns, 5 rows, start in the middle, one turn at the far side. The
    explorer walks 4 steps north, then east along the far row: if the path turns east it
    arrives at step 5, 1 − 5 × 0.01 = 0.95; if west it steps off (−0.05), walks back up 4 steps
    and goes west, arriving at step 10: 1 − 10 × 0.01 − 0.05 = 0.85."""
    from taskgen.analysis.explorer import explore
    from taskgen.generate.paths import GOAL
    model = field_model(width=3, height=5, turns=1, rewards={"step": -0.01, "misstep": -0.05},
                        episode={"max_steps": 30})
    kind, start = sample_paths(model, 0, 16)
    result = explore(model, kind, start)
    east = np.array([np.flatnonzero(k == GOAL)[0] % 3 == 2 for k in kind])
    assert 0 < east.sum() < 16
    assert np.allclose(result.returns, np.where(east, 0.95, 0.85))
    assert np.array_equal(result.length, np.where(east, 5, 10))


@pytest.mark.parametrize("fields", [
    dict(width=7, height=8, turns=5, start="random"),
    dict(width=8, height=7, turns=3, start="random", path={"width": 2}),
    dict(width=6, height=6, turns=4, start="random", misstep={"to": "stay"}),
    dict(width=8, height=8, start="random", maze="backtracker"),
    dict(width=9, height=6, start="random", maze="rooms"),
], ids=["winding", "wide", "stay", "backtracker walls", "rooms walls"])
def test_the_explorer_crosses_every_path_given_time(fields):
    """The explorer is a depth-first search of the safe cells, so with a generous step limit it
    reaches the end of every path (depth-first search visits every vertex of a connected graph:
    Tarjan, SIAM J. Comput. 1972), open field or walls."""
    from taskgen.analysis.explorer import explore
    walls = fields.pop("maze", None)
    text = field_spec_text(episode={"max_steps": 1500}, **fields)
    if walls:
        import yaml
        doc = yaml.safe_load(text)
        doc["layout"]["field"]["maze"] = {"generator": walls, "braid": 0.3}
        text = yaml.safe_dump(doc)
    model = taskgen.build_model(taskgen.load_spec_text(text)).paths
    kind, start = sample_paths(model, 1, 300)
    assert explore(model, kind, start).success.all()
