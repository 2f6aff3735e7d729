"""Stable-Baselines3's ``VecEnv`` over the native batch (the optional extra ``taskgen[sb3]``).

``to_sb3_vec(make_vec(spec, n, autoreset_mode="same_step"))`` gives SB3 a ``VecEnv`` that steps all
environments in one numpy call, as the batch does, and returns what SB3's ``DummyVecEnv`` over
``n`` single envs returns: observations, float32 rewards, dones, and one info dict per environment
with ``TimeLimit.truncated`` and, at an episode's end, ``terminal_observation`` (the last
observation; the returned one already starts the next episode) and ``is_success``. Seeds set by
``seed()`` are used at the next ``reset()``, as in SB3. It reads the batch's public API only.

Attributes and methods reached through ``get_attr`` and ``env_method`` are the batch's, shared by
every environment (``ground_truth`` is per environment).
"""

from __future__ import annotations

from typing import Any, Sequence

import numpy as np
from gymnasium import spaces
from gymnasium.vector import AutoresetMode
from stable_baselines3.common.vec_env import VecEnv
from stable_baselines3.common.vec_env.base_vec_env import VecEnvIndices, VecEnvObs, VecEnvStepReturn

from .vector import TaskVectorEnv


def _row(info: dict[str, Any], i: int) -> dict[str, Any]:
    """Environment i's info from a batched info (arrays with ``_key`` masks), as its single env gives it."""
    out: dict[str, Any] = {}
    for name, value in info.items():
        if name.startswith("_") or name in ("final_obs", "final_info") or not info.get(f"_{name}", np.ones(i + 1))[i]:
            continue
        if isinstance(value, dict):
            out[name] = _row(value, i)
        else:
            item = value[i]
            out[name] = item.copy() if isinstance(item, np.ndarray) else (item.item() if isinstance(item, np.generic)
                                                                          else item)
    return out


class TaskgenVecEnv(VecEnv):
    """A taskgen batch (same-step autoreset) as a Stable-Baselines3 ``VecEnv``."""

    def __init__(self, vec: TaskVectorEnv) -> None:
        if vec.autoreset_mode is not AutoresetMode.SAME_STEP:
            raise ValueError("SB3 restarts an ended environment within the step: make the batch with "
                             "make_vec(..., autoreset_mode='same_step')")
        self.vec = vec
        super().__init__(vec.num_envs, vec.single_observation_space, vec.single_action_space)
        self._actions = np.zeros(vec.num_envs, dtype=np.int64)

    def _obs(self, obs: Any) -> Any:
        """The batch's observation in SB3's form (a dict in the space's key order)."""
        space = self.vec.single_observation_space
        if isinstance(space, spaces.Dict):
            return {name: obs[name] for name in space.spaces}
        return obs

    def reset(self) -> VecEnvObs:
        """Reset every environment with the seeds given to ``seed()`` (then forgotten, as in SB3)."""
        obs, info = self.vec.reset(seed=list(self._seeds))
        self.reset_infos = [_row(info, i) for i in range(self.num_envs)]
        self._reset_seeds()
        self._reset_options()
        return self._obs(obs)

    def step_async(self, actions: np.ndarray) -> None:
        """Keep the actions for :meth:`step_wait`."""
        self._actions = np.asarray(actions).reshape(self.num_envs).astype(np.int64)

    def step_wait(self) -> VecEnvStepReturn:
        """Step the batch; ended environments report their last observation and info and start anew."""
        obs, reward, terminated, truncated, info = self.vec.step(self._actions)
        dones = terminated | truncated
        infos = []
        for i in range(self.num_envs):
            if dones[i]:
                row = _row(info["final_info"], i)
                row["TimeLimit.truncated"] = bool(truncated[i] and not terminated[i])
                row["terminal_observation"] = info["final_obs"][i]
                self.reset_infos[i] = _row(info, i)
            else:
                row = _row(info, i)
                row["TimeLimit.truncated"] = False
            infos.append(row)
        return self._obs(obs), reward.astype(np.float32), dones, infos

    def close(self) -> None:
        """Close the batch."""
        self.vec.close()

    def _indices(self, indices: VecEnvIndices) -> list[int]:
        if indices is None:
            return list(range(self.num_envs))
        return [int(indices)] if isinstance(indices, (int, np.integer)) else [int(i) for i in indices]

    def get_attr(self, attr_name: str, indices: VecEnvIndices = None) -> list[Any]:
        """The batch's attribute, once per environment asked for."""
        value = getattr(self.vec, attr_name)
        return [value for _ in self._indices(indices)]

    def set_attr(self, attr_name: str, value: Any, indices: VecEnvIndices = None) -> None:
        """Set an attribute of the batch (every environment shares it)."""
        if indices is not None and sorted(self._indices(indices)) != list(range(self.num_envs)):
            raise ValueError("the environments of a taskgen batch share their attributes: set them for all")
        setattr(self.vec, attr_name, value)

    def env_method(self, method_name: str, *method_args: Any, indices: VecEnvIndices = None,
                   **method_kwargs: Any) -> list[Any]:
        """``ground_truth`` per environment; any other method is the batch's, called once."""
        chosen = self._indices(indices)
        if method_name == "ground_truth":
            return [self.vec.ground_truth(i) for i in chosen]
        result = getattr(self.vec, method_name)(*method_args, **method_kwargs)
        return [result for _ in chosen]

    def env_is_wrapped(self, wrapper_class: type, indices: VecEnvIndices = None) -> list[bool]:
        """No environment of the batch is wrapped."""
        return [False for _ in self._indices(indices)]

    def get_images(self) -> Sequence[np.ndarray | None]:
        """Each environment's top-down picture (``render_mode="rgb_array"``)."""
        pictures = self.vec.render()
        return list(pictures) if pictures is not None else [None] * self.num_envs


def to_sb3_vec(vec: TaskVectorEnv) -> TaskgenVecEnv:
    """A Stable-Baselines3 ``VecEnv`` over ``vec`` (made with ``autoreset_mode="same_step"``)."""
    return TaskgenVecEnv(vec)
