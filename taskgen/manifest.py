"""The variant manifest: the file `taskgen variants` writes and `taskgen.make` reads back.

A manifest holds the spec itself, the request, and per variant its split, seed, overrides,
parameters, layout fingerprint and figures. Loading a listed variant rebuilds it from the
embedded spec and its seed and checks its fingerprint, so a version of taskgen that builds it
differently fails loudly instead of training on something else.
"""

from __future__ import annotations

import hashlib
import json
import os
from pathlib import Path
from typing import Any, Sequence

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


SPLIT_FILES_AT = 1000    # a suite with more variants keeps each split's in a file of its own (JSON lines)


def write_manifest(manifest: dict[str, Any], out_dir: str | os.PathLike[str], split_files_at: int = SPLIT_FILES_AT
                   ) -> str:
    """Write DIR/manifest.yaml atomically; returns its path. A large suite's variants go to one file per
    split (``variants-<split>.jsonl``, each listed under ``variant_files`` with its count and sha256), so
    that a reader can load one split without parsing the others; a small suite keeps a single file."""
    from .tools.output import write_bytes_atomic, write_text_atomic

    if manifest.get("loaded_splits") is not None:
        raise ValueError("this manifest was loaded with some of its splits only: load it whole to write it")
    folder = Path(out_dir)
    manifest = {key: value for key, value in manifest.items() if key != "variant_files"}
    variants = manifest["variants"]
    if len(variants) <= split_files_at:
        return str(write_text_atomic(folder / "manifest.yaml", manifest_text(manifest)))
    files: dict[str, Any] = {}
    for split in dict.fromkeys(v["split"] for v in variants):
        data = "".join(json.dumps(v, sort_keys=False, ensure_ascii=False) + "\n" for v in variants
                       if v["split"] == split).encode("utf-8")
        name = f"variants-{split}.jsonl"
        write_bytes_atomic(folder / name, data)
        files[split] = {"file": name, "count": sum(v["split"] == split for v in variants),
                        "sha256": hashlib.sha256(data).hexdigest()}
    header = {("variant_files" if key == "variants" else key): (files if key == "variants" else value)
              for key, value in manifest.items()}
    return str(write_text_atomic(folder / "manifest.yaml", manifest_text(header)))


def load_manifest(path: str | os.PathLike[str], splits: Sequence[str] | None = None) -> dict[str, Any]:
    """Read a manifest (safe loader; the C loader when PyYAML has it, for large suites). For a suite kept
    in split files, only the ``splits`` named (None: all) are read, each checked against its sha256."""
    loader = getattr(yaml, "CSafeLoader", yaml.SafeLoader)
    try:
        data = yaml.load(Path(path).read_text(encoding="utf-8"), Loader=loader)
    except (OSError, yaml.YAMLError) as exc:
        raise ManifestError(f"{path}: not a readable manifest ({exc})") from None
    if not isinstance(data, dict) or data.get(MANIFEST_KEY) != MANIFEST_FORMAT or \
            ("variants" not in data and not isinstance(data.get("variant_files"), dict)):
        raise ManifestError(f"{path}: expected a taskgen manifest of format {MANIFEST_FORMAT}")
    if "variants" in data:
        return data
    files: dict[str, Any] = data.pop("variant_files")
    if splits is not None:
        unknown = [s for s in splits if s not in files]
        if unknown:
            raise ManifestError(f"{path}: no split {unknown[0]!r} (splits: {', '.join(sorted(files))})")
    variants: list[dict[str, Any]] = []
    for split, listed in files.items():
        if splits is not None and split not in splits:
            continue
        file = Path(path).parent / str(listed["file"])
        try:
            raw = file.read_bytes()
        except OSError as exc:
            raise ManifestError(f"{file}: the variants of split {split!r} cannot be read ({exc.strerror})") from None
        if hashlib.sha256(raw).hexdigest() != listed.get("sha256"):
            raise ManifestError(f"{file}: the variants of split {split!r} do not match the manifest's sha256")
        variants += [json.loads(line) for line in raw.decode("utf-8").splitlines() if line.strip()]
    data["variants"] = variants
    data["variant_files"] = files
    if splits is not None:
        data["loaded_splits"] = list(splits)
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
    manifest = load_manifest(path, splits=[split])
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
