"""The cue analyses: does the task need the cue, and does it reach a memoryless agent any other way?

- Cue needed: under optimal play the cue has disappeared when the agent decides (recall distance
  ≥ 1).
- Static leak: two reachable states that differ only in the cue, after the window, whose
  noise-free observations differ in any modality.
- Carried cue: a memoryless policy that beats the best cue-blind agent must be carrying the cue
  in where or when it walks; decided on the chance level's certified bounds (chance.py), and the
  witness shows the proven best policy's paths for two cue values side by side. It does not
  apply while the cue is still shown at the decision: that is what "cue needed" finds.

:func:`analyse_cue` gathers them, with the baselines, into one report per variant.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Annotated

import numpy as np
from pydantic import ConfigDict, Field, with_config
from typing_extensions import TypedDict

from ..errors import AnalysisError
from ..model import CueStructure, TaskModel, distances_from
from .baselines import (CUE_BLIND_CLASS, cue_blind_baseline, optimal_baseline, optimal_policy, per_value,
                        random_baseline, shortest_steps)
from .chance import carried_check, gap, gap_check, table_chance
from .memoryless import MemorylessResult, ObservationTables, observation_classes
from .policysearch import NODES
from .report import TOLERANCE, Baseline, Check, Figure, Report, layout_statistics


def _cue(model: TaskModel) -> CueStructure:
    if model.cue is None:
        raise AnalysisError(f"{model.variant_id} has no cue to analyse")
    return model.cue


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
    cue = _cue(model)
    after = ~cue.window         # states outside the cue's display
    step = first_reached(model)
    found: Leak | None = None
    tables = observations or {"key": (np.arange(model.num_keys)[:, None], {"key": slice(0, 1)})}
    for b in np.unique(cue.blind_state[after]):
        members = np.flatnonzero((cue.blind_state == b) & after)
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
                                 (int(model.value[first]), int(model.value[other])),
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
    paths = {int(model.value[s]): _trajectory(model, result, int(s)) for s in starts}
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
    shown = ", cue shown" if _cue(model).window[s] else ""
    return f"{where} {model.action_names[a]}{shown}"


def _optimal_paths(model: TaskModel, policy: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """States of the optimal agent's path for each cue value: ``int[H+1, K]`` and the cues."""
    starts = model.initial_states()
    paths = [starts]
    for t in range(model.horizon):
        paths.append(model.next_state[paths[-1], policy[t, paths[-1]]])
    return np.stack(paths), model.value[starts]


def decision_steps(model: TaskModel, policy: np.ndarray | None = None) -> dict[int, int | None]:
    """Per cue value, the first step whose action sends the optimal agent somewhere another cue
    value's agent does not go (None: its path never parts from the others').

    The dynamics are deterministic, so each cue value gives one trajectory; until its decision a
    trajectory shares its cue-blind states with at least one other.
    """
    policy = optimal_policy(model) if policy is None else policy
    paths, cues = _optimal_paths(model, policy)
    blind = _cue(model).blind_state[paths]                      # [H+1, K]
    decided: dict[int, int | None] = {}
    for i, c in enumerate(cues):
        others = np.delete(blind, i, axis=1)
        apart = np.flatnonzero((blind[1:, i:i + 1] != others[1:]).all(axis=1)) if others.size else np.zeros(0)
        decided[int(c)] = int(apart[0]) if len(apart) else None
    return decided


def recall_distances(model: TaskModel, policy: np.ndarray | None = None) -> dict[int, int | None]:
    """Per cue value: steps between the last observation showing the cue and the decision.

    An action at step t is taken after observation t, so the distance is t − (the last step ≤ t
    whose observation showed the cue). Zero means the cue is in view at the decision; None means
    the path never depends on the cue or never showed it before deciding.
    """
    policy = optimal_policy(model) if policy is None else policy
    paths, cues = _optimal_paths(model, policy)
    shown = _cue(model).window[paths]
    out: dict[int, int | None] = {}
    for i, (c, t) in enumerate(zip(cues, decision_steps(model, policy).values())):
        seen = np.flatnonzero(shown[: t + 1, i]) if t is not None else np.zeros(0, dtype=np.int64)
        out[int(c)] = int(t - seen[-1]) if len(seen) else None
    return out


def recall_distance(model: TaskModel, policy: np.ndarray | None = None) -> int | None:
    """The shortest recall distance over cue values (None: the cue never matters)."""
    values = [d for d in recall_distances(model, policy).values() if d is not None]
    return min(values) if values else None


def _cue_needed(recall: dict[int, int | None], decided: dict[int, int | None]) -> Check:
    if all(d is None for d in recall.values()):
        return Check("cue needed", False, "the optimal agent's path never depends on a cue it has seen")
    for cue, d in sorted(recall.items()):
        if d is not None and d <= 0:
            return Check("cue needed", False, f"cue {cue}: the optimal agent decides at step {decided[cue]} "
                         f"while the cue is still shown (recall distance {d}): no memory is needed")
    known = [d for d in recall.values() if d is not None]
    return Check("cue needed", True, f"recall distance {min(known)}–{max(known)} steps")




