"""Read spec text into a validated :class:`Spec`, turning every problem into a located SpecError."""

from __future__ import annotations

import difflib
import json
import os
import re
import stat
import unicodedata
from typing import Any, Mapping, Sequence

import yaml
from pydantic import BaseModel, ValidationError

from ..errors import Location, SpecError, SpecErrors
from .params import describe
from .schema import FAMILIES, RENAMED, CueLayout, FieldTaskLayout, Spec, spec_type

PathKey = tuple[Any, ...]


class _Positions:
    """Line and column (1-based) of every key and value in a YAML document, by field path."""

    def __init__(self, source: str) -> None:
        self.source = source
        self.values: dict[PathKey, tuple[int, int]] = {}
        self.keys: dict[PathKey, tuple[int, int]] = {}
        self.overridden: dict[PathKey, str] = {}
        self.bool_words: dict[PathKey, str] = {}   # unquoted words YAML 1.1 read as booleans
        self.big_ints: list[PathKey] = []           # integers past MAX_INT
        self.count = 0

    def locate(self, path: PathKey, field: str, at_key: bool = False) -> Location:
        """The position of ``path``, or of its nearest ancestor that the file has."""
        for n in range(len(path), 0, -1):
            if path[:n] in self.overridden:
                return Location(f"override {self.overridden[path[:n]]}", None, None, field)
        table = self.keys if at_key and path in self.keys else self.values
        probe = tuple(path)
        while probe and probe not in table:
            probe = probe[:-1]
            table = self.values
        line, column = table.get(probe, (None, None))
        return Location(self.source, line, column, field)


def _mark(node: yaml.Node) -> tuple[int, int]:
    return node.start_mark.line + 1, node.start_mark.column + 1


MAX_NODES = 100_000   # a hand-written spec has hundreds; aliases must not multiply them
MAX_DEPTH = 50        # nesting levels; a spec has about five
MAX_SPEC_BYTES = 1 << 20   # a spec file or text is refused above 1 MiB, before it is parsed
MAX_INT = 2 ** 31 - 1      # integers in a spec (larger ones would overflow the tables' int64 arithmetic)

# YAML 1.1 integers and floats that people do not mean: octal (010 is 8), hexadecimal, binary,
# sexagesimal (1:30 is 90) and digit groups (1_000); refused with a hint, as the boolean words are
_YAML11_NUMBER = re.compile(r"^[-+]?(0[0-7]+|0x[0-9a-fA-F_]+|0b[01_]+|[0-9][0-9_]*(:[0-5]?[0-9])+(\.[0-9_]*)?|"
                            r"[0-9.]*_[0-9_.]*([eE][-+]?[0-9]+)?)$")


def _refused_text(value: str) -> str | None:
    """What makes a text unfit for a spec (a lone surrogate or a control character other than newline
    and tab), or None."""
    for char in value:
        category = unicodedata.category(char)
        if category == "Cs" or (category == "Cc" and char not in "\n\t"):
            return f"the character U+{ord(char):04X} (a {'lone surrogate' if category == 'Cs' else 'control character'})"
    return None


class _Loader(yaml.SafeLoader):
    """PyYAML's safe loader that refuses, while composing, what a spec must not hold: explicit tags on
    any node and nesting deeper than MAX_DEPTH (so a hostile document fails early and located)."""

    source = "<spec>"

    def __init__(self, stream: str) -> None:
        super().__init__(stream)
        self._paths: list[PathKey] = [()]     # the field path of each node being composed

    def _refuse(self, mark: Any, path: PathKey, expected: str, found: str) -> SpecError:
        return SpecError(Location(self.source, mark.line + 1, mark.column + 1, _dotted(path)), expected, found)

    def compose_node(self, parent: Any, index: Any) -> Any:
        event = self.peek_event()
        path = self._paths[-1]
        if isinstance(index, yaml.ScalarNode):        # a mapping's value, under its key
            path = path + (index.value,)
        elif isinstance(index, int) and not isinstance(index, bool):
            path = path + (index,)
        tag = getattr(event, "tag", None)
        if tag is not None and not isinstance(event, yaml.AliasEvent):
            raise self._refuse(event.start_mark, path, "expected plain YAML without tags",
                               "the tag " + str(tag).replace("tag:yaml.org,2002:", "!!"))
        if len(self._paths) > MAX_DEPTH:
            raise self._refuse(event.start_mark, path, f"expected at most {MAX_DEPTH} levels of nesting", "deeper")
        self._paths.append(path)
        try:
            return super().compose_node(parent, index)
        finally:
            self._paths.pop()


