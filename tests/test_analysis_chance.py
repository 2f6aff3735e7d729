"""The certified chance level and the checks that read it: wide halls, forced choices, undecided verdicts."""

from __future__ import annotations

import numpy as np
import pytest
import yaml

from taskgen import analyse, compile_variant, load_spec_text, make_variant, observation_set
from taskgen.analysis.chance import carried_check, gap_check, table_chance
from taskgen.model import TaskModel

from test_analysis_policysearch import model_and_classes


def best_by_behaviours(model: TaskModel, classes: np.ndarray) -> float:
    """The best deterministic memoryless return by exhaustive enumeration of behaviours: every hidden
    value's trajectory is followed under a partial policy, and at each class no action was chosen
    for yet, every action is tried (no bound, no pruning: the definition, written independently of
    taskgen's search; common practice)."""
    H, g, to = model.horizon, model.discount, model.timeout_reward
    ns, r, term, cls = model.next_state.tolist(), model.reward.tolist(), model.terminal.tolist(), classes.tolist()

    def best(positions: list[tuple[int, int, float, float]], policy: dict[int, int]) -> float:
        moved, waiting = [], None
        for s, t, got, w in positions:
            while t < H and not term[s]:
                a = policy.get(cls[s])
                if a is None:
                    waiting = cls[s]
                    break
                s2 = ns[s][a]
                got += g ** t * (r[s][a] + (to if t == H - 1 and not term[s2] else 0.0))
                s, t = s2, t + 1
            moved.append((s, t, got, w))
        if waiting is None:
            return sum(w * got for _, _, got, w in moved)
        return max(best(moved, {**policy, waiting: a}) for a in range(model.num_actions))

    return best([(int(s), 0, 0.0, float(model.initial[s])) for s in np.flatnonzero(model.initial)], {})


def hall(width: int, values: int, length: int, **extra) -> str:
    """A corridor hall ``width`` lanes wide, ±1 for the right or a wrong arm, the agent seeing its position."""
    doc = {"format_version": 1, "name": "hall",
           "layout": {"corridor": {"length": length, "arm_length": 1, "width": width}},
           "cue": {"values": values},
           "rewards": {"correct": 1.0, "wrong": -1.0, "step": -0.01, "timeout": -1.0},
           "episode": {"max_steps": length + width + 4}}
    doc.update(extra)
    return yaml.safe_dump(doc, sort_keys=False)


def _report(text: str, budget: int | None = None):
    spec = load_spec_text(text)
    model = compile_variant(make_variant(spec, 0))
    obs = observation_set(model, spec.observation)
    return model, analyse(model, obs) if budget is None else analyse(model, obs, budget=budget)


@pytest.mark.parametrize("width, values, length", [(2, 2, 1), (2, 3, 1), (2, 3, 2), (2, 4, 0), (2, 5, 0),
                                                   (3, 2, 2), (3, 3, 1), (3, 4, 0)])
def test_wide_halls_exact_chance_equals_enumeration_and_a_carried_cue_has_a_witness(width, values, length):
    """In halls two or three lanes wide a memoryless agent can route cue values into lanes. The
    proven chance equals exhaustive enumeration to 1e-9, and whenever it beats the cue-blind agent
    the carried-cue check fails with a witness (common practice: a memoryless policy that beats
    every cue-blind one must be reading the cue from where it stands)."""
    text = hall(width, values, length)
    model, classes = model_and_classes(text)
    enumerated = best_by_behaviours(model, classes)
    _, report = _report(text)
    chance = report.baselines["chance"]
    assert chance.method == "exact"
    assert chance.mean_return.mean == pytest.approx(enumerated, abs=1e-9)
    assert chance.interval == pytest.approx((enumerated, enumerated), abs=1e-9)
    carried = next(c for c in report.checks if c.name == "no carried cue")
    blind = report.baselines["cue_blind"].mean_return.mean
    if carried.verdict == "n/a":
        assert "still shown" in carried.reason
    elif report.chance_level["lower"] > blind + 1e-9:
        assert carried.verdict == "fail" and "beats the cue-blind agent" in carried.reason
        assert report.details.witness
    else:
        assert carried.verdict == "pass"


