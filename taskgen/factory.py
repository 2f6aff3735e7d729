"""Build environments from a spec, a spec file, a bundled spec name or a manifest; register bundled specs."""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any, Sequence

import gymnasium as gym
import yaml

from .envs import TaskEnv, TaskVectorEnv
from .kinds import compile_variant, kind_of, make_variant
from .manifest import ManifestError, entry_model, is_manifest, load_manifest, split_entries, split_variants
from .model import TaskModel
from .render import ObservationSet
from .spec import CueTaskSpec, FieldSpec, Spec, load_spec, load_spec_text

NAMESPACE = "taskgen"


def bundled_specs() -> dict[str, Path]:
    """The example specs shipped with taskgen, by spec file stem."""
    package = Path(__file__).resolve().parent
    folder = package / "_specs"            # an installed copy
    if not folder.is_dir():
        folder = package.parent / "specs"  # a source checkout
    return {p.stem: p for p in sorted(folder.glob("*.yaml"))}


def resolve_spec(spec_or_path: Spec | str | os.PathLike[str], **overrides: Any) -> Spec:
    """A Spec as given, or loaded from a path or a bundled spec's name."""
    if isinstance(spec_or_path, (CueTaskSpec, FieldSpec)):
        if overrides:  # re-validate with the overrides applied
            return load_spec_text(yaml.safe_dump(spec_or_path.model_dump(mode="json")),
                                  f"<spec {spec_or_path.name}>", **overrides)
        return spec_or_path
    path = Path(spec_or_path)
    if not path.exists() and str(spec_or_path) in bundled_specs():
        path = bundled_specs()[str(spec_or_path)]
    if path.is_file() and is_manifest(path):
        raise ManifestError(f"{path}: this is a variant manifest, not a spec; load its variants with "
                            "taskgen.make(manifest, split=..., index=...) or taskgen.make_vec(manifest, n, split=...)")
    return load_spec(path, **overrides)


def build_model(spec_or_path: Spec | str | os.PathLike[str], seed: int | None = None,
                **overrides: Any) -> TaskModel:
    """Spec → variant (``seed``, default 0) → compiled model, in one call."""
    spec = resolve_spec(spec_or_path, **overrides)
    return compile_variant(make_variant(spec, 0 if seed is None else seed))


def _built(spec: Spec, seed: int) -> tuple[TaskModel, ObservationSet]:
    """A variant's model and what its agent sees."""
    model = compile_variant(make_variant(spec, seed))
    return model, kind_of(model).observations(model, spec.observation)


def _manifest_path(spec_or_path: Any) -> str | None:
    if isinstance(spec_or_path, (str, os.PathLike)) and Path(spec_or_path).is_file() and is_manifest(spec_or_path):
        return os.fspath(spec_or_path)
    return None


def make(spec_or_path: Spec | str | os.PathLike[str], seed: int | None = None,
         render_mode: str | None = None, split: str | None = None, index: int | None = None,
         **overrides: Any) -> TaskEnv:
    """A ``gymnasium.Env`` for one variant of a spec, or from a variant manifest.

    ``seed`` names the variant (its sampled parameters and layout; None means variant 0);
    episodes are seeded as usual through ``reset(seed=...)``. Overrides replace spec fields,
    with ``__`` between keys: ``make("specs/x.yaml", layout__corridor__length=12)``.

    With a manifest (``taskgen variants``): ``make(manifest, split="test", index=3)`` is that
    listed variant (its fingerprint checked), and ``make(manifest, split="train")`` draws a
    variant of the split at every reset.
    """
    manifest_path = _manifest_path(spec_or_path)
    if manifest_path is not None:
        if split is None:
            raise ManifestError(f"{manifest_path}: a manifest needs split= (and index= for one variant)")
        if seed is not None or overrides:
            raise ManifestError("a manifest fixes seeds and parameters: give split= and index= only")
        if index is None:
            spec, variants = split_variants(manifest_path, split)
            return TaskEnv(kind_of(spec).core(variants, 1, draw=True), render_mode=render_mode)
        manifest = load_manifest(manifest_path)
        entries = split_entries(manifest, split, manifest_path)
        if not 0 <= index < len(entries):
            raise ManifestError(f"{manifest_path}: split {split!r} has {len(entries)} variants, no index {index}")
        spec, model = entry_model(manifest, entries[index], manifest_path)
        kind = kind_of(spec)
        return TaskEnv(kind.core([(model, kind.observations(model, spec.observation))], 1), render_mode=render_mode)
    if split is not None or index is not None:
        raise ManifestError("split= and index= need a manifest written by `taskgen variants`")
    spec = resolve_spec(spec_or_path, **overrides)
    return TaskEnv(kind_of(spec).core([_built(spec, 0 if seed is None else seed)], 1), render_mode=render_mode)


def make_vec(spec_or_path: Spec | str | os.PathLike[str], num_envs: int, seed: int | None = None,
             variants: Sequence[int] | None = None, render_mode: str | None = None, split: str | None = None,
             **overrides: Any) -> TaskVectorEnv:
    """A ``gymnasium.vector.VectorEnv`` of ``num_envs`` environments stepped together in numpy.

    All environments hold the variant ``seed`` (None: variant 0), or environment i holds variant
    ``variants[i]`` (one batch across many layouts, for kinds whose batches may mix variants).
    Episodes are seeded through ``reset(seed=...)`` as in gymnasium's vector envs: an int gives
    env i the seed ``seed + i``. With a manifest and ``split=``, every environment draws a
    variant of the split at each reset.
    """
    if not isinstance(num_envs, int) or num_envs < 1:
        raise ValueError(f"num_envs must be an integer ≥ 1, got {num_envs!r}")
    manifest_path = _manifest_path(spec_or_path)
    if manifest_path is not None:
        if split is None or seed is not None or variants is not None or overrides:
            raise ManifestError(f"{manifest_path}: with a manifest give split= only")
        spec, pool = split_variants(manifest_path, split)
        return TaskVectorEnv(kind_of(spec).core(pool, num_envs, draw=True), render_mode=render_mode)
    if split is not None:
        raise ManifestError("split= needs a manifest written by `taskgen variants`")
    spec = resolve_spec(spec_or_path, **overrides)
    if variants is None:
        variants = [0 if seed is None else seed] * num_envs
    elif seed is not None:
        raise ValueError("give either seed (one variant for all) or variants (one per env), not both")
    variants = list(variants)
    if len(variants) != num_envs:
        raise ValueError(f"variants must name one variant seed per env: {num_envs} needed, got {len(variants)}")
    kind = kind_of(spec)
    if not kind.pools and len(set(variants)) > 1:
        raise ValueError(f"a batch of a {kind.name} spec holds one variant (its hidden values differ per episode): "
                         "give seed=, not several variants")
    built: dict[int, tuple[TaskModel, ObservationSet]] = {}
    for v in variants:
        if v not in built:
            built[v] = _built(spec, v)
    return TaskVectorEnv(kind.core([built[v] for v in variants], num_envs), render_mode=render_mode)


def register_bundled() -> list[str]:
    """Register every bundled spec as ``taskgen/<name>-v0`` (idempotent); returns the IDs."""
    ids = []
    for stem, path in bundled_specs().items():
        env_id = f"{NAMESPACE}/{stem}-v0"
        if env_id not in gym.registry:
            gym.register(id=env_id, entry_point="taskgen.factory:make",
                         vector_entry_point="taskgen.factory:make_vec",
                         kwargs={"spec_or_path": str(path)}, disable_env_checker=False)
        ids.append(env_id)
    return ids
