"""Build environments from a spec, a spec file, a bundled spec name or a manifest; register bundled specs."""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any, Iterable, Sequence

import gymnasium as gym
import yaml
from gymnasium.envs.registration import EnvSpec
from gymnasium.vector import AutoresetMode

from .envs import TaskEnv, TaskVectorEnv
from .kinds import compile_variant, family_observations, kind_of, make_variant
from .manifest import (ManifestError, entry_model, is_manifest, load_manifest, split_entries, split_variants,
                       suite_widths)
from .model import TaskModel
from .limits import check_bytes
from .render import ObservationSet
from .render.observations import observation_bytes
from .spec import CueTaskSpec, FieldSpec, Spec, load_spec, load_spec_text
from .spec.loader import record_overrides

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
            spec = load_spec_text(yaml.safe_dump(spec_or_path.model_dump(mode="json")),
                                  f"<spec {spec_or_path.name}>", **overrides)
            record_overrides(spec, overrides, earlier=spec_or_path)
            return spec
        return spec_or_path
    path = Path(spec_or_path)
    if not path.exists() and str(spec_or_path) in bundled_specs():
        path = bundled_specs()[str(spec_or_path)]
    if path.is_file() and is_manifest(path):
        raise ManifestError(f"{path}: this is a variant manifest, not a spec; load its variants with "
                            "taskgen.make(manifest, split=..., index=...) or taskgen.make_vec(manifest, n, split=...)")
    return load_spec(path, **overrides)


def build_model(spec_or_path: Spec | str | os.PathLike[str], variant: int | None = None,
                **overrides: Any) -> TaskModel:
    """Spec → variant (``variant``, default 0) → compiled model, in one call."""
    _refuse_seed(overrides)
    spec = resolve_spec(spec_or_path, **overrides)
    return compile_variant(make_variant(spec, 0 if variant is None else variant))


def _refuse_seed(overrides: dict[str, Any]) -> None:
    """``seed=`` once picked the variant; a library that passes it for seeding must not change the task."""
    if "seed" in overrides:
        raise TypeError(f"seed={overrides['seed']!r} is not taken here: the variant is variant=N, and episodes "
                        "are seeded by env.reset(seed=...)")


def _built(spec: Spec, variant: int) -> tuple[TaskModel, ObservationSet]:
    """A variant's model and what its agent sees, in the spec family's one observation space."""
    model = compile_variant(make_variant(spec, variant))
    return model, family_observations(model, spec)


def _manifest_path(spec_or_path: Any) -> str | None:
    if isinstance(spec_or_path, (str, os.PathLike)) and Path(spec_or_path).is_file() and is_manifest(spec_or_path):
        return os.fspath(spec_or_path)
    return None


def env_id(spec: Spec) -> str:
    """The gymnasium id of a spec: ``taskgen/<name>-v<format_version>``."""
    return f"{NAMESPACE}/{spec.name}-v{spec.format_version}"


def _source(spec_or_path: Spec | str | os.PathLike[str]) -> Spec | str:
    """What an EnvSpec's kwargs hold to make the env again: the path as a string, or the Spec."""
    return spec_or_path if isinstance(spec_or_path, (CueTaskSpec, FieldSpec)) else os.fspath(spec_or_path)


