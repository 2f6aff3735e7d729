"""Shared helpers: build small corridor specs and models from plain fields."""

from __future__ import annotations

from typing import Any

import pytest
import yaml

from taskgen import bundled_specs, compile_variant, load_spec_text, make_variant


def corridor_spec_text(length: Any = 3, arm_length: Any = 2, values: int = 2, visible_steps: int = 1,
                       rewards: dict | None = None, episode: dict | None = None,
                       vector: dict | None = None, name: str = "test-corridor") -> str:
    """YAML text of a corridor spec with the given fields."""
    doc: dict[str, Any] = {
        "format_version": 1, "name": name,
        "layout": {"corridor": {"length": length, "arm_length": arm_length}},
        "cue": {"values": values, "visible_steps": visible_steps},
    }
    if rewards is not None:
        doc["rewards"] = rewards
    if episode is not None:
        doc["episode"] = episode
    if vector is not None:
        doc["observation"] = {"vector": vector}
    return yaml.safe_dump(doc, sort_keys=False)


def corridor_model(seed: int = 0, **fields: Any):
    """Compiled model of a corridor spec (see corridor_spec_text for the fields)."""
    spec = load_spec_text(corridor_spec_text(**fields))
    return compile_variant(make_variant(spec, seed))


def _is_field(path) -> bool:
    return "field" in (yaml.safe_load(open(path)).get("layout") or {})


#: Bundled examples with a cue (corridors and mazes) and hidden-path fields.
CUE_SPECS = sorted(name for name, path in bundled_specs().items() if not _is_field(path))
FIELD_SPECS = sorted(name for name, path in bundled_specs().items() if _is_field(path))


def field_spec_text(width: Any = 3, height: Any = 4, turns: Any = 0, start: str = "middle",
                    misstep: dict | None = None, mark: Any = "default", rewards: dict | None = None,
                    episode: dict | None = None, observation: dict | None = None,
                    path: dict | None = None) -> str:
    """YAML text of a hidden-path field spec with the given fields."""
    field: dict[str, Any] = {"width": width, "height": height,
                             "path": {"turns": turns, "start": start, **(path or {})}}
    if misstep is not None:
        field["misstep"] = misstep
    if mark != "default":
        field["mark"] = mark
    doc: dict[str, Any] = {"format_version": 1, "name": "test-field", "layout": {"field": field}}
    for key, value in (("rewards", rewards), ("episode", episode), ("observation", observation)):
        if value is not None:
            doc[key] = value
    return yaml.safe_dump(doc, sort_keys=False)


def field_model(seed: int = 0, **fields: Any):
    """The path rule (path-free dynamics) of a field spec's variant (see field_spec_text for the fields)."""
    from taskgen.kinds.field import compile_rule
    return compile_rule(make_variant(load_spec_text(field_spec_text(**fields)), seed))


def sample_paths(rule, seed: int, count: int):
    """``count`` paths of a field's sample stream: (kind int8[count, C], start int64[count])."""
    sample = rule.sample(seed, count)
    return sample.kind, sample.start


@pytest.fixture(params=sorted(bundled_specs()), ids=str)
def example_spec(request) -> str:
    """Path of each bundled example spec."""
    return str(bundled_specs()[request.param])


def timeless(report: Any) -> Any:
    """A report's plain data without the search's wall-clock seconds, the one number that differs between runs."""
    if isinstance(report, dict):
        return {k: timeless(v) for k, v in report.items() if k != "seconds"}
    if isinstance(report, list):
        return [timeless(v) for v in report]
    return report
