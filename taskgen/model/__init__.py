"""Stage 4 of the pipeline: the compiled finite task model that every later stage reads."""

from .cue import compile_cue
from .graph import distances_from, reachable, shortest_success_steps
from .hidden import EnumeratedSet, HiddenSet, SampledSet
from .paths import PathRule, PathSample
from .tables import CueStructure, Tables, TaskModel

__all__ = ["CueStructure", "EnumeratedSet", "HiddenSet", "PathRule", "PathSample", "SampledSet", "Tables",
           "TaskModel", "compile_cue", "distances_from", "reachable", "shortest_success_steps"]
