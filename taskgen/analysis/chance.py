"""The chance level: the best agent without memory, certified where it can be, and the checks it decides.

Two classes of memoryless agents act on the current observation only (noise excluded):

- ``chance``: deterministic (an action per observation class). Its best policy is found by branch
  and bound (policysearch.py) and reported as an interval on its return: ``exact`` (lower = upper,
  optimality proven) or ``bounded`` (the policy found, and a certified upper bound) when the node
  budget ends first.
- ``chance_stochastic``: stochastic (action probabilities per class), found by gradient ascent on
  the exact return (stochastic.py): a lower bound, labelled so; no certificate exists in general.

The chance level the checks use is the larger of the two. A check passes only when the certified
bounds prove it, fails when a policy found refutes it, and is ``undecided`` (with the interval)
when the bounds straddle its threshold. For stochastic policies no upper bound is known beyond
the deterministic class's, so a pass certifies the deterministic class and reports the best
stochastic policy found beside it.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np

from ..model import TaskModel
from .baselines import per_value, policy_figures
from .memoryless import MemorylessResult, solve_memoryless
from .policysearch import NODES, SearchResult
from .report import TOLERANCE, Baseline, ChanceLevelJSON, Check, Figure, SolverJSON
from .stochastic import StochasticResult, best_stochastic

CHANCE_CLASS = "memoryless, deterministic: acts on the current observation only (noise excluded)"
STOCHASTIC_CLASS = ("memoryless, stochastic: action probabilities per current observation (noise excluded); "
                    "the best found, a lower bound (Singh, Jaakkola & Jordan, ICML 1994)")


def solver(result: SearchResult) -> SolverJSON:
    """A search's statistics as report data."""
    return {"nodes": result.nodes, "seconds": round(result.seconds, 3), "classes": result.classes,
            "proven": result.proven}


@dataclass(frozen=True)
class Chance:
    """Both memoryless figures of a variant, per hidden value, and the chance level they give."""

    deterministic: Baseline
    stochastic: Baseline
    returns: np.ndarray               # float[count]: per hidden value, the return of the policy at the level
    witness: MemorylessResult | None  # the deterministic policy, where it is a table of classes

    @property
    def lower(self) -> float:
        """The chance level: the best return a memoryless policy found reaches."""
        det, stoch = self.deterministic.interval[0], self.stochastic.interval[0]
        return max(det, stoch)

    @property
    def upper(self) -> float:
        """No deterministic memoryless policy scores more, and no stochastic one found did."""
        det_upper = self.deterministic.interval[1]
        return max(det_upper if det_upper is not None else np.inf, self.stochastic.interval[0])

    @property
    def reached_by(self) -> Literal["deterministic", "stochastic"]:
        """Which class reached the chance level."""
        return "stochastic" if self.stochastic.interval[0] > self.deterministic.interval[0] + TOLERANCE \
            else "deterministic"

    def level(self) -> ChanceLevelJSON:
        """The chance level as report data."""
        return {"lower": self.lower, "upper": self.upper, "reached_by": self.reached_by}

    def words(self) -> str:
        """The level and its interval in words, for check reasons."""
        if self.upper - self.lower <= TOLERANCE:
            return f"chance {self.lower:.6g} ({self.reached_by}, {self.deterministic.method})"
        return f"chance in [{self.lower:.6g}, {self.upper:.6g}] ({self.reached_by} policy found, bounded)"


def table_chance(model: TaskModel, classes: np.ndarray, budget: int = NODES,
                 policy_class: str = CHANCE_CLASS, stochastic_class: str = STOCHASTIC_CLASS) -> Chance:
    """Both figures where the observation class is a function of the state, ``classes`` int[S] (every cue
    task; a field whose agent sees no marks)."""
    det = solve_memoryless(model, classes, budget)
    stoch = best_stochastic(model, det.classes, [det.policy])
    return combine(model, deterministic_baseline(model, det, policy_class), det.state_policy(model.horizon), stoch,
                   det, stochastic_class)


def deterministic_baseline(model: TaskModel, det: MemorylessResult, policy_class: str = CHANCE_CLASS) -> Baseline:
    """The deterministic memoryless figure: the proven (or best found) policy's figures and the interval."""
    figures = policy_figures(model, det.state_policy(model.horizon), policy_class, det.method, det.detail)
    return Baseline(figures.success_rate, figures.mean_return, figures.mean_length, det.method, policy_class,
                    det.detail, lower=det.mean_return, upper=det.upper, solver=solver(det.proof))


