"""Writing output files: atomically for regular files, straight through for devices and FIFOs, never
over results a user did not ask to replace, and with one run at a time per output folder."""

from __future__ import annotations

import errno
import os
import stat
import tempfile
from contextlib import contextmanager
from pathlib import Path
from typing import Iterable, Iterator

from ..errors import TaskgenError

LOCK_NAME = ".taskgen-lock"


class OutputError(TaskgenError, OSError):
    """An output that cannot be written (names the path and the reason)."""


def _reason(exc: OSError) -> str:
    return exc.strerror or str(exc)


def write_text_atomic(path: str | os.PathLike[str], text: str) -> Path:
    """Write ``text`` to ``path`` so that readers see the old file or the whole new one, never a part."""
    return write_bytes_atomic(path, text.encode("utf-8"))


def write_bytes_atomic(path: str | os.PathLike[str], data: bytes) -> Path:
    """Write ``data`` to ``path``. A regular file (or a new one) is written through a temporary file
    beside it and renamed into place, so readers see the old file or the whole new one (an error,
    Ctrl-C or SIGTERM leaves no temporary file); a symbolic link is followed, so the link stays. A
    device or a FIFO (``/dev/stdout``) is written straight through, never replaced by a file."""
    target = Path(os.path.realpath(path))
    try:
        info = os.stat(target)
    except FileNotFoundError:
        info = None
    except OSError as exc:
        raise OutputError(f"{path}: cannot write here: {_reason(exc)}") from None
    if info is not None and stat.S_ISDIR(info.st_mode):
        raise OutputError(f"{path}: expected a file to write, got a folder")
    if info is not None and not stat.S_ISREG(info.st_mode):
        try:
            with open(target, "wb") as handle:
                handle.write(data)
        except OSError as exc:
            raise OutputError(f"{path}: cannot write: {_reason(exc)}") from None
        return target
    tmp = None
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=target.parent)
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)   # an ordinary file, not mkstemp's private 0600
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
        os.replace(tmp, target)
    except OSError as exc:
        if tmp is not None:
            Path(tmp).unlink(missing_ok=True)
        raise OutputError(f"{path}: cannot write: {_reason(exc)}") from None
    except BaseException:
        if tmp is not None:
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


def refuse_overwrite(paths: Iterable[Path], force: bool, what: str) -> None:
    """Refuse to replace results that exist unless ``force`` (the command's --force)."""
    if force:
        return
    existing = [p for p in paths if p.exists()]
    if existing:
        shown = ", ".join(str(p) for p in existing[:3]) + (f" and {len(existing) - 3} more" if len(existing) > 3 else "")
        raise OutputError(f"{shown} already exist{'s' if len(existing) == 1 else ''}: {what} would replace "
                          f"{'it' if len(existing) == 1 else 'them'}; give --force to do so")


@contextmanager
def locked_folder(out_dir: str | os.PathLike[str]) -> Iterator[Path]:
    """Hold an exclusive lock on an output folder (a ``.taskgen-lock`` file in it) while a run writes
    there, so that two runs into one folder cannot both succeed: the second is refused at once."""
    import fcntl   # POSIX; taskgen's CI and users' machines are Linux or macOS

    folder = Path(out_dir)
    try:
        folder.mkdir(parents=True, exist_ok=True)
        handle = open(folder / LOCK_NAME, "a+")
    except OSError as exc:
        raise OutputError(f"{out_dir}: cannot write here: {_reason(exc)}") from None
    try:
        try:
            fcntl.flock(handle, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError as exc:
            if exc.errno in (errno.EAGAIN, errno.EACCES, errno.EWOULDBLOCK):
                raise OutputError(f"{out_dir}: another taskgen run is writing into this folder") from None
            raise OutputError(f"{out_dir}: cannot lock: {_reason(exc)}") from None
        yield folder
    finally:
        handle.close()     # closing releases the lock
