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
        obs, reward, terminated, truncated, _ = env.step(a % env.action_space.n)
        assert np.isfinite(reward)
        if terminated or truncated:
            break
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


# Hostile pieces (issue: hostile input): deep nesting, integers past int64, lone surrogates and control
# characters in quoted text, explicit tags and YAML 1.1 number spellings, put where a value goes.
_HOSTILE = st.one_of(
    st.integers(min_value=1, max_value=600).map(lambda n: "[" * n + "]" * n),
    st.integers(min_value=2 ** 31, max_value=10 ** 40).map(str),
    st.sampled_from(['"\\ud800"', '"\\udfff x"', '"a\\x07"', '"\\x1b[31m"', "!!int 3", "!!str x", "! x",
                     "!!float 1", "010", "0x1F", "1:30", "1_000", "0b101", "&a [*a]"]),
)


@FUZZ
@given(st.sampled_from(EXAMPLE_TEXTS), st.data())
def test_hostile_values_in_example_specs(text, data):
    """A hostile value put in place of any value of an example spec (Hypothesis) gives a located
    SpecError or a task, never a crash, a RecursionError or an int64 overflow."""
    lines = text.splitlines()
    spots = [i for i, line in enumerate(lines) if ": " in line and not line.lstrip().startswith("#")
             and not line.rstrip().endswith(":")]
    i = data.draw(st.sampled_from(spots))
    key = lines[i].split(": ")[0]
    lines[i] = f"{key}: {data.draw(_HOSTILE)}"
    _outcome("\n".join(lines) + "\n")
