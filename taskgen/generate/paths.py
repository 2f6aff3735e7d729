"""Hidden paths across an open field, drawn for many episodes at once from uniform numbers.

A path is drawn in a canonical frame of ``depth`` rows (row 0 on the start side, row
``depth − 1`` on the far side) and ``across`` columns, then mapped onto the field's cells by
:class:`FieldFrame`. Its centre line alternates runs away from the start side and runs along
it: with t turns there are t // 2 + 1 forward runs (each at least one row long, together
``depth − 1`` rows) and (t + 1) // 2 sideways runs, each to a column drawn uniformly among the
others; an odd t ends with a sideways run along the far side. The path never crosses itself,
because every sideways run has a row of its own. A path of width w covers, at each centre
cell, that cell, the w − 1 cells beside it (higher columns) and the w − 1 rows behind it.

Everything is numpy over the episodes, so a batched runtime draws the paths of every resetting
environment in one call; the single runtime and the analyses call the same function with one.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass
from functools import cached_property
from typing import Sequence

import numpy as np

OFF, ON, GOAL = 0, 1, 2   # kinds of cell for one path: off the path, on it, its end


@dataclass(frozen=True)
class PathShape:
    """What every path of a variant shares: the frame's size, turns, width and start rule."""

    depth: int
    across: int
    turns: int
    width: int = 1
    start: str = "random"     # 'random' or 'middle'

    @property
    def positions(self) -> int:
        """Columns the path's left edge can take."""
        return self.across - self.width + 1

    @property
    def draws(self) -> int:
        """Uniform numbers one path needs: its start, one key per row that may hold a turn, one
        per sideways run."""
        return 1 + max(self.depth - 2, 0) + (self.turns + 1) // 2

    @property
    def longest(self) -> int:
        """Most steps along the centre line from start to end."""
        return self.depth - 1 + (self.turns + 1) // 2 * (self.positions - 1)

    def problem(self) -> str | None:
        """Why no path of this shape fits the field (None when one does)."""
        forward = self.turns // 2 + 1
        if self.depth < 2:
            return f"a path needs at least 2 rows from side to side, the field has {self.depth}"
        if self.positions < 1:
            return f"a path {self.width} cells wide does not fit in {self.across} columns"
        if forward > self.depth - 1:
            return (f"{self.turns} turns need {forward} forward runs of at least one row, but the field "
                    f"is {self.depth} rows from side to side")
        if self.turns > 0 and self.positions < 2:
            return f"a turning path {self.width} wide needs more than {self.across} columns"
        return None


@dataclass(frozen=True)
class DrawnPaths:
    """Paths of n episodes in the canonical frame."""

    kind: np.ndarray      # int8[n, depth, across]: OFF, ON or GOAL
    start: np.ndarray     # int64[n, 2]: (row, column) of each start cell
    centre: np.ndarray    # int64[n, L, 2]: centre line, padded by repeating its last cell (L = 0
                          # when not traced)
    length: np.ndarray    # int64[n]: cells on the centre line (0 when not traced)


