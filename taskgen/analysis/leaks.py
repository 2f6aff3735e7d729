"""Checks that the cue does not reach a memoryless agent after its display window.

- Static leak: two reachable states that differ only in the cue, after the window, whose
  noise-free observations differ in any modality.
- Carried cue: a memoryless policy that beats the best cue-blind agent must be carrying the cue
  in where or when it walks; the witness shows its paths for two cue values side by side.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..model import TaskModel, distances_from
from .memoryless import MemorylessResult, ObservationTables

TOLERANCE = 1e-9


@dataclass(frozen=True)
class Leak:
    """The earliest leaking pair of states."""

    step: int
    states: tuple[int, int]
    cues: tuple[int, int]
    cell: tuple[int, int]
    parts: tuple[str, ...]     # modality.block names whose values differ

    def describe(self) -> str:
        """One line for the report."""
        return (f"step {self.step}: at cell (row {self.cell[0]}, col {self.cell[1]}) cue {self.cues[0]} and "
                f"cue {self.cues[1]} look different in {', '.join(self.parts)}")


def first_reached(model: TaskModel) -> np.ndarray:
    """int[S]: the fewest steps from a reset state to each state."""
    dist = np.full(model.num_states, np.iinfo(np.int64).max)
    for s in model.initial_states():
        d = distances_from(model.next_state, int(s))
        dist = np.where((d >= 0) & (d < dist), d, dist)
    return dist


def static_leak(model: TaskModel, observations: ObservationTables | None) -> Leak | None:
    """The earliest pair of cue twins, both outside the cue's display, that an observation tells
    apart, if any."""
    after = ~model.cue_shown()         # states outside the cue's display
    step = first_reached(model)
    found: Leak | None = None
    tables = observations or {"key": (np.arange(model.num_keys)[:, None], {"key": slice(0, 1)})}
    for b in np.unique(model.blind_state[after]):
        members = np.flatnonzero((model.blind_state == b) & after)
        if members.size < 2:
            continue
        first = members[0]
        for other in members[1:]:
            parts = []
            for modality, (table, blocks) in tables.items():
                a, c = np.asarray(table[model.obs_key[first]]), np.asarray(table[model.obs_key[other]])
                if np.array_equal(a, c):
                    continue
                diff = np.flatnonzero(a.ravel() != c.ravel())
                parts += [f"{modality}.{name}" for name, sl in blocks.items()
                          if ((diff >= sl.start) & (diff < sl.stop)).any()] or [modality]
            if parts:
                when = int(max(step[first], step[other]))
                if found is None or when < found.step:
                    r, c = model.layout.cells[model.cell[first]]
                    found = Leak(when, (int(first), int(other)),
                                 (int(model.hidden[first]), int(model.hidden[other])),
                                 (int(r), int(c)), tuple(parts))
    return found


@dataclass(frozen=True)
class Witness:
    """Two cue values' trajectories under one memoryless policy, and where they part."""

    cues: tuple[int, int]
    rows: list[tuple[int, str, str]]   # (step, left cell/action, right cell/action)
    diverge_step: int

    def describe(self) -> str:
        """A small side-by-side table."""
        left, right = self.cues
        lines = [f"      step  cue {left:<22} cue {right}"]
        previous, skipped = None, 0
        for i, (t, a, b) in enumerate(self.rows):
            if (a, b) == previous and t != self.diverge_step and i != len(self.rows) - 1:
                skipped += 1
                continue
            if skipped:
                lines.append(f"       ...  (the same for {skipped} more step{'s' if skipped > 1 else ''})")
                skipped = 0
            mark = "  <- paths part" if t == self.diverge_step else ""
            lines.append(f"      {t:>4}  {a:<26} {b}{mark}")
            previous = (a, b)
        return "\n".join(lines)


def _trajectory(model: TaskModel, result: MemorylessResult, start: int) -> list[tuple[int, int, bool]]:
    """(state, action, ended) per step of the memoryless policy from ``start``."""
    out, s = [], start
    for _ in range(model.horizon):
        if model.terminal[s]:
            break
        a = int(result.policy[result.classes[s]])
        out.append((s, a, False))
        s = int(model.next_state[s, a])
    out.append((s, -1, True))
    return out


def carried_cue_witness(model: TaskModel, result: MemorylessResult) -> Witness | None:
    """Paths of two cue values that the memoryless policy sends to different places."""
    starts = model.initial_states()
    paths = {int(model.hidden[s]): _trajectory(model, result, int(s)) for s in starts}
    cues = sorted(paths)
    for i, left in enumerate(cues):
        for right in cues[i + 1:]:
            a, b = paths[left], paths[right]
            part = next((t for t in range(min(len(a), len(b)))
                         if model.cell[a[t][0]] != model.cell[b[t][0]]), None)
            if part is None:
                continue
            rows = []
            for t in range(max(len(a), len(b))):
                rows.append((t, _cell_text(model, a, t), _cell_text(model, b, t)))
            return Witness((left, right), rows, part)
    return None


def _cell_text(model: TaskModel, path: list[tuple[int, int, bool]], t: int) -> str:
    if t >= len(path):
        return ""
    s, a, ended = path[t]
    r, c = model.layout.cells[model.cell[s]]
    where = f"({r},{c})"
    if ended:
        outcome = "success" if model.success[s] else ("wrong arm" if model.terminal[s] else "time out")
        return f"{where} {outcome}"
    shown = ", cue shown" if model.cue_shown()[s] else ""
    return f"{where} {model.action_names[a]}{shown}"