def _walk(loader: yaml.SafeLoader, node: yaml.Node, path: PathKey, pos: _Positions,
          open_nodes: frozenset[int] = frozenset()) -> Any:
    """Build plain Python data from a node tree, recording positions and refusing duplicate
    keys, tags, aliases that contain themselves and documents that aliases blow up."""
    pos.values[path] = _mark(node)
    pos.count += 1
    if pos.count > MAX_NODES:
        line, col = _mark(node)
        raise SpecError(Location(pos.source, line, col, _dotted(path)),
                        f"expected a spec of at most {MAX_NODES} YAML values", "more (aliases repeat them)")
    if id(node) in open_nodes:
        line, col = _mark(node)
        raise SpecError(Location(pos.source, line, col, _dotted(path)),
                        "expected no alias inside the value it names", "a recursive alias")
    open_nodes = open_nodes | {id(node)}     # (explicit tags were refused while composing: see _Loader)
    if isinstance(node, yaml.MappingNode):
        out: dict[Any, Any] = {}
        for key_node, value_node in node.value:
            if key_node.tag == "tag:yaml.org,2002:merge":
                line, col = _mark(key_node)
                raise SpecError(Location(pos.source, line, col, _dotted(path)),
                                "expected plain keys (merge keys are not supported)", "<<")
            key = loader.construct_object(key_node, deep=True)
            if not isinstance(key, str) or _refused_text(key):
                line, col = _mark(key_node)
                raise SpecError(Location(pos.source, line, col, ".".join(map(str, path))),
                                "expected a text key", _refused_text(key) if isinstance(key, str) else describe(key))
            child = path + (key,)
            if key in out:
                line, col = _mark(key_node)
                first = pos.keys[child]
                raise SpecError(Location(pos.source, line, col, _dotted(child)),
                                f"expected each key once (first given at line {first[0]})",
                                "a duplicate key")
            pos.keys[child] = _mark(key_node)
            out[key] = _walk(loader, value_node, child, pos, open_nodes)
        return out
    if isinstance(node, yaml.SequenceNode):
        return [_walk(loader, item, path + (i,), pos, open_nodes) for i, item in enumerate(node.value)]
    if node.tag == "tag:yaml.org,2002:bool" and node.value.lower() not in ("true", "false"):
        pos.bool_words[path] = node.value
    line, col = _mark(node)
    where = Location(pos.source, line, col, _dotted(path))
    if node.tag in ("tag:yaml.org,2002:int", "tag:yaml.org,2002:float") and _YAML11_NUMBER.match(node.value):
        raise SpecError(where, "expected a decimal number", f"{node.value[:40]!r}, which YAML 1.1 reads as "
                        f"{loader.construct_object(node)!r:.40}; write it in decimal digits (or in quotes "
                        "to mean the text)")
    value = loader.construct_object(node, deep=True)
    if isinstance(value, int) and not isinstance(value, bool) and abs(value) > MAX_INT:
        pos.big_ints.append(path)     # refused after validation, unless a field's own bound says more
    if isinstance(value, str) and _refused_text(value):
        raise SpecError(where, "expected printable text", _refused_text(value) or "")
    return value


def _dotted(path: PathKey) -> str:
    """``a.b[0].c``; a key that is not plain printable text is shown quoted, as ``a['x.y']``."""
    text = ""
    for part in path:
        if isinstance(part, int):
            text += f"[{part}]"
        elif not part or not part.isprintable() or any(c in part for c in ".[]: "):
            text += f"[{part!r}]"
        else:
            text += f".{part}" if text else part
    return text