def combine(model: TaskModel, deterministic: Baseline, det_policy: np.ndarray | None, stoch: StochasticResult,
            witness: MemorylessResult | None, stochastic_class: str = STOCHASTIC_CLASS,
            det_returns: np.ndarray | None = None) -> Chance:
    """The chance figures from a deterministic figure and the stochastic search (per-value returns of the
    level's policy from the model, or ``det_returns`` where the deterministic policy reads more than the state)."""
    stochastic = policy_figures(model, stoch.state_policy(), stochastic_class, "search lower bound", stoch.detail)
    stochastic = Baseline(stochastic.success_rate, stochastic.mean_return, stochastic.mean_length,
                          "search lower bound", stochastic_class, stoch.detail, lower=stoch.mean_return, upper=None)
    use_stochastic = stoch.mean_return > deterministic.interval[0] + TOLERANCE
    if use_stochastic:
        returns = per_value(model, stoch.state_policy())
    elif det_returns is not None:
        returns = det_returns
    else:
        assert det_policy is not None
        returns = per_value(model, det_policy)
    return Chance(deterministic, stochastic, returns, witness)


def gap(model: TaskModel, optimal: np.ndarray, chance: Chance) -> Figure:
    """Optimal − chance return per hidden value, summarised (its method says whether it is exact)."""
    exact = chance.upper - chance.lower <= TOLERANCE
    method = "exact" if exact else "bounded: optimal − chance in " \
        f"[{float(model.hidden.weights @ optimal) - chance.upper:.6g}, {float(model.hidden.weights @ optimal) - chance.lower:.6g}]"
    return Figure.over(model.hidden, np.asarray(optimal) - chance.returns, method, "optimal − chance")


def gap_check(optimal: float, chance: Chance, min_gap: float, remembered: str, over: str = "") -> Check:
    """Optimal − chance must be positive and at least ``min_gap``: proven on the certified upper bound of
    chance, refuted by a policy found; undecided in between."""
    low, high = optimal - chance.upper, optimal - chance.lower
    where = f" ({over})" if over else ""
    need = f" (minimum {min_gap:g})" if min_gap else ""
    if low > TOLERANCE and low >= min_gap - TOLERANCE:
        return Check("memory gap", True, f"optimal − chance {_span(low, high)}{where}{need}; {chance.words()}")
    if high <= TOLERANCE or high < min_gap - TOLERANCE:
        return Check("memory gap", False, f"optimal − chance {_span(low, high)}{where}{need}: remembering "
                     f"{remembered} does not pay enough; {chance.words()}")
    return Check("memory gap", False, f"undecided: optimal − chance {_span(low, high)}{where}{need}; "
                 f"{chance.words()}; a larger --chance-budget may decide it", undecided=True)


def carried_check(blind: float, chance: Chance, witness_text: str, diverge: int | None) -> Check:
    """No memoryless policy may beat the best cue-blind agent: one that does carries the cue in where or
    when it walks. Passes when the certified bound proves none can; fails on a policy that does."""
    if chance.lower > blind + TOLERANCE:
        who = "a stochastic memoryless policy" if chance.reached_by == "stochastic" else "a memoryless policy"
        return Check("no carried cue", False,
                     f"{who} beats the cue-blind agent by {chance.lower - blind:.6g}: the cue is carried in position "
                     "or timing" + (f"; paths part at step {diverge}" if diverge is not None and witness_text else ""))
    if chance.upper <= blind + TOLERANCE:
        proof = "proven for deterministic policies" if chance.deterministic.method == "exact" else \
            "the certified bound of deterministic policies"
        return Check("no carried cue", True, f"no memoryless policy beats the cue-blind agent ({proof}; the "
                     "stochastic search found none either)")
    return Check("no carried cue", False, f"undecided: the best memoryless policy scores {_span(chance.lower, chance.upper)}"
                 f", the cue-blind agent {blind:.6g}; a larger --chance-budget may decide it", undecided=True)


def _span(low: float, high: float) -> str:
    return f"= {low:.6g}" if abs(high - low) <= TOLERANCE else f"in [{low:.6g}, {high:.6g}]"


__all__ = ["CHANCE_CLASS", "STOCHASTIC_CLASS", "Chance", "carried_check", "combine", "deterministic_baseline", "gap",
           "gap_check", "solver", "table_chance"]
