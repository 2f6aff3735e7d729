"""Stage 4 of the pipeline: the compiled finite task model that every later stage reads."""

from .compile import compile_variant, shortest_success_steps
from .field import FieldModel, compile_field
from .graph import distances_from, reachable
from .tables import TaskModel

__all__ = ["FieldModel", "TaskModel", "compile_field", "compile_variant", "distances_from", "reachable", "shortest_success_steps"]
