"""Spec parameters that may vary per variant: a fixed integer, an inclusive range or a choice."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Annotated, Any, Callable

import numpy as np
from pydantic import BeforeValidator, PlainSerializer, WithJsonSchema
from pydantic_core import PydanticCustomError


def describe(value: Any) -> str:
    """Name a YAML value the way an error message shows what was found."""
    if value is None:
        return "null"
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (int, float)):
        return repr(value)
    if isinstance(value, str):   # a long text is cut, so an error message stays one line
        return repr(value) if len(value) <= 60 else f"{value[:50]!r}… ({len(value):,} characters)"
    if isinstance(value, dict):
        return "a mapping"
    if isinstance(value, (list, tuple)):
        return "a list"
    return type(value).__name__


def expected_error(expected: str, found: Any) -> PydanticCustomError:
    """A validation error in taskgen's template (the loader adds file, line and field)."""
    return PydanticCustomError(
        "taskgen_expected", "expected {expected}, got {found}",
        {"expected": expected, "found": describe(found)},
    )


@dataclass(frozen=True)
class IntParam:
    """An integer parameter: ``low == high`` when fixed, ``choices`` when picked from a list."""

    low: int
    high: int
    choices: tuple[int, ...] | None = None

    @property
    def fixed(self) -> bool:
        """True when every variant gets the same value."""
        return self.low == self.high and (self.choices is None or len(set(self.choices)) == 1)

    def sample(self, rng: np.random.Generator) -> int:
        """Draw this variant's value (uniform over the range or the choices)."""
        if self.fixed:
            return self.low
        if self.choices is not None:
            return int(self.choices[int(rng.integers(len(self.choices)))])
        return int(rng.integers(self.low, self.high + 1))

    def to_yaml(self) -> Any:
        """The value as it would be written in a spec."""
        if self.choices is not None:
            return {"choice": list(self.choices)}
        if self.low == self.high:
            return self.low
        return {"range": [self.low, self.high]}


def _is_int(value: Any) -> bool:
    return isinstance(value, int) and not isinstance(value, bool)


def int_param_validator(minimum: int, maximum: int | None = None) -> Callable[[Any], IntParam]:
    """Build the validator of one IntParam field with its bounds."""
    if maximum is None:
        bound = f"≥ {minimum}"
    else:
        bound = f"in [{minimum}, {maximum}]"
    one = f"an integer {bound}"
    shape = f"{one}, {{range: [low, high]}} or {{choice: [...]}}"

    def in_bounds(v: int) -> bool:
        return v >= minimum and (maximum is None or v <= maximum)

    def validate(value: Any) -> IntParam:
        if isinstance(value, IntParam):
            return value
        if _is_int(value):
            if not in_bounds(value):
                raise expected_error(one, value)
            return IntParam(value, value)
        if isinstance(value, dict) and len(value) == 1:
            (key, body), = value.items()
            if key == "range":
                if not (isinstance(body, list) and len(body) == 2 and all(map(_is_int, body))):
                    raise expected_error("range: a list of two integers [low, high]", body)
                low, high = body
                if low > high:
                    raise expected_error("range: low ≤ high", f"[{low}, {high}]")
                for v in body:
                    if not in_bounds(v):
                        raise expected_error(f"range ends {bound}", v)
                return IntParam(low, high)
            if key == "choice":
                if not (isinstance(body, list) and body and all(map(_is_int, body))):
                    raise expected_error("choice: a non-empty list of integers", body)
                for v in body:
                    if not in_bounds(v):
                        raise expected_error(f"choices {bound}", v)
                return IntParam(min(body), max(body), tuple(body))
        raise expected_error(shape, value)

    return validate


def int_param(minimum: int, maximum: int | None = None) -> Any:
    """Annotated type for an integer spec field that may be a range or a choice."""
    number: dict[str, Any] = {"type": "integer", "minimum": minimum}
    if maximum is not None:
        number["maximum"] = maximum
    schema = {
        "anyOf": [
            number,
            {"type": "object", "additionalProperties": False, "required": ["range"],
             "properties": {"range": {"type": "array", "items": number,
                                      "minItems": 2, "maxItems": 2}}},
            {"type": "object", "additionalProperties": False, "required": ["choice"],
             "properties": {"choice": {"type": "array", "items": number, "minItems": 1}}},
        ]
    }
    return Annotated[
        IntParam,
        BeforeValidator(int_param_validator(minimum, maximum)),
        PlainSerializer(lambda p: p.to_yaml(), return_type=Any),
        WithJsonSchema(schema),
    ]
