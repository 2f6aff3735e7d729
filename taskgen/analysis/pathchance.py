"""A field's chance level: the best memoryless agent over the sampled paths, marks in view included.

On one path the dynamics are deterministic, so under a deterministic memoryless policy each
sampled path is one trajectory and the search of policysearch.py applies. What the agent sees
is its cell's view and, when some modality shows them, the marks its own missteps have left:

- no marks in view: the observation class is a function of the state, and the chance level is
  found exactly as for a cue task (chance.py);
- marks in view: a class is (the cell's view, what the observation shows of the marks), so a
  trajectory carries its marks and the search branches on far more classes. Three searches
  give the interval: the best policy that ignores the marks (exact: a lower bound, for it is
  one of the policies), the marks-aware search itself (exact when its budget lets it finish),
  and a relaxation for the upper bound. Before its first misstep an agent has seen no mark, so
  every marks-reading policy acts there as a policy of the cell's view alone; letting it know
  the path from its first misstep on can only help it. The best "view-only until the first misstep,
  then the full-information optimum" value is therefore a certified upper bound, found by the
  same branch and bound.
"""

from __future__ import annotations

import time
from dataclasses import dataclass
from typing import Any, Callable, Hashable

import numpy as np

from ..model import PathRule, PathSample, TaskModel
from ..model.paths import MARK_FOREVER
from .chance import Chance, combine, table_chance
from .memoryless import TableRollout, solve_memoryless
from .policysearch import NODES, search
from .report import TOLERANCE, Baseline
from .rollouts import Rollouts, roll
from .stochastic import best_stochastic

#: What an observation shows of the marks: (agent's cell, marked cells) → a hashable summary.
Seen = Callable[[int, frozenset[int]], Hashable]

FIELD_CHANCE_CLASS = ("memoryless, deterministic: acts on its cell's view and on the marks its observation shows "
                      "(noise excluded)")
FIELD_BLIND_CHANCE_CLASS = "memoryless, deterministic: acts on its cell's view (noise excluded; no mark is in view)"
FIELD_STOCHASTIC_CLASS = ("memoryless, stochastic: action probabilities per cell view (noise excluded); the best "
                          "found, a lower bound (Singh, Jaakkola & Jordan, ICML 1994)")
FIELD_MARKS_STOCHASTIC_CLASS = ("memoryless, stochastic, ignoring the marks in view: action probabilities per cell "
                                "view (noise excluded); the best found, a lower bound on the stochastic class "
                                "(Singh, Jaakkola & Jordan, ICML 1994)")
MARK_SHARE = 25     # the marks-aware branch and bound gets budget // MARK_SHARE nodes: it proves little, slowly
CLIMB_SHARE = 250   # and the hill climbing before it budget // CLIMB_SHARE trials from each of its two seeds


class MarkRollout(TableRollout):
    """Trajectories of a field whose agent sees marks: a position also holds the marks left so far, as
    (cell, last step shown + 1) pairs, and a class is (the cell's view class, what is seen of the live marks)."""

    def __init__(self, model: TaskModel, classes: np.ndarray, rule: PathRule, sample: PathSample, seen: Seen,
                 values: np.ndarray | None = None) -> None:
        super().__init__(model, classes, values)
        self._joint = None            # classes also hold marks: the bounds over states do not apply
        self._restrict = False
        self._misstep = rule.missteps(model, sample).astype(bool).tolist()
        self._aim = rule.aim[model.local].tolist()
        self._cell = model.cell.tolist()
        self._rule, self._seen = rule, seen
        self._memo: dict[tuple[int, frozenset[int]], Any] = {}   # (state, live marks) → class

    def starts(self) -> list[Any]:
        """No marks at the start."""
        return [(t, s, gained, ()) for t, s, gained in super().starts()]

    def walk(self, i: int, position: Any, policy: dict[Any, int]) -> tuple[Any, Any]:
        """Follow the policy, leaving a mark at every misstep, until a class has no action or the episode ends."""
        return self._trace(position, lambda cls: policy.get(cls, -1), None)

    def play(self, position: Any, table: dict[Any, int], fallback: list[int]) -> tuple[float, dict[Any, Any]]:
        """Follow a complete policy (``table``, else ``fallback`` by view class) from ``position`` to the end:
        the return, and the position at which each class was first met."""
        first: dict[Any, Any] = {}
        end, _ = self._trace(position, lambda cls: table.get(cls, fallback[cls[0]]), first)
        return end[2], first

    def _trace(self, position: Any, act: Callable[[Any], int], first: dict[Any, Any] | None) -> tuple[Any, Any]:
        """Step from ``position`` while ``act`` (class → action, −1: stop) gives an action (``first``: filled
        with the position each class is first met at)."""
        t, s, gained, marks = position
        ns, rw, term, misstep, H, g = self._next, self._reward, self._terminal, self._misstep, self.H, self.g
        live, change = _live(marks, t)
        while t < H and not term[s]:
            if t >= change:
                live, change = _live(marks, t)
            cls = self._memo.get((s, live))
            if cls is None:
                cls = self._memo[(s, live)] = (self._class[s], self._seen(self._cell[s], live) if live else ())
            if first is not None and cls not in first:
                first[cls] = (t, s, gained, marks)
            a = act(cls)
            if a < 0:
                return (t, s, gained, marks), cls
            s2 = ns[s][a]
            gained += g ** t * (rw[s][a] + (self.timeout if t == H - 1 and not term[s2] else 0.0))
            if misstep[s][a]:
                aim = self._aim[s][a]
                marks = tuple(m for m in marks if m[0] != aim) + ((aim, int(self._rule.mark_until(t + 1))),)
                live, change = _live(marks, t + 1)
            s, t = s2, t + 1
        return (t, s, gained, marks), None


