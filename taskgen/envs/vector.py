"""The native batched runtime: N environments of a core stepped together, whatever the task kind.

Autoreset follows gymnasium 1.x's three modes, as in its own vector envs: next step (the default:
the step after an episode ends starts a new one in that environment), same step (the ended
environment starts anew at once; its last observation and info are under ``final_obs`` and
``final_info``) and disabled (ended environments wait for ``reset(options={"reset_mask": mask})``).
Infos are dicts of arrays with ``_key`` masks. Given the same seeds and actions the batch returns
exactly what ``gymnasium.vector.SyncVectorEnv`` over the matching single envs returns, in every mode.
"""

from __future__ import annotations

from typing import Any, Sequence

import numpy as np
from gymnasium import spaces
from gymnasium.error import ResetNeeded
from gymnasium.vector import AutoresetMode, VectorEnv
from gymnasium.vector.utils import batch_space

from ..model import TaskModel
from ..render.observations import assemble
from .ahead import NextEpisodes
from .core import Core
from .single import RENDER_MODES, check_render_mode
from .streams import episode_keys, vector_reset_streams


def as_autoreset_mode(mode: AutoresetMode | str) -> AutoresetMode:
    """A gymnasium autoreset mode from itself, its value ("NextStep") or its name ("next_step")."""
    if isinstance(mode, AutoresetMode):
        return mode
    for known in AutoresetMode:
        if isinstance(mode, str) and mode.replace("_", "").lower() == known.value.lower():
            return known
    raise ValueError(f"autoreset_mode must be one of next_step, same_step, disabled, got {mode!r}")


def _only(value: np.ndarray, rows: np.ndarray) -> np.ndarray:
    """``value`` where ``rows`` is set, and what gymnasium's info merging leaves elsewhere (zeros, or
    None in object arrays)."""
    out = np.full(value.shape, None, dtype=object) if value.dtype == object else np.zeros_like(value)
    out[rows] = value[rows]
    return out


