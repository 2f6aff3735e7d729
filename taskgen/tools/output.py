"""Writing output files atomically: a temporary file beside the target, renamed into place."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path


def write_text_atomic(path: str | os.PathLike[str], text: str) -> Path:
    """Write ``text`` to ``path`` so that readers see the old file or the whole new one, never a part."""
    return write_bytes_atomic(path, text.encode("utf-8"))


def write_bytes_atomic(path: str | os.PathLike[str], data: bytes) -> Path:
    """Write ``data`` to ``path`` through a temporary file beside it, renamed into place: readers see
    the old file or the whole new one, never a part (an error or Ctrl-C leaves no temporary file)."""
    target = Path(path)
    target.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=target.parent)
    umask = os.umask(0)
    os.umask(umask)
    try:
        os.chmod(tmp, 0o666 & ~umask)   # an ordinary file, not mkstemp's private 0600
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
        os.replace(tmp, target)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    return target


def child_path(out_dir: str | os.PathLike[str], name: str) -> Path:
    """``out_dir / name`` for a name derived from user input, refused if it could leave ``out_dir``
    (an absolute path, ``..``, a path separator or a hidden name)."""
    if not name or name in (".", "..") or name.startswith(".") or "/" in name or "\\" in name \
            or Path(name).is_absolute() or "\0" in name:
        raise ValueError(f"output name {name!r} must be a plain file name inside the output folder")
    base = Path(out_dir).resolve()
    target = (base / name).resolve()
    if target.parent != base:
        raise ValueError(f"output name {name!r} would leave {base}")
    return target
