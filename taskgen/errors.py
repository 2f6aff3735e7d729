"""The one error tree of taskgen: every error a user can cause derives from TaskgenError."""

from __future__ import annotations

from dataclasses import dataclass


class TaskgenError(Exception):
    """Root of every error taskgen raises on purpose."""


@dataclass(frozen=True)
class Location:
    """Where in a spec a problem sits: file, 1-based line and column, dotted field path."""

    source: str
    line: int | None = None
    column: int | None = None
    field: str = ""

    def prefix(self) -> str:
        """``file:line:col: field`` as it starts an error message."""
        where = self.source
        if self.line is not None:
            where += f":{self.line}:{self.column or 1}"
        return f"{where}: {self.field}" if self.field else where


class SpecError(TaskgenError, ValueError):
    """A spec that cannot be read or does not validate, located in its file.

    Messages follow one template: ``file:line:col: field: expected ..., got ...``.
    """

    def __init__(self, location: Location, expected: str, found: str | None = None) -> None:
        self.location = location
        self.expected = expected
        self.found = found
        message = f"{location.prefix()}: {expected}"
        if found is not None:
            message += f", got {found}"
        super().__init__(message)


class SpecErrors(SpecError):
    """Several located problems in one spec, reported together (the first one leads)."""

    def __init__(self, errors: list[SpecError]) -> None:
        first = errors[0]
        self.errors = errors
        super().__init__(first.location, first.expected, first.found)
        self.args = ("\n".join(str(e) for e in errors),)

    def __str__(self) -> str:
        return self.args[0]


class LayoutError(TaskgenError, ValueError):
    """A variant's layout cannot be built from its parameters (names the seed)."""

    @classmethod
    def for_variant(cls, variant_id: str, layout: str, seed: int, problem: str) -> "LayoutError":
        """The one message template: ``<variant> (<layout words>, variant seed <seed>): <problem>``."""
        return cls(f"{variant_id} ({layout}, variant seed {seed}): {problem}")


class AnalysisError(TaskgenError, ValueError):
    """An analysis was asked of a model it does not apply to."""
