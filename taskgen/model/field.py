"""Stage 4 for field layouts: hidden-path dynamics for every path at once, and the finite
model of one path.

A field's state is (cell, falls so far); with no fall limit the falls are not counted, so
the state is the cell. The dynamics do not depend on the path except through the kind of the
cell a move aims at (off the path, on it, its end) and the path's start cell, so a
:class:`FieldModel` keeps path-free tables and one rule, :meth:`FieldModel.outcome`. The
batched runtime applies that rule to N environments' paths in one numpy pass; the analyses
apply it to all states of one path to get an ordinary :class:`TaskModel`, on which the exact
machinery (backward induction, policy evaluation, hitting times) runs unchanged.

Feedback marks only change what the agent sees, never what happens, so they are not part of
the state: :meth:`FieldModel.mark_after` is the rule the runtime and the analyses share.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from ..generate import MOVE_NAMES, GridLayout
from ..generate.paths import GOAL, OFF, ON, FieldFrame, PathShape, draw_paths, path_bank
from ..variant import Variant, field_geometry
from .graph import reachable
from .tables import TaskModel

MARK_FOREVER = np.iinfo(np.int64).max // 2   # a mark that lasts until the episode ends


@dataclass(frozen=True)
class Outcome:
    """What one step does, for each of n queries."""

    next_state: np.ndarray   # int64[n]
    reward: np.ndarray       # float64[n]
    fell: np.ndarray         # bool[n]: stepped off the path
    aim: np.ndarray          # int64[n]: the cell the move aimed at (where a fall leaves its mark)
    terminal: np.ndarray     # bool[n]: the next state ends the episode
    success: np.ndarray      # bool[n]: ... by reaching the path's end


@dataclass(frozen=True, eq=False)
class FieldModel:
    """A compiled field variant: path-free tables over states s = falls · C + cell."""

    variant_id: str
    layout: GridLayout
    frame: FieldFrame
    shape: PathShape
    levels: int              # fall counts the state keeps (max_falls + 1, or 1 when not counted)
    max_falls: int | None
    to_start: bool           # a fall sends the agent to the start (else it stays where it was)
    mark_steps: int          # observations a mark is part of (0: no marks; MARK_FOREVER: episode)
    step_reward: float
    goal_reward: float
    fall_reward: float
    timeout_reward: float
    horizon: int
    discount: float
    aim: np.ndarray          # int64[S, A]: cell each move aims at (its own cell at the field's edge)
    move_next: np.ndarray    # int64[S, A]: next state when the aimed cell is on the path
    fall_next: np.ndarray    # int64[S, A]: next state of a fall (cell part 0 when sent to the start)
    state_cell: np.ndarray   # int64[S]
    state_out: np.ndarray    # bool[S]: the fall limit was reached (a failed end)
    params: dict[str, Any] = field(default_factory=dict)
    action_names: tuple[str, ...] = MOVE_NAMES
    bank_kind: np.ndarray | None = None   # int8[P, C]: every path of a walled field (row start · E + end)
    bank_start: np.ndarray | None = None  # int64[P]
    mark_colour: tuple[int, int, int] = (213, 94, 0)   # of a mark in top-down pixels

    @property
    def draws(self) -> int:
        """Uniform numbers one path needs (a walled field: its start and its end)."""
        return 2 if self.bank_kind is not None else self.shape.draws

    @property
    def num_states(self) -> int:
        """S, the number of states."""
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
        if self.bank_kind is None:
            return self.frame.to_field(draw_paths(self.shape, u, centre=False))
        u = np.atleast_2d(u)
        across = self.frame.across
        first = np.full(u.shape[0], (across - 1) // 2) if self.shape.start == "middle" else \
            np.minimum((u[:, 0] * across).astype(np.int64), across - 1)
        last = np.minimum((u[:, 1] * across).astype(np.int64), across - 1)
        rows = first * across + last
        return self.bank_kind[rows].copy(), self.bank_start[rows].copy()

    def outcome(self, state: np.ndarray, action: np.ndarray, kind: np.ndarray, start: np.ndarray,
                path: np.ndarray | None = None) -> Outcome:
        """One step of each query: ``state`` and ``action`` [n] on the path in row ``path[i]``
        (default i) of ``kind`` [P, C] and ``start`` [P]."""
        path = np.arange(state.shape[0]) if path is None else path
        aim = self.aim[state, action]
        k = kind[path, aim]
        fell = k == OFF
        fall_to = self.fall_next[state, action] + (start[path] if self.to_start else 0)
        nxt = np.where(fell, fall_to, self.move_next[state, action])
        reward = self.step_reward + np.where(k == GOAL, self.goal_reward, 0.0) + np.where(fell, self.fall_reward, 0.0)
        reached = kind[path, self.state_cell[nxt]] == GOAL
        out = self.state_out[nxt]
        return Outcome(nxt, reward, fell, aim, reached | out, reached & ~out)

    def mark_after(self, until: np.ndarray, fell: np.ndarray, aim: np.ndarray, rows: np.ndarray,
                   now: np.ndarray) -> None:
        """Leave the marks of this step's falls in ``until`` [N, C] (in place): after a fall
        (``fell[i]``, aimed at ``aim[i]``) in row ``rows[i]`` at step ``now[i]``, that cell shows
        a mark in observations ``now … now + mark_steps − 1``: a cell is marked while ``until > step``."""
        if self.mark_steps == 0:
            return
        hit = np.flatnonzero(fell)
        if hit.size:
            until[rows[hit], aim[hit]] = self.mark_until(now[hit])

    def mark_until(self, now: Any) -> Any:
        """The step up to which (excluded) a mark left at step ``now`` shows (scalar or array)."""
        return np.minimum(now + self.mark_steps, MARK_FOREVER)

    def path_model(self, kind: np.ndarray, start: int, reachable_only: bool = False) -> TaskModel:
        """The finite task of one path (kind int8[C], start cell), for the exact analyses: ends
        absorb for free, the start state is (start, no falls). States are numbered as in the
        runtimes (falls · C + cell); with ``reachable_only`` only the states reachable from the
        start are kept (renumbered in order; ``params["field_states"]`` lists their numbers),
        which is what the analyses solve."""
        S, A = self.num_states, self.num_actions
        state, action = np.divmod(np.arange(S * A), A)
        kinds, starts = np.asarray(kind)[None, :], np.asarray([start])
        step = self.outcome(state, action, kinds, starts, np.zeros(S * A, dtype=np.int64))
        terminal = (kinds[0, self.state_cell] == GOAL) | self.state_out
        success = (kinds[0, self.state_cell] == GOAL) & ~self.state_out
        stay = np.repeat(np.arange(S), A)
        ends = terminal[stay]
        next_state = np.where(ends, stay, step.next_state).reshape(S, A)
        reward = np.where(ends, 0.0, step.reward).reshape(S, A)
        initial = np.zeros(S)
        initial[start] = 1.0
        C = self.num_cells
        path_cells = np.flatnonzero(kinds[0] != OFF)
        layout = replace(self.layout, start=int(start),
                         sites={**self.layout.sites, "path": path_cells,
                                "path_end": np.flatnonzero(kinds[0] == GOAL)})
        keep = np.flatnonzero(reachable(next_state, [start])) if reachable_only else np.arange(S)
        number = -np.ones(S, dtype=np.int64)
        number[keep] = np.arange(keep.size)
        next_state, reward, terminal, success, initial = (number[next_state[keep]], reward[keep], terminal[keep],
                                                          success[keep], initial[keep])
        S = keep.size
        zeros = np.zeros(S, dtype=np.int64)
        return TaskModel(
            next_state=next_state, reward=reward, terminal=terminal, success=success, initial=initial,
            hidden=zeros, blind_state=np.arange(S), cell=self.state_cell[keep], heading=zeros - 1, timer=zeros,
            obs_key=self.state_cell[keep], key_cell=np.arange(C), key_heading=-np.ones(C, dtype=np.int64),
            key_cue=-np.ones(C, dtype=np.int64), hidden_values=1, cue_values=0, hidden_prior=np.ones(1),
            cue_visible_steps=0, cue_window=np.zeros(S, dtype=bool), cue_known=np.ones(S, dtype=bool),
            knowledge=zeros, horizon=self.horizon, discount=self.discount, timeout_reward=self.timeout_reward,
            layout=layout, action_names=self.action_names, variant_id=self.variant_id,
            params={**self.params, "path_cells": int(path_cells.size), "field_states": keep},
        )

    def view_model(self) -> TaskModel:
        """A model with no path at all: what the agent-view renderers draw from, so no picture
        or vector they make can depend on the path."""
        return self.path_model(np.zeros(self.num_cells, dtype=np.int8), self.layout.start)

    def path_falls(self, kind: np.ndarray) -> np.ndarray:
        """float[S, A]: 1 where the move steps off the path ``kind`` from a state that has not
        ended (for expected fall counts; ended states absorb and fall no more)."""
        kind = np.asarray(kind)
        ended = (kind[self.state_cell] == GOAL) | self.state_out
        return ((kind[self.aim] == OFF) & ~ended[:, None]).astype(np.float64)


def compile_field(variant: Variant) -> FieldModel:
    """Compile a field variant's path-free tables."""
    spec, layout = variant.spec, variant.layout
    f = spec.layout.field
    frame, shape = field_geometry(variant.params)
    C, A = layout.num_cells, 4
    levels = (f.fall.max_falls or 0) + 1
    S = C * levels
    falls, cell = np.divmod(np.arange(S), C)
    own = np.arange(C)[:, None]
    aim_cell = np.where(layout.neighbour >= 0, layout.neighbour, own)            # [C, A]
    aim = aim_cell[cell]                                                         # [S, A]
    move_next = falls[:, None] * C + aim
    counted = f.fall.max_falls is not None
    next_falls = np.minimum(falls + 1, levels - 1) if counted else falls
    to_start = f.fall.to == "start"
    fall_cell = np.zeros_like(cell) if to_start else cell
    fall_next = np.broadcast_to((next_falls * C + fall_cell)[:, None], (S, A)).copy()
    state_out = (falls == levels - 1) if counted else np.zeros(S, dtype=bool)
    bank_kind = bank_start = None
    longest = shape.longest
    if f.maze is not None:
        index = frame.cell_index()
        bank_kind, bank_start = path_bank(layout.neighbour, index[0], index[-1])
        longest = int((bank_kind != OFF).sum(axis=1).max()) - 1
    horizon = spec.episode.max_steps
    if horizon == "auto":
        horizon = int(np.ceil(spec.episode.max_steps_factor * longest))
    mark = f.mark
    mark_steps = 0 if mark is None else MARK_FOREVER if mark.steps == "episode" else int(mark.steps)
    r = spec.rewards
    return FieldModel(
        variant_id=variant.variant_id, layout=layout, frame=frame, shape=shape, levels=levels,
        max_falls=f.fall.max_falls, to_start=to_start, mark_steps=mark_steps, step_reward=r.step,
        goal_reward=r.correct, fall_reward=r.fall, timeout_reward=r.timeout, horizon=int(horizon),
        discount=spec.episode.discount, aim=aim, move_next=move_next, fall_next=fall_next, state_cell=cell,
        state_out=state_out, params={**variant.params, "max_steps": int(horizon)},
        bank_kind=bank_kind, bank_start=bank_start,
        mark_colour=tuple(mark.colour) if mark is not None else (213, 94, 0),
    )


__all__ = ["FieldModel", "MARK_FOREVER", "Outcome", "compile_field", "OFF", "ON", "GOAL"]