def parse_yaml(text: str, source: str = "<spec>") -> tuple[Any, _Positions]:
    """Parse one YAML document with the safe loader, keeping node positions."""
    pos = _Positions(source)
    loader = None
    size = len(text.encode("utf-8", "surrogatepass"))
    if size > MAX_SPEC_BYTES:
        raise SpecError(Location(source), f"expected a spec of at most {MAX_SPEC_BYTES:,} bytes", f"{size:,} bytes")
    try:
        loader = _Loader(text)
        loader.source = source
        node = loader.get_single_node()
        if node is None:
            raise SpecError(Location(source, 1, 1), "expected a YAML mapping", "an empty document")
        data = _walk(loader, node, (), pos)
    except yaml.reader.ReaderError as exc:  # a character YAML does not allow, before parsing
        before = text[: exc.position]
        line, column = before.count("\n") + 1, len(before) - (before.rfind("\n") + 1) + 1
        raise SpecError(Location(source, line, column), "expected printable YAML text",
                        f"the character {exc.character!r}") from None
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        at_line = mark.line + 1 if mark else None
        at_column = mark.column + 1 if mark else None
        problem = exc.problem or exc.context or "unreadable YAML"
        raise SpecError(Location(source, at_line, at_column), "expected valid YAML", problem) from None
    except yaml.YAMLError as exc:
        raise SpecError(Location(source, 1, 1), "expected valid YAML", str(exc)) from None
    finally:
        if loader is not None:
            loader.dispose()
    return data, pos


def _model_at(root: type[BaseModel], path: PathKey) -> type[BaseModel] | None:
    """The pydantic model whose fields are valid at ``path`` of a ``root`` spec type (for did-you-mean
    hints)."""
    model: Any = root
    for part in path:
        if isinstance(part, int) or model is None:
            continue
        field = model.model_fields.get(part)
        if field is None:
            return None
        annotation = field.annotation
        candidates = [annotation, *getattr(annotation, "__args__", ())]
        model = next((c for c in candidates if isinstance(c, type) and issubclass(c, BaseModel)), None)
    return model


def _known_keys(root: type[BaseModel], path: PathKey) -> list[str]:
    """The keys valid at ``path``; a layout block may name any family (the family picks the spec type)."""
    model = _model_at(root, path) or root
    return list(FAMILIES) if model in (CueLayout, FieldTaskLayout) else list(model.model_fields)


def _number_word(root: type[BaseModel], path: PathKey, fallback: Any) -> str:
    model = _model_at(root, path[:-1])
    field = model.model_fields.get(path[-1]) if model and path else None
    if field is not None and field.annotation is int:
        return "an integer"
    if field is not None and field.annotation is float:
        return "a number"
    return "an integer" if isinstance(fallback, int) else "a number"


def _translate(err: Mapping[str, Any], pos: _Positions, root: type[BaseModel]) -> SpecError:
    """One pydantic error dict → one SpecError in taskgen's template (``root``: the spec type validated)."""
    path = tuple(err["loc"])
    kind = err["type"]
    ctx = err.get("ctx") or {}
    value = err.get("input")
    field = _dotted(path)
    if kind == "extra_forbidden":
        block = _model_at(root, path[:-1])
        renamed = RENAMED.get((block, str(path[-1]))) if block is not None else None
        if renamed is not None:
            return SpecError(pos.locate(path, field, at_key=True),
                             f"expected '{renamed}' (the key '{path[-1]}' was renamed)", repr(str(path[-1])))
        known = _known_keys(root, path[:-1])
        found = repr(str(path[-1]))
        hint = difflib.get_close_matches(str(path[-1]), known, n=1)
        if hint:
            found += f"; did you mean '{hint[0]}'?"
        return SpecError(pos.locate(path, field, at_key=True),
                         f"expected a known key ({', '.join(known)})", found)
    if kind == "missing":
        return SpecError(pos.locate(path, field), "expected this required key", "none")
    if kind == "taskgen_expected":
        if ctx.get("at"):   # a rule over several fields names the one at fault
            path = path + tuple(ctx["at"].split("."))
            field = _dotted(path)
        return SpecError(pos.locate(path, field), f"expected {ctx['expected']}", ctx["found"])
    bounds = {"greater_than_equal": "≥", "greater_than": ">", "less_than_equal": "≤", "less_than": "<"}
    if kind in bounds:
        limit = next(iter(ctx.values()))
        expected = f"expected {_number_word(root, path, value)} {bounds[kind]} {limit}"
        return SpecError(pos.locate(path, field), expected, describe(value))
    words = {
        "int_type": "an integer", "int_parsing": "an integer", "int_from_float": "an integer",
        "float_type": "a number", "float_parsing": "a number", "bool_type": "true or false",
        "bool_parsing": "true or false", "string_type": "a string", "model_type": "a mapping",
        "model_attributes_type": "a mapping", "dict_type": "a mapping", "list_type": "a list",
        "finite_number": "a finite number",
    }
    if isinstance(value, bool) and path in pos.bool_words and kind != "bool_type":
        word = pos.bool_words[path]
        expected = words.get(kind) or str(ctx.get("expected", "a different value"))
        return SpecError(pos.locate(path, field), f"expected {expected}",
                         f"the unquoted word {word}, which YAML 1.1 reads as {describe(value)}; "
                         f"write '{word}' in quotes to mean the text")
    if kind in ("float_type", "float_parsing") and isinstance(value, str) and _float_text(value):
        return SpecError(pos.locate(path, field), "expected a number",
                         f"the text {value!r}: YAML 1.1 reads an exponent without a dot as text; "
                         f"write it with a dot, as {_float_text(value)}")
    if kind in words:
        return SpecError(pos.locate(path, field), f"expected {words[kind]}", describe(value))
    if kind in ("too_long", "too_short"):
        count = ctx.get("max_length") if kind == "too_long" else ctx.get("min_length")
        return SpecError(pos.locate(path, field), f"expected {'at most' if kind == 'too_long' else 'at least'} "
                         f"{count} item{'s' if count != 1 else ''}", f"{ctx.get('actual_length', 'another number')}")
    if kind == "literal_error":
        return SpecError(pos.locate(path, field), f"expected {ctx.get('expected')}", describe(value))
    if kind == "string_pattern_mismatch":
        return SpecError(pos.locate(path, field),
                         "expected lower-case letters, digits and dashes (at most 63)", describe(value))
    return SpecError(pos.locate(path, field), f"expected {err['msg'].lower()}", describe(value))


