"""Stage 3 of the pipeline: a validated spec and a seed → one concrete variant."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from .generate import GridLayout, corridor_layout
from .limits import check_bytes, check_work
from .spec import Spec

# Streams spawned from a variant seed, so a new kind of draw (a maze layout, say) gets its own
# stream and never shifts the parameters drawn here.
_PARAMS_STREAM = 0


@dataclass(frozen=True, eq=False)
class Variant:
    """One draw of a spec: concrete parameter values and the layout they give."""

    spec: Spec
    seed: int
    params: dict[str, Any]
    layout: GridLayout

    @property
    def variant_id(self) -> str:
        """Stable name of this variant: ``<spec name>-s<seed>``."""
        return f"{self.spec.name}-s{self.seed}"


def variant_rng(seed: int, stream: int) -> np.random.Generator:
    """The generator of one named stream of a variant seed."""
    return np.random.default_rng(np.random.SeedSequence(entropy=seed, spawn_key=(stream,)))


def make_variant(spec: Spec, seed: int = 0) -> Variant:
    """Draw the variant of ``spec`` that ``seed`` names (same spec and seed, same variant)."""
    if not isinstance(seed, (int, np.integer)) or isinstance(seed, bool) or seed < 0:
        raise ValueError(f"variant seed must be an integer ≥ 0, got {seed!r}")
    seed = int(seed)
    rng = variant_rng(seed, _PARAMS_STREAM)
    corridor = spec.layout.corridor
    params = {
        "length": corridor.length.sample(rng),
        "arm_length": corridor.arm_length.sample(rng),
        "width": corridor.width,
        "cue_values": spec.cue.values,
        "visible_steps": spec.cue.visible_steps,
    }
    _check_size(spec, params, f"{spec.name}-s{seed}")
    layout = corridor_layout(params["length"], params["arm_length"], params["cue_values"], params["width"])
    return Variant(spec=spec, seed=seed, params=params, layout=layout)


def _check_size(spec: Spec, params: dict[str, Any], what: str) -> None:
    """Estimate the compiled sizes from the numbers alone and refuse what is over the caps."""
    k, n = params["cue_values"], params["visible_steps"]
    cells = params["length"] * params["width"] + (2 * k - 1) + k * params["arm_length"]
    longest = params["length"] + (k - 1) + params["arm_length"]       # farthest arm end
    horizon = spec.episode.max_steps
    if horizon == "auto":
        horizon = int(np.ceil(spec.episode.max_steps_factor * longest))
    check_work(what, cells * (n + 1) * k, 4, max(horizon, 1))
    vector = spec.observation.vector
    width = k + 4 + (cells if vector.position == "one_hot" else 2)
    check_bytes(f"{what}: the observation table", cells * (k + 1) * width * 4)
    rows, cols = max(2 * k - 1, k - 1 + params["width"]), params["length"] + params["arm_length"] + 1
    check_bytes(f"{what}: a top-down picture", (rows + 3) * (cols + 2) * 12 * 12 * 3)
