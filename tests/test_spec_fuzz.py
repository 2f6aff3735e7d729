"""Fuzzing the whole pipeline (Hypothesis): every input is a working task or a located error.

Run more cases with TASKGEN_FUZZ_EXAMPLES=10000 pytest tests/test_spec_fuzz.py.
"""

from __future__ import annotations

import os

import numpy as np
import yaml
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import taskgen
from taskgen.limits import ResourceLimitError

from strategies import documents, mutated_specs

EXAMPLES = int(os.environ.get("TASKGEN_FUZZ_EXAMPLES", "120"))
FUZZ = settings(max_examples=EXAMPLES, deadline=None, derandomize=True,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])
EXAMPLE_TEXTS = [p.read_text() for p in taskgen.bundled_specs().values()]


def _outcome(text: str) -> str:
    """Load, compile and step a spec; return 'task', 'spec error', 'limit' or 'layout', or fail."""
    try:
        spec = taskgen.load_spec_text(text, "fuzz.yaml")
    except taskgen.SpecError as exc:
        for line in str(exc).splitlines():
            assert line.startswith("fuzz.yaml:"), line
            where = line.split(": ")[0].split(":")
            assert len(where) == 3 and where[1].isdigit() and where[2].isdigit(), line  # file:line:col
        for error in getattr(exc, "errors", [exc]):
            assert error.location.line is not None
            assert error.location.field or "YAML" in error.expected or "key" in error.expected, str(error)
        return "spec error"
    try:
        env = taskgen.make(spec)
    except ResourceLimitError as exc:
        assert "raise it with" in str(exc)
        return "limit"
    except taskgen.LayoutError as exc:     # a valid spec whose layouts cannot meet their rules
        assert str(exc).startswith(f"{spec.name}-s0") and "variant seed 0" in str(exc)
        return "layout"
    obs, _ = env.reset(seed=0)
    assert env.observation_space.contains(obs)
    for a in range(8):
        obs, reward, *_ = env.step(a % 4)
        assert np.isfinite(reward)
    return "task"


@FUZZ
@given(documents)
def test_random_yaml_documents(doc):
    """Random YAML data (Hypothesis) never escapes as anything but a located SpecError."""
    _outcome(yaml.safe_dump(doc, allow_unicode=True))


@FUZZ
@given(st.text(max_size=200))
def test_random_text(text):
    """Random text, most of it not YAML at all, gives a located SpecError or a task."""
    _outcome(text)


@FUZZ
@given(mutated_specs(EXAMPLE_TEXTS))
def test_mutated_example_specs(text):
    """Mutations of every example spec (Hypothesis): a task, a located SpecError, a resource cap, or
    a layout error naming the variant and seed."""
    _outcome(text)