def _float_text(text: str) -> str | None:
    """For text like '1e-3' (a float to people, a string to YAML 1.1), the spelling YAML reads."""
    try:
        float(text)
    except ValueError:
        return None
    mantissa, _, exponent = text.lower().partition("e")
    if not exponent or "." in mantissa:
        return None
    return f"{mantissa}.0e{exponent}"


def _apply_overrides(data: dict[str, Any], overrides: Mapping[str, Any], pos: _Positions) -> None:
    """Merge ``a__b__c=value`` keyword overrides (or dotted keys, ``a.b.c``) into the raw document before
    validation."""
    for name, value in overrides.items():
        path = tuple(name.replace(".", "__").split("__"))
        node: Any = data
        for part in path[:-1]:
            if not isinstance(node.get(part), dict):
                node[part] = {}
            node = node[part]
        node[path[-1]] = value
        pos.overridden[path] = name


def _explained_by_typo(err: Mapping[str, Any], errors: list[Any]) -> bool:
    """A missing key whose misspelling sits beside it is reported once, as the unknown key; so is a
    missing cue when the layout names an unknown family (the spec type is then undecided)."""
    if err["type"] != "missing":
        return False
    parent, name = tuple(err["loc"][:-1]), err["loc"][-1]
    if (parent, name) == ((), "cue") and any(other["type"] == "extra_forbidden" and tuple(other["loc"][:1]) ==
                                             ("layout",) and len(other["loc"]) == 2 for other in errors):
        return True
    for other in errors:
        loc = tuple(other["loc"])
        if other["type"] == "extra_forbidden" and loc[:-1] == parent:
            if name in difflib.get_close_matches(str(loc[-1]), [name], n=1):
                return True
    return False


def validate_data(data: Any, pos: _Positions, overrides: Mapping[str, Any] | None = None) -> Spec:
    """Validate parsed YAML data; all problems are raised together as SpecErrors."""
    if not isinstance(data, dict):
        raise SpecError(pos.locate((), ""), "expected a YAML mapping at the top level", describe(data))
    if overrides:
        data = dict(data)
        _apply_overrides(data, overrides, pos)
    root = spec_type(data)
    try:
        spec: Spec = root.model_validate(data)
    except ValidationError as exc:
        raw = exc.errors(include_url=False)
        errors = [_translate(e, pos, root) for e in raw if not _explained_by_typo(e, raw)]
        errors.sort(key=lambda e: (e.location.line or 0, e.location.column or 0))
        raise (errors[0] if len(errors) == 1 else SpecErrors(errors)) from None
    if pos.big_ints:    # a field without an upper bound of its own: the tables' int64 arithmetic is the bound
        path = pos.big_ints[0]
        value: Any = data
        for part in path:
            value = value[part]
        raise SpecError(pos.locate(path, _dotted(path)), f"expected an integer of at most {MAX_INT:,} in size",
                        f"one of {len(str(abs(value)))} digits")
    if overrides:
        record_overrides(spec, overrides)
    return spec


