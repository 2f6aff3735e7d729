"""Resource caps, checked from estimates before anything large is allocated.

A mistyped size (a corridor of 10⁹ cells, a 10⁶-step limit) must be refused with the numbers,
not discovered by running out of memory. Defaults can be raised for one process with the
environment variables below, or with ``--max-work`` / ``--max-bytes`` on the commands.
"""

from __future__ import annotations

import os
from contextlib import contextmanager
from dataclasses import dataclass, replace
from typing import Iterator

from .errors import TaskgenError


class ResourceLimitError(TaskgenError, ValueError):
    """A spec would need more work or memory than the current caps allow."""


@dataclass(frozen=True)
class Limits:
    """Caps on one variant: DP work (states × actions × step limit) and bytes of any one table or picture."""

    max_work: int = 200_000_000
    max_bytes: int = 512 * 1024 * 1024


def _from_environment() -> Limits:
    out = Limits()
    for field, name in (("max_work", "TASKGEN_MAX_WORK"), ("max_bytes", "TASKGEN_MAX_BYTES")):
        text = os.environ.get(name)
        if text:
            try:
                out = replace(out, **{field: int(float(text))})
            except ValueError:
                raise ResourceLimitError(f"{name} must be a number, got {text!r}") from None
    return out


_current = _from_environment()


def current() -> Limits:
    """The caps in force."""
    return _current


@contextmanager
def raised(max_work: float | None = None, max_bytes: float | None = None) -> Iterator[Limits]:
    """Temporarily replace caps (None keeps a cap as it is)."""
    global _current
    before = _current
    _current = replace(before, **{k: int(v) for k, v in (("max_work", max_work), ("max_bytes", max_bytes))
                                  if v is not None})
    try:
        yield _current
    finally:
        _current = before


def check_work(what: str, states: int, actions: int, horizon: int) -> None:
    """Refuse a model whose exact analyses would exceed the work cap."""
    work = states * actions * horizon
    if work > _current.max_work:
        raise ResourceLimitError(
            f"{what}: the compiled model would need {work:.3g} state-action-steps "
            f"(≈{states:.3g} states × {actions} actions × step limit {horizon}), over the cap of "
            f"{_current.max_work:.3g}; raise it with --max-work or TASKGEN_MAX_WORK")


def check_bytes(what: str, nbytes: int) -> None:
    """Refuse one table or picture larger than the byte cap."""
    if nbytes > _current.max_bytes:
        raise ResourceLimitError(
            f"{what} would take {nbytes:.3g} bytes, over the cap of {_current.max_bytes:.3g}; "
            "raise it with --max-bytes or TASKGEN_MAX_BYTES")
