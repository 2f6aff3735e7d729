"""Loading specs: located errors in one template, unknown-key hints, overrides."""

from __future__ import annotations

import pytest

from taskgen import SpecError, load_spec, load_spec_text
from taskgen.spec import IntParam

GOOD = """\
format_version: 1
name: tiny
layout:
  corridor:
    length: 4
cue:
  values: 2
"""


def test_minimal_spec_gets_defaults():
    """A spec with only the required keys validates and fills in the documented defaults."""
    spec = load_spec_text(GOOD)
    assert spec.layout.corridor.length == IntParam(4, 4)
    assert spec.layout.corridor.arm_length == IntParam(1, 1)
    assert spec.cue.visible_steps == 1
    assert spec.episode.max_steps == "auto"
    assert spec.observation.vector.position == "one_hot"


# Exact messages: the template "file:line:col: field: expected ..., got ..." (common practice,
# the compiler-style location prefix that editors and terminals turn into links).
FIELD = "format_version: 1\nname: tiny\nlayout:\n  field: {width: 4, height: 5}\n"


@pytest.mark.parametrize("text, message", [
    (GOOD.replace("length: 4", "length: -3"),
     "x.yaml:5:13: layout.corridor.length: expected an integer ≥ 0, got -3"),
    (GOOD.replace("length: 4", "lenght: 4"),
     "x.yaml:5:5: layout.corridor.lenght: expected a known key (length, arm_length, width), "
     "got 'lenght'; did you mean 'length'?"),
    (GOOD.replace("values: 2", "values: two"),
     "x.yaml:7:11: cue.values: expected an integer, got 'two'"),
    (GOOD.replace("values: 2", "values: 2.5"),
     "x.yaml:7:11: cue.values: expected an integer, got 2.5"),
    (GOOD.replace("values: 2", "values: 9"),
     "x.yaml:7:11: cue.values: expected an integer ≤ 8, got 9"),
    (GOOD.replace("values: 2", "values: true"),
     "x.yaml:7:11: cue.values: expected an integer, got true"),
    (GOOD.replace("length: 4", "length: {range: [9, 3]}"),
     "x.yaml:5:13: layout.corridor.length: expected range: low ≤ high, got '[9, 3]'"),
    (GOOD.replace("length: 4", "length: {between: [1, 3]}"),
     "x.yaml:5:13: layout.corridor.length: expected an integer ≥ 0, {range: [low, high]} "
     "or {choice: [...]}, got a mapping"),
    (GOOD + "episode: {max_steps: 0}\n",
     "x.yaml:8:22: episode.max_steps: expected an integer ≥ 1 or 'auto', got 0"),
    (GOOD + "colour: red\n",
     "x.yaml:8:1: colour: expected a known key (format_version, name, description, layout, cue, "
     "decision, agent, rewards, episode, observation), got 'colour'"),
    (GOOD.replace("format_version: 1", "format_version: 2"),
     "x.yaml:1:17: format_version: expected 1, got 2"),
    (GOOD.replace("name: tiny", "name: Tiny Task"),
     "x.yaml:2:7: name: expected lower-case letters, digits and dashes (at most 63), got 'Tiny Task'"),
    (GOOD.replace("    length: 4\n", ""),
     "x.yaml:4:3: layout: expected exactly one of corridor, maze, field, got neither"),
    (GOOD.replace("cue:\n  values: 2\n", ""),
     "x.yaml:1:1: cue: expected this required key, got none"),
    ("format_version: 1\nname: [unclosed\n",
     "x.yaml:3:1: expected valid YAML, got expected ',' or ']', but got '<stream end>'"),
    (GOOD + "cue: {values: 3}\n",
     "x.yaml:8:1: cue: expected each key once (first given at line 6), got a duplicate key"),
    (FIELD + "cue: {values: 2}\n",
     "x.yaml:5:6: cue: expected no cue block with a field layout (the hidden path is what the agent must "
     "remember), got a cue block"),
    (FIELD + "observation: {first_person: {}}\n",
     "x.yaml:5:29: observation.first_person: expected observation.vector, grid and/or pixels with a field "
     "layout (a first-person view needs turns), got observation.first_person"),
    (FIELD + "rewards: {wrong: -1}\n",
     "x.yaml:5:18: rewards.wrong: expected no rewards.wrong or rewards.per_goal with a field layout (a misstep "
     "pays rewards.misstep), got rewards.wrong"),
    (FIELD.replace("height: 5", "height: 5, mark: {steps: 0}"),
     "x.yaml:4:46: layout.field.mark.steps: expected an integer in [1, 1000000] or 'episode', got 0"),
    (FIELD.replace("height: 5", "height: 5, mark: {steps: 9223372036854775808}"),   # found by fuzzing
     "x.yaml:4:46: layout.field.mark.steps: expected an integer in [1, 1000000] or 'episode', "
     "got 9223372036854775808"),
    (FIELD.replace("height: 5", "height: 5, path: {width: 9}"),
     "x.yaml:4:46: layout.field.path.width: expected an integer ≤ 4, got 9"),
    (FIELD.replace("height: 5", "height: 5, maze: {generator: rooms}, path: {turns: 2}"),
     "x.yaml:4:72: layout.field.path.turns: expected no path.turns with field walls (the passages decide the "
     "path), got 2"),
    (FIELD + "observation: {distractors: {lure_probability: 0.1}}\n",
     "x.yaml:5:47: observation.distractors.lure_probability: expected no lures with a field layout (there is "
     "no cue colour to flash; decoy_probability gives decoy marks), got 0.1"),
    (FIELD.replace("height: 5", "height: 5, mark: null") + "observation: {distractors: {decoy_probability: 0.1}}\n",
     "x.yaml:5:48: observation.distractors.decoy_probability: expected a mark block (layout.field.mark) for "
     "decoy marks to imitate, got mark: null"),
    (GOOD + "observation: {first_person: {}}\n",
     "x.yaml:1:1: agent.actions: expected agent.actions 'turns' for a first-person or egocentric view, "
     "got 'moves'"),
    ("- 1\n- 2\n", "x.yaml:1:1: expected a YAML mapping at the top level, got a list"),
    ("", "x.yaml:1:1: expected a YAML mapping, got an empty document"),
])
def test_bad_spec_gives_exact_located_message(text, message):
    """Each kind of bad input is reported with file, line, column, field, expected and found."""
    with pytest.raises(SpecError) as info:
        load_spec_text(text, "x.yaml")
    assert str(info.value).splitlines()[0] == message