def _live(marks: tuple[tuple[int, int], ...], t: int) -> tuple[frozenset[int], int]:
    """The cells whose marks show at step ``t``, and the step at which that next changes."""
    return (frozenset(c for c, until in marks if until > t),
            min((until for _, until in marks if until > t), default=MARK_FOREVER))


def improve(rollout: MarkRollout, fallback: np.ndarray, trials: int) -> tuple[dict[Any, int], float, int]:
    """Hill climbing on a marks-reading policy from the view-only ``fallback``: change the action of one class
    the trajectories meet (the most visited first), keep the change when the exact mean return rises; until a
    pass changes nothing or ``trials`` changes were tried. Returns (the table, its value, trials used)."""
    weights, A, back = list(rollout.weights), rollout.num_actions, fallback.tolist()
    starts = rollout.starts()
    table: dict[Any, int] = {}
    runs = [rollout.play(p, table, back) for p in starts]
    used, changed = 0, True
    while changed and used < trials:
        changed = False
        mass: dict[Any, float] = {}
        for w, (_, first) in zip(weights, runs):
            for cls in first:
                mass[cls] = mass.get(cls, 0.0) + w
        for cls in sorted(mass, key=lambda c: -mass[c]):
            members = [i for i, (_, first) in enumerate(runs) if cls in first]
            current = table.get(cls, back[cls[0]])
            for a in range(A):
                if a == current or used >= trials:
                    continue
                used += 1
                table[cls] = a
                tried = [rollout.play(runs[i][1][cls], table, back)[0] for i in members]
                if sum(weights[i] * (v - runs[i][0]) for i, v in zip(members, tried)) > TOLERANCE:
                    for i in members:
                        runs[i] = rollout.play(starts[i], table, back)
                    current, changed = a, True
                    break
                table[cls] = current
    table = {cls: a for cls, a in table.items() if a != back[cls[0]]}
    return table, sum(w * value for w, (value, _) in zip(weights, runs)), used


class FirstMisstepRollout(TableRollout):
    """The relaxation of :mod:`this module <taskgen.analysis.pathchance>`: the view-only policy until the
    first misstep, then the full-information optimum (a trajectory closes at its first misstep: the table walk
    with the missteps as its closing moves)."""

    def __init__(self, model: TaskModel, classes: np.ndarray, rule: PathRule, sample: PathSample,
                 values: np.ndarray | None = None) -> None:
        super().__init__(model, classes, values)
        self._joint = None            # a trajectory closes at its first misstep: the bounds over states do not apply
        self._restrict = False
        self._closes = rule.missteps(model, sample).astype(bool).tolist()