def make(spec_or_path: Spec | str | os.PathLike[str], variant: int | None = None,
         render_mode: str | None = None, split: str | None = None, index: int | None = None,
         analysis_info: bool = False, **overrides: Any) -> TaskEnv:
    """A ``gymnasium.Env`` for one variant of a spec, or from a variant manifest.

    ``variant`` names the variant (its sampled parameters and layout; None means variant 0);
    episodes are seeded as usual through ``reset(seed=...)``. Overrides replace spec fields,
    with ``__`` between keys: ``make("specs/x.yaml", layout__corridor__length=12)``; the variant
    then has an id of its own. ``analysis_info=True`` adds ``info["analysis_only"]`` (the hidden
    value and the state) for analyses; leave it off for agents.

    With a manifest (``taskgen variants``): ``make(manifest, split="test", index=3)`` is that
    listed variant (its fingerprint checked), and ``make(manifest, split="train")`` draws a
    variant of the split at every reset. ``env.spec`` makes the same env again.
    """
    _refuse_seed(overrides)
    manifest_path = _manifest_path(spec_or_path)
    options: dict[str, Any] = {"render_mode": render_mode} if render_mode is not None else {}
    if analysis_info:
        options["analysis_info"] = True
    if manifest_path is not None:
        if split is None:
            raise ManifestError(f"{manifest_path}: a manifest needs split= (and index= for one variant)")
        if variant is not None or overrides:
            raise ManifestError("a manifest fixes variants and parameters: give split= and index= only")
        if index is None:
            spec, variants = split_variants(manifest_path, split)
            env = TaskEnv(kind_of(spec).core(variants, 1, draw=True), render_mode=render_mode,
                          analysis_info=analysis_info)
        else:
            manifest = load_manifest(manifest_path, splits=[split])
            entries = split_entries(manifest, split, manifest_path)
            if not 0 <= index < len(entries):
                raise ManifestError(f"{manifest_path}: split {split!r} has {len(entries)} variants, no index {index}")
            spec, model = entry_model(manifest, entries[index], manifest_path)
            env = TaskEnv(kind_of(spec).core([(model, family_observations(model, spec, suite_widths(manifest)))], 1),
                          render_mode=render_mode, analysis_info=analysis_info)
        where = {"split": split} if index is None else {"split": split, "index": index}
        env.spec = EnvSpec(env_id(spec), ENTRY, kwargs={"spec_or_path": manifest_path, **where, **options})
        return env
    if split is not None or index is not None:
        raise ManifestError("split= and index= need a manifest written by `taskgen variants`")
    spec = resolve_spec(spec_or_path, **overrides)
    env = TaskEnv(kind_of(spec).core([_built(spec, 0 if variant is None else variant)], 1),
                  render_mode=render_mode, analysis_info=analysis_info)
    chosen = {"variant": variant} if variant is not None else {}
    env.spec = EnvSpec(env_id(spec), ENTRY, kwargs={"spec_or_path": _source(spec_or_path), **chosen, **overrides,
                                                    **options})
    return env


def make_vec(spec_or_path: Spec | str | os.PathLike[str], num_envs: int, variant: int | None = None,
             variants: Sequence[int] | None = None, render_mode: str | None = None, split: str | None = None,
             autoreset_mode: AutoresetMode | str = AutoresetMode.NEXT_STEP, analysis_info: bool = False,
             **overrides: Any) -> TaskVectorEnv:
    """A ``gymnasium.vector.VectorEnv`` of ``num_envs`` environments stepped together in numpy.

    All environments hold the variant ``variant`` (None: variant 0), or environment i holds
    variant ``variants[i]`` (one batch across many layouts, for kinds whose batches may mix
    variants). Episodes are seeded through ``reset(seed=...)`` as in gymnasium's vector envs: an
    int gives env i the seed ``seed + i``. With a manifest and ``split=``, every environment
    draws a variant of the split at each reset. ``autoreset_mode`` is gymnasium's: "next_step"
    (default), "same_step" or "disabled" (then ``reset(options={"reset_mask": mask})``).
    """
    _refuse_seed(overrides)
    if not isinstance(num_envs, int) or isinstance(num_envs, bool) or num_envs < 1:
        raise ValueError(f"num_envs must be an integer ≥ 1, got {num_envs!r}")

    def shell(core: Any) -> TaskVectorEnv:
        return TaskVectorEnv(core, render_mode=render_mode, autoreset_mode=autoreset_mode, analysis_info=analysis_info)

    manifest_path = _manifest_path(spec_or_path)
    if manifest_path is not None:
        if split is None or variant is not None or variants is not None or overrides:
            raise ManifestError(f"{manifest_path}: with a manifest give split= only")
        spec, pool = split_variants(manifest_path, split)
        _check_batch(num_envs, pool)
        return shell(kind_of(spec).core(pool, num_envs, draw=True))
    if split is not None:
        raise ManifestError("split= needs a manifest written by `taskgen variants`")
    spec = resolve_spec(spec_or_path, **overrides)
    if variants is not None and variant is not None:
        raise ValueError("give either variant (one for all) or variants (one per env), not both")
    chosen = None if variants is None else list(variants)
    if chosen is not None and len(chosen) != num_envs:
        raise ValueError(f"variants must name one variant per env: {num_envs} needed, got {len(chosen)}")
    unique = {0 if variant is None else variant} if chosen is None else set(chosen)
    kind = kind_of(spec)
    if not kind.pools and len(unique) > 1:
        raise ValueError(f"a batch of a {kind.name} spec holds one variant (its hidden values differ per episode): "
                         "give variant=, not several variants")
    built = {v: _built(spec, v) for v in sorted(unique)}
    _check_batch(num_envs, built.values())           # before any per-environment list or array exists
    if chosen is None:
        return shell(kind.core([built[next(iter(unique))]] * num_envs, num_envs))
    return shell(kind.core([built[v] for v in chosen], num_envs))


