"""Stage 3 of the pipeline: what a variant is, the seeded streams it is drawn from, and the step-limit rule.

How a spec's parameters and layout are drawn is up to its kind (``taskgen.kinds``); every kind
draws from the streams below and returns a :class:`Variant`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Protocol

import numpy as np

from .generate import GridLayout
from .spec import Spec
from .spec.schema import Episode

# Streams spawned from a variant seed, so each kind of draw has its own and adding a draw to
# one never shifts another.
PARAMS_STREAM = 0
LAYOUT_STREAM = 1
PLACEMENT_STREAM = 2
SAMPLE_STREAM = 3        # the hidden values a model's analyses are computed on (paths of a field)


class Params(Protocol):
    """The concrete parameter values of one variant (a frozen dataclass per layout family)."""

    def to_dict(self) -> dict[str, Any]:
        """The values as plain data, for reports and manifests."""


@dataclass(frozen=True, eq=False)
class Variant:
    """One draw of a spec: concrete parameter values and the layout they give."""

    spec: Spec
    seed: int
    params: Params
    layout: GridLayout

    @property
    def variant_id(self) -> str:
        """Stable name of this variant: ``<spec name>-s<seed>`` (see :func:`variant_name`)."""
        return variant_name(self.spec, self.seed)


def variant_name(spec: Spec, seed: int) -> str:
    """``<spec name>-s<seed>``, or ``<spec name>+<digest>-s<seed>`` for a spec loaded with overrides:
    how reports, errors and infos name a variant."""
    return f"{spec.name}{spec.override_tag}-s{seed}"


def check_seed(seed: Any) -> int:
    """A variant seed as an int, refused unless it is an integer ≥ 0."""
    if not isinstance(seed, (int, np.integer)) or isinstance(seed, bool) or seed < 0:
        raise ValueError(f"variant seed must be an integer ≥ 0, got {seed!r}")
    return int(seed)


def variant_rng(seed: int, stream: int, attempt: int = 0) -> np.random.Generator:
    """The generator of one named stream of a variant seed (and of one layout attempt)."""
    key = (stream,) if attempt == 0 else (stream, attempt)
    return np.random.default_rng(np.random.SeedSequence(entropy=seed, spawn_key=key))


def horizon(episode: Episode, longest: int) -> int:
    """The step limit: ``max_steps`` as given, or with 'auto' ``ceil(max_steps_factor × longest)``,
    where ``longest`` is the longest shortest solution (compiling) or a bound on it (estimating
    sizes before compiling). At least 1."""
    if episode.max_steps != "auto":
        return int(episode.max_steps)
    return max(1, math.ceil(episode.max_steps_factor * max(longest, 0)))
