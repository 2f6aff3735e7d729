"""The variant manifest: the file `taskgen variants` writes and `taskgen.make` reads back.

A manifest holds the spec itself, the request, and per variant its split, seed, overrides,
parameters, layout fingerprint and figures. Loading a listed variant rebuilds it from the
embedded spec and its seed and checks its fingerprint, so a version of taskgen that builds it
differently fails loudly instead of training on something else.
"""

from __future__ import annotations

import json
import os
from pathlib import Path
from typing import Any

import numpy as np
import yaml
from gymnasium import spaces
from gymnasium.spaces import Space

from .errors import TaskgenError
from .kinds import compile_variant, family_observations, family_widths, kind_of, make_variant
from .model import TaskModel
from .render import ObservationSet
from .spec import Spec, load_spec_text
from .spec.loader import record_overrides

MANIFEST_KEY = "taskgen_manifest"
MANIFEST_FORMAT = 1


class ManifestError(TaskgenError, ValueError):
    """A manifest that cannot be read, or whose variants no longer reproduce."""


class _PlainDumper(yaml.SafeDumper):
    """Writes repeated values in full instead of as YAML anchors and aliases."""

    def ignore_aliases(self, data: Any) -> bool:
        return True


def manifest_text(manifest: dict[str, Any]) -> str:
    """The manifest as YAML, deterministic for equal content (its first line names the format)."""
    return yaml.dump(manifest, Dumper=_PlainDumper, sort_keys=False, allow_unicode=True, width=100)


def is_manifest(path: str | os.PathLike[str]) -> bool:
    """True for a file written by `taskgen variants` (its first line names the format)."""
    try:
        with open(path, encoding="utf-8") as handle:
            return handle.readline().startswith(f"{MANIFEST_KEY}:")
    except (OSError, UnicodeDecodeError):
        return False


def describe_space(space: Space[Any]) -> dict[str, Any]:
    """An observation space as plain data (a manifest records its suite's space; tests compare them)."""
    if isinstance(space, spaces.Dict):
        return {"dict": {name: describe_space(part) for name, part in space.spaces.items()}}
    if isinstance(space, spaces.Box):
        return {"box": {"shape": list(space.shape), "dtype": str(space.dtype),
                        "low": float(np.min(space.low)), "high": float(np.max(space.high))}}
    return {"other": str(space)}


def load_manifest(path: str | os.PathLike[str]) -> dict[str, Any]:
    """Read a manifest (safe loader; the C loader when PyYAML has it, for large suites)."""
    loader = getattr(yaml, "CSafeLoader", yaml.SafeLoader)
    try:
        data = yaml.load(Path(path).read_text(encoding="utf-8"), Loader=loader)
    except (OSError, yaml.YAMLError) as exc:
        raise ManifestError(f"{path}: not a readable manifest ({exc})") from None
    if not isinstance(data, dict) or data.get(MANIFEST_KEY) != MANIFEST_FORMAT or "variants" not in data:
        raise ManifestError(f"{path}: expected a taskgen manifest of format {MANIFEST_FORMAT}")
    return data


def split_entries(manifest: dict[str, Any], split: str, source: str = "manifest") -> list[dict[str, Any]]:
    """The variants of one split, in index order."""
    entries = [v for v in manifest["variants"] if v["split"] == split]
    if not entries:
        names = sorted({v["split"] for v in manifest["variants"]})
        raise ManifestError(f"{source}: no split {split!r} (splits: {', '.join(names)})")
    return entries


def entry_spec(manifest: dict[str, Any], entry: dict[str, Any] | None, source: str = "manifest") -> Spec:
    """The embedded spec, with a listed variant's overrides (its sweep point, held-out values) applied."""
    overrides = dict((entry or {}).get("overrides") or {})
    spec = load_spec_text(yaml.safe_dump(manifest["spec"]), f"{source} (embedded spec)", **overrides)
    applied = manifest.get("spec_overrides") or {}
    if applied:    # the suite's spec was given overrides (already in its embedded text): they tag the ids
        record_overrides(spec, {**applied, **overrides})
    return spec


def entry_model(manifest: dict[str, Any], entry: dict[str, Any], source: str = "manifest") -> tuple[Spec, TaskModel]:
    """Rebuild one listed variant and check that it still has its recorded fingerprint."""
    spec = entry_spec(manifest, entry, source)
    model = compile_variant(make_variant(spec, int(entry["seed"])))
    if kind_of(spec).fingerprint(model) != entry["fingerprint"]:
        raise ManifestError(f"{source}: variant {entry['id']} no longer reproduces its fingerprint (the manifest "
                            f"was written by taskgen {manifest.get('taskgen_version')})")
    return spec, model


def split_variants(path: str | os.PathLike[str], split: str) -> tuple[Spec, list[tuple[TaskModel, ObservationSet]]]:
    """Every variant of a split with what its agent sees, fingerprints checked, for one env or batch
    that draws a variant at every reset (refused for a kind whose environments hold one variant)."""
    manifest = load_manifest(path)
    spec = entry_spec(manifest, None, str(path))
    kind = kind_of(spec)
    if not kind.pools:
        raise ManifestError(f"{path}: the variants of a {kind.name} suite differ in size, so they load one at a "
                            "time: taskgen.make(manifest, split=..., index=...)")
    out = []
    widths = suite_widths(manifest, str(path))
    for entry in split_entries(manifest, split, str(path)):
        variant_spec, model = entry_model(manifest, entry, str(path))
        out.append((model, family_observations(model, variant_spec, widths)))
    return spec, out


def suite_widths(manifest: dict[str, Any], source: str = "manifest") -> dict[str, int]:
    """The vector block widths every variant of a suite is laid out in (recorded when it was written;
    for an older manifest, computed from the spec at every sweep point it lists)."""
    recorded = (manifest.get("observation") or {}).get("widths")
    if recorded is not None:
        return {str(name): int(width) for name, width in recorded.items()}
    points = {json.dumps(v.get("overrides") or {}, sort_keys=True): v for v in manifest["variants"]}
    return family_widths([entry_spec(manifest, entry, source) for entry in points.values()])
