"""The core of tasks whose hidden value is a path drawn per episode (fields).

Every reset draws a new path for the environment from its episode key (purpose ``path``), so
the same seed gives the same sequence of paths, and N environments draw theirs in one numpy
call. A step applies ``PathRule.outcome`` to all environments' paths at once, leaves the missteps'
marks, then gathers observation rows and lays the visible marks over them. A single env draws
the same numbers in Python integers and steps by the rule's scalar form (``PathRule.outcome_one``),
keeping the noise-free observations it has made by what they show.
"""

from __future__ import annotations

from typing import Any, Sequence

import numpy as np
from gymnasium import spaces

from ..model import TaskModel
from ..model.paths import GOAL, MARK_FOREVER
from ..render import MarkOverlay, PathPictures
from ..render.observations import ObservationSet, assemble
from ..render.vector import with_noise_columns
from .core import ROW, Core
from .noise import EpisodeBlocks, EpisodeNoise
from .streams import add_pixel_noise, draw, subkey, subkeys, uniform

NOT_POOLED = ("a field's variants differ in observation size and its paths are drawn per episode, so a batch "
              "or a split of a field holds one variant")


class PathCore(Core):
    """N environments of one field variant: their states, paths, marks and noise as arrays."""

    def __init__(self, variants: Sequence[tuple[TaskModel, ObservationSet]], num_envs: int,
                 draw: bool = False) -> None:
        if draw or len({id(m) for m, _ in variants}) != 1:
            raise ValueError(NOT_POOLED)
        model, observations = variants[0]
        if model.paths is None or observations.marks is None:
            raise ValueError(f"{model.variant_id} is not a model of hidden paths")
        self.model, self.rule, self.observations = model, model.paths, observations
        self.overlay: MarkOverlay = observations.marks
        self.num_envs, self.num_actions = num_envs, model.num_actions
        self.blocks = dict(observations.vector.blocks) if observations.vector is not None else {}
        n, C = num_envs, self.rule.num_cells
        self.vector = observations.vector
        self.bits = self.vector.noise_bits if self.vector is not None else 0
        self.flip = self.vector.flip_probability if self.vector is not None else 0.0
        self.state = np.zeros(n, dtype=np.int64)
        self.step_count = np.zeros(n, dtype=np.int64)
        self.kind = np.zeros((n, C), dtype=np.int8)
        self.start = np.zeros(n, dtype=np.int64)
        self.until = np.zeros((n, C), dtype=np.int64)
        self.missteps = np.zeros(n, dtype=np.int64)
        # a decoy mark is on one of the cells other than the agent's
        self.noise = EpisodeNoise(n, self.bits, self.rule.horizon, observations.pixel_noise is not None,
                                  decoy_probability=observations.decoy_probability, decoy_values=C - 1)
        self.rows = np.arange(n)
        self._ids = np.full(n, model.variant_id, dtype=object)
        self._ids.flags.writeable = False    # shared by every info dict: read-only
        self._pictures: PathPictures | None = None
        self._kind_list: list[int] = []
        self._noise_track = np.zeros((self.rule.horizon + 1, self.bits), dtype=np.float32)
        # a single env: its state and step as Python ints, and what its step reads, looked up once
        self._vector_only = self.vector is not None and observations.names == ("vector",)
        self._decoys: list[int] = []    # a single env's decoy mark at each step (−1: none), as shown_marks reads it
        self._blocks = EpisodeBlocks(self.noise, lambda keys: self.flip)   # a single env's draws, by blocks
        self._drawn_one: dict[str, np.ndarray] | None = None    # this episode's, until _sync_one needs them
        self._pixel_key = np.zeros(1, dtype=np.uint64)        # this episode's pixel noise key (single env)
        self._s, self._t, self._start, self._variant_id = 0, 0, 0, model.variant_id
        self._rows = self.vector.table if self.vector is not None else np.zeros((self.rule.num_cells, 0))
        self._table_bits = with_noise_columns(self._rows, self.bits)
        # a single env's noise-free observations by (cell, marks shown), at most about 32 MiB of them
        self._seen: dict[tuple[int, frozenset[int]], dict[str, np.ndarray]] = {}
        row = sum(table[0].nbytes for table in (observations.grid, observations.pixels) if table is not None)
        row += 4 * (self._rows.shape[1] + self.bits) if self.vector is not None else 0
        self._seen_limit = max(16, min(4096, (32 << 20) // max(1, row)))
        self._cells = self.rule.state_cell
        self._cell_list: list[int] = self._cells.tolist()
        self._until_of: dict[int, int] = {}      # a single env: cell → the step its mark shows until (excluded)
        self._shown: frozenset[int] = frozenset()   # the cells of until_of whose marks show, until step _expiry
        self._expiry = MARK_FOREVER
        # a single env whose one modality gets no noise returns its kept noise-free picture, copied
        self._plain = observations.names[0] if observations.single and not self.bits and \
            observations.pixel_noise is None else None
        self._missteps = 0
        self._mark_block = self.overlay.block
        self._marks, self._horizon = self.rule.mark_steps > 0, self.rule.horizon

    @property
    def models(self) -> list[TaskModel]:
        """The one variant."""
        return [self.model]

    def single_observation_space(self) -> spaces.Space[Any]:
        """The space of one environment."""
        return self.observations.space()

    def draws(self, rows: np.ndarray, keys: np.ndarray) -> dict[str, np.ndarray]:
        """Each episode's path (its cells' kinds and its start cell) and noise."""
        drawn = self.noise.draws(keys, self.flip)
        drawn["kind"], drawn["start"] = self.rule.draw(uniform(subkeys(keys, "path"), 0, self.rule.draws))
        return drawn

    def begin_drawn(self, rows: np.ndarray, drawn: dict[str, np.ndarray]) -> None:
        """Start the episodes of ``rows`` on their drawn paths, at their start cells with no marks."""
        self.kind[rows], self.start[rows] = drawn["kind"], drawn["start"]
        self.state[rows] = drawn["start"]                        # (start cell, no missteps)
        self.step_count[rows] = 0
        self.until[rows] = 0
        self.missteps[rows] = 0
        self.noise.begin_drawn(rows, drawn)

    def shown_marks(self) -> np.ndarray:
        """bool[N, C]: the marks each agent sees now: its missteps' marks and, with decoys, this
        step's decoy mark (a cell other than the agent's, from the episode's decoy track)."""
        marked = self.until > self.step_count[:, None]
        if self.noise.decoy_probability:
            other = self.noise.decoys_at(self.step_count)
            show = (other >= 0).nonzero()[0]
            if show.size:
                other = other.take(show).astype(np.int64)     # (tracks keep a narrow type)
                cell = self.rule.state_cell.take(self.state.take(show))
                marked[show, other + (other >= cell)] = True        # every cell but the agent's
        return marked

    def advance(self, actions: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """One step of every environment: reward, terminated, truncated."""
        rule = self.rule
        out = rule.outcome(self.state, actions, self.kind, self.start)
        step = self.step_count + 1
        truncated = step >= rule.horizon
        truncated &= ~out.terminal
        reward = out.reward                       # a fresh array: the timeout is added in place
        if rule.timeout_reward:
            reward += truncated * rule.timeout_reward
        self.state, self.step_count = out.next_state, step
        self.missteps += out.misstep
        rule.mark_after(self.until, out.misstep, out.aim, self.rows, self.step_count)
        return reward, out.terminal, truncated

    def observe(self) -> dict[str, np.ndarray]:
        """Observations of every environment: gathered rows, marks laid over, then noise."""
        cell = self.rule.state_cell.take(self.state)
        parts = self._gathered(cell)
        if self.bits:
            parts["vector"][:, -self.bits:] = self.noise.bits_at(self.step_count)
        self.overlay.apply(parts, cell, self.shown_marks())
        if "pixels" in parts and self.observations.pixel_noise is not None:
            kind, amplitude = self.observations.pixel_noise
            parts["pixels"] = add_pixel_noise(parts["pixels"], self.noise.pixel_keys, self.step_count, kind, amplitude)
        return parts

    def _gathered(self, cell: np.ndarray) -> dict[str, np.ndarray]:
        """The rows of cells ``cell`` [n] in every modality (the vector's noise bits still zero), gathered
        with ndarray.take along axis 0, several times faster than fancy indexing."""
        parts: dict[str, np.ndarray] = {}
        if self.vector is not None:
            parts["vector"] = self._table_bits.take(cell, axis=0)
        if self.observations.grid is not None:
            parts["grid"] = self.observations.grid.take(cell, axis=0)
        if self.observations.pixels is not None:
            parts["pixels"] = self.observations.pixels.take(cell, axis=0)
        return parts

    def infos(self) -> dict[str, Any]:
        """The one variant's id, the step, and each environment's path (int8 per cell: 0 off, 1 on, 2
        its end), its start cell, the state and the missteps so far."""
        info: dict[str, Any] = {"variant_id": self._ids, "step": self.step_count.copy()}
        if self.analysis_info:
            info["analysis_only"] = {"path": self.kind.copy(), "start": self.start.copy(),
                                     "state": self.state.copy(), "missteps": self.missteps.copy()}
        return info

    def success(self) -> np.ndarray:
        """Whether each environment stands on its path's end, not out of the field."""
        cell = self.rule.state_cell.take(self.state)
        return (self.kind[self.rows, cell] == GOAL) & ~self.rule.state_out.take(self.state)

    def success_one(self) -> bool:
        """A single env's success, read from its Python-int state."""
        return self._kind_list[self._cell_list[self._s]] == GOAL and not bool(self.rule.state_out[self._s])

    def vector_mask(self) -> np.ndarray:
        """The elements the one variant fills, for every environment."""
        if self.vector is None:
            raise ValueError("these environments observe no vector")
        used = self.observations.used if self.observations.used is not None else np.ones(self.vector.size, bool)
        return np.broadcast_to(used, (self.num_envs, used.size))

    def model_of(self, i: int) -> TaskModel:
        """The one variant."""
        return self.model

    def _pictures_now(self) -> PathPictures:
        if self._pictures is None:
            self._pictures = PathPictures(self.model)
        return self._pictures

    def _sync_one(self) -> None:
        """A single env keeps its state, step and missteps as Python ints while it steps; copy them
        into the arrays the batched methods (pictures, shown_marks) read, with its episode's noise."""
        if self._kind_list:
            self.state[0], self.step_count[0], self.missteps[0] = self._s, self._t, self._missteps
        if self._drawn_one is not None:
            self.noise.begin_drawn(ROW, {name: value[None] for name, value in self._drawn_one.items()})
            self._drawn_one = None

    def picture(self, i: int) -> np.ndarray:
        """What environment i's agent could see, drawn larger: the agent and its marks, no path."""
        self._sync_one()
        cell = int(self.rule.state_cell[self.state[i]])
        return self._pictures_now().agent(cell, self.shown_marks()[i])

    def ground_truth(self, i: int) -> np.ndarray:
        """The ground truth of environment i, with its path drawn (never an observation)."""
        self._sync_one()
        cell = int(self.rule.state_cell[self.state[i]])
        return self._pictures_now().truth(self.kind[i], cell, self.shown_marks()[i])

    def memory_bytes(self) -> dict[str, int]:
        """Bytes held per environment (state, path, marks, keys) and shared (tables)."""
        per_env: list[np.ndarray] = [self.state, self.step_count, self.kind, self.start, self.until, self.missteps,
                                     *self.noise.arrays()]
        rule, obs = self.rule, self.observations
        shared: list[np.ndarray] = [rule.aim, rule.move_next, rule.misstep_next, rule.state_cell, rule.state_out]
        shared += [t for t in (obs.vector.table if obs.vector is not None else None, obs.pixels) if t is not None]
        if self.overlay.tiles is not None:
            shared.append(self.overlay.tiles)
        return {"per_env": sum(a.nbytes for a in per_env) // self.num_envs, "shared": sum(a.nbytes for a in shared)}

    # -- one environment: the rule in Python numbers, observations cached by what they show -------------
    def start_one(self, key: np.ndarray, origin: tuple[int, int] | None = None) -> tuple[Any, dict[str, Any]]:
        """Draw the episode's path (its cells as a list, for the scalar rule) and the episode's noise."""
        rule = self.rule
        path = subkey(int(key[0]), "path")        # begin's draws, in Python ints (equal, and quicker for one)
        kind, self._kind_list, start = rule.draw_one([draw(path, 0, j) for j in range(rule.draws)])
        self.kind[0], self.start[0], self.state[0] = kind, start, start
        self.step_count[0] = self.until[0] = self.missteps[0] = self._missteps = 0
        if self.bits or self.noise.decoy_probability or self.observations.pixel_noise is not None:
            self._drawn_one = drawn = self._blocks.draws(int(key[0]), origin)   # with the stream's next episodes'
            if self.bits:
                self._noise_track = drawn["noise_bits"].astype(np.float32)
            if "decoys" in drawn:
                self._decoys = drawn["decoys"].tolist()
            if "pixel_noise" in drawn:
                self._pixel_key = drawn["pixel_noise"][None]
        self._until_of, self._shown, self._expiry = {}, frozenset(), MARK_FOREVER
        self._s, self._t, self._start = int(self.state[0]), 0, int(self.start[0])
        return self._observe_scalar(), self._info_scalar()

    def step_one(self, action: int) -> tuple[Any, float, bool, bool, dict[str, Any]]:
        """Move on the hidden path; truncate at the step limit (kept short: it runs on every step)."""
        rule = self.rule
        state, reward, misstep, aim, terminated = rule.outcome_one(self._s, action, self._kind_list, self._start)
        self._s = state
        self._t = step = self._t + 1             # self.state and self.step_count: see _sync_one
        if misstep:
            self._missteps += 1
            if self._marks:
                self._until_of[aim] = until = min(step + rule.mark_steps, MARK_FOREVER)   # rule.mark_until
                self.until[0, aim] = until
                self._shown, self._expiry = self._shown | {aim}, min(self._expiry, until)
        truncated = not terminated and step >= self._horizon
        if truncated:
            reward += rule.timeout_reward
        if self._vector_only:
            obs = self._vector_one(state, step)
        else:
            obs = self._observe_scalar()
        if not self.analysis_info:
            return obs, reward, terminated, truncated, {"variant_id": self._variant_id, "step": step}
        return obs, reward, terminated, truncated, {
            "variant_id": self._variant_id, "step": step,
            "analysis_only": {"path": self.kind[0].copy(), "start": self._start, "state": state,
                              "missteps": self._missteps}}

    def _observe_scalar(self) -> Any:
        """A single env's observation: the vector alone the short way; with other modalities, the
        noise-free picture of (cell, marks shown) — made by the batched observe's overlay and kept,
        since an agent sees the same ones again and again — with this step's noise laid over."""
        if self._vector_only:
            return self._vector_one(self._s, self._t)
        step, cell = self._t, self._cell_list[self._s]
        if step >= self._expiry:     # a mark has gone (as shown_marks: shown while until > step), for good
            self._until_of = {c: until for c, until in self._until_of.items() if until > step}
            self._shown = frozenset(self._until_of)
            self._expiry = min(self._until_of.values(), default=MARK_FOREVER)
        shown = self._shown
        decoy = self._decoy_one(cell, step)      # laid over the kept picture below
        key = (cell, shown)
        seen = self._seen.get(key)
        if seen is None:
            marked = np.zeros((1, self.rule.num_cells), dtype=bool)
            marked[0, list(shown)] = True
            seen = self._noise_free(cell, marked)
            if len(self._seen) >= self._seen_limit:
                self._seen.clear()
            self._seen[key] = seen
        if self._plain is not None and decoy < 0:
            return seen[self._plain].copy()
        parts = {name: part.copy() for name, part in seen.items()}
        if decoy >= 0:
            self.overlay.apply_one(parts, cell, decoy)
            if self._plain is not None:
                return parts[self._plain]
        if self.bits:
            parts["vector"][-self.bits:] = self._noise_track[min(self._t, self._horizon)]
        if "pixels" in parts and self.observations.pixel_noise is not None:
            kind, amplitude = self.observations.pixel_noise
            parts["pixels"] = add_pixel_noise(parts["pixels"][None], self._pixel_key, np.array([self._t]),
                                              kind, amplitude)[0]
        return assemble(self.observations, parts)

    def _noise_free(self, cell: int, marked: np.ndarray) -> dict[str, np.ndarray]:
        """What :meth:`observe` shows an agent on ``cell`` with ``marked`` [1, C] shown, before noise."""
        cells = np.array([cell])
        parts = self._gathered(cells)
        self.overlay.apply(parts, cells, marked)
        return {name: part[0] for name, part in parts.items()}

    def _vector_one(self, state: int, step: int) -> np.ndarray:
        """A single env's vector (the common case, kept short): its row, the marks shown (with this
        step's decoy mark, as :meth:`shown_marks` draws it) and the noise bits."""
        out = self._rows[self._cell_list[state]].copy()
        block = self._mark_block
        if block is not None:
            out[block] = self.until[0] > step
            decoy = self._decoy_one(self._cell_list[state], step)
            if decoy >= 0:
                out[block.start + decoy] = 1.0
        if self.bits:
            out = np.concatenate((out, self._noise_track[min(step, self._horizon)]))
        return out

    def _decoy_one(self, cell: int, step: int) -> int:
        """A single env's decoy mark at ``step`` when the agent is on ``cell`` (−1: none), read as
        :meth:`shown_marks` reads it: a cell other than the agent's."""
        if not self._decoys:
            return -1
        other = self._decoys[step]
        return other + (other >= cell) if other >= 0 else -1

    def _info_scalar(self) -> dict[str, Any]:
        if not self.analysis_info:
            return {"variant_id": self._variant_id, "step": self._t}
        return {"variant_id": self._variant_id, "step": self._t,
                "analysis_only": {"path": self.kind[0].copy(), "start": self._start,
                                  "state": self._s, "missteps": self._missteps}}
