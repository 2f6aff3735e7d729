"""Field dynamics: exact traversal times against a closed form and against Kemeny & Snell's
fundamental matrix, the misstep rules, and one path's model against the shared step rule."""

from __future__ import annotations

import math

import numpy as np
import pytest

from taskgen.analysis import Objective, at_reset, evaluate, hitting_times, uniform_policy
from taskgen.generate.paths import GOAL, OFF, ON

from conftest import field_model


def straight(L: int, **fields):
    """A field three cells wide and L + 1 deep with a straight path up its middle column: the
    path model and the path's cells from start (the south edge) to end."""
    model = field_model(width=3, height=L + 1, turns=0, start="middle", **fields)
    kind, start = model.draw(np.zeros((1, model.draws)))
    return model, model.path_model(kind[0], int(start[0])), kind[0], int(start[0])


def closed_form_traversal(L: int) -> float:
    """Expected steps for a uniform-random walker to cross a straight hidden path of L steps.

    Number the path's cells 0 (start, on the field's south edge) … L (end). With moves north,
    east, south, west equally likely, north advances, south goes back (at cell 0 it bumps into
    the edge and stays), and east or west step off the path, which sends the walker to cell 0.
    For the expected steps E_i from cell i:

        0 < i < L:  E_i = 1 + ¼E_{i+1} + ¼E_{i−1} + ½E_0
        i = 0:      E_0 = 1 + ¼E_1 + ¾E_0,  so E_1 = E_0 − 4
        i = L:      E_L = 0

    The first line is the linear recurrence E_{i+1} − 4E_i + E_{i−1} = −4 − 2E_0. A constant
    c solves it when −2c = −4 − 2E_0, so c = 2 + E_0; the homogeneous part has characteristic
    roots r² − 4r + 1 = 0, r = 2 ± √3 = ρ^{±1} with ρ = 2 + √3. So E_i = 2 + E_0 + Aρ^i + Bρ^{−i}.
    At i = 0: A + B = −2; at i = 1 (E_1 = E_0 − 4): Aρ + B/ρ = −6. With ρ − 1/ρ = 2√3 and
    1/ρ = 2 − √3 these give A = −(1 + √3)/√3 and B = (1 − √3)/√3. Then E_L = 0 gives

        E_0 = −2 + ((1 + √3)ρ^L + (√3 − 1)ρ^{−L}) / √3.

    Check: L = 1 gives E_0 = 4, the mean of a geometric wait for north with p = ¼.
    """
    rho, r3 = 2 + math.sqrt(3), math.sqrt(3)
    return -2 + ((1 + r3) * rho ** L + (r3 - 1) * rho ** -L) / r3


@pytest.mark.parametrize("L", range(1, 11))
def test_random_traversal_time_matches_the_closed_form(L):
    """The exact solver's expected traversal steps (no step limit) equal the closed form derived
    in closed_form_traversal to 1e-9 relative (the values grow as (2 + √3)^L: 4, 20, 80, 304, …,
    826804 steps for L = 10; source: the derivation in closed_form_traversal's docstring)."""
    _, path, _, start = straight(L)
    steps = hitting_times(path, uniform_policy(path), path.terminal)[start]
    assert steps == pytest.approx(closed_form_traversal(L), rel=1e-9, abs=1e-9)


@pytest.mark.parametrize("L", [1, 2, 5, 10])
def test_traversal_time_matches_the_fundamental_matrix(L):
    """Expected steps from every path cell equal t = N·1 with N = (I − Q)⁻¹ (Kemeny & Snell,
    Finite Markov Chains, 1960, theorem 3.3.5), Q built here from the rules alone: from cell i
    north goes to i + 1, south to i − 1 (cell 0 stays), east and west to cell 0."""
    _, path, kind, start = straight(L)
    Q = np.zeros((L, L))
    for i in range(L):
        if i + 1 < L:
            Q[i, i + 1] += 0.25
        Q[i, max(i - 1, 0)] += 0.25
        Q[i, 0] += 0.5
    t = np.linalg.inv(np.eye(L) - Q) @ np.ones(L)
    h = hitting_times(path, uniform_policy(path), path.terminal)
    cells = start - 3 * np.arange(L)             # up the middle column, one row per step
    assert np.allclose(h[cells], t, rtol=1e-10)
    assert kind[start - 3 * L] == GOAL and (kind[cells] == ON).all()


def test_missteps_send_the_agent_back_or_leave_it_in_place():
    """A step off the path pays step + misstep and returns the agent to the start cell, or with
    misstep.to 'stay' keeps it where it was; the mark goes on the cell it aimed at (common practice)."""
    rewards = {"step": -0.01, "misstep": -0.5, "correct": 1.0}
    for to, expect in (("start", "start"), ("stay", "here")):
        model, path, kind, start = straight(4, misstep={"to": to}, rewards=rewards)
        here = start - 6                               # two steps up
        east = 1
        out = model.outcome(np.array([here]), np.array([east]), kind[None], np.array([start]))
        assert out.misstep[0] and out.aim[0] == here + 1 and kind[here + 1] == OFF
        assert out.next_state[0] == (start if expect == "start" else here)
        assert out.reward[0] == pytest.approx(-0.51)
        assert path.next_state[here, east] == out.next_state[0]


