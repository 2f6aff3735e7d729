"""The native batched runtime: N environments stepped with a handful of numpy gathers.

The unique variants' tables are stacked into one global state space (each variant's states
shifted by an offset), so a step for all N environments is ``next_state[state, action]``,
``reward[state, action]``, ``terminal[next]`` and one gather of observation rows. Noise and
resets use the counter-based streams of streams.py, which is what makes the batch equal to N
single envs given the same seeds and actions.
"""

from __future__ import annotations

from typing import Any, Sequence

import numpy as np
from gymnasium import spaces
from gymnasium.vector import AutoresetMode, VectorEnv
from gymnasium.vector.utils import batch_space

from ..model import TaskModel
from ..render import TopDownRenderer
from ..render.observations import ObservationSet, assemble
from ..render.vector import common_blocks, padded_table
from .distractors import apply_distractors
from .streams import (add_pixel_noise, categorical, episode_keys, flip_threshold, flips, noise_init, subkeys, uniform,
                      vector_reset_keys)


class TaskVectorEnv(VectorEnv):
    """A batch of compiled tasks as a ``gymnasium.vector.VectorEnv`` (autoreset: next step).

    ``variants[i]`` is the (model, observation set) of environment i; environments may share a
    variant or each hold their own. Observations, rewards, terminations, truncations, resets and
    infos equal those of ``gymnasium.vector.SyncVectorEnv`` over the matching single envs given
    the same seeds and actions (when variants' blocks differ in width, each block is zero-padded
    at its end to the widest).
    """

    metadata = {"autoreset_mode": AutoresetMode.NEXT_STEP, "render_modes": ["rgb_array"], "render_fps": 6}

    def __init__(self, variants: Sequence[tuple[TaskModel, ObservationSet]], render_mode: str | None = None,
                 num_envs: int | None = None, draw_variants: bool = False) -> None:
        """With ``draw_variants``, ``variants`` is a pool (a split) and each of ``num_envs``
        environments draws its variant from it at every reset, as ``SplitEnv`` does."""
        if not variants:
            raise ValueError("a batch needs at least one environment")
        if render_mode is not None and render_mode not in self.metadata["render_modes"]:
            raise ValueError(f"render_mode must be one of {self.metadata['render_modes']} or None, "
                             f"got {render_mode!r}")
        self.num_envs = num_envs if draw_variants else len(variants)
        self.render_mode = render_mode
        self._draw = draw_variants
        unique: dict[int, int] = {}
        models: list[TaskModel] = []
        layouts: list[ObservationSet] = []
        env_model = np.zeros(self.num_envs, dtype=np.int64)
        for i, (model, layout) in enumerate(variants):
            if id(model) not in unique or draw_variants:
                unique[id(model)] = len(models)
                models.append(model)
                layouts.append(layout)
            if not draw_variants:
                env_model[i] = unique[id(model)]
        vectors = [o.vector for o in layouts]
        if len({m.num_actions for m in models}) != 1 or len({o.names for o in layouts}) != 1 or \
                len({v.noise_bits if v is not None else 0 for v in vectors}) != 1:
            raise ValueError("every variant of a batch must have the same actions, modalities and noise bits")
        self.models = models
        self.env_model = env_model
        self._observations = layouts[0]
        self._has_vector = vectors[0] is not None
        self.observation_blocks = common_blocks(vectors) if self._has_vector else {}
        self._build_tables(models, layouts)

        parts = self._observations.spaces()
        if self._has_vector:
            size = max((b.stop for b in self.observation_blocks.values()), default=0)
            parts["vector"] = spaces.Box(0.0, 1.0, shape=(size,), dtype=np.float32)
        self.single_observation_space = next(iter(parts.values())) if len(parts) == 1 else spaces.Dict(parts)
        self.single_action_space = spaces.Discrete(models[0].num_actions)
        self.observation_space = batch_space(self.single_observation_space, self.num_envs)
        self.action_space = batch_space(self.single_action_space, self.num_envs)

        N, bits = self.num_envs, self._bits
        self._state = self._starts[np.arange(N), 0].copy()
        self._step = np.zeros(N, dtype=np.int64)
        self._noise = np.zeros((N, bits), dtype=bool)
        self._streams = np.zeros(N, dtype=np.uint64)
        self._episodes = np.zeros(N, dtype=np.int64)
        self._keys = np.zeros(N, dtype=np.uint64)
        self._flip_keys = np.zeros(N, dtype=np.uint64)
        self._pixel_keys = np.zeros(N, dtype=np.uint64)
        self._distractor_keys = np.zeros(N, dtype=np.uint64)
        self._distracted = self._observations.decoy_probability > 0 or self._observations.lure_probability > 0
        self._seeded = np.zeros(N, dtype=bool)
        self._autoreset = np.zeros(N, dtype=bool)
        self._generators: list[np.random.Generator | None] = [None] * N
        self._renderers: dict[int, TopDownRenderer] = {}

    def _build_tables(self, models: list[TaskModel], layouts: list[ObservationSet]) -> None:
        """Stack the unique variants' tables into one global state space."""
        state_off = np.cumsum([0] + [m.num_states for m in models])
        key_off = np.cumsum([0] + [m.num_keys for m in models])
        self._next = np.concatenate([m.next_state + o for m, o in zip(models, state_off)])
        self._reward = np.concatenate([m.reward for m in models])
        self._next_flat, self._reward_flat = self._next.ravel(), self._reward.ravel()
        self._num_actions = int(models[0].num_actions)
        self._terminal = np.concatenate([m.terminal for m in models])
        self._obs_key = np.concatenate([m.obs_key + o for m, o in zip(models, key_off)])
        self._hidden = np.concatenate([m.hidden for m in models])
        vectors = [o.vector for o in layouts]
        if self._has_vector:
            self._table = np.concatenate([padded_table(v, self.observation_blocks) for v in vectors])
        else:
            self._table = np.zeros((int(key_off[-1]), 0), dtype=np.float32)
        self._grid = np.concatenate([o.grid for o in layouts]) if layouts[0].grid is not None else None
        self._pixels = np.concatenate([o.pixels for o in layouts]) if layouts[0].pixels is not None else None
        self._first_person = (np.concatenate([o.first_person for o in layouts])
                              if layouts[0].first_person is not None else None)
        self._bits = vectors[0].noise_bits if self._has_vector else 0
        self._key_cue = np.concatenate([m.key_cue for m in models])
        tiles = [o.lure_tiles if o.lure_tiles is not None else np.zeros((1, 4), dtype=np.int64) for o in layouts]
        self._tiles = np.concatenate(tiles)
        tile_count = np.array([t.shape[0] for t in tiles])
        tile_offset = np.cumsum([0] + list(tile_count))[:-1]
        width = max(m.initial_states().size for m in models)
        starts = np.zeros((len(models), width), dtype=np.int64)
        cumulative = np.ones((len(models), width))
        for j, (m, o) in enumerate(zip(models, state_off)):
            s = m.initial_states()
            starts[j, :] = s[-1] + o
            starts[j, :s.size] = s + o
            cumulative[j, :s.size] = np.cumsum(m.initial[s])
        # per variant; _assign copies them into the per-environment rows
        self._per_model = {
            "_state_offset": state_off[:-1],
            "_flip": np.array([v.flip_probability if v is not None else 0.0 for v in vectors]),
            "_threshold": np.array([flip_threshold(v.flip_probability) if v is not None else 0 for v in vectors],
                                   dtype=np.uint64),
            "_horizon": np.array([m.horizon for m in models]),
            "_timeout": np.array([m.timeout_reward for m in models]),
            "_starts": starts, "_cumulative": cumulative,
            "_tile_count": tile_count, "_tile_offset": tile_offset,
            "_variant_ids": np.array([m.variant_id for m in models], dtype=object),
        }
        for name, table in self._per_model.items():
            setattr(self, name, table[self.env_model].copy())
        self._timeout_any = bool(self._per_model["_timeout"].any())
        if not self._draw:
            self._variant_ids.flags.writeable = False   # shared by every info dict: read-only
        self._width = self._table.shape[1]
        self._every = np.ones(self.num_envs, dtype=bool)
        self._every.flags.writeable = False

    # -- episode starts -------------------------------------------------------------------
    def _begin(self, mask: np.ndarray) -> None:
        """Start new episodes in the masked environments (their keys must be set)."""
        rows = np.flatnonzero(mask)
        if not rows.size:
            return
        keys = self._keys[rows]
        if self._draw:    # a new variant from the pool, by the same stream a SplitEnv uses
            count = len(self.models)
            chosen = np.minimum((uniform(subkeys(keys, "variant")) * count).astype(np.int64), count - 1)
            self.env_model[rows] = chosen
            for name, table in self._per_model.items():
                getattr(self, name)[rows] = table[chosen]
        pick = categorical(uniform(subkeys(keys, "cue")), self._cumulative[rows])
        self._state[rows] = self._starts[rows, pick]
        self._step[rows] = 0
        if self._bits:
            self._noise[rows] = noise_init(keys, self._bits)
            self._flip_keys[rows] = subkeys(keys, "noise_flip")
        if self._observations.pixel_noise is not None:
            self._pixel_keys[rows] = subkeys(keys, "pixel_noise")
        if self._distracted:
            self._distractor_keys[rows] = subkeys(keys, "distractor")

    def reset(self, *, seed: int | Sequence[int | None] | None = None, options: dict[str, Any] | None = None):
        """Reset every environment; ``seed`` is None, an int (env i gets seed + i) or a list."""
        self._episodes, self._keys = vector_reset_keys(seed, self._seeded, self._generators, self._streams,
                                                       self._episodes)
        self._begin(np.ones(self.num_envs, dtype=bool))
        self._autoreset[:] = False
        return self._observe(), self._infos()

    # -- stepping -------------------------------------------------------------------------
    def step(self, actions: np.ndarray):
        """Step every environment; those that ended last step are reset instead (next-step)."""
        a = np.asarray(actions)
        if a.dtype != np.int64 and a.dtype.kind in "iu":
            a = a.astype(np.int64)
        # viewed as unsigned, a negative action is huge: one comparison checks both bounds
        if a.shape != (self.num_envs,) or a.dtype != np.int64 or \
                (a.view(np.uint64) >= np.uint64(self._num_actions)).any():
            raise ValueError(f"actions must be {self.num_envs} integers in [0, {self._num_actions}), "
                             f"got {actions!r}")
        resetting = self._autoreset
        pending = resetting.any()
        s = self._state
        flat = s * self._num_actions + a
        next_state = self._next_flat[flat]
        reward = self._reward_flat[flat]
        step = self._step + 1
        terminated = self._terminal[next_state]
        truncated = (step >= self._horizon) & ~terminated
        if self._timeout_any:
            reward += truncated * self._timeout
        if self._bits:
            flipped = flips(self._flip_keys, step, self._bits, self._threshold)
            if pending:
                flipped &= ~resetting[:, None]
            self._noise ^= flipped
        if pending:
            moving = ~resetting
            self._state = np.where(moving, next_state, s)
            self._step = np.where(moving, step, self._step)
            rows = np.flatnonzero(resetting)
            self._episodes[rows] += 1
            self._keys[rows] = episode_keys(self._streams[rows], self._episodes[rows])
            self._begin(resetting)
            reward[rows] = 0.0
            terminated &= moving
            truncated &= moving
        else:
            self._state, self._step = next_state, step
        self._autoreset = terminated | truncated
        return self._observe(), reward, terminated, truncated, self._infos()

    def _observe(self) -> Any:
        keys = self._obs_key[self._state]
        parts: dict[str, np.ndarray] = {}
        if self._has_vector:
            if self._bits:   # one output array; the bool bits are cast as they are copied in
                out = np.empty((self.num_envs, self._width + self._bits), dtype=np.float32)
                out[:, :self._width] = self._table[keys]
                out[:, self._width:] = self._noise
                parts["vector"] = out
            else:
                parts["vector"] = self._table[keys]
        if self._grid is not None:
            parts["grid"] = self._grid[keys]
        if self._pixels is not None:
            frames = self._pixels[keys]
            if self._observations.pixel_noise is not None:
                kind, amplitude = self._observations.pixel_noise
                frames = add_pixel_noise(frames, self._pixel_keys, self._step, kind, amplitude)
            parts["pixels"] = frames
        if self._first_person is not None:
            parts["first_person"] = self._first_person[keys]
        if self._distracted:
            apply_distractors(self._observations, parts, self._distractor_keys, self._step,
                              self._key_cue[keys] >= 0, self._tile_count, self._tile_offset, self._tiles)
        return assemble(self._observations, parts)

    def _infos(self) -> dict[str, Any]:
        """Infos as gymnasium's vector envs give them: arrays with ``_key`` masks."""
        every = self._every   # every environment has every key: one shared, read-only mask
        return {
            "variant_id": self._variant_ids.copy() if self._draw else self._variant_ids, "_variant_id": every,
            "step": self._step.copy(), "_step": every,
            "analysis_only": {"cue": self._hidden[self._state], "_cue": every,
                              "state": self._state - self._state_offset, "_state": every},
            "_analysis_only": every,
        }

    def render(self) -> tuple[np.ndarray, ...] | None:
        """A top-down picture of every environment (``render_mode="rgb_array"``)."""
        if self.render_mode is None:
            return None
        frames = []
        for i in range(self.num_envs):  # pictures are for people, not for the training loop
            j = int(self.env_model[i])
            if j not in self._renderers:
                self._renderers[j] = TopDownRenderer(self.models[j])
            local = int(self._state[i] - self._state_offset[i])
            frames.append(self._renderers[j].frame(int(self.models[j].obs_key[local])))
        return tuple(frames)

    def memory_bytes(self) -> dict[str, int]:
        """Bytes held per environment (state arrays) and shared (tables), for the benchmark."""
        per_env = [self._state, self._step, self._noise, self._streams, self._episodes, self._keys, self._flip_keys,
                   self._seeded, self._autoreset, self._starts, self._cumulative, self._threshold,
                   self._horizon, self._timeout, self._state_offset, self.env_model]
        shared = [self._next, self._reward, self._terminal, self._obs_key, self._hidden, self._table]
        shared += [t for t in (self._grid, self._pixels, self._first_person) if t is not None]
        return {"per_env": sum(a.nbytes for a in per_env) // self.num_envs,
                "shared": sum(a.nbytes for a in shared)}