@dataclass(frozen=True)
class MarkPolicy:
    """A deterministic memoryless policy of a field: an action per (view class, marks seen), defaulting to
    the view-only policy for a class it does not list."""

    view: np.ndarray                  # int[C]: view class per cell
    fallback: np.ndarray              # int[O]: action per view class
    table: dict[Any, int]             # (view class, seen) → action
    seen: Seen | None

    def action(self, cell: int, live: frozenset[int]) -> int:
        """The action at ``cell`` when the cells ``live`` show a mark."""
        view = int(self.view[cell])
        key = (view, self.seen(cell, live) if live and self.seen is not None else ())
        return self.table.get(key, int(self.fallback[view]))


def path_chance(model: TaskModel, rule: PathRule, sample: PathSample, view: np.ndarray, seen: Seen | None,
                budget: int = NODES) -> tuple[Chance, MarkPolicy]:
    """The chance figures of a field model (``view`` int[C]: view class per cell; ``seen``: what the
    observation shows of the marks, None when none is in view) and the deterministic policy reaching them."""
    classes = view[model.obs_key]
    if seen is None:
        chance = table_chance(model, classes, budget, FIELD_BLIND_CHANCE_CLASS, FIELD_STOCHASTIC_CLASS)
        assert chance.witness is not None
        return chance, MarkPolicy(view, chance.witness.policy, {}, None)
    began = time.perf_counter()
    blind = solve_memoryless(model, classes, budget)               # ignores the marks: a lower bound
    relaxed = search(FirstMisstepRollout(model, classes, rule, sample), budget)
    rollout = MarkRollout(model, classes, rule, sample, seen)
    walker = blind.policy.copy()          # the relaxation's view-only policy: it walks until it steps off
    for cls, action in relaxed.policy.items():
        walker[cls] = action
    climbs = [(improve(rollout, seed, max(budget // CLIMB_SHARE, 1)), seed) for seed in (blind.policy, walker)]
    (table, climbed, _), fallback = max(climbs, key=lambda climb: climb[0][1])
    marks = search(rollout, max(budget // MARK_SHARE, 1), incumbent=(climbed, table))
    policy = MarkPolicy(view, fallback, marks.policy, seen)
    runs = _roll(rule, sample, policy)
    met = {cls for start in rollout.starts() for cls in rollout.play(start, marks.policy, fallback.tolist())[1]}
    lower = float(runs.returns.mean())
    upper = max(min(relaxed.upper, marks.upper), lower)
    proven = marks.proven or upper - lower <= TOLERANCE
    upper = lower if proven else upper          # proven: the interval is the value itself
    seconds = time.perf_counter() - began
    nodes = blind.proof.nodes + relaxed.nodes + marks.nodes
    detail = (f"{nodes:,} nodes of branch and bound and {sum(c[0][2] for c in climbs):,} hill-climbing trials. "
              f"Ignoring the marks: {blind.mean_return:.6g} ({blind.method}); reading them: "
              f"{climbed:.6g} by hill climbing, {marks.value:.6g} after branch and bound "
              f"({'optimal, proven' if marks.proven else 'stopped at its budget'}); acting on the view alone until "
              f"the first misstep and knowing the path after it: at most {relaxed.upper:.6g}"
              f"{'' if relaxed.proven else ' (bounded)'}")
    det = Baseline.of(model.hidden, runs.success, runs.returns, runs.length, "exact" if proven else "bounded",
                      FIELD_CHANCE_CLASS, detail, upper=upper,
                      solver={"nodes": nodes, "seconds": round(seconds, 3), "classes": len(met), "proven": proven})
    stoch = best_stochastic(model, classes, [blind.policy, walker])
    return combine(model, det, None, stoch, None, FIELD_MARKS_STOCHASTIC_CLASS, runs.returns), policy


def _roll(rule: PathRule, sample: PathSample, policy: MarkPolicy) -> Rollouts:
    """Exact figures of ``policy`` on each sampled path, its own marks in view (rollouts.roll)."""
    def act(t: int, cell: np.ndarray, marked: np.ndarray, live: np.ndarray) -> np.ndarray:
        return np.asarray([policy.action(int(c), frozenset(np.flatnonzero(m).tolist())) for c, m in zip(cell, marked)])
    return roll(rule, sample.kind, sample.start, act)


__all__ = ["FIELD_BLIND_CHANCE_CLASS", "FIELD_CHANCE_CLASS", "FirstMisstepRollout", "MarkPolicy", "MarkRollout",
           "path_chance"]
