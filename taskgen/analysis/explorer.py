"""The explorer: a simple agent with memory that does not know the path, a reference for what memory alone buys."""

from __future__ import annotations

import numpy as np

from ..model import PathRule
from ..model.paths import Outcome
from .rollouts import Rollouts, roll

EXPLORER_CLASS = ("remembers where it stepped off, where it has been and the moves that took it on (memory, not "
                  "the path): retraces those moves, else tries forward, sideways and back, new cells first")


def _directions(model: PathRule) -> tuple[int, int, int]:
    """Actions (forward, along +across, along −across) in the field's canonical frame."""
    return {"south": (0, 1, 3), "north": (2, 1, 3), "west": (1, 2, 0), "east": (3, 2, 0)}[model.frame.start_side]


class Explorer:
    """A simple agent with memory, for K paths at once: a depth-first search of the safe cells.

    It remembers the cells it stepped off into, the cells it has stood on, the cells it has searched
    out (no new safe cell beside them), and, for each cell it left for a new one, the move that
    took it there. Where it knows such a move and it does not lead to a searched-out cell, it
    takes it again (so after a misstep it walks straight back to where it got to); elsewhere it
    tries, in this order, forward (toward the far side), sideways in the direction it last went,
    sideways the other way and back, taking the first move to a cell it has neither stood on nor
    stepped off into. With none left the cell is searched out and it steps back to a safe cell that is
    not. A reference for what memory alone buys, below the agent that knows the path."""

    def __init__(self, model: PathRule, paths: int) -> None:
        self.model = model
        self.forward, self.plus, self.minus = _directions(model)
        self.back = {0: 2, 2: 0, 1: 3, 3: 1}[self.forward]
        C = model.num_cells
        self.known_off = np.zeros((paths, C), dtype=bool)
        self.visited = np.zeros((paths, C), dtype=bool)
        self.route = -np.ones((paths, C), dtype=np.int64)   # the move that left each cell for a new one
        self.done = np.zeros((paths, C), dtype=bool)         # searched out: no new safe cell beside it
        self.side = np.ones(paths, dtype=bool)               # True: last went along +across
        self.rows = np.arange(paths)
        self.aim = model.aim[:C]                             # where each move from each cell aims

    def act(self, t: int, cell: np.ndarray, marked: np.ndarray, live: np.ndarray) -> np.ndarray:
        """The K actions at step t (marks are not needed: it remembers its missteps itself)."""
        rows = self.rows
        self.visited[rows, cell] = True
        along = np.where(self.side, self.plus, self.minus)
        other = np.where(self.side, self.minus, self.plus)
        order = np.stack([np.full_like(cell, self.forward), along, other, np.full_like(cell, self.back)], axis=1)
        target = self.aim[cell[:, None], order]                            # [K, 4]
        safe = (target != cell[:, None]) & ~self.known_off[rows[:, None], target]
        fresh = safe & ~self.visited[rows[:, None], target]
        known = self.route[rows, cell]
        follow = (known >= 0) & ~self.done[rows, self.aim[cell, np.maximum(known, 0)]]
        stuck = ~follow & ~fresh.any(axis=1)
        self.done[rows[stuck], cell[stuck]] = True
        back = safe & ~self.done[rows[:, None], target]
        pick = np.where(fresh.any(axis=1), np.argmax(fresh, axis=1),
                        np.where(back.any(axis=1), np.argmax(back, axis=1), np.argmax(safe, axis=1)))
        return np.where(follow, known, order[rows, pick])

    def observe(self, cell: np.ndarray, action: np.ndarray, out: Outcome, live: np.ndarray) -> None:
        """Remember missteps, and the move that reached a new cell."""
        rows = self.rows
        misstep = out.misstep & live
        self.known_off[rows[misstep], out.aim[misstep]] = True
        arrived = self.model.state_cell[out.next_state]
        new = live & ~out.misstep & (arrived != cell) & ~self.visited[rows, arrived]
        self.route[rows[new], cell[new]] = action[new]
        self.visited[rows[new], arrived[new]] = True
        sideways = new & ((action == self.plus) | (action == self.minus))
        self.side = np.where(sideways, action == self.plus, self.side)


def explore(model: PathRule, kind: np.ndarray, start: np.ndarray) -> Rollouts:
    """Exact figures of the :class:`Explorer` on each path."""
    explorer = Explorer(model, start.shape[0])
    return roll(model, kind, start, explorer.act, explorer.observe)