class TaskVectorEnv(VectorEnv[Any, Any, Any]):
    """A batch of compiled tasks as a ``gymnasium.vector.VectorEnv`` (any of gymnasium's autoreset modes)."""

    metadata = {"autoreset_mode": AutoresetMode.NEXT_STEP, "render_modes": RENDER_MODES, "render_fps": 6}

    def __init__(self, core: Core, render_mode: str | None = None,
                 autoreset_mode: AutoresetMode | str = AutoresetMode.NEXT_STEP, analysis_info: bool = False) -> None:
        check_render_mode(render_mode)
        self.core = core
        core.analysis_info = bool(analysis_info)
        self.num_envs = N = core.num_envs
        self.render_mode = render_mode
        self.autoreset_mode = as_autoreset_mode(autoreset_mode)
        self.metadata = {**type(self).metadata, "autoreset_mode": self.autoreset_mode}
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
        self._next = NextEpisodes(core)   # episode numbers, and the next episodes' start draws made ahead
        self._seeded = np.zeros(N, dtype=bool)
        self._generators: list[np.random.Generator | None] = [None] * N
        self._autoreset = np.zeros(N, dtype=bool)   # ended last step (next-step mode: restart now)
        self._started = False
        self._every = np.ones(N, dtype=bool)
        self._every.flags.writeable = False   # every environment has every key: one shared, read-only mask

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
        """Reset every environment, or with ``options={"reset_mask": mask}`` (bool[N]) only those
        masked; ``seed`` is None, an int (env i gets seed + i) or a list of one per environment."""
        mask = self._reset_mask(options)
        rows = np.arange(self.num_envs) if mask is None else np.flatnonzero(mask)
        if mask is not None and not self._started:
            raise ValueError("the first reset resets every environment: call reset() without a reset_mask")
        fresh = vector_reset_streams(seed, self._seeded, self._generators, self._streams, rows)
        new, going_on = rows[fresh], rows[~fresh]
        if going_on.size:      # the stream's next episode, drawn ahead
            self._next.restart(going_on)
        if new.size:           # a new stream's episode 0
            first = np.zeros(new.size, dtype=np.int64)
            self._begin(new, episode_keys(self._streams[new], first))
            self._next.begun(new, self._streams[new], first)
        self._autoreset[rows] = False
        self._started = True
        info = self._infos()
        if mask is not None:   # only the reset environments report an info, as in gymnasium's vector envs
            info = self._restricted(info, mask)
        return assemble(self._observations, self._observe()), info

    def _reset_mask(self, options: dict[str, Any] | None) -> np.ndarray | None:
        """``options["reset_mask"]`` checked as gymnasium's vector envs check it (None without one)."""
        if not options or "reset_mask" not in options:
            return None
        mask = options["reset_mask"]
        if not isinstance(mask, np.ndarray) or mask.dtype != np.bool_ or mask.shape != (self.num_envs,):
            raise ValueError(f"options['reset_mask'] must be a numpy bool array of shape ({self.num_envs},), "
                             f"got {mask!r}")
        if not mask.any():
            raise ValueError("options['reset_mask'] must reset at least one environment, got none")
        return mask

    def step(self, actions: Any) -> tuple[Any, np.ndarray, np.ndarray, np.ndarray, dict[str, Any]]:
        """Step every environment; ended ones restart as the autoreset mode says."""
        a = np.asarray(actions)
        if a.dtype != np.int64 and a.dtype.kind in "iu":
            a = a.astype(np.int64)
        # viewed as unsigned, a negative action is huge: the largest checks both bounds
        if a.shape != (self.num_envs,) or a.dtype != np.int64 or a.view(np.uint64).max() >= self._bound:
            raise ValueError(f"actions must be {self.num_envs} integers in [0, {self._num_actions}), "
                             f"got {actions!r}")
        if not self._started:
            raise ResetNeeded("call reset() before step()")
        resetting = self._autoreset
        mode = self.autoreset_mode
        if mode is not AutoresetMode.NEXT_STEP and resetting.any():
            raise ValueError(f"environments {np.flatnonzero(resetting).tolist()} have ended: with autoreset "
                             "disabled, reset them with reset(options={'reset_mask': mask}) before stepping")
        reward, terminated, truncated = self._advance(a)
        rows = resetting.nonzero()[0]
        if rows.size:   # these start anew instead (overwriting what the step did to them)
            self._next.restart(rows)
            reward[rows] = 0.0
            terminated[rows] = False
            truncated[rows] = False
        ended = terminated | truncated
        if mode is AutoresetMode.SAME_STEP:
            final = self._same_step(ended)
            obs = assemble(self._observations, self._observe())
            info = self._infos()
            if final is not None:
                info.update(final)
            return obs, reward, terminated, truncated, info
        self._autoreset = ended
        return assemble(self._observations, self._observe()), reward, terminated, truncated, self._infos(ended)

    def _same_step(self, ended: np.ndarray) -> dict[str, Any] | None:
        """Same-step autoreset: the ended environments' last observations and infos, then their new
        episodes (None when none ended)."""
        if not ended.any():
            return None
        rows = np.flatnonzero(ended)
        parts = self._observe()
        final_obs = np.full(self.num_envs, None, dtype=object)
        for i in rows.tolist():   # one object per ended environment, as gymnasium's final_obs holds them
            final_obs[i] = assemble(self._observations, {name: part[i] for name, part in parts.items()})
        final_info = self._restricted(self._infos(ended), ended)
        self._next.restart(rows)
        return {"final_obs": final_obs, "_final_obs": ended, "final_info": final_info, "_final_info": ended.copy()}

    def _infos(self, ended: np.ndarray | None = None) -> dict[str, Any]:
        """Infos as gymnasium's vector envs give them: arrays with ``_key`` masks; ``is_success`` for
        the environments whose episode ``ended``."""
        every, info = self._every, self._core_infos()
        out: dict[str, Any] = {"variant_id": info["variant_id"], "_variant_id": every,
                               "step": info["step"], "_step": every}
        if "analysis_only" in info:
            hidden: dict[str, Any] = {}
            for name, value in info["analysis_only"].items():
                hidden[name], hidden[f"_{name}"] = value, every
            out["analysis_only"], out["_analysis_only"] = hidden, every
        if ended is not None and ended.any():
            out["is_success"], out["_is_success"] = self.core.success() & ended, ended.copy()
        return out

    def _restricted(self, info: dict[str, Any], rows: np.ndarray) -> dict[str, Any]:
        """An info of every environment cut to those in ``rows`` (bool[N]), as gymnasium's merging of the
        single envs' infos leaves it."""
        out: dict[str, Any] = {}
        for name, value in info.items():
            if name.startswith("_"):
                continue
            out[name] = self._restricted(value, rows) if isinstance(value, dict) else _only(np.asarray(value), rows)
            out[f"_{name}"] = rows.copy()
        return out

    def observation_mask(self) -> np.ndarray:
        """bool[N, D]: the vector elements each environment's current variant fills (the rest pad its
        blocks to the spec family's widths and are always 0)."""
        return np.array(self.core.vector_mask())

    def render(self) -> tuple[np.ndarray, ...] | None:
        """What each agent could see, one top-down picture per environment (``render_mode="rgb_array"``)."""
        if self.render_mode is None:
            return None
        return tuple(self.core.picture(i) for i in range(self.num_envs))   # for people, not training

    def ground_truth(self, i: int = 0) -> np.ndarray:
        """The ground truth of environment i (galleries, debugging)."""
        return self.core.ground_truth(i)

    def memory_bytes(self) -> dict[str, int]:
        """Bytes held per environment (the core's state, the streams and the episodes drawn ahead) and
        shared (tables)."""
        own = sum(a.nbytes for a in (self._streams, self._seeded, self._autoreset)) + self._next.memory_bytes()
        core = self.core.memory_bytes()
        return {"per_env": core["per_env"] + own // self.num_envs, "shared": core["shared"]}
