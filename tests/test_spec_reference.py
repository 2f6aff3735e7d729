"""JSON Schema and reference: valid draft 2020-12, agrees with the loader, committed files current."""

from __future__ import annotations

import json
from pathlib import Path

import jsonschema
import pytest
import yaml

from taskgen import SpecError, bundled_specs, load_spec_text
from taskgen.spec.reference import DIALECT, json_schema, json_schema_text, reference_markdown

from conftest import corridor_spec_text

DOCS = Path(__file__).resolve().parents[1] / "docs"


def test_schema_is_valid_draft_2020_12():
    """The emitted schema passes the metaschema check (jsonschema.Draft202012Validator.check_schema)."""
    schema = json_schema()
    assert schema["$schema"] == DIALECT
    jsonschema.Draft202012Validator.check_schema(schema)


def test_every_field_has_a_description_and_an_example():
    """Each property in the schema, nested blocks included, documents itself (issue requirement)."""
    schema = json_schema()
    blocks = [schema, *schema["$defs"].values()]
    for block in blocks:
        assert block.get("description"), block.get("title")
        for key, prop in block.get("properties", {}).items():
            assert prop.get("description") and prop.get("examples"), key


def test_every_example_spec_validates_against_the_schema():
    """Each bundled spec is valid under the schema (jsonschema)."""
    validator = jsonschema.Draft202012Validator(json_schema())
    for path in bundled_specs().values():
        validator.validate(yaml.safe_load(path.read_text()))


def test_the_schema_knows_which_layouts_need_a_cue():
    """A corridor without a cue and a field with one fail the schema as they fail the loader
    (jsonschema's if/then/else), so editors flag both."""
    validator = jsonschema.Draft202012Validator(json_schema())
    no_cue = {"format_version": 1, "name": "x", "layout": {"corridor": {"length": 3}}}
    field_cue = {"format_version": 1, "name": "x", "layout": {"field": {"width": 3, "height": 3}},
                 "cue": {"values": 2}}
    for doc in (no_cue, field_cue):
        assert not validator.is_valid(doc)
        with pytest.raises(SpecError):
            load_spec_text(yaml.safe_dump(doc))
    assert validator.is_valid({"format_version": 1, "name": "x", "layout": {"field": {"width": 3, "height": 3}}})


@pytest.mark.parametrize("mutation", [
    {"cue": {"values": "two"}},
    {"cue": {"values": 2, "colour": "red"}},
    {"layout": {"corridor": {"length": -1}}},
    {"layout": {"corridor": {"length": {"range": [1]}}}},
    {"layout": {"corridor": {"length": 3, "arm_length": 1.5}}},
    {"episode": {"max_steps": "soon"}},
    {"episode": {"max_steps": 0}},
    {"observation": {"vector": {"position": "polar"}}},
    {"observation": {"vector": {"noise": {"bits": 4}}}},
    {"rewards": {"correct": "high"}},
    {"extra": 1},
])
def test_loader_rejections_are_schema_rejections(mutation):
    """A spec the loader rejects for a type, a bound or an unknown key also fails the schema
    (jsonschema), so editors flag what taskgen would."""
    doc = yaml.safe_load(corridor_spec_text())
    for key, value in mutation.items():
        doc[key] = {**doc.get(key, {}), **value} if isinstance(value, dict) and key in doc else value
    with pytest.raises(SpecError):
        load_spec_text(yaml.safe_dump(doc))
    assert not jsonschema.Draft202012Validator(json_schema()).is_valid(doc)


def test_committed_schema_is_current():
    """docs/taskgen.schema.json equals `taskgen schema` (regenerate with the command in README)."""
    assert (DOCS / "taskgen.schema.json").read_text() == json_schema_text()
    json.loads(json_schema_text())


def test_committed_reference_is_current():
    """docs/spec-reference.md equals `taskgen reference` (regenerate with the command in README)."""
    assert (DOCS / "spec-reference.md").read_text() == reference_markdown()


def test_example_specs_carry_the_editor_modeline():
    """Each example spec's first line points editors at the committed schema."""
    for path in bundled_specs().values():
        assert path.read_text().splitlines()[0] == "# yaml-language-server: $schema=../docs/taskgen.schema.json"