def solvability(model: TaskModel, shortest: np.ndarray) -> Check:
    """Every cue value must be solvable within the step limit (``shortest``: per cue value)."""
    for cue, steps in enumerate(shortest):
        if steps < 0:
            return Check("solvable", False, f"{model.variant_id}: cue {cue}: no way to succeed (a paying goal, "
                         "or the goal sequence, cannot be reached)")
        if steps > model.horizon:
            return Check("solvable", False, f"{model.variant_id}: cue {cue}: shortest solution {steps} steps "
                         f"exceeds the step limit {model.horizon}")
    return Check("solvable", True, f"every cue solvable; shortest {int(shortest.max())} steps, limit {model.horizon}")


@with_config(ConfigDict(extra="forbid"))
class CueDetailsJSON(TypedDict):
    """What only a cue task reports per variant (under ``details``)."""

    shortest_solution: Annotated[dict[str, int], Field(description="Fewest steps to success by cue value (−1: "
                                                       "none).")]
    recall_distance: Annotated[dict[str, int | None], Field(
        description="By cue value: steps between the last observation showing the cue and the optimal agent's "
        "decision (null: its path never depends on the cue).")]
    witness: Annotated[str, Field(description="When a memoryless policy carries the cue, its paths for two cue "
                                  "values side by side; else empty.")]


@dataclass(frozen=True)
class CueDetails:
    """What only a cue task reports: each cue value's shortest solution and recall distance, and the
    carried-cue witness (empty when there is none)."""

    shortest: dict[int, int]
    recall: dict[int, int | None]
    witness: str = ""

    def to_dict(self) -> CueDetailsJSON:
        """``shortest_solution`` and ``recall_distance`` by cue value, and the ``witness`` text."""
        return {"shortest_solution": {str(k): v for k, v in self.shortest.items()},
                "recall_distance": {str(k): v for k, v in self.recall.items()}, "witness": self.witness}

    def text_lines(self) -> list[str]:
        """The witness table, when there is one."""
        if not self.witness:
            return []
        return ["    witness: the best memoryless policy's paths for two cue values", self.witness]

    def spreads(self) -> dict[str, list[float]]:
        """The recall distance of every cue value that has one."""
        return {"recall_distance": [float(d) for d in self.recall.values() if d is not None]}


def analyse_cue(model: TaskModel, observations: ObservationTables | None = None, min_gap: float = 0.0,
                budget: int = NODES) -> Report:
    """Run every analysis and check on one compiled cue variant.

    ``observations`` maps each modality the agent receives to ``(table[K, …], blocks)``, the
    noise-free rendering of every observation key; without it the observation keys themselves
    stand for what the agent sees. ``budget``: nodes the search for the chance level may visit.
    """
    policy = optimal_policy(model)
    chance = table_chance(model, observation_classes(model, observations), budget)
    try:
        blind_baseline, blind_error = cue_blind_baseline(model), ""
    except AnalysisError as exc:  # the cue changes more than rewards: say so, never pass silently
        blind_error = str(exc)
        blind_baseline = Baseline.unavailable(CUE_BLIND_CLASS, blind_error)
    optimal = optimal_baseline(model)
    baselines = {"optimal": optimal, "chance": chance.deterministic, "chance_stochastic": chance.stochastic,
                 "cue_blind": blind_baseline, "random": random_baseline(model)}
    recall = recall_distances(model, policy)
    shortest = shortest_steps(model)
    checks = [solvability(model, shortest), _cue_needed(recall, decision_steps(model, policy))]

    leak = static_leak(model, observations)
    checks.append(Check("no cue leak", leak is None,
                        "after the display window, cue twins look alike" if leak is None
                        else f"the cue leaks: {leak.describe()}"))

    witness = ""
    shown = [cue for cue, d in sorted(recall.items()) if d is not None and d <= 0]
    blind = blind_baseline.mean_return
    if shown:
        checks.append(Check("no carried cue", None, f"does not apply: cue {shown[0]} is still shown when the optimal "
                            "agent decides (see cue needed)"))
    elif blind is None:
        checks.append(Check("no carried cue", None, f"cannot run: no exact cue-blind figure ({blind_error})"))
    else:
        found = None
        if chance.witness is not None and chance.witness.mean_return > blind.mean + TOLERANCE:
            found = carried_cue_witness(model, chance.witness)
            witness = found.describe() if found else ""
        checks.append(carried_check(blind.mean, chance, witness, found.diverge_step if found else None))

    optimal_returns = per_value(model, policy)
    checks.append(gap_check(float(model.hidden.weights @ optimal_returns), chance, min_gap, "the cue"))
    solved = shortest[shortest >= 0]
    return Report(
        kind=model.kind, variant_id=model.variant_id, params=model.param_dict(), num_states=model.num_states,
        horizon=model.horizon, hidden=model.hidden.to_dict(),
        shortest=Figure.over(model.hidden, np.maximum(shortest, 0), "exact", "fewest steps to success"),
        longest_shortest=int(solved.max()) if solved.size else -1, baselines=baselines,
        memory_gap=gap(model, optimal_returns, chance), chance_level=chance.level(), checks=checks,
        layout=layout_statistics(model),
        details=CueDetails({i: int(d) for i, d in enumerate(shortest)}, recall, witness))
