"""`taskgen variants`: reproducible suites of held-out variants, written as one manifest.

A suite is a list of splits (name and size) over the points of a parameter sweep. Variants are
drawn with consecutive seeds; a candidate is refused when it would break a held-out rule (a
layout fingerprint already used, or a parameter value reserved for the held-out split). Drawing
(compile and fingerprint) and the analyses run in a process pool; which candidates are taken is
decided in seed order in this process, so the manifest is byte-identical for any worker count.
"""

from __future__ import annotations

import hashlib
import itertools
import json
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Iterable, Sequence

import yaml

from .. import __version__
from ..errors import SpecError, TaskgenError
from ..factory import resolve_spec
from ..kinds import compile_variant, family_observations, family_widths, kind_of, make_variant
from ..manifest import MANIFEST_FORMAT, MANIFEST_KEY, describe_space, manifest_text, write_manifest
from ..analysis.baselines import optimal_baseline, random_baseline
from ..analysis import Report
from ..analysis.report import BaselineJSON, SolverJSON
from ..spec import Spec
from ..variant import variant_name
from .check import check_variant
from .output import write_text_atomic
from .progress import Progress
from .scale import Dask, Pool, runner, spec_from_text, spec_text

CHUNK = 256              # candidates drawn per round, whatever the worker count
BASELINE_LEVELS = ("full", "fast", "none")
SHARD = 1000                 # layouts analysed per shard of a resumable run
MAX_SWEEP_VALUES = 10_000    # values of one swept key
MAX_SWEEP_POINTS = 100_000   # points of all sweeps together (each point gets every split)
MAX_REFUSALS = 20        # give up after this many refused candidates per requested variant (plus 1000)


class SuiteError(TaskgenError, ValueError):
    """A suite request that cannot be met (names what was asked and what exists)."""


@dataclass(frozen=True)
class SuiteRequest:
    """What a suite should hold. Keys are dotted spec paths, such as ``layout.corridor.length``."""

    splits: tuple[tuple[str, int], ...] = (("train", 1000), ("test", 200))
    sweeps: tuple[tuple[str, tuple[Any, ...]], ...] = ()
    zipped: bool = False
    disjoint_layouts: bool = False
    holdout: tuple[str, tuple[int, ...]] | None = None
    holdout_split: str = "test"
    seed: int = 0
    baselines: str = "full"     # full: every figure; fast: optimal and random only; none: no analyses

    def as_dict(self) -> dict[str, Any]:
        """Plain data for the manifest."""
        return {"splits": dict(self.splits), "sweeps": {k: list(v) for k, v in self.sweeps},
                "sweep_mode": "zip" if self.zipped else "cross", "disjoint_layouts": self.disjoint_layouts,
                "holdout": None if self.holdout is None else {"parameter": self.holdout[0],
                                                              "values": list(self.holdout[1]),
                                                              "split": self.holdout_split},
                "seed": self.seed, "baselines": self.baselines}


def parse_values(text: str) -> tuple[Any, ...]:
    """``a,b,c`` (numbers or words) or ``low:high[:step]`` (inclusive integers)."""
    if ":" in text:
        parts = text.split(":")
        try:
            numbers = [int(p) for p in parts]
        except ValueError:
            raise SuiteError(f"a range is low:high or low:high:step with integers, got {text!r}") from None
        low, high = numbers[0], numbers[1]
        step = numbers[2] if len(numbers) == 3 else 1
        if len(numbers) not in (2, 3) or step <= 0:
            raise SuiteError(f"a range is low:high or low:high:step with a step ≥ 1, got {text!r}")
        if len(range(low, high + 1, step)) > MAX_SWEEP_VALUES:
            raise SuiteError(f"{text!r} has {len(range(low, high + 1, step)):,} values, more than the "
                             f"{MAX_SWEEP_VALUES:,} a sweep may take")
        values = tuple(range(low, high + 1, step))
    else:
        values = tuple(yaml.safe_load(v) for v in text.split(",") if v.strip() != "")
    if not values:
        raise SuiteError(f"empty set of values: {text!r}")
    return values


def _overrides(point: dict[str, Any]) -> dict[str, Any]:
    return {key.replace(".", "__"): value for key, value in point.items()}


def _apply(spec: Spec, point: dict[str, Any], what: str) -> Spec:
    if not point:
        return spec
    try:
        return resolve_spec(spec, **_overrides(point))
    except SpecError as exc:
        raise SuiteError(f"{what}: {exc}") from None