def test_the_layout_family_decides_the_spec_type():
    """A corridor or maze gives a CueTaskSpec with a cue; a field gives a FieldSpec without one; a
    misspelt family is reported alone with a hint (common practice: did-you-mean)."""
    from taskgen import CueTaskSpec, FieldSpec
    assert isinstance(load_spec_text(GOOD), CueTaskSpec)
    field = load_spec_text(FIELD)
    assert isinstance(field, FieldSpec) and not hasattr(field, "cue")
    with pytest.raises(SpecError) as info:
        load_spec_text(FIELD.replace("field:", "feild:"), "x.yaml")
    assert str(info.value) == ("x.yaml:4:3: layout.feild: expected a known key (corridor, maze, field), got "
                               "'feild'; did you mean 'field'?")


def test_a_field_spec_written_out_by_an_earlier_version_still_loads():
    """Earlier versions wrote field specs out with `cue: null` and the default decision block; the
    format is unchanged, so they load as the same spec (common practice: backward compatibility)."""
    old = load_spec_text(FIELD + "cue: null\ndecision: {rule: match, wrong: end}\n")
    assert old == load_spec_text(FIELD)


def test_renamed_keys_are_refused_with_the_new_name_not_aliased():
    """Keys an earlier version used (a field's `fall` block and its `max_falls`, `rewards.fall`) are
    refused, each at its own line and column with the key that replaced it; none is read silently as
    the new one (common practice: a renamed option fails loudly with its replacement named)."""
    old = FIELD.replace("height: 5}", "height: 5, fall: {to: stay}}") + "rewards: {fall: -0.1}\n"
    with pytest.raises(SpecError) as info:
        load_spec_text(old, "x.yaml")
    assert str(info.value).splitlines() == [
        "x.yaml:4:32: layout.field.fall: expected 'misstep' (the key 'fall' was renamed), got 'fall'",
        "x.yaml:5:11: rewards.fall: expected 'misstep' (the key 'fall' was renamed), got 'fall'"]
    with pytest.raises(SpecError) as info:
        load_spec_text(FIELD.replace("height: 5}", "height: 5, misstep: {max_falls: 3}}"), "x.yaml")
    assert str(info.value) == ("x.yaml:4:42: layout.field.misstep.max_falls: expected 'limit' (the key "
                               "'max_falls' was renamed), got 'max_falls'")
    new = load_spec_text(FIELD.replace("height: 5}", "height: 5, misstep: {to: stay, limit: 3}}") +
                         "rewards: {misstep: -0.1}\n")
    assert new.layout.field.misstep.limit == 3 and new.layout.field.misstep.to == "stay"
    assert new.rewards.misstep == -0.1


