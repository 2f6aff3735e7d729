"""Stage 5b of the pipeline: Gymnasium runtimes: one shell of each kind over a task kind's core."""

from .core import Core
from .paths import PathCore
from .single import TaskEnv
from .tables import TableCore
from .vector import TaskVectorEnv

__all__ = ["Core", "PathCore", "TableCore", "TaskEnv", "TaskVectorEnv"]
