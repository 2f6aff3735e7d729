"""Stage 5c of the pipeline: observation keys → arrays (vectors, pictures), and pictures for people."""

from .marks import MarkOverlay, path_observation_set
from .observations import ObservationSet, key_classes, observation_set
from .pictures import PathPictures, truth_picture
from .topdown import TopDownRenderer
from .vector import VectorLayout, vector_layout

__all__ = ["MarkOverlay", "ObservationSet", "PathPictures", "TopDownRenderer", "VectorLayout", "truth_picture",
           "key_classes", "observation_set", "path_observation_set", "vector_layout"]