def sweep_points(request: SuiteRequest) -> list[dict[str, Any]]:
    """The parameter assignments of the sweep, crossed or zipped (one empty point without sweeps)."""
    if not request.sweeps:
        return [{}]
    keys = [k for k, _ in request.sweeps]
    value_lists = [v for _, v in request.sweeps]
    count = math.prod(len(v) for v in value_lists) if not request.zipped else len(value_lists[0])
    if count > MAX_SWEEP_POINTS:
        raise SuiteError(f"the sweeps make {count:,} points, more than the {MAX_SWEEP_POINTS:,} a suite may have")
    if request.zipped:
        if len({len(v) for v in value_lists}) != 1:
            raise SuiteError("zipped sweeps need equally many values: "
                             + ", ".join(f"{k} has {len(v)}" for k, v in request.sweeps))
        combos: Iterable[tuple[Any, ...]] = zip(*value_lists)
    else:
        combos = itertools.product(*value_lists)
    return [dict(zip(keys, combo)) for combo in combos]


def family_size(spec: Spec) -> int | None:
    """How many distinct variants the spec can produce, where that is countable (else None)."""
    return kind_of(spec).family_size(spec)


def _draw(job: tuple[tuple[str, str], int]) -> tuple[str, dict[str, Any]]:
    """Compile one candidate: its fingerprint and parameter values (runs in a worker)."""
    text, seed = job
    spec = spec_from_text(*text)
    model = compile_variant(make_variant(spec, seed))
    return kind_of(spec).fingerprint(model), model.param_dict()


def _figures(job: tuple[tuple[str, str], int]) -> dict[str, Any]:
    """The analyses of one accepted variant, in the report's contract (runs in a worker)."""
    text, seed = job
    return figures_of(check_variant(spec_from_text(*text), seed))


def figures_of(report: Report) -> dict[str, Any]:
    """A report's figures as a manifest entry holds them (the same objects as `check --json`, without the
    search's wall-clock time, so that a manifest repeats byte for byte): every baseline of the kind (a cue
    task's cue-blind agent, a field's explorer as well)."""
    return {"baselines": {name: _without_seconds(baseline.to_dict()) for name, baseline in report.baselines.items()},
            "memory_gap": report.memory_gap.to_dict(), "chance_level": report.chance_level, "checks_ok": report.ok,
            "details": report.details.to_dict() if report.details is not None else {}}


def _fast_figures(job: tuple[tuple[str, str], int]) -> dict[str, Any]:
    """Only the optimal and the uniform-random baselines (``--baselines fast``): exact on the model, and no
    search for the chance level, so generation scales to very many variants (runs in a worker)."""
    text, seed = job
    model = compile_variant(make_variant(spec_from_text(*text), seed))
    return {"baselines": {"optimal": optimal_baseline(model).to_dict(), "random": random_baseline(model).to_dict()}}


def _without_seconds(baseline: BaselineJSON) -> BaselineJSON:
    """A baseline without its search's wall-clock time, so that a manifest repeats byte for byte."""
    solver = baseline.get("solver")
    if solver is None:
        return baseline
    kept: SolverJSON = {"nodes": solver["nodes"], "classes": solver["classes"], "proven": solver["proven"]}
    return {**baseline, "solver": kept}


@dataclass
class _Slot:
    split: str
    point: dict[str, Any]
    overrides: dict[str, Any]
    spec: Spec
    wanted: int
    taken: list[dict[str, Any]] = field(default_factory=list)


