"""Hidden-path dynamics: one path-free rule for every path, and the finite model of any set of paths.

A field's state is (cell, missteps so far); with no misstep limit the missteps are not counted, so
the state is the cell. The dynamics do not depend on the path except through the kind of the
cell a move aims at (off the path, on it, its end) and the path's start cell, so a
:class:`PathRule` keeps path-free tables and one rule, :meth:`PathRule.outcome`. The batched
runtime applies that rule to N environments' paths in one numpy pass; :meth:`PathRule.model`
applies it to every state of each path of a sample to get an ordinary :class:`TaskModel`, whose
hidden values are those paths, so the exact machinery runs on it unchanged.

Feedback marks only change what the agent sees, never what happens, so they are not part of
the state: :meth:`PathRule.mark_after` is the rule the runtime and the analyses share.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass
from functools import cached_property
from typing import Any

import numpy as np

from ..generate import MOVE_NAMES, GridLayout
from ..generate.paths import GOAL, OFF, ON, FieldFrame, PathBank, PathShape, draw_paths, open_bank, path_signature
from ..variant import SAMPLE_STREAM, Params, variant_rng
from .graph import reachable
from .hidden import SampledSet
from .tables import Deferred, Tables, TaskModel

MARK_FOREVER = np.iinfo(np.int64).max // 2   # a mark that lasts until the episode ends
DRAWN_KEPT = 4096                             # open-field paths a single env keeps by signature


@dataclass(frozen=True, eq=False)
class PathSample:
    """Paths as the runtimes and analyses use them: the kind of every cell and the start cell."""

    kind: np.ndarray         # int8[K, C]: OFF, ON or GOAL
    start: np.ndarray        # int64[K]

    @property
    def count(self) -> int:
        """K, the number of paths."""
        return int(self.start.shape[0])


@dataclass(frozen=True)
class Outcome:
    """What one step does, for each of n queries."""

    next_state: np.ndarray   # int64[n]
    reward: np.ndarray       # float64[n]
    misstep: np.ndarray      # bool[n]: stepped off the path
    aim: np.ndarray          # int64[n]: the cell the move aimed at (where a misstep leaves its mark)
    terminal: np.ndarray     # bool[n]: the next state ends the episode
    success: np.ndarray      # bool[n]: ... by reaching the path's end


@dataclass(frozen=True, eq=False)
class PathRule:
    """A compiled field variant's path-free dynamics over states s = missteps · C + cell."""

    variant_id: str
    params: Params
    layout: GridLayout
    frame: FieldFrame
    shape: PathShape
    levels: int              # misstep counts the state keeps (misstep_limit + 1, or 1 when not counted)
    misstep_limit: int | None
    to_start: bool           # a misstep sends the agent to the start (else it stays where it was)
    mark_steps: int          # observations a mark is part of (0: no marks; MARK_FOREVER: episode)
    step_reward: float
    goal_reward: float
    misstep_reward: float
    timeout_reward: float
    horizon: int
    discount: float
    aim: np.ndarray          # int64[S, A]: cell each move aims at (its own cell at the field's edge)
    move_next: np.ndarray    # int64[S, A]: next state when the aimed cell is on the path
    misstep_next: np.ndarray # int64[S, A]: next state of a misstep (cell part 0 when sent to the start)
    state_cell: np.ndarray   # int64[S]
    state_out: np.ndarray    # bool[S]: the misstep limit was reached (a failed end)
    action_names: tuple[str, ...] = MOVE_NAMES
    bank_kind: np.ndarray | None = None   # int8[P, C]: every path of a walled field (row start · E + end)
    bank_start: np.ndarray | None = None  # int64[P]
    mark_colour: tuple[int, int, int] = (204, 121, 167)   # of a mark's ring in pixels (render/palette.py: MARK)

    @property
    def draws(self) -> int:
        """Uniform numbers one path needs (a walled field: its start and its end)."""
        return 2 if self.bank_kind is not None else self.shape.draws

    @property
    def num_states(self) -> int:
        """S, the number of states of one path."""
        return int(self.state_cell.size)

    @property
    def num_actions(self) -> int:
        """A, the number of actions."""
        return int(self.aim.shape[1])

    @property
    def num_cells(self) -> int:
        """C, the number of field cells."""
        return self.layout.num_cells

    def draw(self, u: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Paths from uniforms ``u`` [n, draws]: (kind int8[n, C], start cell int64[n]). An open
        field draws its path's shape; a walled field draws a start (or takes the middle one) and
        an end along its sides and takes the way between them from its bank."""
        if self.bank_kind is None or self.bank_start is None:
            parts = self._open_bank
            if parts is None:
                return self.frame.to_field(draw_paths(self.shape, u, centre=False))
            bank, kind, start = parts
            row = bank.index(self.shape, np.atleast_2d(np.asarray(u, dtype=np.float64)))
            return kind[row], start[row]
        u = np.atleast_2d(u)
        across = self.frame.across
        first = np.full(u.shape[0], (across - 1) // 2) if self.shape.start == "middle" else \
            np.minimum((u[:, 0] * across).astype(np.int64), across - 1)
        last = np.minimum((u[:, 1] * across).astype(np.int64), across - 1)
        rows = first * across + last
        return self.bank_kind[rows].copy(), self.bank_start[rows].copy()

    @cached_property
    def _open_bank(self) -> tuple[PathBank, np.ndarray, np.ndarray] | None:
        """An open field's every path in field cells (kind, start), when its shape has few (see
        open_bank): drawing a batch's paths is then a lookup instead of draw_paths' numpy calls."""
        bank = open_bank(self.shape)
        if bank is None:
            return None
        kind, start = self.frame.to_field(bank.drawn)
        return bank, kind, start

    def draw_one(self, u: list[float]) -> tuple[np.ndarray, list[int], int]:
        """:meth:`draw` of one row of uniforms, for a single env's reset: (kind int8[C], the same as a
        list, start cell). A walled field reads its bank; an open field keeps the paths it has drawn by
        their signature (few per variant unless the field is large; at most DRAWN_KEPT of them)."""
        if self.bank_kind is not None:
            kind, start = self.draw(np.array([u]))
            return kind[0], kind[0].tolist(), int(start[0])
        key = path_signature(self.shape, u)
        drawn = self._drawn.get(key)
        if drawn is None:
            kind, start = self.draw(np.array([u]))
            if len(self._drawn) >= DRAWN_KEPT:
                self._drawn.clear()
            self._drawn[key] = drawn = (kind[0], kind[0].tolist(), int(start[0]))
        return drawn

    @cached_property
    def _drawn(self) -> dict[tuple[int, ...], tuple[np.ndarray, list[int], int]]:
        return {}

    def sample(self, seed: int, count: int) -> PathSample:
        """``count`` paths from the variant seed's sample stream (same seed, same paths)."""
        kind, start = self.draw(variant_rng(seed, SAMPLE_STREAM).random((count, self.draws)))
        return PathSample(kind, start)

    def outcome(self, state: np.ndarray, action: np.ndarray, kind: np.ndarray, start: np.ndarray,
                path: np.ndarray | None = None) -> Outcome:
        """One step of each query: ``state`` and ``action`` [n] on the path in row ``path[i]``
        (default i) of ``kind`` [P, C] and ``start`` [P]."""
        # flat lookups with ndarray.take, several times faster than fancy indexing on the hot path
        row = self._rows_of(state.shape[0], kind.shape[1]) if path is None else path * kind.shape[1]
        flat_kind = kind.reshape(-1)
        move = state * self.aim.shape[1]
        move += action
        aim = self._aim_flat.take(move)
        k = flat_kind.take(row + aim)
        misstep = k == OFF
        misstep_to = self._misstep_flat.take(move)
        if self.to_start:
            misstep_to += start if path is None else start[path]
        nxt = np.where(misstep, misstep_to, self._move_flat.take(move))
        reward = self._reward_of_kind.take(k)
        reached = flat_kind.take(row + self.state_cell.take(nxt)) == GOAL
        out = self.state_out.take(nxt)
        return Outcome(nxt, reward, misstep, aim, reached | out, reached & ~out)

    def _rows_of(self, n: int, cells: int) -> np.ndarray:
        """int64[n]: i · cells, the flat start of query i's path row (kept for the last n and cells)."""
        kept = self._row_starts
        if kept.size != n or (n > 1 and kept[1] != cells):
            kept = np.arange(n, dtype=np.int64) * cells
            kept.flags.writeable = False
            self.__dict__["_row_starts"] = kept          # a frozen dataclass: kept as cached_property keeps
        return kept

    def outcome_one(self, state: int, action: int, kind: list[int], start: int) -> tuple[int, float, bool, int, bool]:
        """:meth:`outcome` of one query in Python numbers (a single env's step): (next state, reward,
        misstep, aim, terminal) on the path ``kind`` (a list over cells) from ``start``."""
        aim_of, move_next, misstep_next, cell_of, out_of, reward_of = self._lists
        aim = aim_of[state][action]
        k = kind[aim]
        if k == OFF:
            nxt = misstep_next[state][action] + (start if self.to_start else 0)
        else:
            nxt = move_next[state][action]
        return nxt, reward_of[k], k == OFF, aim, kind[cell_of[nxt]] == GOAL or out_of[nxt]

    @cached_property
    def _lists(self) -> tuple[list[Any], ...]:
        """The rule's tables as Python lists, made once per variant for :meth:`outcome_one`."""
        return (self.aim.tolist(), self.move_next.tolist(), self.misstep_next.tolist(), self.state_cell.tolist(),
                self.state_out.tolist(), self._reward_of_kind.tolist())

    @cached_property
    def _reward_of_kind(self) -> np.ndarray:
        """float64[3]: a step's reward by the kind of cell it aims at (OFF, ON, GOAL), summed in the
        order step + goal + misstep, so every runtime and analysis adds the same floats."""
        table = np.zeros(3)
        table[OFF] = self.step_reward + 0.0 + self.misstep_reward
        table[ON] = self.step_reward + 0.0 + 0.0
        table[GOAL] = self.step_reward + self.goal_reward + 0.0
        return table

    @cached_property
    def _row_starts(self) -> np.ndarray:
        return np.zeros(0, dtype=np.int64)

    @cached_property
    def _aim_flat(self) -> np.ndarray:
        return self.aim.reshape(-1)

    @cached_property
    def _move_flat(self) -> np.ndarray:
        return self.move_next.reshape(-1)

    @cached_property
    def _misstep_flat(self) -> np.ndarray:
        return self.misstep_next.reshape(-1)

    def mark_after(self, until: np.ndarray, misstep: np.ndarray, aim: np.ndarray, rows: np.ndarray,
                   now: np.ndarray) -> None:
        """Leave the marks of this step's missteps in ``until`` [N, C] (in place): after a misstep
        (``misstep[i]``, aimed at ``aim[i]``) in row ``rows[i]`` at step ``now[i]``, that cell shows
        a mark in observations ``now … now + mark_steps − 1``: a cell is marked while ``until > step``."""
        if self.mark_steps == 0:
            return
        hit = np.flatnonzero(misstep)
        if hit.size:
            until[rows[hit], aim[hit]] = self.mark_until(now[hit])

    def mark_until(self, now: Any) -> Any:
        """The step up to which (excluded) a mark left at step ``now`` shows (scalar or array)."""
        return np.minimum(now + self.mark_steps, MARK_FOREVER)

    def tables(self, sample: PathSample, reachable_only: bool = True) -> Tables:
        """Finite tables over the paths of ``sample``: every (path, state), ends absorbing for
        free, each path starting at (its start, no missteps) with weight 1 / K. With
        ``reachable_only`` only the states reachable from each path's start are kept (what the
        analyses solve); ``local`` keeps their runtime numbers (missteps · C + cell)."""
        S, A = self.num_states, self.num_actions
        state, action = np.divmod(np.arange(S * A), A)
        stay = np.repeat(np.arange(S), A)
        parts: list[tuple[np.ndarray, ...]] = []
        offset = 0
        for i in range(sample.count):        # once per sampled path, not per step
            kind, start = sample.kind[i], int(sample.start[i])
            step = self.outcome(state, action, kind[None, :], np.asarray([start]), np.zeros(S * A, dtype=np.int64))
            terminal = (kind[self.state_cell] == GOAL) | self.state_out
            success = (kind[self.state_cell] == GOAL) & ~self.state_out
            ends = terminal[stay]
            next_state = np.where(ends, stay, step.next_state).reshape(S, A)
            reward = np.where(ends, 0.0, step.reward).reshape(S, A)
            keep = np.flatnonzero(reachable(next_state, np.asarray([start]))) if reachable_only else np.arange(S)
            number = -np.ones(S, dtype=np.int64)
            number[keep] = np.arange(keep.size) + offset
            parts.append((number[next_state[keep]], reward[keep], terminal[keep], success[keep],
                          (keep == start).astype(np.float64) / sample.count, np.full(keep.size, i), keep))
            offset += keep.size
        next_state, reward, terminal, success, initial, value, local = (np.concatenate(p) for p in zip(*parts))
        cell = self.state_cell[local]
        return Tables(next_state=next_state, reward=reward, terminal=terminal, success=success, initial=initial,
                      value=value, local=local, cell=cell, heading=-np.ones_like(cell), obs_key=cell.copy())

    def model(self, sample: PathSample, seed: int | None, reachable_only: bool = True,
              deferred: bool = False) -> TaskModel:
        """The finite task whose hidden values are the paths of ``sample`` (drawn from ``seed``, or
        None for paths given by hand). What the agent sees depends on its cell only (marks are laid
        over at run time), so observation keys are cells. With ``deferred`` the tables are built when
        first read."""
        C = self.num_cells
        source: Tables | Deferred = Deferred(self.tables, (sample, reachable_only)) if deferred \
            else self.tables(sample, reachable_only)
        return TaskModel(
            kind="field", variant_id=self.variant_id, params=self.params, layout=self.layout,
            action_names=self.action_names, horizon=self.horizon, discount=self.discount,
            timeout_reward=self.timeout_reward, key_cell=np.arange(C), key_heading=-np.ones(C, dtype=np.int64),
            hidden=SampledSet(sample, sample.count, seed, "sampled path" if seed is not None else "path"),
            source=source, paths=self)

    def path_model(self, kind: np.ndarray, start: int, reachable_only: bool = False) -> TaskModel:
        """The finite task of one path (kind int8[C], start cell). Without ``reachable_only`` its
        states are numbered as in the runtimes (missteps · C + cell), so a runtime's state indexes it."""
        sample = PathSample(np.asarray(kind, dtype=np.int8)[None, :], np.asarray([start], dtype=np.int64))
        return self.model(sample, None, reachable_only)

    def path_missteps(self, kind: np.ndarray) -> np.ndarray:
        """float[S, A]: 1 where the move steps off the path ``kind`` from a state that has not
        ended (for expected misstep counts; ended states absorb and step off no more)."""
        kind = np.asarray(kind)
        ended = (kind[self.state_cell] == GOAL) | self.state_out
        return ((kind[self.aim] == OFF) & ~ended[:, None]).astype(np.float64)

    def missteps(self, model: TaskModel, sample: PathSample) -> np.ndarray:
        """float[S, A] over a model of ``sample`` (see :meth:`model`): 1 where the move steps off
        its path from a state that has not ended."""
        aim = self.aim[model.local]
        off = sample.kind[model.value[:, None], aim] == OFF
        return (off & ~model.terminal[:, None]).astype(np.float64)

    def digest(self) -> str:
        """sha256 (hex) of the variant: its size and sides, the shape of its paths, and its path-free
        tables, rewards and limits. Paths are drawn per episode, so two variants with equal digests
        offer the same paths with the same probabilities."""
        frame, shape = self.frame, self.shape
        h = hashlib.sha256()
        h.update(f"field|{frame.rows}|{frame.cols}|{frame.start_side}|{shape.turns}|{shape.width}|{shape.start}|"
                 f"{self.levels}|{self.to_start}|{self.mark_steps}|{self.horizon}|".encode())
        for part in (np.asarray([self.step_reward, self.goal_reward, self.misstep_reward, self.timeout_reward,
                                 self.discount], dtype="<f8"),
                     self.aim.astype("<i8"), self.move_next.astype("<i8"), self.misstep_next.astype("<i8"),
                     self.state_out.astype("u1")):
            h.update(np.ascontiguousarray(part).tobytes())
            h.update(b"|")
        return h.hexdigest()


__all__ = ["GOAL", "MARK_FOREVER", "OFF", "ON", "Outcome", "PathRule", "PathSample"]
