"""The native batched runtime: N environments of a core stepped together, whatever the task kind.

Autoreset is gymnasium 1.x's next-step mode, as in its own vector envs: the step after an
episode ends starts a new one in that environment. Infos are dicts of arrays with ``_key``
masks. Given the same seeds and actions the batch returns exactly what
``gymnasium.vector.SyncVectorEnv`` over the matching single envs returns.
"""

from __future__ import annotations

from typing import Any, Sequence

import numpy as np
from gymnasium import spaces
from gymnasium.vector import AutoresetMode, VectorEnv
from gymnasium.vector.utils import batch_space

from ..model import TaskModel
from ..render.observations import assemble
from .core import Core
from .single import RENDER_MODES, check_render_mode
from .streams import episode_keys, vector_reset_keys


class TaskVectorEnv(VectorEnv[Any, Any, Any]):
    """A batch of compiled tasks as a ``gymnasium.vector.VectorEnv`` (autoreset: next step)."""

    metadata = {"autoreset_mode": AutoresetMode.NEXT_STEP, "render_modes": RENDER_MODES, "render_fps": 6}

    def __init__(self, core: Core, render_mode: str | None = None) -> None:
        check_render_mode(render_mode)
        self.core = core
        self.num_envs = N = core.num_envs
        self.render_mode = render_mode
        self.single_observation_space = core.single_observation_space()
        self.single_action_space = spaces.Discrete(core.num_actions)
        self.observation_space = batch_space(self.single_observation_space, N)
        self.action_space = batch_space(self.single_action_space, N)
        self.observation_blocks = dict(core.blocks)
        self._num_actions = core.num_actions
        self._bound = np.uint64(core.num_actions)
        # the core's methods and tables, looked up once: a step is on the hot path
        self._advance, self._begin, self._observe, self._core_infos = core.advance, core.begin, core.observe, core.infos
        self._observations = core.observations
        self._streams = np.zeros(N, dtype=np.uint64)
        self._episodes = np.zeros(N, dtype=np.int64)
        self._keys = np.zeros(N, dtype=np.uint64)
        self._seeded = np.zeros(N, dtype=bool)
        self._generators: list[np.random.Generator | None] = [None] * N
        self._autoreset = np.zeros(N, dtype=bool)
        self._every = np.ones(N, dtype=bool)
        self._every.flags.writeable = False   # every environment has every key: one shared, read-only mask
        self._masks = [f"_{name}" for name in core.infos()["analysis_only"]]   # the mask keys, named once

    @property
    def models(self) -> list[TaskModel]:
        """The distinct variants the environments hold (or draw from)."""
        return self.core.models

    @property
    def model(self) -> TaskModel:
        """The variant every environment holds (a batch of one variant only)."""
        models = self.core.models
        if len(models) != 1:
            raise ValueError(f"this batch holds {len(models)} variants: see .models")
        return models[0]

    def reset(self, *, seed: int | Sequence[int | None] | None = None,
              options: dict[str, Any] | None = None) -> tuple[Any, dict[str, Any]]:
        """Reset every environment; ``seed`` is None, an int (env i gets seed + i) or a list."""
        self._episodes, self._keys = vector_reset_keys(seed, self._seeded, self._generators, self._streams,
                                                       self._episodes)
        self.core.begin(np.arange(self.num_envs), self._keys)
        self._autoreset[:] = False
        return assemble(self.core.observations, self.core.observe()), self._infos()

    def step(self, actions: Any) -> tuple[Any, np.ndarray, np.ndarray, np.ndarray, dict[str, Any]]:
        """Step every environment; those that ended last step start a new episode instead."""
        a = np.asarray(actions)
        if a.dtype != np.int64 and a.dtype.kind in "iu":
            a = a.astype(np.int64)
        # viewed as unsigned, a negative action is huge: one comparison checks both bounds
        if a.shape != (self.num_envs,) or a.dtype != np.int64 or \
                (a.view(np.uint64) >= self._bound).any():
            raise ValueError(f"actions must be {self.num_envs} integers in [0, {self._num_actions}), "
                             f"got {actions!r}")
        resetting = self._autoreset
        moving = ~resetting if resetting.any() else None
        reward, terminated, truncated = self._advance(a, moving)
        if moving is not None:
            rows = np.flatnonzero(resetting)
            self._episodes[rows] += 1
            self._keys[rows] = episode_keys(self._streams[rows], self._episodes[rows])
            self._begin(rows, self._keys[rows])
            reward[rows] = 0.0
            terminated &= moving
            truncated &= moving
        self._autoreset = terminated | truncated
        return assemble(self._observations, self._observe()), reward, terminated, truncated, self._infos()

    def _infos(self) -> dict[str, Any]:
        """Infos as gymnasium's vector envs give them: arrays with ``_key`` masks."""
        every, info = self._every, self._core_infos()
        hidden: dict[str, Any] = {}
        for (name, value), mask in zip(info["analysis_only"].items(), self._masks):
            hidden[name], hidden[mask] = value, every
        return {"variant_id": info["variant_id"], "_variant_id": every, "step": info["step"], "_step": every,
                "analysis_only": hidden, "_analysis_only": every}

    def render(self) -> tuple[np.ndarray, ...] | None:
        """What each agent could see, one top-down picture per environment (``render_mode="rgb_array"``)."""
        if self.render_mode is None:
            return None
        return tuple(self.core.picture(i) for i in range(self.num_envs))   # for people, not training

    def ground_truth(self, i: int = 0) -> np.ndarray:
        """The ground truth of environment i (galleries, debugging)."""
        return self.core.ground_truth(i)

    def memory_bytes(self) -> dict[str, int]:
        """Bytes held per environment (the core's state and the episode keys) and shared (tables)."""
        own = [self._streams, self._episodes, self._keys, self._seeded, self._autoreset]
        core = self.core.memory_bytes()
        return {"per_env": core["per_env"] + sum(a.nbytes for a in own) // self.num_envs, "shared": core["shared"]}
