"""Reference agents of a task whose figures are computed exactly on the compiled model.

- optimal: remembers what it has seen (a field's: knows the path), best return by backward
  induction;
- cue-blind: never knows the cue (it knows position and time, never the cue value), best
  return by backward induction over cue-blind states;
- random: picks actions uniformly.

Every figure is computed per hidden value (the value at its start state) and summarised by
:class:`~taskgen.analysis.report.Figure`. The chance level (the best memoryless agent) lives in
memoryless.py.
"""

from __future__ import annotations

import numpy as np

from ..errors import AnalysisError
from ..model import CueStructure, TaskModel, shortest_success_steps
from .dp import Objective, SharedChoice, evaluate, optimise, optimise_tables, uniform_policy
from .report import Baseline

OPTIMAL_CLASS = ("perfect memory: uses the cue from the moment it is shown (sees position and time; "
                 "before the cue is shown it knows only its prior)")
CUE_BLIND_CLASS = ("never knows the cue: sees position and time but never the cue value "
                   "(deterministic, time-dependent)")
RANDOM_CLASS = "uniform-random actions"


def per_value(model: TaskModel, policy: np.ndarray, objective: Objective | None = None) -> np.ndarray:
    """float[count]: a policy's exact value (default: the task's return) from each hidden value's start."""
    return evaluate(model, policy, objective)[0][model.starts()]


def policy_figures(model: TaskModel, policy: np.ndarray, policy_class: str, method: str = "exact",
                   method_detail: str = "") -> Baseline:
    """Exact success rate, return and length of one policy per hidden value, summarised (the method
    names how the policy was chosen)."""
    return Baseline.of(model.hidden, per_value(model, policy, Objective.success(model)), per_value(model, policy),
                       per_value(model, policy, Objective.length(model)), method, policy_class, method_detail)


def shortest_steps(model: TaskModel) -> np.ndarray:
    """int64[count]: fewest steps to success from each hidden value's start (−1: unreachable)."""
    return shortest_success_steps(model.next_state, model.success, model.starts())


def shortest_solutions(model: TaskModel) -> dict[int, int]:
    """Fewest steps to success (the paying goal, the whole goal sequence, a path's end) for each
    hidden value (−1: unreachable)."""
    return {i: int(d) for i, d in enumerate(shortest_steps(model))}


def _cue(model: TaskModel) -> CueStructure:
    if model.cue is None:
        raise AnalysisError(f"{model.variant_id} has no cue, so it has no cue-blind agent")
    return model.cue


def optimal_policy(model: TaskModel) -> np.ndarray:
    """The optimal deterministic policy ``int[H, S]`` of an agent with perfect memory: it uses
    what it has seen of the cue from the moment it is shown; until it has seen all of it, it acts
    alike in the cue twins it cannot tell apart, on their prior-weighted values. Without a cue
    the state is all it needs (a field's optimal agent knows the path)."""
    if model.cue is None or model.cue.known.all():
        return optimise(model)[1]
    cue = model.cue
    _, group = np.unique(np.stack([cue.blind_state, cue.knowledge], axis=1), axis=0, return_inverse=True)
    group = group.ravel()
    weight = model.hidden.weights[model.value]
    mass = np.bincount(group, weights=weight)
    shared = SharedChoice(group, weight / mass[group], ~cue.known)
    return optimise_tables(model.next_state, model.terminal, model.horizon,
                           Objective.task_return(model), shared)[1]


def optimal_baseline(model: TaskModel, policy_class: str = OPTIMAL_CLASS) -> Baseline:
    """Exact figures of the agent that remembers the cue (or knows the path)."""
    return policy_figures(model, optimal_policy(model), policy_class)


def random_baseline(model: TaskModel) -> Baseline:
    """Exact figures of the uniform-random agent."""
    return policy_figures(model, uniform_policy(model), RANDOM_CLASS)


def cue_blind_policy(model: TaskModel) -> np.ndarray:
    """The best policy that never uses the cue, as ``int[H, S]`` (equal on cue-blind twins).

    Exact when the cue changes only rewards: transitions, terminal flags and the reset
    distribution of cue-blind states must not depend on it, so the blind agent's belief about
    the cue stays the prior and its expected reward is the prior-weighted mean.
    """
    blind = _cue(model).blind_state
    B = int(blind.max()) + 1
    blind_next = blind[model.next_state]                               # [S, A]
    rep = np.zeros(B, dtype=np.int64)
    rep[blind] = np.arange(model.num_states)                           # one member per class
    if not (blind_next == blind_next[rep[blind]]).all():
        raise AnalysisError("the cue changes transitions, so the cue-blind figure is not exact here")
    if not (model.terminal == model.terminal[rep[blind]]).all():
        raise AnalysisError("the cue changes which states end the episode; cue-blind figure not exact")
    weight = model.hidden.weights[model.value]
    mass = np.bincount(blind, weights=weight, minlength=B)
    reset_blind = np.bincount(blind, weights=model.initial, minlength=B)
    expected_initial = reset_blind[blind] * weight / mass[blind]
    if not np.allclose(expected_initial, model.initial):
        raise AnalysisError("the reset distribution ties the cue to the start; cue-blind figure not exact")
    reward = np.zeros((B, model.num_actions))
    np.add.at(reward, blind, model.reward * (weight / mass[blind])[:, None])
    objective = Objective(reward, model.discount, model.timeout_reward)
    _, blind_policy = optimise_tables(blind_next[rep], model.terminal[rep], model.horizon, objective)
    return blind_policy[:, blind]


def cue_blind_baseline(model: TaskModel) -> Baseline:
    """Exact figures of the best agent that never knows the cue."""
    return policy_figures(model, cue_blind_policy(model), CUE_BLIND_CLASS)
