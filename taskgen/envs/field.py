"""Runtimes of hidden-path fields: a batched VectorEnv and a single Env on one shared core.

Every reset draws a new path for the environment from its episode key (purpose ``path``), so
the same seed gives the same sequence of paths, and N environments draw theirs in one numpy
call. A step applies ``FieldModel.outcome`` to all environments' paths at once, leaves the
falls' marks, then gathers observation rows and lays the visible marks over them.
"""

from __future__ import annotations

from typing import Any, Sequence

import gymnasium as gym
import numpy as np
from gymnasium import spaces
from gymnasium.vector import AutoresetMode, VectorEnv
from gymnasium.vector.utils import batch_space

from ..model import FieldModel
from ..render.field import FieldPictures, MarkOverlay
from ..render.observations import ObservationSet, assemble
from .streams import (add_pixel_noise, episode_keys, flip_threshold, flips, next_episode, noise_init, noise_track,
                      subkeys, uniform, vector_reset_keys)


class FieldCore:
    """The state of N field environments as arrays, and the one step rule they all follow."""

    def __init__(self, model: FieldModel, observations: ObservationSet, overlay: MarkOverlay, n: int) -> None:
        self.model, self.observations, self.overlay, self.n = model, observations, overlay, n
        C = model.num_cells
        self.vector = observations.vector
        self.bits = self.vector.noise_bits if self.vector is not None else 0
        self.threshold = flip_threshold(self.vector.flip_probability) if self.bits else 0
        self.state = np.zeros(n, dtype=np.int64)
        self.step_count = np.zeros(n, dtype=np.int64)
        self.kind = np.zeros((n, C), dtype=np.int8)
        self.start = np.zeros(n, dtype=np.int64)
        self.until = np.zeros((n, C), dtype=np.int64)
        self.falls = np.zeros(n, dtype=np.int64)
        self.noise = np.zeros((n, self.bits), dtype=bool)
        self.flip_keys = np.zeros(n, dtype=np.uint64)
        self.pixel_keys = np.zeros(n, dtype=np.uint64)
        self.decoy = observations.decoy_probability
        self.decoy_keys = np.zeros(n, dtype=np.uint64)
        self.rows = np.arange(n)
        self._pictures: FieldPictures | None = None

    def begin(self, rows: np.ndarray, keys: np.ndarray) -> None:
        """Start the episodes of ``rows`` whose keys are ``keys``: a new path for each."""
        if not rows.size:
            return
        u = uniform(subkeys(keys, "path"), 0, self.model.draws)
        kind, start = self.model.draw(u)
        self.kind[rows], self.start[rows] = kind, start
        self.state[rows] = start                        # (start cell, no falls)
        self.step_count[rows] = 0
        self.until[rows] = 0
        self.falls[rows] = 0
        if self.bits:
            self.noise[rows] = noise_init(keys, self.bits)
            self.flip_keys[rows] = subkeys(keys, "noise_flip")
        if self.observations.pixel_noise is not None:
            self.pixel_keys[rows] = subkeys(keys, "pixel_noise")
        if self.decoy > 0:
            self.decoy_keys[rows] = subkeys(keys, "distractor")

    def shown_marks(self) -> np.ndarray:
        """bool[N, C]: the marks each agent sees now: its falls' marks and, with decoys, this
        step's decoy mark (a cell other than the agent's, drawn from the 'distractor' stream)."""
        marked = self.until > self.step_count[:, None]
        if self.decoy > 0:
            draws = uniform(self.decoy_keys, self.step_count, 2)
            show = np.flatnonzero(draws[:, 0] < self.decoy)
            if show.size:
                C = self.model.num_cells
                cell = self.model.state_cell[self.state[show]]
                other = np.minimum((draws[show, 1] * (C - 1)).astype(np.int64), C - 2)
                marked[show, other + (other >= cell)] = True        # every cell but the agent's
        return marked

    def advance(self, actions: np.ndarray, moving: np.ndarray | None = None):
        """One step of every environment (only ``moving`` ones change): reward, terminated, truncated."""
        m = self.model
        out = m.outcome(self.state, actions, self.kind, self.start)
        step = self.step_count + 1
        truncated = (step >= m.horizon) & ~out.terminal
        reward = out.reward + truncated * m.timeout_reward
        fell = out.fell
        if moving is not None:
            fell = fell & moving
            self.state = np.where(moving, out.next_state, self.state)
            self.step_count = np.where(moving, step, self.step_count)
        else:
            self.state, self.step_count = out.next_state, step
        self.falls += fell
        m.mark_after(self.until, fell, out.aim, self.rows, self.step_count)
        if self.bits:
            flipped = flips(self.flip_keys, step, self.bits, self.threshold)
            if moving is not None:
                flipped &= moving[:, None]
            self.noise ^= flipped
        return reward, out.terminal, truncated

    def observe(self) -> Any:
        """Observations of every environment: gathered rows, marks laid over, then noise."""
        cell = self.model.state_cell[self.state]
        parts: dict[str, np.ndarray] = {}
        if self.vector is not None:
            width = self.vector.table.shape[1]
            out = np.empty((self.n, width + self.bits), dtype=np.float32)
            out[:, :width] = self.vector.table[cell]
            out[:, width:] = self.noise
            parts["vector"] = out
        if self.observations.grid is not None:
            parts["grid"] = self.observations.grid[cell]
        if self.observations.pixels is not None:
            parts["pixels"] = self.observations.pixels[cell]
        self.overlay.apply(parts, cell, self.shown_marks())
        if "pixels" in parts and self.observations.pixel_noise is not None:
            kind, amplitude = self.observations.pixel_noise
            parts["pixels"] = add_pixel_noise(parts["pixels"], self.pixel_keys, self.step_count, kind, amplitude)
        return parts

    def picture(self, i: int, truth: bool = False) -> np.ndarray:
        """A top-down picture of environment i for people: as its agent could see it (agent and
        marks, no path), or with ``truth`` the ground truth with the path drawn."""
        if self._pictures is None:
            self._pictures = FieldPictures(self.model)
        cell = int(self.model.state_cell[self.state[i]])
        marked = self.shown_marks()[i]
        if truth:
            return self._pictures.truth(self.kind[i], cell, marked)
        return self._pictures.agent(cell, marked)


