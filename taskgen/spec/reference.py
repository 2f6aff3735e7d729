"""The spec language as JSON Schema (draft 2020-12) and as a Markdown reference, both generated
from the pydantic models so neither can drift from the code."""

from __future__ import annotations

import json
from typing import Any

from pydantic.json_schema import models_json_schema

from .schema import FORMAT_VERSION, CueTaskSpec, FieldSpec

DIALECT = "https://json-schema.org/draft/2020-12/schema"
TOP_LEVELS = ((CueTaskSpec, "cue task (corridor or maze layout)"), (FieldSpec, "field task (field layout)"))


def json_schema() -> dict[str, Any]:
    """The JSON Schema of a spec: a field spec when the layout names a field, else a cue task. The
    if/then/else (rather than a oneOf) lets editors check and complete against the one type that applies."""
    _, top = models_json_schema([(model, "validation") for model, _ in TOP_LEVELS],
                                ref_template="#/$defs/{model}")
    return {
        "$schema": DIALECT, "title": "taskgen spec",
        "description": "A taskgen memory-task spec, format version 1: a cue task (layout corridor or maze, "
        "with a cue) or a field task (layout field, no cue); the layout family decides which.",
        "if": {"properties": {"layout": {"required": ["field"]}}, "required": ["layout"]},
        "then": {"$ref": "#/$defs/FieldSpec"}, "else": {"$ref": "#/$defs/CueTaskSpec"},
        "$defs": _reachable(top["$defs"], [model.__name__ for model, _ in TOP_LEVELS]),
    }


def _reachable(defs: dict[str, Any], roots: list[str]) -> dict[str, Any]:
    """The definitions the roots refer to, directly or not (pydantic also emits ones nothing uses)."""
    keep: set[str] = set()
    stack = list(roots)
    while stack:
        name = stack.pop()
        if name in keep:
            continue
        keep.add(name)
        stack += [ref.rsplit("/", 1)[-1] for ref in _refs(defs[name])]
    return {name: body for name, body in defs.items() if name in keep}


def _refs(node: Any) -> list[str]:
    if isinstance(node, dict):
        own = [node["$ref"]] if isinstance(node.get("$ref"), str) else []
        return own + [r for v in node.values() for r in _refs(v)]
    if isinstance(node, list):
        return [r for v in node for r in _refs(v)]
    return []


def json_schema_text() -> str:
    """The schema as the text committed in docs/taskgen.schema.json."""
    return json.dumps(json_schema(), indent=2, ensure_ascii=False) + "\n"


def _resolve(prop: dict[str, Any], defs: dict[str, Any]) -> tuple[str | None, dict[str, Any]]:
    """(model name, its schema) when a property is a nested block, else (None, prop)."""
    options = prop.get("anyOf", [prop])
    for option in options:
        ref = option.get("$ref")
        if ref:
            name = ref.rsplit("/", 1)[-1]
            return name, defs[name]
    return None, prop


def _flow(value: Any) -> str:
    """A value in YAML flow style, as a spec would write it."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if value is None:
        return "null"
    if isinstance(value, str):
        return value if value else '""'
    if isinstance(value, dict):
        return "{" + ", ".join(f"{k}: {_flow(v)}" for k, v in value.items()) + "}"
    if isinstance(value, list):
        return "[" + ", ".join(_flow(v) for v in value) + "]"
    return json.dumps(value)


def _type_text(prop: dict[str, Any], defs: dict[str, Any]) -> str:
    """A short human description of a property's type and bounds."""
    if "anyOf" in prop:
        parts = []
        for option in prop["anyOf"]:
            if option.get("type") == "object" and "required" in option:
                parts.append("{" + option["required"][0] + ": [...]}")
            elif option.get("type") == "null":
                parts.append("null")
            else:
                parts.append(_type_text(option, defs))
        return " or ".join(parts)
    if "$ref" in prop:
        return "mapping"
    if "const" in prop:
        return _flow(prop["const"])
    if "enum" in prop:
        return " | ".join(_flow(v) for v in prop["enum"])
    kind = {"integer": "integer", "number": "number", "boolean": "true/false", "string": "text",
            "object": "mapping", "array": "list"}.get(prop.get("type", ""), prop.get("type", "any"))
    bounds = []
    if "minimum" in prop and "maximum" in prop:
        prop = dict(prop)
        bounds.append(f"in [{_flow(prop.pop('minimum'))}, {_flow(prop.pop('maximum'))}]")
    for key, sign in (("minimum", "≥"), ("exclusiveMinimum", ">"), ("maximum", "≤"), ("exclusiveMaximum", "<")):
        if key in prop:
            bounds.append(f"{sign} {_flow(prop[key])}")
    if "pattern" in prop:
        bounds.append(f"matching `{prop['pattern']}`")
    return " ".join([kind, *bounds])


def _cell(text: str) -> str:
    return text.replace("|", "\\|").replace("\n", " ")


def reference_markdown() -> str:
    """The spec reference, one section per block, in document order."""
    defs = json_schema()["$defs"]
    lines = [
        "# Spec reference",
        "",
        "<!-- Generated by `taskgen reference --out docs/spec-reference.md`; do not edit by hand. -->",
        "",
        f"A spec is one YAML document in spec language version {FORMAT_VERSION}. Unknown keys are "
        "errors; values are never coerced (`\"3\"` is not a number, `1.5` is not an integer). Editors can "
        "complete and check specs with the JSON Schema in `docs/taskgen.schema.json`.",
        "",
        "There are two kinds of spec, told apart by the layout family: a **cue task** (`layout.corridor` "
        "or `layout.maze`) has a `cue` and a `decision` rule; a **field task** (`layout.field`) has "
        "neither, because the hidden path is what the agent must remember. Blocks both share are "
        "listed once.",
        "",
    ]
    documented: dict[str, str] = {}          # block path → the model documented there
    for model, words in TOP_LEVELS:
        queue: list[tuple[str, str, dict[str, Any]]] = [("", model.__name__, defs[model.__name__])]
        while queue:
            path, name, block = queue.pop(0)
            if path in documented and documented[path] == name:
                continue                        # a block both spec types share, documented once
            title = f"## Top level of a {words}" if not path else f"## `{path}`"
            if path and path in documented:
                title += f" ({words.split(' (')[0]})"
            documented.setdefault(path, name)
            lines += [title, "", block.get("description", ""), "",
                      "| key | type | default | description | example |", "| --- | --- | --- | --- | --- |"]
            required = set(block.get("required", []))
            nested = []
            for key, prop in block.get("properties", {}).items():
                child_model, target = _resolve(prop, defs)
                default = "required" if key in required else _flow(prop.get("default"))
                if child_model is not None and key not in required and "default" not in prop:
                    default = "see block"
                example = prop.get("examples", [None])[0]
                type_text = _type_text(prop, defs) if child_model is None else "mapping"
                if child_model is not None and "anyOf" in prop:
                    type_text = "mapping or null"
                lines.append(f"| `{key}` | {_cell(type_text)} | {_cell(default)} | "
                             f"{_cell(prop.get('description', ''))} | `{_cell(_flow(example))}` |")
                if child_model is not None:
                    nested.append((key if not path else f"{path}.{key}", child_model, target))
            lines.append("")
            queue[0:0] = nested
    return "\n".join(lines)
