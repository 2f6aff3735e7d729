"""One Gymnasium environment over a core of one, whatever the task kind."""

from __future__ import annotations

from typing import Any

import gymnasium as gym
import numpy as np
from gymnasium import spaces
from gymnasium.error import ResetNeeded

from ..model import TaskModel
from ..render.observations import ObservationSet
from .core import Core
from .streams import next_episode

RENDER_MODES = ["rgb_array"]


def check_render_mode(render_mode: str | None) -> None:
    """Refuse a render mode the environments do not offer."""
    if render_mode is not None and render_mode not in RENDER_MODES:
        raise ValueError(f"render_mode must be one of {RENDER_MODES} or None, got {render_mode!r}")


class TaskEnv(gym.Env[Any, Any]):
    """A compiled task as a ``gymnasium.Env``.

    Actions are ``Discrete(4)`` moves north, east, south, west, or with turns ``Discrete(3)``.
    Rewards, termination and truncation come from the task kind's core. The observation is the
    one modality the spec asks for (a Box), or a Dict of several. ``info`` holds ``variant_id``
    and ``step``; at an episode's end (terminated or truncated) ``is_success``; and only with
    ``analysis_info=True``, under ``analysis_only``, the hidden value (the cue, or the path) and
    the state: these are for analyses and baselines only; an agent that reads them is no longer
    tested on memory.
    """

    metadata = {"render_modes": RENDER_MODES, "render_fps": 6}

    def __init__(self, core: Core, render_mode: str | None = None, analysis_info: bool = False) -> None:
        check_render_mode(render_mode)
        if core.num_envs != 1:
            raise ValueError(f"a single env needs a core of one environment, got {core.num_envs}")
        self.core = core
        core.analysis_info = bool(analysis_info)
        self.render_mode = render_mode
        self.observation_space = core.single_observation_space()
        self.action_space = spaces.Discrete(core.num_actions)
        self.observation_blocks = dict(core.blocks)
        self._num_actions = core.num_actions
        self._step_one, self._success_one = core.step_one, core.success_one   # bound once: the hot path
        self._stream: int | None = None
        self._episode = 0
        self._ended = False

    @property
    def model(self) -> TaskModel:
        """The variant the current episode plays."""
        return self.core.model_of(0)

    @property
    def observations(self) -> ObservationSet:
        """The noise-free observation tables of the variant(s)."""
        return self.core.observations

    def reset(self, *, seed: int | None = None,
              options: dict[str, Any] | None = None) -> tuple[Any, dict[str, Any]]:
        """Start an episode: draw its hidden value (and noise) and return the first observation.

        A seeded reset (or the first one) draws the env's stream number from ``np_random``;
        each later reset starts the stream's next episode (see streams.py).
        """
        super().reset(seed=seed)
        self._stream, self._episode, key = next_episode(self._stream, self._episode, seed is not None,
                                                        self.np_random)
        self._ended = False
        return self.core.start_one(key, (self._stream, self._episode))

    def step(self, action: int) -> tuple[Any, float, bool, bool, dict[str, Any]]:
        """One step of the task; truncated at the step limit; ``info["is_success"]`` at the end."""
        if not (isinstance(action, (int, np.integer)) and not isinstance(action, (bool, np.bool_))
                and 0 <= action < self._num_actions):
            raise ValueError(f"action must be an integer in [0, {self._num_actions}), got {action!r}")
        if self._stream is None:
            raise ResetNeeded("call reset() before step()")
        if self._ended:
            raise ResetNeeded("the episode has ended: call reset() before step()")
        obs, reward, terminated, truncated, info = self._step_one(action)
        if terminated or truncated:
            self._ended = True
            info["is_success"] = self._success_one()
        return obs, reward, terminated, truncated, info

    def observation_mask(self) -> np.ndarray:
        """bool[D]: the vector elements this episode's variant fills. Every variant of a spec shares one
        observation space, so a smaller one's blocks are padded with elements that are always 0."""
        return np.array(self.core.vector_mask()[0])

    def render(self) -> np.ndarray | None:
        """A top-down picture of what the agent could see (``render_mode="rgb_array"``); never the path."""
        if self.render_mode is None:
            return None
        return self.core.picture(0)

    def ground_truth(self) -> np.ndarray:
        """The ground truth, the hidden value drawn (for galleries and debugging, never an observation)."""
        return self.core.ground_truth(0)