def record_overrides(spec: Spec, overrides: Mapping[str, Any], earlier: Spec | None = None) -> None:
    """Keep on ``spec`` the overrides it was loaded with (after those of ``earlier``, the spec they were
    applied to), so its variants' ids differ from the spec's own (``Spec.override_tag``)."""
    items = dict(earlier._overrides) if earlier is not None else {}
    for name, value in overrides.items():
        items[name.replace("__", ".")] = json.dumps(value, sort_keys=True, default=str)
    spec._overrides = tuple(sorted(items.items()))


def parse_assignments(items: Sequence[str], option: str = "--set") -> dict[str, Any]:
    """``KEY=VALUE`` items (dotted keys, YAML values read as in a spec) into overrides by dotted key;
    a malformed item or value is a located error naming the option and key."""
    out: dict[str, Any] = {}
    for item in items:
        key, sep, text = item.partition("=")
        parts = key.split(".")
        if not sep or not all(p and p.replace("_", "a").isalnum() and p.isascii() for p in parts):
            raise SpecError(Location(option), "expected KEY=VALUE with a dotted spec key, e.g. "
                            "layout.corridor.length=12", repr(item[:80]))
        if not text.strip():
            raise SpecError(Location(f"{option} {key}"), "expected a YAML value after '='", "nothing")
        out[key], _ = parse_yaml(text, f"{option} {key}")     # read by the spec's own loader, as in a file
    return out


def load_spec_text(text: str, source: str = "<spec>", **overrides: Any) -> Spec:
    """Validate spec text; ``source`` names it in error messages."""
    data, pos = parse_yaml(text, source)
    return validate_data(data, pos, overrides)


def load_spec(path: str | os.PathLike[str], **overrides: Any) -> Spec:
    """Read and validate a spec file. Overrides use ``__`` between keys: ``layout__corridor__length=9``."""
    source = os.fspath(path)
    return load_spec_text(read_spec_file(source), source, **overrides)


def read_spec_file(source: str) -> str:
    """The text of a spec file: a regular file of at most MAX_SPEC_BYTES, in UTF-8. A FIFO, a device or a
    folder is refused by its type before it is opened (reading one could block or never end)."""
    try:
        info = os.stat(source)
    except FileNotFoundError:
        raise SpecError(Location(source), "expected a spec file", "no such file") from None
    except OSError as exc:
        raise SpecError(Location(source), "expected a readable spec file", exc.strerror or str(exc)) from None
    if not stat.S_ISREG(info.st_mode):
        kind = "a folder" if stat.S_ISDIR(info.st_mode) else "a FIFO" if stat.S_ISFIFO(info.st_mode) else \
            "a device" if stat.S_ISCHR(info.st_mode) or stat.S_ISBLK(info.st_mode) else "a special file"
        raise SpecError(Location(source), "expected a regular spec file", kind)
    if info.st_size > MAX_SPEC_BYTES:
        raise SpecError(Location(source), f"expected a spec of at most {MAX_SPEC_BYTES:,} bytes", f"{info.st_size:,} bytes")
    try:
        with open(source, "rb") as handle:
            data = handle.read(MAX_SPEC_BYTES + 1)    # a file that grew since: read no further than the cap
    except OSError as exc:
        raise SpecError(Location(source), "expected a readable spec file", exc.strerror or str(exc)) from None
    if len(data) > MAX_SPEC_BYTES:
        raise SpecError(Location(source), f"expected a spec of at most {MAX_SPEC_BYTES:,} bytes", "more")
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise SpecError(Location(source), "expected UTF-8 text", f"the byte 0x{data[exc.start]:02x} at offset "
                        f"{exc.start}") from None