def draw_paths(shape: PathShape, u: np.ndarray, centre: bool = True) -> DrawnPaths:
    """Draw one path per row of ``u`` (uniforms in [0, 1), shape [n, shape.draws]). The centre
    lines are traced only with ``centre`` (runtimes need the cells, not the line)."""
    problem = shape.problem()
    if problem is not None:
        raise ValueError(problem)
    u = np.atleast_2d(np.asarray(u, dtype=np.float64))
    n, D, X, w = u.shape[0], shape.depth, shape.across, shape.width
    span = shape.positions
    if shape.start == "middle":
        x = np.full(n, (span - 1) // 2, dtype=np.int64)
    else:
        x = np.minimum((u[:, 0] * span).astype(np.int64), span - 1)
    start = np.stack([np.zeros(n, dtype=np.int64), x.copy()], axis=1)
    # rows 1 … D−2 where a forward run ends and a sideways run begins: the turns // 2 rows
    # with the smallest keys (a uniform choice of that many rows)
    keys = u[:, 1:1 + max(D - 2, 0)]
    ranks = np.argsort(np.argsort(keys, axis=1, kind="stable"), axis=1, kind="stable")
    turn_row = np.zeros((n, D), dtype=bool)
    turn_row[:, 1:D - 1] = ranks < shape.turns // 2
    if shape.turns % 2:
        turn_row[:, D - 1] = True
    side_draws = u[:, 1 + max(D - 2, 0):]
    # the column after each sideways run: uniform among the other positions (a loop over the
    # runs, not the rows), then for every row the columns its part of the centre line spans
    runs = (shape.turns + 1) // 2
    xs = np.empty((n, runs + 1), dtype=np.int64)
    xs[:, 0] = x
    for k in range(runs):
        shift = 1 + np.minimum((side_draws[:, k] * (span - 1)).astype(np.int64), span - 2)
        xs[:, k + 1] = (xs[:, k] + shift) % span
    before = np.cumsum(turn_row, axis=1) - turn_row                  # sideways runs before each row
    enter = np.take_along_axis(xs, before, axis=1)                   # [n, D]: the column entering a row
    leave = np.take_along_axis(xs, np.minimum(before + turn_row, runs), axis=1)
    lo, hi = np.minimum(enter, leave), np.maximum(enter, leave) + w - 1
    columns = np.arange(X)
    covered = (columns >= lo[:, :, None]) & (columns <= hi[:, :, None])     # [n, D, X]
    kind = covered.astype(np.int8)
    for j in range(1, w):       # a wide path also covers the rows just behind each centre cell
        kind[:, :D - j] |= covered[:, j:]
    last = xs[:, runs]
    end_cols = (columns[None, :] >= last[:, None]) & (columns[None, :] < (last + w)[:, None])
    kind[:, D - 1][end_cols] = GOAL
    if not centre:
        return DrawnPaths(kind=kind, start=start, centre=np.zeros((n, 0, 2), dtype=np.int64),
                          length=np.zeros(n, dtype=np.int64))
    line, length = _compact(_trace(enter, leave))
    return DrawnPaths(kind=kind, start=start, centre=line, length=length)


def path_signature(shape: PathShape, u: Sequence[float]) -> tuple[int, ...]:
    """The choices one row of uniforms ``u`` makes in :func:`draw_paths` — the start position, the
    rows where sideways runs begin (the ``turns // 2`` smallest keys, ties to the lower row, as the
    stable sort there) and each run's shift — which alone decide the path: equal signatures give
    equal paths, so a single env can keep the paths it has drawn by signature."""
    span, inner = shape.positions, max(shape.depth - 2, 0)
    x = (span - 1) // 2 if shape.start == "middle" else min(int(u[0] * span), span - 1)
    keys = u[1:1 + inner]
    rows = sorted(sorted(range(inner), key=lambda j: (keys[j], j))[:shape.turns // 2])
    side = u[1 + inner:]
    shifts = [1 + min(int(side[k] * (span - 1)), span - 2) for k in range((shape.turns + 1) // 2)]
    return (x, *rows, *shifts)


BANK_PATHS = 1 << 16        # the most paths a shape's bank holds
BANK_ROWS = 16              # the most rows that may hold a turn, for a bank (its subset table has 2**rows entries)


@dataclass(frozen=True)
class PathBank:
    """Every path of a small shape, drawn once, and how a row of uniforms finds its own: the index
    of :func:`path_signature`'s choices (start position, turn rows, shifts) in mixed radix."""

    drawn: DrawnPaths       # kind and start of every path (centre lines not traced)
    subset: np.ndarray      # int64[2**rows]: the number of each set of turn rows (bit j: row j + 1), −1 if none
    combos: int             # how many sets of turn rows there are

    def index(self, shape: PathShape, u: np.ndarray) -> np.ndarray:
        """int64[n]: the bank row of each row of uniforms ``u`` [n, draws]; the row holds the path
        :func:`draw_paths` draws from it (the same choices, read the same way)."""
        n, span, inner = u.shape[0], shape.positions, max(shape.depth - 2, 0)
        x = np.zeros(n, dtype=np.int64) if shape.start == "middle" else \
            np.minimum((u[:, 0] * span).astype(np.int64), span - 1)
        keys = u[:, 1:1 + inner]
        ranks = np.argsort(np.argsort(keys, axis=1, kind="stable"), axis=1, kind="stable")
        bits = (ranks < shape.turns // 2).astype(np.int64) @ (np.int64(1) << np.arange(inner, dtype=np.int64))
        index = x * self.combos + self.subset[bits]
        for k in range((shape.turns + 1) // 2):
            index = index * (span - 1) + np.minimum((u[:, 1 + inner + k] * (span - 1)).astype(np.int64), span - 2)
        return index


def open_bank(shape: PathShape) -> PathBank | None:
    """The bank of every path of ``shape``, or None when there would be more than BANK_PATHS of them
    (or more than BANK_ROWS rows that may hold a turn). Each path is drawn by :func:`draw_paths` from
    a row of uniforms that makes its choices, so the bank holds exactly what draw_paths gives."""
    span, inner, k, runs = shape.positions, max(shape.depth - 2, 0), shape.turns // 2, (shape.turns + 1) // 2
    if shape.problem() is not None or inner > BANK_ROWS:
        return None
    subsets = [s for s in itertools.combinations(range(inner), k)]
    starts = 1 if shape.start == "middle" else span
    count = starts * len(subsets) * (span - 1) ** runs
    if count > BANK_PATHS:
        return None
    subset = -np.ones(1 << inner, dtype=np.int64)
    for number, rows in enumerate(subsets):
        subset[sum(1 << j for j in rows)] = number
    u = np.empty((count, shape.draws))
    for i, (x, rows, shifts) in enumerate(itertools.product(range(starts), subsets,
                                                             itertools.product(range(span - 1), repeat=runs))):
        u[i, 0] = (x + 0.5) / span
        u[i, 1:1 + inner] = [0.1 + 1e-3 * j if j in rows else 0.6 + 1e-3 * j for j in range(inner)]
        u[i, 1 + inner:] = [(s + 0.5) / max(span - 1, 1) for s in shifts]
    return PathBank(drawn=draw_paths(shape, u, centre=False), subset=subset, combos=len(subsets))


def _trace(enter: np.ndarray, leave: np.ndarray) -> np.ndarray:
    """[n, T, 2] centre lines walked cell by cell: each row from its entering to its leaving
    column (repeats where one line's run is shorter than another's)."""
    n, D = enter.shape
    steps = []
    for d in range(D):
        length = np.abs(leave[:, d] - enter[:, d])
        direction = np.sign(leave[:, d] - enter[:, d])
        for j in range(int(length.max(initial=0)) + 1):
            steps.append(np.stack([np.full(n, d), enter[:, d] + direction * np.minimum(j, length)], axis=1))
    return np.stack(steps, axis=1)


def _compact(raw: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Drop consecutive repeats from each centre line and pad with its last cell."""
    n, T, _ = raw.shape
    fresh = np.ones((n, T), dtype=bool)
    fresh[:, 1:] = (raw[:, 1:] != raw[:, :-1]).any(axis=2)
    length = fresh.sum(axis=1)
    order = np.argsort(~fresh, axis=1, kind="stable")          # kept cells first, in order
    packed = np.take_along_axis(raw, order[:, :, None], axis=1)
    last = packed[np.arange(n), length - 1]
    pad = np.arange(T)[None, :] >= length[:, None]
    packed[pad] = np.broadcast_to(last[:, None, :], packed.shape)[pad]
    return packed[:, :int(length.max())], length


def count_turns(centre: np.ndarray, length: int) -> int:
    """Direction changes along one centre line (its first ``length`` cells)."""
    moves = np.diff(centre[:length], axis=0)
    return int((moves[1:] != moves[:-1]).any(axis=1).sum()) if len(moves) > 1 else 0


@dataclass(frozen=True)
class FieldFrame:
    """How the canonical frame maps onto a field of ``rows × cols`` cells for a start side."""

    rows: int
    cols: int
    start_side: str

    @property
    def depth(self) -> int:
        """Rows of the canonical frame (cells from the start side to the far side)."""
        return self.rows if self.start_side in ("north", "south") else self.cols

    @property
    def across(self) -> int:
        """Columns of the canonical frame (cells along the start side)."""
        return self.cols if self.start_side in ("north", "south") else self.rows

    @cached_property
    def _index(self) -> np.ndarray:
        return self._build_index()

    def cell_index(self) -> np.ndarray:
        """int64[depth, across]: the field cell (row · cols + column) of each frame position."""
        return self._index

    def _build_index(self) -> np.ndarray:
        d, x = np.meshgrid(np.arange(self.depth), np.arange(self.across), indexing="ij")
        if self.start_side == "south":
            r, c = self.rows - 1 - d, x
        elif self.start_side == "north":
            r, c = d, x
        elif self.start_side == "west":
            r, c = x, d
        else:
            r, c = x, self.cols - 1 - d
        return r * self.cols + c

    def to_field(self, drawn: DrawnPaths) -> tuple[np.ndarray, np.ndarray]:
        """(kind int8[n, cells] per field cell, start cell int64[n]) of drawn paths."""
        index = self.cell_index()
        n = drawn.kind.shape[0]
        kind = np.zeros((n, self.rows * self.cols), dtype=np.int8)
        kind[:, index.ravel()] = drawn.kind.reshape(n, -1)
        start = index[drawn.start[:, 0], drawn.start[:, 1]]
        return kind, start


def path_bank(neighbour: np.ndarray, starts: np.ndarray, ends: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Every path through a walled field: for each start cell and each end cell, the shortest way
    along the passages (``neighbour`` [C, 4], −1 for a wall), ties broken by the first move in
    action order. Returns (kind int8[S·E, C] with OFF, ON and GOAL at the end; start int64[S·E]),
    row s·E + e for start s and end e."""
    C = neighbour.shape[0]
    kind = np.zeros((starts.size * ends.size, C), dtype=np.int8)
    for i, s in enumerate(starts):            # once per variant: a breadth-first search per start
        parent = -np.ones(C, dtype=np.int64)
        parent[s] = s
        frontier = [int(s)]
        while frontier:
            nxt = []
            for cell in frontier:
                for n in neighbour[cell]:
                    if n >= 0 and parent[n] < 0:
                        parent[n] = cell
                        nxt.append(int(n))
            frontier = nxt
        for j, e in enumerate(ends):
            row = kind[i * ends.size + j]
            if parent[e] < 0:
                raise ValueError(f"cell {int(e)} cannot be reached from cell {int(s)}")
            cell = int(e)
            while cell != s:
                row[cell] = ON
                cell = int(parent[cell])
            row[s] = ON
            row[e] = GOAL
    return kind, np.repeat(np.asarray(starts, dtype=np.int64), ends.size)
