"""Stage 5c of the pipeline: observation keys → arrays (vectors, pictures)."""

from .topdown import TopDownRenderer
from .observations import ObservationSet, observation_set
from .vector import VectorLayout, vector_layout

__all__ = ["ObservationSet", "TopDownRenderer", "VectorLayout", "observation_set", "vector_layout"]
