"""Stage 5a of the pipeline: exact analyses of a compiled model."""

from .baselines import (Baseline, cue_blind_baseline, cue_blind_policy, optimal_baseline, optimal_policy,
                        policy_figures, random_baseline)
from .checks import (Check, VariantReport, analyse, decision_steps, recall_distance,
                     recall_distances, shortest_solutions, solvability)
from .dp import Objective, at_reset, evaluate, hitting_times, optimise, return_variance, uniform_policy
from .leaks import Leak, Witness, carried_cue_witness, static_leak
from .memoryless import MemorylessResult, best_memoryless, evaluate_memoryless, observation_classes

__all__ = [
    "Baseline", "Check", "Leak", "MemorylessResult", "Objective", "VariantReport", "Witness", "analyse",
    "at_reset", "best_memoryless", "carried_cue_witness", "cue_blind_baseline", "cue_blind_policy",
    "decision_steps", "evaluate", "evaluate_memoryless", "hitting_times",
    "observation_classes", "optimal_baseline", "optimal_policy", "optimise", "policy_figures",
    "random_baseline", "recall_distance", "return_variance", "recall_distances", "shortest_solutions", "solvability",
    "static_leak", "uniform_policy",
]
