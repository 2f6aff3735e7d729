"""Stage 5b of the pipeline: one Gymnasium environment that steps through a model's tables."""

from __future__ import annotations

from typing import Any

import gymnasium as gym
import numpy as np

from ..model import TaskModel
from ..render import TopDownRenderer
from ..render.observations import ObservationSet, assemble
from .distractors import apply_distractors
from .streams import add_pixel_noise, categorical, next_episode, noise_track, subkeys, uniform


class TaskEnv(gym.Env):
    """A compiled task as a ``gymnasium.Env``.

    Actions are ``Discrete(4)``: north, east, south, west. Rewards, termination and
    truncation come from the model's tables and step limit. The observation is the one
    modality the spec asks for (a Box), or a Dict of several (``vector``, ``grid``, ``pixels``).
    ``info`` holds ``variant_id``, ``step`` and, under ``analysis_only``, the hidden cue and
    the model state: these are for analyses and baselines only; an agent that reads them is no
    longer tested on memory.
    """

    metadata = {"render_modes": ["rgb_array"], "render_fps": 6}

    def __init__(self, model: TaskModel, observations: ObservationSet, render_mode: str | None = None) -> None:
        if render_mode is not None and render_mode not in self.metadata["render_modes"]:
            raise ValueError(f"render_mode must be one of {self.metadata['render_modes']} or None, "
                             f"got {render_mode!r}")
        self.model = model
        self.observations = observations
        self.vector = observations.vector
        self.render_mode = render_mode
        self.observation_blocks = dict(self.vector.blocks) if self.vector is not None else {}
        self.observation_space = observations.space()
        self.action_space = gym.spaces.Discrete(model.num_actions)
        self._starts = model.initial_states()
        self._start_cumulative = np.cumsum(model.initial[self._starts])[None, :]
        self._renderer: TopDownRenderer | None = None
        self._state = int(self._starts[0])
        self._step = 0
        self._bits = self.vector.noise_bits if self.vector is not None else 0
        self._noise = np.zeros((model.horizon + 1, self._bits), dtype=np.float32)
        # The step path reads plain Python lists: indexing them is far cheaper than numpy scalars.
        self._next = model.next_state.tolist()
        self._reward = model.reward.tolist()
        self._terminal = model.terminal.tolist()
        self._hidden = model.hidden.tolist()
        self._obs_key = model.obs_key.tolist()
        self._rows = self.vector.table[model.obs_key] if self.vector is not None else None
        self._horizon = model.horizon
        self._timeout = model.timeout_reward
        self._num_actions = model.num_actions
        self._stream: int | None = None
        self._episode = 0
        self._key = np.zeros(1, dtype=np.uint64)
        self._pixel_key = np.zeros(1, dtype=np.uint64)
        self._distractor_key = np.zeros(1, dtype=np.uint64)
        self._distracted = observations.decoy_probability > 0 or observations.lure_probability > 0
        tiles = observations.lure_tiles
        self._tile_count = np.array([0 if tiles is None else tiles.shape[0]])
        self._vector_only = observations.names == ("vector",) and not self._distracted

    def _observation(self) -> Any:
        if self._vector_only:   # the common case, kept short: it runs on every step
            if self._bits:
                return np.concatenate((self._rows[self._state], self._noise[min(self._step, self._horizon)]))
            return self._rows[self._state].copy()
        parts: dict[str, np.ndarray] = {}
        if self._rows is not None:
            if self._bits:
                parts["vector"] = np.concatenate((self._rows[self._state], self._noise[min(self._step, self._horizon)]))
            else:
                parts["vector"] = self._rows[self._state].copy()
        key = self._obs_key[self._state]
        if self.observations.grid is not None:
            parts["grid"] = self.observations.grid[key].copy()
        if self.observations.pixels is not None:
            frame = self.observations.pixels[key]
            if self.observations.pixel_noise is not None:
                kind, amplitude = self.observations.pixel_noise
                frame = add_pixel_noise(frame[None], self._pixel_key, self._step, kind, amplitude)[0]
            parts["pixels"] = frame.copy()
        if self.observations.first_person is not None:
            parts["first_person"] = self.observations.first_person[key].copy()
        if self._distracted:
            apply_distractors(self.observations, {k: v[None] for k, v in parts.items()}, self._distractor_key,
                              np.array([self._step]), np.array([self.model.key_cue[key] >= 0]),
                              self._tile_count, np.zeros(1, dtype=np.int64), self.observations.lure_tiles)
        return assemble(self.observations, parts)

    def _info(self) -> dict[str, Any]:
        return {
            "variant_id": self.model.variant_id,
            "step": self._step,
            "analysis_only": {"cue": self._hidden[self._state], "state": self._state},
        }

    def reset(self, *, seed: int | None = None, options: dict[str, Any] | None = None):
        """Start an episode: draw the cue and the noise, return the first observation.

        A seeded reset (or the first one) draws the env's stream number from ``np_random``;
        each later reset starts the stream's next episode (see streams.py).
        """
        super().reset(seed=seed)
        self._stream, self._episode, key = next_episode(self._stream, self._episode, seed is not None,
                                                        self.np_random)
        return self._start(key)

    def _start(self, key: np.ndarray):
        """Begin the episode whose key is ``key``: draw its cue and noise, return obs and info."""
        self._key = key
        start = categorical(uniform(subkeys(self._key, "cue")), self._start_cumulative)[0]
        self._state = int(self._starts[start])
        self._step = 0
        if self._bits:  # the whole episode's noise bits at once: one numpy call per reset
            self._noise = noise_track(self._key, self._bits, self.vector.flip_probability,
                                      self.model.horizon)[0].astype(np.float32)
        if self.observations.pixel_noise is not None:
            self._pixel_key = subkeys(self._key, "pixel_noise")
        if self._distracted:
            self._distractor_key = subkeys(self._key, "distractor")
        return self._observation(), self._info()

    def step(self, action: int):
        """Move by the model's tables; truncate at the step limit."""
        if not (isinstance(action, (int, np.integer)) and 0 <= action < self._num_actions):
            raise ValueError(f"action must be an integer in [0, {self._num_actions}), got {action!r}")
        s = self._state
        self._state = self._next[s][action]
        reward = self._reward[s][action]
        self._step += 1
        terminated = self._terminal[self._state]
        truncated = not terminated and self._step >= self._horizon
        if truncated:
            reward += self._timeout
        return self._observation(), reward, terminated, truncated, self._info()

    def render(self) -> np.ndarray | None:
        """A top-down RGB picture of the current state (``render_mode="rgb_array"``)."""
        if self.render_mode is None:
            return None
        if self._renderer is None:
            self._renderer = TopDownRenderer(self.model)
        return self._renderer.frame(int(self.model.obs_key[self._state]))