def test_broken_yaml_points_at_the_problem():
    """A YAML syntax error carries the parser's own position (PyYAML marks, 0-based → 1-based)."""
    with pytest.raises(SpecError, match=r"^x\.yaml:2:6: expected valid YAML, got mapping values are not"):
        load_spec_text("name: a\nkey: : b\n", "x.yaml")


def test_unsafe_tag_is_refused_with_a_location():
    """Python object tags are refused at the tag's position, on collections and on scalars."""
    with pytest.raises(SpecError, match=r"^x\.yaml:2:7: name: expected plain YAML without tags, "
                       r"got the tag !!python/object/apply:os.system$"):
        load_spec_text("format_version: 1\nname: !!python/object/apply:os.system ['true']\n", "x.yaml")
    with pytest.raises(SpecError, match=r"^x\.yaml:2:7: name: expected plain YAML without tags, "
                       r"got the tag !!python/name:os.system$"):
        load_spec_text("format_version: 1\nname: !!python/name:os.system\n", "x.yaml")


def test_several_errors_are_reported_together_in_file_order():
    """All problems of a spec are listed, sorted by position, so one run shows them all."""
    text = GOOD.replace("length: 4", "length: -1").replace("values: 2", "values: 1")
    with pytest.raises(SpecError) as info:
        load_spec_text(text, "x.yaml")
    lines = str(info.value).splitlines()
    assert [line.split(": ")[0] for line in lines] == ["x.yaml:5:13", "x.yaml:7:11"]


def test_missing_file_is_a_spec_error(tmp_path):
    """A path that does not exist is a SpecError naming it, not an OSError."""
    with pytest.raises(SpecError, match="no such file"):
        load_spec(tmp_path / "absent.yaml")


def test_overrides_replace_fields_and_are_validated():
    """Keyword overrides with __ between keys replace fields; bad ones name the override."""
    spec = load_spec_text(GOOD, layout__corridor__length={"range": [2, 5]}, cue__values=3)
    assert spec.layout.corridor.length == IntParam(2, 5)
    assert spec.cue.values == 3
    with pytest.raises(SpecError, match=r"^override cue__values: cue.values: expected an integer ≥ 2, got 1"):
        load_spec_text(GOOD, cue__values=1)


def test_example_specs_load(example_spec):
    """Every bundled example spec validates."""
    assert load_spec(example_spec).format_version == 1


