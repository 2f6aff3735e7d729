"""Stage 5a of the pipeline: exact analyses of a compiled model."""

from .baselines import (Baseline, chance_baseline, cue_blind_policy, optimal_baseline, optimal_policy,
                        random_baseline)
from .checks import (Check, VariantReport, analyse, decision_step, recall_distance, shortest_solutions,
                     solvability)
from .dp import Objective, at_reset, evaluate, hitting_times, optimise, uniform_policy

__all__ = [
    "Baseline", "Check", "Objective", "VariantReport", "analyse", "at_reset", "chance_baseline",
    "cue_blind_policy", "decision_step", "evaluate", "hitting_times", "optimal_baseline", "optimal_policy",
    "optimise", "random_baseline", "recall_distance", "shortest_solutions", "solvability", "uniform_policy",
]
