"""Writing output files atomically: a temporary file beside the target, renamed into place."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path


def write_text_atomic(path: str | os.PathLike[str], text: str) -> Path:
    """Write ``text`` to ``path`` so that readers see the old file or the whole new one, never a part."""
    target = Path(path)
    target.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=target.parent)
    try:
        with os.fdopen(fd, "w", encoding="utf-8", newline="\n") as handle:
            handle.write(text)
        os.replace(tmp, target)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    return target