def test_lanes_carry_the_cue_in_a_two_lane_hall():
    """Two lanes, three cue values, one corridor cell: the memoryless agent beats the cue-blind one by
    steering two cue values into lanes (hand-worked: each lane leads to its own arm, so two of three
    values succeed, 2/3 against the blind agent's 1/3), and the check says so."""
    _, report = _report(hall(2, 3, 1))
    assert report.baselines["chance"].success_rate.mean == pytest.approx(2 / 3, abs=1e-12)
    assert report.baselines["cue_blind"].success_rate.mean == pytest.approx(1 / 3, abs=1e-12)
    assert next(c for c in report.checks if c.name == "no carried cue").verdict == "fail"


@pytest.mark.parametrize("k", [2, 3, 4, 5])
def test_k_way_forced_choice_in_a_one_lane_hall_is_one_in_k(k):
    """With one lane and the cue gone before the choice, a memoryless agent can only guess: chance
    success is exactly 1/k, proven, and no memoryless policy (stochastic ones included) scores more
    than the cue-blind agent (common practice: a k-alternative forced choice)."""
    _, report = _report(hall(1, k, 3))
    chance = report.baselines["chance"]
    assert chance.method == "exact"
    assert chance.success_rate.mean == pytest.approx(1 / k, abs=1e-12)
    assert report.chance_level["upper"] == pytest.approx(report.baselines["cue_blind"].mean_return.mean, abs=1e-9)
    assert report.baselines["chance_stochastic"].mean_return.mean <= chance.mean_return.mean + 1e-9
    checks = {c.name: c.verdict for c in report.checks}
    assert checks["no carried cue"] == "pass" and checks["memory gap"] == "pass"


def test_the_carried_cue_check_does_not_apply_while_the_cue_is_shown_at_the_decision():
    """A cue that stays in view until the choice needs no memory: cue needed fails, and no carried
    cue says it does not apply instead of blaming position or timing (common practice)."""
    _, report = _report(hall(1, 3, 2, cue={"values": 3, "visible_steps": 20}))
    checks = {c.name: c for c in report.checks}
    assert checks["cue needed"].verdict == "fail"
    assert checks["no carried cue"].verdict == "n/a" and "still shown" in checks["no carried cue"].reason


def test_a_tiny_budget_leaves_checks_undecided_with_the_interval_in_the_reason():
    """With a one-node budget the chance level is an interval, reported as bounded; a check the interval
    cannot decide says undecided and quotes it (the meaning of a certified bound; common practice)."""
    model, report = _report(hall(3, 4, 1), budget=1)
    chance = report.baselines["chance"]
    assert chance.method == "bounded"
    low, high = chance.interval
    assert high is not None and high > low
    level = report.chance_level
    assert level["lower"] <= level["upper"] and level["upper"] >= high - 1e-12
    verdicts = {c.name: c for c in report.checks}
    undecided = [c for c in verdicts.values() if c.verdict == "undecided"]
    assert undecided and all("[" in c.reason for c in undecided)
    assert not report.ok
    _, proven = _report(hall(3, 4, 1))
    assert low - 1e-9 <= proven.baselines["chance"].mean_return.mean <= high + 1e-9


def test_checks_decide_on_the_bound_not_on_the_policy_found():
    """Unit cases of the rule: pass only when the certified bound proves it, fail on a policy that
    refutes it, undecided in between (common practice for bounded optimisation)."""
    model, classes = model_and_classes(hall(3, 4, 1))
    chance = table_chance(model, classes)
    level = chance.lower
    assert gap_check(level + 1.0, chance, 0.5, "the cue").verdict == "pass"
    assert gap_check(level + 0.1, chance, 0.5, "the cue").verdict == "fail"
    assert carried_check(level, chance, "", None).verdict == "pass"
    assert carried_check(level - 0.1, chance, "", None).verdict == "fail"
    bounded = table_chance(model, classes, budget=1)
    assert bounded.upper - bounded.lower > 1e-3
    middle = (bounded.lower + bounded.upper) / 2
    assert carried_check(middle, bounded, "", None).verdict == "undecided"
    assert gap_check(middle + 0.2, bounded, 0.2, "the cue").verdict == "undecided"
