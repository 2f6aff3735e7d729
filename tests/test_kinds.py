"""Task kinds: one registry by layout family, and no branch on the family anywhere else."""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

import taskgen
from taskgen.kinds import all_kinds, kind_of

from conftest import CUE_SPECS, FIELD_SPECS

PACKAGE = Path(taskgen.__file__).resolve().parent
FAMILIES = {"corridor", "maze", "field", "family"}


def test_every_bundled_spec_has_the_kind_of_its_layout():
    """A corridor or a maze is a cue task, a field a field task; the compiled model says which kind
    made it, and the registry knows each kind once (common practice)."""
    for name in CUE_SPECS + FIELD_SPECS:
        spec = taskgen.load_spec(taskgen.bundled_specs()[name])
        kind = kind_of(spec)
        assert kind.name == ("field" if name in FIELD_SPECS else "cue")
        assert spec.layout.family in kind.layouts
        assert kind_of(taskgen.build_model(spec)) is kind
    assert sorted(kind.name for kind in all_kinds()) == ["cue", "field"]


def _family_reads(path: Path) -> list[str]:
    """``….layout.<family>`` attribute reads in one module's code (comments and strings excluded)."""
    found = []
    for node in ast.walk(ast.parse(path.read_text(), str(path))):
        if isinstance(node, ast.Attribute) and node.attr in FAMILIES and isinstance(node.value, ast.Attribute) \
                and node.value.attr == "layout":
            found.append(f"{path.relative_to(PACKAGE)}:{node.lineno}: .layout.{node.attr}")
    return found


def test_only_the_kinds_and_the_spec_read_the_layout_family():
    """Outside taskgen/kinds (the registry) and taskgen/spec (where families are defined), no module
    reads a spec's layout family: every other stage makes one kind_of() call (an architecture test;
    common practice)."""
    reads = [hit for path in sorted(PACKAGE.rglob("*.py")) if path.parent.name not in ("kinds", "spec")
             for hit in _family_reads(path)]
    assert reads == []


def test_no_module_pair_differs_only_by_a_family_prefix():
    """No two modules are named ``x.py`` and ``field_x.py`` (or ``cue_x.py``): a family's code lives in
    its kind, not in a sibling copy of a stage (common practice)."""
    names = {path.stem for path in PACKAGE.rglob("*.py")}
    pairs = [name for name in names for prefix in ("field_", "cue_") if name.startswith(prefix)
             and name[len(prefix):] in names]
    assert pairs == []


@pytest.mark.parametrize("name", ["lantern-hall", "marsh-stones"])
def test_one_env_shell_for_every_kind(name):
    """make() and make_vec() give the same two classes whatever the kind (common practice)."""
    assert type(taskgen.make(name)) is taskgen.TaskEnv
    assert type(taskgen.make_vec(name, 2)) is taskgen.TaskVectorEnv
