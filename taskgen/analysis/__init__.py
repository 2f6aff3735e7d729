"""Stage 5a of the pipeline: exact analyses of a compiled model, and the one report they fill in."""

from .baselines import (cue_blind_baseline, cue_blind_policy, optimal_baseline, optimal_policy, per_value,
                        policy_figures, random_baseline, shortest_solutions, shortest_steps)
from .cue import (CueDetails, Leak, Witness, analyse_cue, carried_cue_witness, decision_steps, recall_distance,
                  recall_distances, static_leak)
from .dp import Objective, at_reset, evaluate, hitting_times, optimise, return_variance, uniform_policy
from .memoryless import MemorylessResult, best_memoryless, evaluate_memoryless, observation_classes
from .paths import PathDetails, analyse_paths
from .report import Baseline, Check, Figure, Report

__all__ = [
    "Baseline", "Check", "CueDetails", "Figure", "Leak", "MemorylessResult", "Objective", "PathDetails", "Report",
    "Witness", "analyse_cue", "analyse_paths", "at_reset", "best_memoryless", "carried_cue_witness",
    "cue_blind_baseline", "cue_blind_policy", "decision_steps", "evaluate", "evaluate_memoryless",
    "hitting_times", "observation_classes", "optimal_baseline", "optimal_policy", "optimise", "per_value",
    "policy_figures", "random_baseline", "recall_distance", "recall_distances", "return_variance",
    "shortest_solutions", "shortest_steps", "static_leak", "uniform_policy",
]
