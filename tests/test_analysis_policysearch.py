"""The branch and bound for the best deterministic memoryless policy, against brute-force enumeration.

The reference is the definition itself: a deterministic memoryless policy is one action per
observation class, so on a small model every policy can be listed (itertools.product) and
evaluated exactly; the best of them is the optimum the search must prove (common practice).
"""

from __future__ import annotations

import itertools
from typing import Any

import numpy as np
import pytest
import yaml
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from taskgen import compile_variant, load_spec_text, make_variant, observation_set
from taskgen.analysis.memoryless import TableRollout, evaluate_memoryless, solve_memoryless
from taskgen.analysis.policysearch import search
from taskgen.model import TaskModel
from taskgen.render.observations import key_classes

ENUMERABLE = 4 ** 7          # policies listed at most per model (classes a trajectory can reach, 4 actions)


def model_and_classes(text: str, seed: int = 0, paths: int = 6) -> tuple[TaskModel, np.ndarray]:
    """A spec's compiled model and its observation classes (what the agent can tell apart, marks and
    noise excluded; ``paths``: a field's sampled paths)."""
    spec = load_spec_text(text)
    model = compile_variant(make_variant(spec, seed), paths)
    return model, key_classes(observation_set(model, spec.observation))[model.obs_key]


def reachable_classes(model: TaskModel, classes: np.ndarray) -> np.ndarray:
    """Classes of the non-terminal states some action sequence reaches from the start within the horizon:
    the only classes whose action can change a return."""
    seen = model.initial > 0
    frontier = seen.copy()
    for _ in range(model.horizon):
        nxt = np.zeros_like(seen)
        nxt[model.next_state[frontier & ~model.terminal].ravel()] = True
        frontier = nxt & ~seen
        seen |= nxt
        if not frontier.any():
            break
    return np.unique(classes[seen & ~model.terminal])


