"""Resource caps, checked from estimates before anything large is allocated.

A mistyped size (a corridor of 10⁹ cells, a 10⁶-step limit) must be refused with the numbers,
not discovered by running out of memory. Defaults can be raised for one process with the
environment variables below, or with ``--max-work`` / ``--max-bytes`` on the commands.
"""

from __future__ import annotations

import math
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


def _cap(value: str | float, where: str) -> int:
    """A cap given as a number (an option's value, or an environment variable's text): a finite
    number ≥ 1, else a ResourceLimitError that names where it came from."""
    try:
        number = float(value)
    except (TypeError, ValueError):
        number = math.nan
    if not math.isfinite(number) or number < 1:
        shown = repr(value)[:80]
        raise ResourceLimitError(f"{where}: expected a finite number ≥ 1, got {shown}")
    return int(number)


def _from_environment() -> Limits:
    """The defaults, with TASKGEN_MAX_WORK / TASKGEN_MAX_BYTES applied (read on first use, never at import)."""
    out = Limits()
    for field, name in (("max_work", "TASKGEN_MAX_WORK"), ("max_bytes", "TASKGEN_MAX_BYTES")):
        text = os.environ.get(name)
        if text:
            out = replace(out, **{field: _cap(text, name)})
    return out


_current: Limits | None = None


def current() -> Limits:
    """The caps in force (the environment variables are read here, the first time)."""
    global _current
    if _current is None:
        _current = _from_environment()
    return _current


def install(limits: Limits) -> None:
    """Put ``limits`` in force in this process (a worker of a pool gets its parent's caps this way)."""
    global _current
    _current = limits


@contextmanager
def raised(max_work: str | float | None = None, max_bytes: str | float | None = None) -> Iterator[Limits]:
    """Temporarily replace caps (None keeps a cap as it is); a value that is not a finite number ≥ 1 is
    refused, naming the option."""
    global _current
    before = current()
    _current = replace(before, **{k: _cap(v, f"--{k.replace('_', '-')}")
                                  for k, v in (("max_work", max_work), ("max_bytes", max_bytes)) if v is not None})
    try:
        yield _current
    finally:
        _current = before


STEP_FLOOR = 4096   # a step of the analyses' dynamic programming costs at least this many state-actions
                    # (numpy's per-call cost), so a long horizon over few states is counted as it runs


SEARCH_FACTOR = 200    # the chance search may spend this many times the work cap before it stops with an interval
ASCENT_FACTOR = 10     # the stochastic ascent this many times, before it stops with the best policy found


def search_work() -> int:
    """The work (state-action-steps, a step counted as STEP_FLOOR at least) the chance search of one
    variant may spend on its dearest bounds; past it the search ends as at its node budget, with a
    certified interval. The bundled specs spend at most a tenth of it (benchmarks: a marsh field)."""
    return SEARCH_FACTOR * current().max_work


def ascent_work() -> int:
    """The work the stochastic ascent of one variant may spend (its evaluations are passes over the horizon)."""
    return ASCENT_FACTOR * current().max_work


def check_work(what: str, states: int, actions: int, horizon: int,
               advice: str = "raise it with --max-work (on the command line) or TASKGEN_MAX_WORK") -> None:
    """Refuse a model whose exact analyses would exceed the work cap: step limit × state-actions, each
    step counted as at least STEP_FLOOR state-actions."""
    work = horizon * max(states * actions, STEP_FLOOR)
    cap = current().max_work
    if work > cap:
        floor = "" if states * actions >= STEP_FLOOR else f", each step counted as at least {STEP_FLOOR:,}"
        raise ResourceLimitError(
            f"{what}: the compiled model would need {work:.3g} state-action-steps "
            f"(≈{states:.3g} states × {actions} actions × step limit {horizon}{floor}), over the cap of "
            f"{cap:.3g}; {advice}")


def check_bytes(what: str, nbytes: int) -> None:
    """Refuse one table or picture larger than the byte cap."""
    cap = current().max_bytes
    if nbytes > cap:
        raise ResourceLimitError(
            f"{what} would take {nbytes:.3g} bytes, over the cap of {cap:.3g}; "
            "raise it with --max-bytes (on the command line) or TASKGEN_MAX_BYTES")
