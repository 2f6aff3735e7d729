"""Progress of long commands: a tqdm bar on a terminal, a line every few seconds otherwise, nothing with --quiet."""

from __future__ import annotations

import sys
import time
from typing import Any, TextIO

from tqdm import tqdm

LINE_EVERY = 5.0     # seconds between progress lines when stderr is not a terminal


class Progress:
    """Counts finished units of work (variants, episodes) towards ``total``; writes to stderr."""

    def __init__(self, total: int, what: str, unit: str = "variant", quiet: bool = False,
                 stream: TextIO | None = None) -> None:
        self.total, self.what, self.unit, self.quiet = total, what, unit, quiet
        self.stream = stream if stream is not None else sys.stderr
        self.count, self.start, self.last = 0, time.monotonic(), time.monotonic()
        terminal = hasattr(self.stream, "isatty") and self.stream.isatty()
        self.bar: Any = tqdm(total=total, desc=what, unit=unit, file=self.stream, leave=False) \
            if terminal and not quiet else None

    def update(self, n: int = 1) -> None:
        """``n`` more units are done."""
        self.count += n
        if self.bar is not None:
            self.bar.update(n)
        elif not self.quiet and time.monotonic() - self.last >= LINE_EVERY:
            self.last = time.monotonic()
            self.stream.write(self.line() + "\n")
            self.stream.flush()

    def line(self) -> str:
        """``what: done/total units, rate/s, ETA``."""
        elapsed = max(time.monotonic() - self.start, 1e-9)
        rate = self.count / elapsed
        left = (self.total - self.count) / rate if rate > 0 else float("inf")
        eta = f"{left:.0f} s" if left != float("inf") else "?"
        return f"{self.what}: {self.count:,}/{self.total:,} {self.unit}s, {rate:.1f}/s, ETA {eta}"

    def close(self) -> None:
        """End the bar (a terminal's is removed)."""
        if self.bar is not None:
            self.bar.close()

    def __enter__(self) -> "Progress":
        return self

    def __exit__(self, *exc: Any) -> None:
        self.close()
