"""The compiled task model: the finite tables that analyses, runtimes and renderers all read."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..generate import GridLayout


@dataclass(frozen=True, eq=False)
class TaskModel:
    """A finite, deterministic task with one hidden variable (the cue), as plain arrays.

    States are integers ``0 … S−1``. Taking action ``a`` in state ``s`` moves to
    ``next_state[s, a]`` and pays ``reward[s, a]``; entering a ``terminal`` state ends the
    episode (terminal states loop on themselves for free). ``success`` marks the terminal
    states that count as solving the task. An episode that reaches ``horizon`` steps without
    terminating is truncated and its last step also pays ``timeout_reward``.

    What the agent can see in a state, before noise, is ``obs_key[s]``; key ``k`` shows the
    agent at cell ``key_cell[k]`` and the cue value ``key_cue[k]`` (−1 while hidden);
    ``cue_window`` marks the states in which the spec means the cue to be shown and
    ``cue_known`` those reached after the agent has seen it (an agent with memory may use the
    cue there and only there).
    ``hidden[s]`` is the cue value of the state and ``blind_state[s]`` numbers the state with
    the cue forgotten, so two states that differ only in the cue share it.
    """

    next_state: np.ndarray      # int64[S, A]
    reward: np.ndarray          # float64[S, A]
    terminal: np.ndarray        # bool[S]
    success: np.ndarray         # bool[S]
    initial: np.ndarray         # float64[S], distribution at reset
    hidden: np.ndarray          # int64[S], cue value
    blind_state: np.ndarray     # int64[S]
    cell: np.ndarray            # int64[S], layout cell of the agent
    heading: np.ndarray         # int64[S], 0 north … 3 west, or −1 when the agent has no heading
    timer: np.ndarray           # int64[S], steps taken, saturating at the cue's display window
    obs_key: np.ndarray         # int64[S]
    key_cell: np.ndarray        # int64[K]
    key_heading: np.ndarray     # int64[K], −1 without headings
    key_cue: np.ndarray         # int64[K]
    hidden_values: int          # number of hidden values (cue values, or k^m for a sequence of m)
    cue_values: int             # values one displayed cue element can take (k)
    hidden_prior: np.ndarray    # float64[hidden_values]
    cue_visible_steps: int
    cue_window: np.ndarray      # bool[S], states in which the spec shows the cue
    cue_known: np.ndarray       # bool[S], states in which the agent has already seen the cue
    knowledge: np.ndarray       # int[S], equal for cue twins a perfect-memory agent cannot tell apart
    horizon: int
    discount: float
    timeout_reward: float
    layout: GridLayout
    action_names: tuple[str, ...]
    variant_id: str
    params: dict[str, Any] = field(default_factory=dict)

    @property
    def num_states(self) -> int:
        """S, the number of states."""
        return int(self.next_state.shape[0])

    @property
    def num_actions(self) -> int:
        """A, the number of actions."""
        return int(self.next_state.shape[1])

    @property
    def num_keys(self) -> int:
        """K, the number of distinct observation keys."""
        return int(self.key_cell.shape[0])

    def cue_shown(self) -> np.ndarray:
        """bool[S]: the spec shows the cue in this state (its display window or cue site).
        Observation keys carry the cue exactly there; the leak check tests that they do."""
        return self.cue_window

    def initial_states(self) -> np.ndarray:
        """States with positive probability at reset."""
        return np.flatnonzero(self.initial > 0)
