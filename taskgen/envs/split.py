"""Environments from a variant manifest: one variant, or a new variant of a split at every reset."""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any

import gymnasium as gym
import numpy as np
import yaml
from gymnasium import spaces

from ..errors import TaskgenError
from ..model import FieldModel, TaskModel, compile_field, compile_variant
from ..render import observation_set
from ..render.observations import ObservationSet, assemble
from ..render.vector import common_blocks, scatter_index
from ..spec import Spec, load_spec_text
from ..variant import make_variant
from .single import TaskEnv
from .streams import next_episode, subkeys, uniform

MANIFEST_KEY = "taskgen_manifest"


class ManifestError(TaskgenError, ValueError):
    """A manifest that cannot be read, or whose variants no longer reproduce."""


def is_manifest(path: str | os.PathLike[str]) -> bool:
    """True for a file written by `taskgen variants` (its first line names the format)."""
    try:
        with open(path, encoding="utf-8") as handle:
            return handle.readline().startswith(f"{MANIFEST_KEY}:")
    except (OSError, UnicodeDecodeError):
        return False


def load_manifest(path: str | os.PathLike[str]) -> dict[str, Any]:
    """Read a manifest (safe loader; the C loader when PyYAML has it, for large suites)."""
    loader = getattr(yaml, "CSafeLoader", yaml.SafeLoader)
    try:
        data = yaml.load(Path(path).read_text(encoding="utf-8"), Loader=loader)
    except (OSError, yaml.YAMLError) as exc:
        raise ManifestError(f"{path}: not a readable manifest ({exc})") from None
    if not isinstance(data, dict) or data.get(MANIFEST_KEY) != 1 or "variants" not in data:
        raise ManifestError(f"{path}: expected a taskgen manifest of format 1")
    return data


def split_entries(manifest: dict[str, Any], split: str, source: str = "manifest") -> list[dict[str, Any]]:
    """The variants of one split, in index order."""
    entries = [v for v in manifest["variants"] if v["split"] == split]
    if not entries:
        names = sorted({v["split"] for v in manifest["variants"]})
        raise ManifestError(f"{source}: no split {split!r} (splits: {', '.join(names)})")
    return entries


def entry_model(manifest: dict[str, Any], entry: dict[str, Any],
                source: str = "manifest") -> tuple[Spec, TaskModel | FieldModel]:
    """Rebuild one listed variant and check that it still has its recorded fingerprint."""
    from ..analysis.fingerprint import field_fingerprint, fingerprint

    overrides = {key.replace(".", "__"): value for key, value in (entry.get("overrides") or {}).items()}
    spec = load_spec_text(yaml.safe_dump(manifest["spec"]), f"{source} (embedded spec)", **overrides)
    variant = make_variant(spec, int(entry["seed"]))
    model: TaskModel | FieldModel
    if spec.layout.family == "field":
        model = compile_field(variant)
        found = field_fingerprint(model)
    else:
        model = compile_variant(variant)
        found = fingerprint(model)
    if found != entry["fingerprint"]:
        raise ManifestError(f"{source}: variant {entry['id']} no longer reproduces its fingerprint (the manifest "
                            f"was written by taskgen {manifest.get('taskgen_version')})")
    return spec, model


class SplitEnv(gym.Env):
    """Draws one variant of a split at every reset (training across many layouts).

    The draw uses the env's counter-based stream (purpose 'variant'), like the batched runtime,
    so a batch over the same split equals a SyncVectorEnv of SplitEnvs. Observation blocks are
    as wide as the widest variant's, zero-padded at their ends. ``info["variant_id"]`` names the
    variant of the current episode.
    """

    metadata = {"render_modes": ["rgb_array"], "render_fps": 6}

    def __init__(self, variants: list[tuple[TaskModel, ObservationSet]], render_mode: str | None = None) -> None:
        self.envs = [TaskEnv(m, o, render_mode=render_mode) for m, o in variants]
        self.render_mode = render_mode
        self._observations = variants[0][1]
        parts = self._observations.spaces()
        self._scatter = None
        if self._observations.vector is not None:
            vectors = [o.vector for _, o in variants]
            self.observation_blocks = common_blocks(vectors)
            size = max((b.stop for b in self.observation_blocks.values()), default=0)
            self._scatter = [scatter_index(v, self.observation_blocks) for v in vectors]
            parts["vector"] = spaces.Box(0.0, 1.0, shape=(size,), dtype=np.float32)
        self.observation_space = next(iter(parts.values())) if len(parts) == 1 else spaces.Dict(parts)
        self.action_space = spaces.Discrete(self.envs[0].model.num_actions)
        self._current = 0
        self._stream: int | None = None
        self._episode = 0

    def _widen(self, obs: Any) -> Any:
        """The variant's vector laid out in the split's common blocks (other modalities as they are)."""
        if self._scatter is None:
            return obs
        parts = {self._observations.names[0]: obs} if self._observations.single else dict(obs)
        space = self.observation_space if self._observations.single else self.observation_space["vector"]
        wide = np.zeros(space.shape, dtype=np.float32)
        wide[self._scatter[self._current]] = parts["vector"]
        parts["vector"] = wide
        return assemble(self._observations, parts)

    def reset(self, *, seed: int | None = None, options: dict[str, Any] | None = None):
        """Draw a variant of the split, then start its episode from the same stream."""
        super().reset(seed=seed)
        self._stream, self._episode, key = next_episode(self._stream, self._episode, seed is not None,
                                                        self.np_random)
        count = len(self.envs)
        self._current = min(int(uniform(subkeys(key, "variant"))[0] * count), count - 1)
        obs, info = self.envs[self._current]._start(key)
        return self._widen(obs), info

    def step(self, action: int):
        """Step the current variant."""
        obs, reward, terminated, truncated, info = self.envs[self._current].step(action)
        return self._widen(obs), reward, terminated, truncated, info

    def render(self) -> np.ndarray | None:
        """The current variant's picture."""
        return self.envs[self._current].render()


def manifest_variants(path: str | os.PathLike[str], split: str) -> list[tuple[TaskModel, ObservationSet]]:
    """Every variant of a split as (model, vector layout), fingerprints checked."""
    manifest = load_manifest(path)
    if "field" in (manifest["spec"].get("layout") or {}) and manifest["spec"]["layout"]["field"] is not None:
        raise ManifestError(f"{path}: a field suite's variants differ in size, so they load one at a time: "
                            "taskgen.make(manifest, split=..., index=...) (each one draws a new path per episode)")
    out = []
    for entry in split_entries(manifest, split, str(path)):
        spec, model = entry_model(manifest, entry, str(path))
        out.append((model, observation_set(model, spec.observation)))
    return out