class FieldVectorEnv(VectorEnv):
    """N environments of one field variant as a ``gymnasium.vector.VectorEnv`` (autoreset: next step).

    ``info["analysis_only"]`` holds each environment's path (int8 per cell: 0 off, 1 on, 2 its
    end), its start cell, the model state and the falls so far: for analyses only; an agent
    that reads them is no longer tested on memory.
    """

    metadata = {"autoreset_mode": AutoresetMode.NEXT_STEP, "render_modes": ["rgb_array"], "render_fps": 6}

    def __init__(self, model: FieldModel, observations: ObservationSet, overlay: MarkOverlay, num_envs: int,
                 render_mode: str | None = None) -> None:
        if render_mode is not None and render_mode not in self.metadata["render_modes"]:
            raise ValueError(f"render_mode must be one of {self.metadata['render_modes']} or None, "
                             f"got {render_mode!r}")
        self.model, self.num_envs, self.render_mode = model, num_envs, render_mode
        self.core = FieldCore(model, observations, overlay, num_envs)
        self._observations = observations
        self.observation_blocks = dict(observations.vector.blocks) if observations.vector is not None else {}
        self.single_observation_space = observations.space()
        self.single_action_space = spaces.Discrete(model.num_actions)
        self.observation_space = batch_space(self.single_observation_space, num_envs)
        self.action_space = batch_space(self.single_action_space, num_envs)
        self._streams = np.zeros(num_envs, dtype=np.uint64)
        self._episodes = np.zeros(num_envs, dtype=np.int64)
        self._keys = np.zeros(num_envs, dtype=np.uint64)
        self._seeded = np.zeros(num_envs, dtype=bool)
        self._generators: list[np.random.Generator | None] = [None] * num_envs
        self._autoreset = np.zeros(num_envs, dtype=bool)
        self._every = np.ones(num_envs, dtype=bool)
        self._every.flags.writeable = False
        self._ids = np.full(num_envs, model.variant_id, dtype=object)
        self._ids.flags.writeable = False    # shared by every info dict: read-only

    def reset(self, *, seed: int | Sequence[int | None] | None = None, options: dict[str, Any] | None = None):
        """Reset every environment (a new path each); ``seed`` is None, an int (env i gets seed + i) or a list."""
        self._episodes, self._keys = vector_reset_keys(seed, self._seeded, self._generators, self._streams,
                                                       self._episodes)
        self.core.begin(np.arange(self.num_envs), self._keys)
        self._autoreset[:] = False
        return assemble(self._observations, self.core.observe()), self._infos()

    def step(self, actions: np.ndarray):
        """Step every environment; those that ended last step start a new episode instead."""
        a = np.asarray(actions)
        if a.dtype.kind in "iu" and a.dtype != np.int64:
            a = a.astype(np.int64)
        if a.shape != (self.num_envs,) or a.dtype != np.int64 or (a < 0).any() or (a >= self.model.num_actions).any():
            raise ValueError(f"actions must be {self.num_envs} integers in [0, {self.model.num_actions}), "
                             f"got {actions!r}")
        resetting = self._autoreset
        moving = ~resetting if resetting.any() else None
        reward, terminated, truncated = self.core.advance(a, moving)
        if moving is not None:
            rows = np.flatnonzero(resetting)
            self._episodes[rows] += 1
            self._keys[rows] = episode_keys(self._streams[rows], self._episodes[rows])
            self.core.begin(rows, self._keys[rows])
            reward[rows] = 0.0
            terminated &= moving
            truncated &= moving
        self._autoreset = terminated | truncated
        return assemble(self._observations, self.core.observe()), reward, terminated, truncated, self._infos()

    def _infos(self) -> dict[str, Any]:
        every, core = self._every, self.core
        return {"variant_id": self._ids, "_variant_id": every, "step": core.step_count.copy(), "_step": every,
                "analysis_only": {"path": core.kind.copy(), "_path": every, "start": core.start.copy(),
                                  "_start": every, "state": core.state.copy(), "_state": every,
                                  "falls": core.falls.copy(), "_falls": every},
                "_analysis_only": every}

    def render(self) -> tuple[np.ndarray, ...] | None:
        """What each agent's top-down view would show (no path), one picture per environment."""
        if self.render_mode is None:
            return None
        return tuple(self.core.picture(i) for i in range(self.num_envs))   # for people, not training

    def ground_truth(self, i: int = 0) -> np.ndarray:
        """The ground-truth picture of environment i, with the path drawn (galleries, debugging)."""
        return self.core.picture(i, truth=True)

    def memory_bytes(self) -> dict[str, int]:
        """Bytes held per environment (state, path, marks, keys) and shared (tables), for the benchmark."""
        core = self.core
        per_env = [core.state, core.step_count, core.kind, core.start, core.until, core.falls, core.noise,
                   core.flip_keys, core.pixel_keys, self._streams, self._episodes, self._keys, self._seeded,
                   self._autoreset]
        m, obs = self.model, core.observations
        shared = [m.aim, m.move_next, m.fall_next, m.state_cell, m.state_out]
        shared += [t for t in (obs.vector.table if obs.vector is not None else None, obs.pixels) if t is not None]
        if core.overlay.tiles is not None:
            shared.append(core.overlay.tiles)
        return {"per_env": sum(a.nbytes for a in per_env) // self.num_envs, "shared": sum(a.nbytes for a in shared)}


class FieldEnv(gym.Env):
    """One field environment as a ``gymnasium.Env``: Discrete(4) moves north, east, south, west.

    Stepping off the hidden path pays ``rewards.fall``, sends the agent back to the start (or
    leaves it where it was) and leaves a mark; reaching the path's end pays ``rewards.correct``.
    ``info["analysis_only"]`` holds the path, its start, the state and the falls: for analyses only.
    """

    metadata = {"render_modes": ["rgb_array"], "render_fps": 6}

    def __init__(self, model: FieldModel, observations: ObservationSet, overlay: MarkOverlay,
                 render_mode: str | None = None) -> None:
        if render_mode is not None and render_mode not in self.metadata["render_modes"]:
            raise ValueError(f"render_mode must be one of {self.metadata['render_modes']} or None, "
                             f"got {render_mode!r}")
        self.model, self.render_mode = model, render_mode
        self.core = FieldCore(model, observations, overlay, 1)
        self._observations = observations
        self.observation_blocks = dict(observations.vector.blocks) if observations.vector is not None else {}
        self.observation_space = observations.space()
        self.action_space = spaces.Discrete(model.num_actions)
        self._stream: int | None = None
        self._episode = 0
        vector = observations.vector
        self._vector_only = observations.names == ("vector",) and observations.decoy_probability == 0
        self._rows = vector.table if vector is not None else None
        self._mark_block = overlay.block
        self._noise = np.zeros((model.horizon + 1, self.core.bits), dtype=np.float32)
        self._state, self._step = 0, 0
        self._tables: tuple[list, ...] = ()
        self._num_actions, self._marks = model.num_actions, model.mark_steps > 0

    def _observation(self) -> Any:
        core = self.core
        if not self._vector_only:
            return assemble(self._observations, {k: v[0] for k, v in core.observe().items()})
        out = self._rows[self.model.state_cell[self._state]].copy()     # the common case, kept short
        if self._mark_block is not None:
            out[self._mark_block] = core.until[0] > self._step
        if core.bits:
            out = np.concatenate((out, self._noise[min(self._step, self.model.horizon)]))
        return out

    def _info(self) -> dict[str, Any]:
        core = self.core
        return {"variant_id": self.model.variant_id, "step": self._step,
                "analysis_only": {"path": core.kind[0].copy(), "start": int(core.start[0]),
                                  "state": self._state, "falls": int(core.falls[0])}}

    def reset(self, *, seed: int | None = None, options: dict[str, Any] | None = None):
        """Start an episode on a new path drawn from the episode's key; return the first observation.

        The path's step rule is applied once to every (state, action), so a step is a table
        lookup (the same rule as the batched runtime's, on all states at once)."""
        super().reset(seed=seed)
        self._stream, self._episode, key = next_episode(self._stream, self._episode, seed is not None,
                                                        self.np_random)
        core, m = self.core, self.model
        core.begin(np.zeros(1, dtype=np.int64), key)
        S, A = m.num_states, m.num_actions
        state, action = np.divmod(np.arange(S * A), A)
        out = m.outcome(state, action, core.kind, core.start, np.zeros(S * A, dtype=np.int64))
        self._tables = tuple(a.reshape(S, A).tolist() for a in (out.next_state, out.reward, out.fell, out.aim,
                                                                 out.terminal))
        self._state, self._step = int(core.state[0]), 0
        if core.bits:   # the whole episode's bits at once, equal to the batched runtime's step-by-step flips
            self._noise = noise_track(key, core.bits, self.core.vector.flip_probability,
                                      m.horizon)[0].astype(np.float32)
        return self._observation(), self._info()

    def step(self, action: int):
        """Move on the hidden path; truncate at the step limit."""
        if not (isinstance(action, (int, np.integer)) and 0 <= action < self._num_actions):
            raise ValueError(f"action must be an integer in [0, {self._num_actions}), got {action!r}")
        nxt, pay, fell, aim, ends = self._tables
        s, core = self._state, self.core
        self._state = nxt[s][action]
        reward = pay[s][action]
        self._step += 1
        core.state[0], core.step_count[0] = self._state, self._step
        if fell[s][action]:
            core.falls[0] += 1
            if self._marks:
                core.until[0, aim[s][action]] = self.model.mark_until(self._step)
        terminated = ends[s][action]
        truncated = not terminated and self._step >= self.model.horizon
        if truncated:
            reward += self.model.timeout_reward
        if core.bits and not self._vector_only:
            core.noise[0] = self._noise[min(self._step, self.model.horizon)] > 0.5
        return self._observation(), reward, terminated, truncated, self._info()

    def render(self) -> np.ndarray | None:
        """A top-down picture as the agent could see it: the agent and its marks, no path."""
        if self.render_mode is None:
            return None
        return self.core.picture(0)

    def ground_truth(self) -> np.ndarray:
        """The ground-truth picture, with the path drawn (galleries, debugging)."""
        return self.core.picture(0, truth=True)
