"""Stage 5c of the pipeline: observation keys → arrays (vectors, pictures)."""

from .topdown import TopDownRenderer
from .vector import VectorLayout, vector_layout

__all__ = ["TopDownRenderer", "VectorLayout", "vector_layout"]
