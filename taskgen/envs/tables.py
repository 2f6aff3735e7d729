"""The core of tasks whose every hidden value is in the model's tables (the cue tasks).

The variants' tables are stacked into one global state space (each variant's states shifted by
an offset), so a step for all N environments is ``next_state[state, action]``,
``reward[state, action]``, ``terminal[next]`` and one gather of observation rows. A reset draws
the hidden value from the prior (and, for a pool, the environment's variant) from the episode's
counter-based streams, which is what makes a batch equal to N single envs given the same seeds
and actions. A single env takes a scalar path through the same tables.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np
from gymnasium import spaces

from ..model import TaskModel
from ..render import TopDownRenderer, truth_picture
from ..render.observations import ObservationSet, assemble
from ..render.vector import common_blocks, padded_table, scatter_index, with_noise_columns
from .core import ROW, Core
from .distractors import apply_distractors, distract_one, show_decoys
from .noise import EpisodeBlocks, EpisodeNoise
from .streams import (add_pixel_noise, categorical_bits, categorical_one, subkey, subkeys, uniform, uniform_bits,
                      uniform_one, unit_thresholds)

STATE_ROWS_BYTES = 1 << 26   # a batch keeps each state's vector (not only each key's) up to this many bytes


@dataclass(frozen=True, eq=False)
class _PerVariant:
    """What differs between the stacked variants, one row per variant."""

    state_offset: np.ndarray    # int64[V]
    flip: np.ndarray            # float64[V]: noise flip probability
    horizon: np.ndarray         # int64[V]
    timeout: np.ndarray         # float64[V]
    starts: np.ndarray          # int64[V, W]: global start states, padded with the last
    cumulative: np.ndarray      # float64[V, W]: cumulative start probabilities, padded with 1
    thresholds: np.ndarray      # uint64[V, W]: their streams.unit_thresholds (a batch picks starts by them)
    tile_count: np.ndarray      # int64[V]
    tile_offset: np.ndarray     # int64[V]
    variant_ids: np.ndarray     # object[V]


class TableCore(Core):
    """N environments stepping stacked tables (autoreset is the shell's).

    ``variants[i]`` is the (model, observation set) of environment i; environments may share a
    variant or each hold their own. With ``draw``, ``variants`` is a pool (a split) and each of
    ``num_envs`` environments draws its variant from it at every reset. When variants' vector
    blocks differ in width, each block is zero-padded at its end to the widest.
    """

    def __init__(self, variants: Sequence[tuple[TaskModel, ObservationSet]], num_envs: int,
                 draw: bool = False) -> None:
        if not variants:
            raise ValueError("a batch needs at least one environment")
        if not draw and len(variants) != num_envs:
            raise ValueError(f"{num_envs} environments need {num_envs} variants, got {len(variants)}")
        self.num_envs, self._draw = num_envs, draw
        unique: dict[int, int] = {}
        models: list[TaskModel] = []
        sets: list[ObservationSet] = []
        env_variant = np.zeros(num_envs, dtype=np.int64)
        for i, (model, obs) in enumerate(variants):
            if id(model) not in unique or draw:
                unique[id(model)] = len(models)
                models.append(model)
                sets.append(obs)
            if not draw:
                env_variant[i] = unique[id(model)]
        vectors = [o.vector for o in sets]
        if len({m.num_actions for m in models}) != 1 or len({o.names for o in sets}) != 1 or \
                len({v.noise_bits if v is not None else 0 for v in vectors}) != 1:
            raise ValueError("every variant of a batch must have the same actions, modalities and noise bits")
        self._models = models
        self.observations = sets[0]
        self.num_actions = models[0].num_actions
        self.env_variant = env_variant
        self._has_vector = vectors[0] is not None
        self.blocks = common_blocks([v for v in vectors if v is not None]) if self._has_vector else {}
        self._stack(models, sets)
        N = num_envs
        self._state_offset = np.zeros(N, dtype=np.int64)   # a variant's states are numbered from it
        self._flip = np.zeros(N)
        self._horizon = np.zeros(N, dtype=np.int64)
        self._timeout = np.zeros(N)
        self._starts = np.zeros((N, self._per.starts.shape[1]), dtype=np.int64)
        self._thresholds = np.zeros((N, self._per.cumulative.shape[1]), dtype=np.uint64)   # unit_thresholds
        # the start states and thresholds when every environment holds the same one variant (else None)
        self._one_start = (self._per.starts[0], unit_thresholds(self._per.cumulative[0])) \
            if len(models) == 1 else None
        self._tile_count = np.zeros(N, dtype=np.int64)
        self._tile_offset = np.zeros(N, dtype=np.int64)
        self._ids = np.empty(N, dtype=object)
        self._assign_rows(np.arange(N), env_variant)
        self.state = self._starts[np.arange(N), 0].copy()
        self.step_count = np.zeros(N, dtype=np.int64)
        self._distracted = self.observations.decoy_probability > 0 or self.observations.lure_probability > 0
        obs = self.observations
        # lures flash in the grid view and top-down pixels only (never in a vector or a first-person view)
        self._lured = obs.lure_probability > 0 and (self._grid is not None or self._pixels is not None)
        self.noise = EpisodeNoise(N, self._bits, int(self._per.horizon.max()), obs.pixel_noise is not None,
                                  lures=self._lured, decoy_probability=obs.decoy_probability,
                                  decoy_values=obs.cue_values)
        self._renderers: dict[int, TopDownRenderer] = {}
        # a single env's episode: its state and step as Python ints, the tables as lists (made once)
        self._s, self._t, self._h = -1, 0, 0
        self._variant, self._variant_id, self._timeout_one = 0, "", 0.0
        self._noise_track = np.zeros((0, self._bits), dtype=np.float32)
        self._pixel_key = np.zeros(1, dtype=np.uint64)
        self._distractor_key = 0                            # the episode's 'distractor' key
        self._rows = np.zeros((0, 0), dtype=np.float32)    # each state's vector (no columns without one)
        self._next_list: list[Any] = []
        self._shown_list: list[bool] = []
        self._start_list: list[list[int]] = []
        self._cumulative_list: list[list[float]] = []
        self._vector_only = self.observations.names == ("vector",)       # lures never show in a vector
        cue_bits = self.blocks.get("cue", slice(0, 0))          # a decoy shows in them (single env, vector only)
        self._decoy = self.observations.decoy_probability if cue_bits.stop > cue_bits.start else 0.0
        self._cue_start, self._cue_stop = cue_bits.start, cue_bits.stop
        self._one_hot = np.eye(max(cue_bits.stop - cue_bits.start, 1), dtype=np.float32)   # a decoy's cue bits
        self._blocks = EpisodeBlocks(self.noise, self._episode_flips)   # a single env's draws, by blocks
        self._decoy_track: list[int] = []
        self._decoy_pictures: dict[tuple[int, int], dict[str, np.ndarray]] = {}   # see _show_kept_decoy

    @property
    def models(self) -> list[TaskModel]:
        """The distinct variants, in the order environments (or draws) number them."""
        return self._models

    def _stack(self, models: list[TaskModel], sets: list[ObservationSet]) -> None:
        """Stack the variants' tables into one global state space."""
        state_off = np.cumsum([0] + [m.num_states for m in models])
        key_off = np.cumsum([0] + [m.num_keys for m in models])
        self._next = np.concatenate([m.next_state + o for m, o in zip(models, state_off)])
        self._reward = np.concatenate([m.reward for m in models])
        self._next_flat, self._reward_flat = self._next.ravel(), self._reward.ravel()
        self._terminal = np.concatenate([m.terminal for m in models])
        self._obs_key = np.concatenate([m.obs_key + o for m, o in zip(models, key_off)])
        self._hidden = np.concatenate([m.value for m in models])
        self._success = np.concatenate([m.success for m in models])
        self._local = np.concatenate([m.local for m in models])
        if self._has_vector:
            self._table = np.concatenate([padded_table(o.vector, self.blocks) for o in sets if o.vector is not None])
            size = max(b.stop for b in self.blocks.values())
            self._used = np.zeros((len(sets), size), dtype=bool)
            for j, o in enumerate(sets):
                assert o.vector is not None
                self._used[j, scatter_index(o.vector, self.blocks)] = True if o.used is None else o.used
        else:
            self._table = np.zeros((int(key_off[-1]), 0), dtype=np.float32)
        self._width = self._table.shape[1]
        self._grid = np.concatenate([o.grid for o in sets if o.grid is not None]) if sets[0].grid is not None else None
        self._pixels = np.concatenate([o.pixels for o in sets if o.pixels is not None]) \
            if sets[0].pixels is not None else None
        self._first_person = np.concatenate([o.first_person for o in sets if o.first_person is not None]) \
            if sets[0].first_person is not None else None
        first = sets[0].vector
        self._bits = first.noise_bits if first is not None else 0
        self._table_bits = with_noise_columns(self._table, self._bits)
        # each state's vector, so a step gathers once (not its key, then the key's row), when that table
        # is small; the other modalities (and a larger vector table) are gathered by key
        by_state = self._obs_key.size * self._table_bits.shape[1] * self._table_bits.itemsize
        self._state_rows = self._table_bits.take(self._obs_key, axis=0) \
            if self._has_vector and by_state <= STATE_ROWS_BYTES else None
        self._keyed = self._state_rows is None or any(t is not None for t in (
            sets[0].grid, sets[0].pixels, sets[0].first_person))
        self._key_cue = np.concatenate([m.shown_cue() for m in models])
        self._state_shown = self._key_cue[self._obs_key] >= 0        # the real cue in view at each state
        self._terminal_flat = self._terminal[self._next_flat]         # each (state, action)'s next state ends
        tiles = [o.lure_tiles if o.lure_tiles is not None else np.zeros((1, 4), dtype=np.int64) for o in sets]
        self._tiles = np.concatenate(tiles)
        tile_count = np.array([t.shape[0] for t in tiles])
        width = max(m.initial_states().size for m in models)
        starts = np.zeros((len(models), width), dtype=np.int64)
        cumulative = np.ones((len(models), width))
        for j, (m, o) in enumerate(zip(models, state_off)):
            s = m.initial_states()
            starts[j, :] = s[-1] + o
            starts[j, :s.size] = s + o
            cumulative[j, :s.size] = np.cumsum(m.initial[s])
        flip = np.array([o.vector.flip_probability if o.vector is not None else 0.0 for o in sets])
        self._per = _PerVariant(
            state_offset=state_off[:-1], flip=flip,
            horizon=np.array([m.horizon for m in models]), timeout=np.array([m.timeout_reward for m in models]),
            starts=starts, cumulative=cumulative, thresholds=unit_thresholds(cumulative), tile_count=tile_count,
            tile_offset=np.cumsum([0] + list(tile_count))[:-1],
            variant_ids=np.array([m.variant_id for m in models], dtype=object))
        self._timeout_any = bool(self._per.timeout.any())
        self._every_id = self._per.variant_ids[self.env_variant]
        self._every_id.flags.writeable = False   # shared by every info dict while no env draws: read-only

    def _assign_rows(self, rows: np.ndarray, chosen: np.ndarray) -> None:
        """Give environments ``rows`` the per-variant values of variants ``chosen`` (copied per
        environment, so that a step reads them without a gather by variant)."""
        per = self._per
        self.env_variant[rows] = chosen
        self._state_offset[rows] = per.state_offset[chosen]
        self._flip[rows] = per.flip[chosen]
        self._horizon[rows] = per.horizon[chosen]
        self._timeout[rows] = per.timeout[chosen]
        self._starts[rows] = per.starts[chosen]
        self._thresholds[rows] = per.thresholds[chosen]
        self._tile_count[rows] = per.tile_count[chosen]
        self._tile_offset[rows] = per.tile_offset[chosen]
        self._ids[rows] = per.variant_ids[chosen]

    # -- the batch ------------------------------------------------------------------------------------
    def single_observation_space(self) -> spaces.Space[Any]:
        """The space of one environment (its vector as wide as the common blocks)."""
        parts: dict[str, spaces.Space[Any]] = self.observations.spaces()
        if self._has_vector:
            size = max((b.stop for b in self.blocks.values()), default=0)
            parts["vector"] = spaces.Box(0.0, 1.0, shape=(size,), dtype=np.float32)
        return next(iter(parts.values())) if len(parts) == 1 else spaces.Dict(parts)

    def draws(self, rows: np.ndarray, keys: np.ndarray) -> dict[str, np.ndarray]:
        """Each episode's variant (pools), start state (which holds the cue) and noise."""
        bits = uniform_bits(subkeys(keys, "cue"))
        if self._draw:    # a new variant from the pool, and a start state of it
            per, chosen = self._per, self._pool_draws(keys)
            drawn = self.noise.draws(keys, per.flip[chosen])
            drawn["variant"] = chosen
            drawn["state"] = per.starts[chosen, categorical_bits(bits, per.thresholds[chosen])]
            return drawn
        drawn = self.noise.draws(keys, self._flip[rows])
        if self._one_start is not None:      # every environment holds one variant: one row of thresholds
            starts, thresholds = self._one_start
            drawn["state"] = starts.take(categorical_bits(bits, thresholds))
        else:
            drawn["state"] = self._starts[rows, categorical_bits(bits, self._thresholds[rows])]
        return drawn

    def begin_drawn(self, rows: np.ndarray, drawn: dict[str, np.ndarray]) -> None:
        """Start new episodes: the variant (pools), the start state, step 0 and the noise."""
        if self._draw:
            self._assign_rows(rows, drawn["variant"])
        self.state[rows] = drawn["state"]
        self.step_count[rows] = 0
        self.noise.begin_drawn(rows, drawn)

    def advance(self, actions: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Gathers of next state, reward and terminal (the noise bits are read from their tracks)."""
        flat = self.state * self.num_actions
        flat += actions
        next_state = self._next_flat.take(flat)
        reward = self._reward_flat.take(flat)
        terminated = self._terminal_flat.take(flat)
        step = self.step_count + 1
        truncated = np.greater(step >= self._horizon, terminated)    # at the limit and not terminated
        if self._timeout_any:
            np.add(reward, self._timeout, out=reward, where=truncated)
        self.state, self.step_count = next_state, step
        return reward, terminated, truncated

    def observe(self) -> dict[str, np.ndarray]:
        """Gathered rows of every modality, noise bits appended, pixel noise and distractors laid over."""
        keys = self._obs_key.take(self.state) if self._keyed else self.state
        parts: dict[str, np.ndarray] = {}
        # rows are gathered with ndarray.take along axis 0, several times faster than fancy indexing (the
        # method, not np.take, which wraps it in Python)
        if self._has_vector:   # by state where the table of each state's vector is small enough
            vector = self._state_rows.take(self.state, axis=0) if self._state_rows is not None else \
                self._table_bits.take(keys, axis=0)
            if self._bits:   # the bool bits are cast as they are copied into the zero columns
                vector[:, self._width:] = self.noise.bits_at(self.step_count)
            parts["vector"] = vector
        if self._grid is not None:
            parts["grid"] = self._grid.take(keys, axis=0)
        if self._pixels is not None:
            frames = self._pixels.take(keys, axis=0)
            if self.observations.pixel_noise is not None:
                kind, amplitude = self.observations.pixel_noise
                frames = add_pixel_noise(frames, self.noise.pixel_keys, self.step_count, kind, amplitude)
            parts["pixels"] = frames
        if self._first_person is not None:
            parts["first_person"] = self._first_person.take(keys, axis=0)
        if self._distracted:
            noise = self.noise
            apply_distractors(self.observations, parts, noise.decoys_at(self.step_count) if noise.decoy_probability
                              else None, noise.distractor_keys, self.step_count,
                              self._state_shown.take(self.state), self._tile_count, self._tile_offset, self._tiles)
        return parts

    def infos(self) -> dict[str, Any]:
        """The variant each environment plays (a fresh copy while environments draw variants), the step,
        and the cue and the model state (numbered within the environment's variant)."""
        info: dict[str, Any] = {"variant_id": self._ids.copy() if self._draw else self._every_id,
                                "step": self.step_count.copy()}
        if self.analysis_info:
            info["analysis_only"] = {"cue": self._hidden[self.state], "state": self.state - self._state_offset}
        return info

    def success(self) -> np.ndarray:
        """Whether each environment's state is a success state of its variant."""
        return self._success.take(self.state)

    def success_one(self) -> bool:
        """A single env's success, read from its Python-int state."""
        return bool(self._success[self._s])

    def vector_mask(self) -> np.ndarray:
        """The elements each environment's current variant fills."""
        if not self._has_vector:
            raise ValueError("these environments observe no vector")
        if self._s >= 0:
            return self._used[[self._variant]]
        return self._used[self.env_variant]

    def model_of(self, i: int) -> TaskModel:
        """Environment i's current variant."""
        j = self._variant if self._s >= 0 and i == 0 else int(self.env_variant[i])
        return self._models[j]

    def _local_state(self, i: int) -> int:
        state = self._s if self._s >= 0 and i == 0 else int(self.state[i])
        return int(self._local[state])

    def _renderer(self, j: int) -> TopDownRenderer:
        if j not in self._renderers:
            self._renderers[j] = TopDownRenderer(self._models[j])
        return self._renderers[j]

    def picture(self, i: int) -> np.ndarray:
        """The top-down picture of what environment i's observation key shows."""
        model = self.model_of(i)
        renderer = self._renderer(self._models.index(model))
        return renderer.frame(int(model.obs_key[self._local_state(i)]))

    def ground_truth(self, i: int) -> np.ndarray:
        """The whole map, the true cue and the goals it names, outlined."""
        model = self.model_of(i)
        return truth_picture(self._renderer(self._models.index(model)), model, self._local_state(i))

    def memory_bytes(self) -> dict[str, int]:
        """Bytes of the per-environment rows and of the stacked tables."""
        per_env = [self.state, self.step_count, *self.noise.arrays(), self._starts, self._thresholds,
                   self._flip, self._horizon, self._timeout, self._state_offset, self.env_variant]
        shared = [self._next, self._reward, self._terminal, self._terminal_flat, self._obs_key, self._hidden,
                  self._table, self._state_shown]
        shared += [self._state_rows] if self._state_rows is not None else []
        shared += [self._table_bits] if self._table_bits is not self._table else []
        shared += [t for t in (self._grid, self._pixels, self._first_person) if t is not None]
        return {"per_env": sum(a.nbytes for a in per_env) // self.num_envs, "shared": sum(a.nbytes for a in shared)}

    # -- one environment: a scalar path through the same tables ---------------------------------------
    def start_one(self, key: np.ndarray, origin: tuple[int, int] | None = None) -> tuple[Any, dict[str, Any]]:
        """Draw the variant (pools) and the cue from ``key``; the episode's noise bits and decoys all at once
        (with ``origin``, the episode's (stream, number), for a block of the stream's next episodes)."""
        if not self._next_list:      # the tables as Python lists: indexing them beats numpy scalars
            self._next_list, self._reward_list = self._next.tolist(), self._reward.tolist()
            self._terminal_list, self._hidden_list = self._terminal.tolist(), self._hidden.tolist()
            self._local_list, self._key_list = self._local.tolist(), self._obs_key.tolist()
            self._shown_list = self._state_shown.tolist()
            self._start_list, self._cumulative_list = self._per.starts.tolist(), self._per.cumulative.tolist()
            self._rows = self._table[self._obs_key]
        j = int(self.env_variant[0])
        episode = int(key[0])                   # the draws in Python ints: equal to begin's, and quicker for one
        if self._draw:
            count = len(self._models)
            j = min(int(uniform_one(subkey(episode, "variant")) * count), count - 1)
        per = self._per
        state = self._start_list[j][categorical_one(uniform_one(subkey(episode, "cue")), self._cumulative_list[j])]
        self._s, self._t, self._h = state, 0, int(per.horizon[j])
        self._variant, self._variant_id, self._timeout_one = j, str(per.variant_ids[j]), float(per.timeout[j])
        if self._bits or self.observations.decoy_probability:   # drawn with the stream's next episodes'
            drawn = self._blocks.draws(episode, origin)
            if self._bits:
                self._noise_track = drawn["noise_bits"].astype(np.float32)
            if "decoys" in drawn:
                self._decoy_track = drawn["decoys"].tolist()
        if self.observations.pixel_noise is not None:
            self._pixel_key = np.array([subkey(episode, "pixel_noise")], dtype=np.uint64)
        if self._distracted:
            self._distractor_key = subkey(episode, "distractor")
        return self._observe_scalar(), self._info_scalar()

    def step_one(self, action: int) -> tuple[Any, float, bool, bool, dict[str, Any]]:
        """Move by the tables; truncate at the step limit (kept short: it runs on every step)."""
        s = self._s
        self._s = state = self._next_list[s][action]
        reward = self._reward_list[s][action]
        self._t = t = self._t + 1
        terminated = self._terminal_list[state]
        truncated = not terminated and t >= self._h
        if truncated:
            reward += self._timeout_one
        if self._vector_only:
            obs = np.concatenate((self._rows[state], self._noise_track[min(t, self._h)])) if self._bits \
                else self._rows[state].copy()
            if self._decoy:      # a decoy cue value in the cue bits (distractors.show_decoys), drawn at reset
                value = self._decoy_track[t]
                if value >= 0 and not self._shown_list[state]:
                    obs[self._cue_start:self._cue_stop] = self._one_hot[value]
        else:
            obs = self._observe_scalar()
        if self.analysis_info:
            return obs, reward, terminated, truncated, {
                "variant_id": self._variant_id, "step": t,
                "analysis_only": {"cue": self._hidden_list[state], "state": self._local_list[state]}}
        return obs, reward, terminated, truncated, {"variant_id": self._variant_id, "step": t}

    def _episode_flips(self, keys: np.ndarray) -> np.ndarray | float:
        """The noise bits' flip probability of the episodes whose keys are ``keys`` (a pool's episodes
        draw their variants from their keys, as :meth:`start_one` does)."""
        if self._draw:
            return self._per.flip[self._pool_draws(keys)]
        return float(self._per.flip[int(self.env_variant[0])])

    def _pool_draws(self, keys: np.ndarray) -> np.ndarray:
        """The variant of the pool each episode whose key is in ``keys`` plays (purpose 'variant')."""
        count = len(self._models)
        return np.minimum((uniform(subkeys(keys, "variant")) * count).astype(np.int64), count - 1)

    def _observe_scalar(self) -> Any:
        """The single env's observation, every modality (the vector-only case is inlined in step_one)."""
        state, t = self._s, self._t
        noise = self._noise_track[min(t, self._h)] if self._bits else None
        parts: dict[str, np.ndarray] = {}
        if self._has_vector:
            parts["vector"] = np.concatenate((self._rows[state], noise)) if noise is not None else self._rows[state].copy()
        key = self._key_list[state]
        if self._grid is not None:
            parts["grid"] = self._grid[key].copy()
        if self._pixels is not None:
            frame = self._pixels[key]
            if self.observations.pixel_noise is not None:
                kind, amplitude = self.observations.pixel_noise
                frame = add_pixel_noise(frame[None], self._pixel_key, t, kind, amplitude)[0]
            parts["pixels"] = frame.copy()
        if self._first_person is not None:
            parts["first_person"] = self._first_person[key].copy()
        decoy = self._decoy_track[t] if self._decoy_track else -1
        if decoy >= 0 and self._shown_list[state]:     # a decoy never shows with the real cue
            decoy = -1
        if decoy >= 0 and not self._lured and self.observations.pixel_noise is None:
            self._show_kept_decoy(parts, key, decoy)
        elif self._lured or decoy >= 0:     # something may show on this step
            j = self._variant
            distract_one(self.observations, {k: v[None] for k, v in parts.items()}, self._distractor_key, t,
                         bool(self._key_cue[key] >= 0), self._per.tile_count[j:j + 1], self._per.tile_offset[j:j + 1],
                         self._tiles, decoy)
        return assemble(self.observations, parts)

    def _show_kept_decoy(self, parts: dict[str, np.ndarray], key: int, decoy: int) -> None:
        """Show decoy value ``decoy`` in a single env's noise-free ``parts`` (in place), the pictures from
        those kept by (key, value): an agent sees the same few again and again, and lighting a lamp
        costs more than copying a kept picture."""
        kept = self._decoy_pictures.get((key, decoy))
        if kept is None:
            lit = {name: part.copy() for name, part in parts.items() if name != "vector"}
            if lit:
                show_decoys(self.observations, {name: part[None] for name, part in lit.items()}, ROW,
                            np.array([decoy]))
            if len(self._decoy_pictures) >= 4096:
                self._decoy_pictures.clear()
            self._decoy_pictures[(key, decoy)] = kept = lit
        for name, picture in kept.items():
            parts[name] = picture.copy()
        if "vector" in parts and self._cue_stop > self._cue_start:
            parts["vector"][self._cue_start + decoy] = 1.0     # the cue bits are all 0 where a decoy shows

    def _info_scalar(self) -> dict[str, Any]:
        state = self._s
        if not self.analysis_info:
            return {"variant_id": self._variant_id, "step": self._t}
        return {"variant_id": self._variant_id, "step": self._t,
                "analysis_only": {"cue": self._hidden_list[state], "state": self._local_list[state]}}

