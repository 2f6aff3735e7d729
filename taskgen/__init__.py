"""taskgen: compile YAML memory-task specs into seeded, checked Gymnasium environments.

Pipeline: spec text → :data:`Spec` → :class:`Variant` → :class:`TaskModel` → analyses,
environments and renderers → the ``taskgen`` command line. What differs between families of
tasks (cue corridors and mazes, hidden-path fields) lives in one registered kind each
(:mod:`taskgen.kinds`).
"""

from importlib.metadata import PackageNotFoundError, version

from .analysis import Report
from .envs import TaskEnv, TaskVectorEnv
from .errors import AnalysisError, LayoutError, SpecError, TaskgenError
from .factory import build_model, bundled_specs, make, make_vec, register, register_bundled
from .kinds import analyse, compile_variant, kind_of, make_variant, observation_set
from .model import TaskModel
from .spec import CueTaskSpec, FieldSpec, Spec, load_spec, load_spec_text
from .tools import check_variant
from .tools.evaluate import Evaluation, evaluate
from .variant import Variant

try:
    __version__ = version("taskgen")
except PackageNotFoundError:  # a source checkout that was never installed
    __version__ = "0.0.0+source"

register_bundled()

__all__ = [
    "AnalysisError", "CueTaskSpec", "Evaluation", "FieldSpec", "LayoutError", "Report", "Spec", "SpecError", "TaskEnv",
    "TaskModel", "TaskVectorEnv", "TaskgenError", "Variant", "__version__", "analyse", "build_model",
    "bundled_specs", "check_variant", "compile_variant", "evaluate", "kind_of", "load_spec", "load_spec_text", "make",
    "make_variant", "make_vec", "observation_set", "register", "register_bundled",
]
