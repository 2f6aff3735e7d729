"""Stage 1 of the pipeline: spec text → validated :class:`Spec`."""

from .loader import load_spec, load_spec_text
from .params import IntParam
from .schema import FORMAT_VERSION, CueTaskSpec, FieldSpec, Spec

__all__ = ["FORMAT_VERSION", "CueTaskSpec", "FieldSpec", "IntParam", "Spec", "load_spec", "load_spec_text"]