def build_suite(spec: Spec, request: SuiteRequest, workers: int = 1,
                progress: bool | None = None, scheduler: str | None = None, shards: str | None = None,
                resume: bool = False, after_shard: Callable[[int], None] | None = None) -> dict[str, Any]:
    """Draw every split and return the manifest as plain data (``workers`` processes here, or a Dask
    ``scheduler``: an address or ``local:N``; the manifest is the same for any of them).

    With ``shards`` (a folder), the analyses are done in shards of SHARD layouts, each written there
    when it is done; with ``resume``, a shard already there whose inputs hash the same is read back
    instead of analysed again, so an interrupted run goes on where it stopped. ``after_shard(k)`` is
    called after shard k is written (a test stops a run there)."""
    if request.baselines not in BASELINE_LEVELS:
        raise SuiteError(f"--baselines must be one of {', '.join(BASELINE_LEVELS)}, got {request.baselines!r}")
    names = [name for name, _ in request.splits]
    if len(set(names)) != len(names) or any(count < 0 for _, count in request.splits):
        raise SuiteError("splits need distinct names and sizes ≥ 0")
    points = sweep_points(request)
    slots: list[_Slot] = []
    reserved: set[int] = set()
    holdout_key = None
    if request.holdout is not None:
        holdout_key, values = request.holdout
        if not values:
            raise SuiteError(f"the held-out range of {holdout_key} is empty")
        if request.holdout_split not in names:
            raise SuiteError(f"the held-out split {request.holdout_split!r} is not one of the splits {names}")
        reserved = set(values)
    for name, count in request.splits:
        for i, point in enumerate(points):
            extra = dict(point)
            if holdout_key is not None and name == request.holdout_split:
                extra[holdout_key] = {"choice": sorted(reserved)}
            slots.append(_Slot(name, point, extra, _apply(spec, extra, f"split {name}, sweep point {i}"), count))
    if holdout_key is not None:
        _check_holdout_leaves_values(spec, points, holdout_key, reserved)
    if request.disjoint_layouts:
        _check_family_size(spec, points, request)

    seen: set[str] = set()
    param_name = holdout_key.split(".")[-1] if holdout_key else None
    next_seed = request.seed
    total = sum(s.wanted for s in slots)
    where = runner(workers, scheduler)
    run: Callable[..., Any] = where.map
    texts = {id(slot.spec): spec_text(slot.spec) for slot in slots}
    try:
        quiet = progress is False
        with Progress(total, f"drawing {spec.name}", quiet=quiet) as bar:
            for slot in slots:
                refused = 0
                while len(slot.taken) < slot.wanted:
                    seeds = list(range(next_seed, next_seed + CHUNK))
                    results = run(_draw, [(texts[id(slot.spec)], s) for s in seeds])
                    for seed, (fp, params) in zip(seeds, results):
                        next_seed = seed + 1
                        if len(slot.taken) == slot.wanted:
                            next_seed = seed
                            break
                        train_side = holdout_key is not None and slot.split != request.holdout_split
                        if (train_side and params.get(param_name) in reserved) or \
                                (request.disjoint_layouts and fp in seen):
                            refused += 1
                            continue
                        seen.add(fp)
                        slot.taken.append({"seed": seed, "fingerprint": fp, "params": params})
                        bar.update(1)
                    if refused > MAX_REFUSALS * slot.wanted + 1000:
                        raise SuiteError(f"split {slot.split}: found only {len(slot.taken)} of {slot.wanted} "
                                         f"variants after refusing {refused} candidates (layouts already "
                                         "used or held-out values)")
            accepted = [(slot, v) for slot in slots for v in slot.taken]
            cache: dict[str, dict[str, Any]] = {}
            unique: dict[str, tuple[tuple[str, str], int]] = {}
            for slot, v in accepted:
                unique.setdefault(v["fingerprint"], (texts[id(slot.spec)], v["seed"]))
            order = sorted(unique) if request.baselines != "none" else []
        analyse = _figures if request.baselines == "full" else _fast_figures
        with Progress(len(order), f"analysing {spec.name}", unit="layout", quiet=quiet or not order) as bar:
            for k in range(0, len(order), SHARD if shards else max(len(order), 1)):
                part = order[k:k + SHARD] if shards else order
                jobs = [unique[fp] for fp in part]
                key = hashlib.sha256(json.dumps([__version__, request.baselines, part, jobs]).encode()).hexdigest()
                path = Path(shards) / f"figures-{k // SHARD:05d}.json" if shards else None
                done = _read_shard(path, key) if path is not None and resume else None
                if done is None:
                    done = dict(zip(part, run(analyse, jobs, bar.update)))
                    if path is not None:
                        write_text_atomic(path, json.dumps({"key": key, "figures": done}))   # key order kept
                        if after_shard is not None:
                            after_shard(k // SHARD)
                else:
                    bar.update(len(part))
                cache.update(done)
    except BaseException:     # an error, Ctrl-C or SIGTERM: drop the queued work, do not wait for it
        if isinstance(where, (Pool, Dask)):
            where.close(wait=False)
        raise
    where.close()

    variants = []
    index_in_split: dict[str, int] = {}
    for slot, v in accepted:
        index = index_in_split.get(slot.split, 0)
        index_in_split[slot.split] = index + 1
        figures = cache.get(v["fingerprint"], {})
        variants.append({"id": variant_name(slot.spec, v["seed"]), "split": slot.split, "index": index,
                         "seed": v["seed"], "overrides": slot.overrides, "params": v["params"],
                         "fingerprint": v["fingerprint"], **figures})
    spec_data = spec.model_dump(mode="json")
    return {
        MANIFEST_KEY: MANIFEST_FORMAT,
        "taskgen_version": __version__,
        "spec_sha256": spec_hash(spec),
        "spec": spec_data,
        **({"spec_overrides": spec.overrides} if spec.overrides else {}),   # --set: part of the variants' ids
        "request": request.as_dict(),
        "family_size": _suite_family_size(spec, points),
        "observation": _suite_observation(slots, accepted),
        "variants": variants,
    }


def _read_shard(path: Path, key: str) -> dict[str, Any] | None:
    """A finished shard's figures by fingerprint, if the file is there, whole and made from the same
    inputs (its key); else None, and the shard is analysed again."""
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if not isinstance(data, dict) or data.get("key") != key or not isinstance(data.get("figures"), dict):
        return None
    return data["figures"]


def _suite_observation(slots: list[_Slot], accepted: list[tuple[_Slot, dict[str, Any]]]) -> dict[str, Any]:
    """The one observation space of every split: the block widths of the widest variant over every
    sweep point and held-out range, and the space as plain data (from one variant laid out in them)."""
    widths = family_widths([slot.spec for slot in slots])
    if not accepted:
        return {"widths": widths, "space": None}
    slot, first = accepted[0]
    model = compile_variant(make_variant(slot.spec, first["seed"]))
    observations = family_observations(model, slot.spec, widths)
    core = kind_of(slot.spec).core([(model, observations)], 1)
    blocks = {name: [b.start, b.stop] for name, b in core.blocks.items()}
    return {"widths": widths, "space": describe_space(core.single_observation_space()), "vector_blocks": blocks}


def _suite_family_size(spec: Spec, points: list[dict[str, Any]]) -> int | None:
    """Distinct layouts over the sweep: the points differ in a swept value, so their families add."""
    sizes = [family_size(_apply(spec, point, "sweep point")) for point in points]
    counted = [size for size in sizes if size is not None]
    return sum(counted) if len(counted) == len(sizes) else None


def spec_hash(spec: Spec) -> str:
    """sha256 of the validated spec (canonical JSON), so formatting and comments do not count."""
    text = json.dumps(spec.model_dump(mode="json"), sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()


def _check_holdout_leaves_values(spec: Spec, points: list[dict[str, Any]], key: str, reserved: set[int]) -> None:
    """The other splits must still have values to draw."""
    for point in points:
        target = _apply(spec, point, "sweep point")
        param: Any = target
        for part in key.split("."):
            param = getattr(param, part, None)
        if param is None or not hasattr(param, "low"):
            if point.get(key) is not None:
                continue
            raise SuiteError(f"cannot hold out {key}: it is not a parameter drawn per variant")
        values = set(param.choices) if param.choices is not None else set(range(param.low, param.high + 1))
        if not values - reserved:
            raise SuiteError(f"holding out {sorted(reserved)} of {key} leaves no values for the other splits "
                             f"(the spec draws it from {sorted(values)})")


def _check_family_size(spec: Spec, points: list[dict[str, Any]], request: SuiteRequest) -> None:
    """Refuse to ask for more unique layouts than the family has, where that is countable
    (splits are sized per sweep point, so each point's family must hold every split)."""
    wanted = sum(count for _, count in request.splits)
    for point in points:
        size = family_size(_apply(spec, point, "sweep point"))
        if size is not None and wanted > size:
            raise SuiteError(f"asked for {wanted} unique layouts, but this family has only {size:,} "
                             f"({kind_of(spec).family_words(spec)})")


def parse_splits(items: Sequence[str]) -> tuple[tuple[str, int], ...]:
    """``name=count`` items into split pairs."""
    out = []
    for item in items:
        name, _, count = item.partition("=")
        if not name or not (count.isascii() and count.isdigit()):
            raise SuiteError(f"a split is name=count, got {item!r}")
        out.append((name, int(count)))
    return tuple(out)


def parse_assignment(item: str) -> tuple[str, tuple[Any, ...]]:
    """``key=values`` (see parse_values) into a key and its values."""
    key, _, values = item.partition("=")
    if not key or not values:
        raise SuiteError(f"expected key=values, got {item[:80]!r}")
    try:
        return key, parse_values(values)
    except SuiteError as exc:
        raise SuiteError(f"{key}: {exc}") from None


__all__ = ["BASELINE_LEVELS", "SuiteError", "SuiteRequest", "build_suite", "family_size", "figures_of",
           "manifest_text", "parse_assignment", "parse_splits", "parse_values", "spec_hash", "sweep_points",
           "write_manifest"]
