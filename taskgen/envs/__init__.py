"""Stage 5b of the pipeline: Gymnasium runtimes over the compiled model."""

from .field import FieldEnv, FieldVectorEnv
from .factory import build_field, build_model, bundled_specs, make, make_vec, register_bundled, resolve_spec
from .single import TaskEnv
from .vector import TaskVectorEnv

__all__ = ["FieldEnv", "FieldVectorEnv", "TaskEnv", "build_field", "TaskVectorEnv", "build_model", "bundled_specs", "make", "make_vec", "register_bundled",
           "resolve_spec"]