def enumerated_best(model: TaskModel, classes: np.ndarray) -> float | None:
    """The best return over every deterministic memoryless policy, or None when there are too many."""
    live = reachable_classes(model, classes)
    A = model.num_actions
    if A ** live.size > ENUMERABLE:
        return None
    best = -np.inf
    combos = np.array(list(itertools.product(range(A), repeat=live.size)), dtype=np.int64).reshape(-1, live.size)
    for chunk in np.array_split(combos, max(1, len(combos) // 2048)):
        policies = np.zeros((len(chunk), int(classes.max()) + 1), dtype=np.int64)
        policies[:, live] = chunk
        best = max(best, float(evaluate_memoryless(model, classes, policies).max()))
    return best


def _corridor(draw: st.DrawFn) -> str:
    corridor: dict[str, Any] = {"length": draw(st.integers(0, 3)), "arm_length": draw(st.integers(1, 2))}
    width = draw(st.sampled_from([1, 1, 2, 3]))
    if width > 1:
        corridor["width"] = width
    return yaml.safe_dump({
        "format_version": 1, "name": "enumerated-corridor", "layout": {"corridor": corridor},
        "cue": {"values": draw(st.integers(2, 4)), "visible_steps": draw(st.integers(1, 2))},
        "decision": {"wrong": draw(st.sampled_from(["end", "continue"]))},
        "rewards": _rewards(draw),
        "episode": {"max_steps": draw(st.integers(2, 12)), "discount": draw(st.sampled_from([1.0, 0.9]))},
        "observation": {"vector": {"position": draw(st.sampled_from(["none", "one_hot"])),
                                   "walls": draw(st.booleans())}},
    }, sort_keys=False)


def _maze(draw: st.DrawFn) -> str:
    height = draw(st.integers(1, 3))
    width = draw(st.integers(3 if height == 1 else 2, 3))        # room for a start and two goals
    return yaml.safe_dump({
        "format_version": 1, "name": "enumerated-maze",
        "layout": {"maze": {"width": width, "height": height, "generator": "uniform",
                            "braid": draw(st.sampled_from([0.0, 0.5]))}},
        "cue": {"values": 2, "visible_steps": 1},
        "decision": {"wrong": draw(st.sampled_from(["end", "continue"]))},
        "rewards": _rewards(draw),
        "episode": {"max_steps": draw(st.integers(2, 10))},
        "observation": {"vector": {"position": "none", "walls": True}},
    }, sort_keys=False)


def _field(draw: st.DrawFn) -> str:
    return yaml.safe_dump({
        "format_version": 1, "name": "enumerated-field",
        "layout": {"field": {"width": draw(st.integers(2, 3)), "height": draw(st.integers(2, 3)),
                             "path": {"turns": draw(st.integers(0, 1)),
                                      "start": draw(st.sampled_from(["middle", "random"]))},
                             "misstep": {"to": draw(st.sampled_from(["start", "stay"]))}, "mark": None}},
        "rewards": {"step": -draw(st.sampled_from([0.0, 0.01, 0.1])), "misstep": -draw(st.sampled_from([0.0, 0.2])),
                    "timeout": -draw(st.sampled_from([0.0, 1.0]))},
        "episode": {"max_steps": draw(st.integers(3, 10))},
        "observation": {"vector": {"position": draw(st.sampled_from(["none", "one_hot"]))}},
    }, sort_keys=False)


def _rewards(draw: st.DrawFn) -> dict[str, float]:
    return {"correct": 1.0, "wrong": -draw(st.sampled_from([0.0, 0.5, 1.0])),
            "step": -draw(st.sampled_from([0.0, 0.01, 0.2])), "timeout": -draw(st.sampled_from([0.0, 0.5, 2.0]))}


@st.composite
def small_specs(draw: st.DrawFn) -> tuple[str, int]:
    """A random small spec of any family (corridor, maze, field without marks in view) and a seed."""
    family = draw(st.sampled_from([_corridor, _corridor, _maze, _field]))
    return family(draw), draw(st.integers(0, 50))


@settings(max_examples=240, deadline=None, derandomize=True, suppress_health_check=[HealthCheck.too_slow])
@given(small_specs())
def test_the_proven_optimum_equals_enumeration(case):
    """On 240 random small specs of every family the search proves optimality, and its value equals
    the best of every deterministic memoryless policy listed (enumeration is the definition; common
    practice), to 1e-9."""
    text, seed = case
    model, classes = model_and_classes(text, seed)
    best = enumerated_best(model, classes)
    assume(best is not None)     # too many policies to list: not a case (Hypothesis counts only the others)
    result = solve_memoryless(model, classes)
    assert result.method == "exact" and result.proof.proven
    assert result.mean_return == pytest.approx(best, abs=1e-9)
    assert result.upper == pytest.approx(best, abs=1e-9)


def test_a_tiny_budget_gives_an_interval_that_contains_the_optimum():
    """Stopped early, the search reports the best policy it found (evaluated exactly) and an admissible
    bound: the enumerated optimum lies between them (the meaning of a branch-and-bound gap; common
    practice)."""
    text = yaml.safe_dump({"format_version": 1, "name": "wide", "layout": {"corridor": {"length": 1, "arm_length": 1,
                                                                                          "width": 2}},
                           "cue": {"values": 2}, "rewards": {"correct": 1.0, "wrong": -0.5, "step": -0.01},
                           "episode": {"max_steps": 6}, "observation": {"vector": {"position": "none", "walls": True}}})
    model, classes = model_and_classes(text)
    best = enumerated_best(model, classes)
    assert best is not None
    stopped = search(TableRollout(model, classes), budget=3)
    assert not stopped.proven and stopped.method == "bounded" and stopped.nodes == 3
    assert stopped.value - 1e-9 <= best <= stopped.upper + 1e-9
    full = search(TableRollout(model, classes))
    assert full.proven and full.value == pytest.approx(best, abs=1e-9)


def test_a_search_out_of_work_still_brackets_the_optimum():
    """Stopped by its work budget (a long horizon's dear bounds), the search says so and its interval
    still holds the proven optimum of an unlimited search (branch and bound's invariant: common practice);
    the report tells the user which budget to raise."""
    from taskgen.analysis.memoryless import describe

    text = yaml.safe_dump({"format_version": 1, "name": "long-wait", "layout": {"corridor": {"length": 6}},
                           "cue": {"values": 3}, "episode": {"max_steps": 400},
                           "rewards": {"correct": 1.0, "wrong": -1.0, "step": -0.01, "timeout": -1.0}})
    model, classes = model_and_classes(text)
    full = search(TableRollout(model, classes))
    rollout = TableRollout(model, classes)
    short = search(rollout, work=rollout.restricted_cost)
    assert full.proven and not short.proven and short.out_of_work
    assert short.value - 1e-9 <= full.value <= short.upper + 1e-9
    assert "stopped at the work budget (raise --max-work)" in describe(short)
