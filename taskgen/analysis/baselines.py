"""Reference agents of a task whose figures are computed exactly on the compiled model.

- optimal: remembers the cue (sees the full state), best return by backward induction;
- cue-blind: never knows the cue (it knows position and time, never the cue value), best
  return by backward induction over cue-blind states;
- random: picks actions uniformly.

The chance level (the best memoryless agent) lives in memoryless.py.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

import numpy as np

from ..errors import AnalysisError
from ..model import TaskModel
from .dp import Objective, SharedChoice, at_reset, evaluate, optimise, optimise_tables, uniform_policy

OPTIMAL_CLASS = ("perfect memory: uses the cue from the moment it is shown (sees position and time; "
                 "before the cue is shown it knows only its prior)")
CUE_BLIND_CLASS = ("never knows the cue: sees position and time but never the cue value "
                   "(deterministic, time-dependent)")
RANDOM_CLASS = "uniform-random actions"


@dataclass(frozen=True)
class Baseline:
    """One reference agent's exact figures and how they were obtained."""

    success_rate: float
    mean_return: float
    mean_length: float
    method: str
    policy_class: str
    method_detail: str = ""

    def to_dict(self) -> dict[str, float | str | None]:
        """Plain-data form for JSON output (a figure that could not be computed is None)."""
        return {k: (None if isinstance(v, float) and v != v else v) for k, v in asdict(self).items()}


def policy_figures(model: TaskModel, policy: np.ndarray, policy_class: str, method: str = "exact",
                   method_detail: str = "") -> Baseline:
    """Exact success rate, return and length of one policy (the method names how it was chosen)."""
    return Baseline(
        success_rate=at_reset(model, evaluate(model, policy, Objective.success(model))),
        mean_return=at_reset(model, evaluate(model, policy)),
        mean_length=at_reset(model, evaluate(model, policy, Objective.length(model))),
        method=method, policy_class=policy_class, method_detail=method_detail,
    )


def optimal_policy(model: TaskModel) -> np.ndarray:
    """The optimal deterministic policy ``int[H, S]`` of an agent with perfect memory: it uses
    what it has seen of the cue from the moment it is shown; until it has seen all of it, it acts
    alike in the cue twins it cannot tell apart, on their prior-weighted values."""
    if model.cue_known.all():
        return optimise(model)[1]
    _, group = np.unique(np.stack([model.blind_state, model.knowledge], axis=1), axis=0, return_inverse=True)
    group = group.ravel()
    weight = model.hidden_prior[model.hidden]
    mass = np.bincount(group, weights=weight)
    shared = SharedChoice(group, weight / mass[group], ~model.cue_known)
    return optimise_tables(model.next_state, model.terminal, model.horizon,
                           Objective.task_return(model), shared)[1]


def optimal_baseline(model: TaskModel) -> Baseline:
    """Exact figures of the agent that remembers the cue."""
    return policy_figures(model, optimal_policy(model), OPTIMAL_CLASS)


def random_baseline(model: TaskModel) -> Baseline:
    """Exact figures of the uniform-random agent."""
    return policy_figures(model, uniform_policy(model), RANDOM_CLASS)


def cue_blind_policy(model: TaskModel) -> np.ndarray:
    """The best policy that never uses the cue, as ``int[H, S]`` (equal on cue-blind twins).

    Exact when the cue changes only rewards: transitions, terminal flags and the reset
    distribution of cue-blind states must not depend on it, so the blind agent's belief about
    the cue stays the prior and its expected reward is the prior-weighted mean.
    """
    blind, B = model.blind_state, int(model.blind_state.max()) + 1
    blind_next = model.blind_state[model.next_state]                   # [S, A]
    rep = np.zeros(B, dtype=np.int64)
    rep[blind] = np.arange(model.num_states)                           # one member per class
    if not (blind_next == blind_next[rep[blind]]).all():
        raise AnalysisError("the cue changes transitions, so the cue-blind figure is not exact here")
    if not (model.terminal == model.terminal[rep[blind]]).all():
        raise AnalysisError("the cue changes which states end the episode; cue-blind figure not exact")
    weight = model.hidden_prior[model.hidden]
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
