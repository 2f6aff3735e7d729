"""taskgen: compile YAML memory-task specs into seeded, checked Gymnasium environments.

Pipeline: spec text → :class:`Spec` → :class:`Variant` → :class:`TaskModel` (or, for a
hidden-path field, :class:`FieldModel`) → analyses, environments and renderers → the
``taskgen`` command line.
"""

from importlib.metadata import PackageNotFoundError, version

from .analysis import VariantReport, analyse
from .envs import (FieldEnv, FieldVectorEnv, TaskEnv, TaskVectorEnv, build_model, bundled_specs, make, make_vec,
                   register_bundled)
from .errors import AnalysisError, LayoutError, SpecError, TaskgenError
from .model import FieldModel, TaskModel, compile_field, compile_variant
from .spec import CueTaskSpec, FieldSpec, Spec, load_spec, load_spec_text
from .tools import check_variant
from .variant import Variant, make_variant

try:
    __version__ = version("taskgen")
except PackageNotFoundError:  # a source checkout that was never installed
    __version__ = "0.0.0+source"

register_bundled()

__all__ = [
    "AnalysisError", "CueTaskSpec", "FieldEnv", "FieldModel", "FieldSpec", "FieldVectorEnv", "LayoutError", "Spec", "SpecError", "TaskEnv", "TaskModel", "TaskVectorEnv", "TaskgenError",
    "Variant",
    "VariantReport", "__version__", "analyse", "build_model", "bundled_specs", "check_variant", "compile_field", "compile_variant",
    "load_spec", "load_spec_text", "make", "make_variant", "make_vec", "register_bundled",
]
