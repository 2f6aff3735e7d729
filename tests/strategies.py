"""Hypothesis strategies shared by the fuzz tests: random YAML and mutated example specs."""

from __future__ import annotations

import copy
from typing import Any

import yaml
from hypothesis import strategies as st

EXTREME_NUMBERS = [0, -1, 1, 2**31, 2**63, -(2**63), 10**18, 1e308, -1e308, 1e-308, float("inf"),
                   float("-inf"), float("nan"), 0.5, -0.0]

scalars = st.one_of(
    st.none(), st.booleans(), st.integers(min_value=-(2**64), max_value=2**64),
    st.floats(allow_nan=True, allow_infinity=True), st.text(max_size=20),
    st.sampled_from(EXTREME_NUMBERS), st.sampled_from(["yes", "no", "on", "off", "auto", "one_hot", "1e3"]),
)
keys = st.one_of(st.text(max_size=12), st.sampled_from(
    ["format_version", "name", "layout", "corridor", "length", "arm_length", "width", "cue", "values",
     "visible_steps", "rewards", "correct", "wrong", "step", "timeout", "episode", "max_steps",
     "observation", "vector", "noise", "bits", "flip_probability", "range", "choice"]))
documents = st.recursive(scalars, lambda inner: st.one_of(
    st.lists(inner, max_size=4), st.dictionaries(keys, inner, max_size=5)), max_leaves=25)


def _paths(doc: Any, prefix: tuple = ()) -> list[tuple]:
    """Every path to a value in nested dicts and lists."""
    out = [prefix]
    if isinstance(doc, dict):
        for k, v in doc.items():
            out += _paths(v, prefix + (k,))
    elif isinstance(doc, list):
        for i, v in enumerate(doc):
            out += _paths(v, prefix + (i,))
    return out


def _parent(doc: Any, path: tuple) -> Any:
    for part in path[:-1]:
        doc = doc[part]
    return doc


@st.composite
def mutated_specs(draw: st.DrawFn, texts: list[str]) -> str:
    """An example spec with a few random mutations: delete, duplicate or retype a key, extreme
    numbers, wrong nesting, unicode; some mutations act on the text (duplicated lines, cuts)."""
    text = draw(st.sampled_from(texts))
    doc = yaml.safe_load(text)
    for _ in range(draw(st.integers(1, 3))):
        paths = [p for p in _paths(doc) if p]
        if not paths:
            break
        path = draw(st.sampled_from(paths))
        parent = _parent(doc, path)
        kind = draw(st.sampled_from(["delete", "retype", "extreme", "nest", "unicode", "rename"]))
        key = path[-1]
        if kind == "delete":
            del parent[key]
        elif kind == "retype":
            parent[key] = draw(documents)
        elif kind == "extreme":
            parent[key] = draw(st.sampled_from(EXTREME_NUMBERS))
        elif kind == "nest":
            parent[key] = draw(st.sampled_from([[parent[key]], {"value": parent[key]},
                                                {"range": [parent[key], parent[key]]}]))
        elif kind == "unicode":
            parent[key] = draw(st.text(min_size=1, max_size=8))
        elif kind == "rename" and isinstance(parent, dict):
            parent[draw(st.text(min_size=1, max_size=10))] = parent.pop(key)
    out = yaml.safe_dump(copy.deepcopy(doc), allow_unicode=True, sort_keys=False)
    lines = out.splitlines(keepends=True)
    textual = draw(st.sampled_from(["none", "none", "none", "duplicate line", "cut", "indent"]))
    if lines and textual != "none":
        i = draw(st.integers(0, len(lines) - 1))
        if textual == "duplicate line":
            lines.insert(i, lines[i])
        elif textual == "cut":
            lines = lines[:i] + [lines[i][: len(lines[i]) // 2]]
        else:
            lines[i] = "   " + lines[i]
    return "".join(lines)