@pytest.mark.parametrize("replace, message", [
    (("length: 4", "length: 010"), "x.yaml:5:13: layout.corridor.length: expected a decimal number, got '010', "
                                   "which YAML 1.1 reads as 8"),
    (("length: 4", "length: 0x10"), "got '0x10', which YAML 1.1 reads as 16"),
    (("length: 4", "length: 1:30"), "got '1:30', which YAML 1.1 reads as 90"),
    (("length: 4", "length: 1_000"), "got '1_000', which YAML 1.1 reads as 1000"),
    (("length: 4", "length: !!int 4"), "x.yaml:5:13: layout.corridor.length: expected plain YAML without tags, "
                                       "got the tag !!int"),
    (("values: 2", "values: !!float 2"), "got the tag !!float"),
    (("name: tiny", "name: !!str tiny"), "got the tag !!str"),
    (("name: tiny", "name: ! tiny"), "got the tag !"),
    (("name: tiny", 'name: tiny\ndescription: "a\\ud800b"'), "description: expected printable text, got the "
                                                               "character U+D800 (a lone surrogate)"),
    (("name: tiny", 'name: tiny\ndescription: "bell\\a"'), "got the character U+0007 (a control character)"),
    (("length: 4", "length: {range: [0, 1" + "0" * 100 + "]}"), "layout.corridor.length.range[1]: expected an "
                                                              "integer of at most 2,147,483,647 in size"),
    (("name: tiny", "name: tiny\ndescription: " + "[" * 400 + "]" * 400), "expected at most 50 levels of nesting"),
    (("name: tiny", "name: " + "X" * 100_000), "got 'XXXXXXXXXXXXXXXXXXXXXXXXXXXXXXXXXXXXXXXXXXXXXXXXXX'… (100,000 "
                                                "characters)"),
])
def test_hostile_yaml_is_refused_where_it_stands(replace, message):
    """YAML 1.1's octal, hexadecimal, sexagesimal and digit-group numbers, every explicit tag, lone
    surrogates and control characters, integers past int32, deep nesting (before Python's recursion
    limit) are refused with a located message in the project's words; long values are cut (YAML 1.1
    resolution rules: yaml.org/type/int.html, from memory)."""
    with pytest.raises(SpecError) as caught:
        load_spec_text(GOOD.replace(*replace), "x.yaml")
    text = str(caught.value)
    assert message in text and len(text) < 300, text


def test_list_lengths_are_said_in_our_words():
    """A two-number cell given three is 'expected at most 2 items, got 3', not pydantic's phrase."""
    text = GOOD.replace("corridor:\n    length: 4", "maze: {width: 3, height: 3, start_cell: [0, 0, 0]}")
    with pytest.raises(SpecError, match=r"layout\.maze\.start_cell: expected at most 2 items, got 3$"):
        load_spec_text(text, "x.yaml")


def test_oversized_and_special_inputs_are_refused_before_reading(tmp_path):
    """A spec over 1 MiB is refused by its size (text or file) before parsing; a FIFO, a device and a
    folder are refused by their type, never opened (a FIFO would block, /dev/zero never ends)."""
    import os

    big = GOOD + "description: '" + "x" * (1 << 20) + "'\n"
    with pytest.raises(SpecError, match=r"expected a spec of at most 1,048,576 bytes, got 1,048,6\d\d bytes"):
        load_spec_text(big)
    (tmp_path / "big.yaml").write_text(big)
    with pytest.raises(SpecError, match="big.yaml: expected a spec of at most 1,048,576 bytes"):
        load_spec(tmp_path / "big.yaml")
    fifo = tmp_path / "pipe.yaml"
    os.mkfifo(fifo)
    for path, kind in ((fifo, "a FIFO"), ("/dev/zero", "a device"), (tmp_path, "a folder")):
        with pytest.raises(SpecError, match=f"expected a regular spec file, got {kind}"):
            load_spec(path)
    (tmp_path / "latin1.yaml").write_bytes(GOOD.encode() + b"description: caf\xe9\n")
    with pytest.raises(SpecError, match="expected UTF-8 text, got the byte 0xe9"):
        load_spec(tmp_path / "latin1.yaml")
