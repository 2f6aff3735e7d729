"""Stage 5b of the pipeline: Gymnasium runtimes over the compiled model."""

from .factory import build_model, bundled_specs, make, register_bundled, resolve_spec
from .single import TaskEnv

__all__ = ["TaskEnv", "build_model", "bundled_specs", "make", "register_bundled", "resolve_spec"]
