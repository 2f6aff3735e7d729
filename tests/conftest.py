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


@pytest.fixture(params=sorted(bundled_specs()), ids=str)
def example_spec(request) -> str:
    """Path of each bundled example spec."""
    return str(bundled_specs()[request.param])