def _check_batch(num_envs: int, variants: Iterable[tuple[TaskModel, ObservationSet]]) -> None:
    """Refuse a batch whose per-environment arrays or one step's observations would pass the byte cap,
    before they are allocated (a step's observations, plus the state, keys and, for a field, a path
    and its marks per cell)."""
    each = max(observation_bytes(obs) + 16 * model.layout.num_cells + 256 for model, obs in variants)
    check_bytes(f"a batch of {num_envs:,} environments (≈{each:,} bytes each)", num_envs * each)


ENTRY = "taskgen.factory:make"
REGISTERED_ENTRY = "taskgen.factory:make_registered"
REGISTERED_VEC_ENTRY = "taskgen.factory:make_vec_registered"


def _registered_source(registered_as: str, spec_or_path: Any) -> Any:
    """The spec an id was registered with; another one given through ``gym.make`` is refused."""
    source = gym.registry[registered_as].kwargs["spec_or_path"]
    if spec_or_path is not None and _source(spec_or_path) != source:
        raise ValueError(f"{registered_as} is registered for {source}, not {spec_or_path}: run another spec "
                         "with taskgen.make(...) or register it under its own id with taskgen.register(...)")
    return source


def make_registered(registered_as: str, spec_or_path: Any = None, **kwargs: Any) -> TaskEnv:
    """The entry point of a registered id (``gym.make``): the registered spec, never another."""
    return make(_registered_source(registered_as, spec_or_path), **kwargs)


def make_vec_registered(registered_as: str, num_envs: int = 1, spec_or_path: Any = None,
                        **kwargs: Any) -> TaskVectorEnv:
    """The vector entry point of a registered id (``gym.make_vec(id, n, vectorization_mode="vector_entry_point")``)."""
    return make_vec(_registered_source(registered_as, spec_or_path), num_envs, **kwargs)


def register(spec_or_path: Spec | str | os.PathLike[str], id: str | None = None) -> str:
    """Register a spec with gymnasium, as ``id`` or ``taskgen/<name>-v<format_version>``; returns the id.

    ``gym.make(id)`` then makes variant 0 (``variant=N`` for another, overrides as in :func:`make`),
    and ``gym.make_vec(id, n, vectorization_mode="vector_entry_point")`` the native batch.
    Registering the same spec again is a no-op; another spec under a taken id is refused.
    """
    spec = resolve_spec(spec_or_path)
    if isinstance(spec_or_path, (str, os.PathLike)) and not Path(spec_or_path).exists():
        spec_or_path = bundled_specs()[str(spec_or_path)]      # a bundled name: register its file
    source = _source(spec_or_path)
    env_name = env_id(spec) if id is None else id
    if env_name in gym.registry:
        if gym.registry[env_name].kwargs.get("spec_or_path") != source:
            raise ValueError(f"{env_name} is already registered for "
                             f"{gym.registry[env_name].kwargs.get('spec_or_path')}; give another id=")
        return env_name
    gym.register(id=env_name, entry_point=REGISTERED_ENTRY, vector_entry_point=REGISTERED_VEC_ENTRY,
                 kwargs={"registered_as": env_name, "spec_or_path": source}, disable_env_checker=False)
    return env_name


def register_bundled() -> list[str]:
    """Register every bundled spec as ``taskgen/<name>-v<format_version>`` (idempotent); returns the ids."""
    return [register(path) for path in bundled_specs().values()]