def test_the_misstep_limit_ends_the_episode_as_a_failure():
    """With misstep.limit m the m-th misstep reaches an end state that is not a success. On a one-step
    path with m = 1 a uniform agent reaches the end at a step when it draws north (1/4) before any
    east or west (2/4); south bumps and draws again (1/4). Within H steps that is the geometric
    sum Σ_{t<H} (1/4)^t · 1/4 = (1 − 4^−H)/3 (first-step analysis; common practice)."""
    model, path, kind, start = straight(1, misstep={"limit": 1})
    out = model.outcome(np.array([start]), np.array([1]), kind[None], np.array([start]))
    assert out.terminal[0] and not out.success[0]
    success = at_reset(path, evaluate(path, uniform_policy(path), Objective.success(path)))
    assert success == pytest.approx((1 - 4.0 ** -path.horizon) / 3, abs=1e-12)


def test_one_path_model_agrees_with_the_shared_step_rule():
    """Every (state, action) of a winding path's model moves and pays as FieldModel.outcome
    says, so the analyses and the runtimes read one rule (common practice)."""
    model = field_model(width=5, height=6, turns=3, start="random", misstep={"limit": 3},
                        rewards={"step": -0.02, "misstep": -0.3, "correct": 2.0})
    kind, start = model.draw(np.random.default_rng(4).random((1, model.draws)))
    path = model.path_model(kind[0], int(start[0]))
    S, A = path.num_states, path.num_actions
    s, a = np.divmod(np.arange(S * A), A)
    out = model.outcome(s, a, np.repeat(kind, S * A, axis=0), np.repeat(start, S * A))
    live = ~path.terminal[s]
    assert np.array_equal(path.next_state.ravel()[live], out.next_state[live])
    assert np.allclose(path.reward.ravel()[live], out.reward[live])
    assert np.array_equal(path.terminal[out.next_state[live]], out.terminal[live])
    assert np.array_equal(path.success[out.next_state[live]], out.success[live])


@pytest.mark.parametrize("fields", [
    dict(width=5, height=6, turns=3, start="random", misstep={"limit": 3}),
    dict(width=4, height=5, turns=2, start="random", misstep={"to": "stay"}),
], ids=["to start, limited", "stay"])
def test_the_scalar_step_rule_equals_the_array_rule(fields):
    """PathRule.outcome_one (a single env's step, in Python numbers) gives for every (state, action)
    on sampled paths exactly what PathRule.outcome gives: next state, reward, misstep, aimed cell
    and end (common practice: a fast path checked against the plain one)."""
    rule = field_model(rewards={"step": -0.02, "misstep": -0.3, "correct": 2.0, "timeout": -1.0}, **fields)
    kind, start = rule.draw(np.random.default_rng(9).random((6, rule.draws)))
    S, A = rule.num_states, rule.num_actions
    s, a = np.divmod(np.arange(S * A), A)
    for k, st in zip(kind, start):
        out = rule.outcome(s, a, np.repeat(k[None], S * A, axis=0), np.repeat(st, S * A))
        scalar = [rule.outcome_one(int(x), int(y), k.tolist(), int(st)) for x, y in zip(s, a)]
        assert [o[0] for o in scalar] == out.next_state.tolist()
        assert [o[1] for o in scalar] == out.reward.tolist()
        assert [o[2] for o in scalar] == out.misstep.tolist()
        assert [o[3] for o in scalar] == out.aim.tolist()
        assert [o[4] for o in scalar] == out.terminal.tolist()


@pytest.mark.parametrize("fields", [dict(width=5, height=7, turns=3, start="random"),
                                    dict(width=4, height=4, turns=0, start="middle")], ids=["winding", "straight"])
def test_a_single_env_s_draw_equals_the_batch_draw(fields):
    """PathRule.draw_one (a single env's reset, keeping paths by signature) returns for every row
    of uniforms what PathRule.draw returns for the whole batch (common practice)."""
    rule = field_model(**fields)
    u = np.random.default_rng(2).random((500, rule.draws))
    kind, start = rule.draw(u)
    for i, row in enumerate(u):
        one, listed, first = rule.draw_one(row.tolist())
        assert np.array_equal(one, kind[i]) and listed == kind[i].tolist() and first == start[i]


def test_an_open_field_draws_from_its_bank_what_draw_paths_draws():
    """A small open field's PathRule.draw reads its bank; the paths equal draw_paths' in field cells
    for 1,000 rows of uniforms (common practice)."""
    from taskgen.generate.paths import draw_paths
    rule = field_model(width=5, height=7, turns=3, start="random")
    assert rule._open_bank is not None
    u = np.random.default_rng(13).random((1000, rule.draws))
    kind, start = rule.draw(u)
    want_kind, want_start = rule.frame.to_field(draw_paths(rule.shape, u, centre=False))
    assert np.array_equal(kind, want_kind) and np.array_equal(start, want_start)
