"""The hidden value a task draws at reset, as far as a model's tables cover it.

A cue has few values, so a model lists them all with their prior (:class:`EnumeratedSet`) and
every figure computed on it is an exact expectation. A hidden path has far too many values to
list, so a model covers a sample of them drawn from a recorded seed (:class:`SampledSet`) and
its figures are sample means with a standard error.
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from dataclasses import dataclass
from typing import Annotated, Any, Literal

from typing_extensions import TypedDict   # pydantic reads these as JSON shapes; it needs this one before 3.12

import numpy as np
from pydantic import ConfigDict, Field, with_config


@with_config(ConfigDict(extra="forbid"))
class HiddenJSON(TypedDict):
    """The hidden values a report's figures are computed over."""

    kind: Annotated[Literal["enumerated", "sampled"], Field(
        description="enumerated: every value (a cue), figures exact; sampled: a sample (paths), figures are "
        "sample means with standard errors.")]
    name: Annotated[str, Field(description="What one value is: cue, sampled path.")]
    count: Annotated[int, Field(description="How many values the model covers.")]
    seed: Annotated[int | None, Field(description="The variant seed a sample was drawn from (stream 3); null "
                                      "when enumerated.")]


class HiddenSet(ABC):
    """The hidden values a model's tables cover, each with its weight in the figures."""

    name: str                       # what one value is, in messages: "cue", "sampled path"

    @property
    @abstractmethod
    def count(self) -> int:
        """How many hidden values the tables cover."""

    @property
    @abstractmethod
    def weights(self) -> np.ndarray:
        """float64[count]: each value's weight in a figure (they sum to 1)."""

    @property
    @abstractmethod
    def exact(self) -> bool:
        """True when the values are all there are (figures are exact expectations)."""

    @abstractmethod
    def to_dict(self) -> HiddenJSON:
        """Plain data for reports."""


@dataclass(frozen=True, eq=False)
class EnumeratedSet(HiddenSet):
    """Every hidden value, with the probability of drawing it at reset."""

    prior: np.ndarray               # float64[count]
    name: str = "cue"

    @property
    def count(self) -> int:
        """How many hidden values there are."""
        return int(self.prior.size)

    @property
    def weights(self) -> np.ndarray:
        """The prior."""
        return self.prior

    @property
    def exact(self) -> bool:
        """Always True: nothing is left out."""
        return True

    def to_dict(self) -> HiddenJSON:
        """``kind: enumerated``, the value name and count, no seed."""
        return {"kind": "enumerated", "name": self.name, "count": self.count, "seed": None}


@dataclass(frozen=True, eq=False)
class SampledSet(HiddenSet):
    """A sample of hidden values, equally weighted, drawn from ``seed`` (None: values given by hand)."""

    sample: Any                     # the values, in the kind's own form (a field's: a PathSample)
    size: int
    seed: int | None
    name: str = "sampled path"

    @property
    def count(self) -> int:
        """How many values were sampled."""
        return self.size

    @property
    def weights(self) -> np.ndarray:
        """1 / count each."""
        return np.full(self.size, 1.0 / self.size)

    @property
    def exact(self) -> bool:
        """Always False: figures are sample means."""
        return False

    def to_dict(self) -> HiddenJSON:
        """``kind: sampled``, the value name, the sample size and its seed."""
        return {"kind": "sampled", "name": self.name, "count": self.size, "seed": self.seed}
