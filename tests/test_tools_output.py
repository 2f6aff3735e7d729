"""Atomic writes and output names that cannot leave the output folder."""

from __future__ import annotations

import pytest

from taskgen.tools import output
from taskgen.tools.output import child_path, write_text_atomic


def test_atomic_write_replaces_whole_files(tmp_path):
    """A write leaves the complete new text and no temporary file behind."""
    target = tmp_path / "out" / "manifest.yaml"
    write_text_atomic(target, "old\n")
    write_text_atomic(target, "new\n")
    assert target.read_text() == "new\n"
    assert [p.name for p in target.parent.iterdir()] == ["manifest.yaml"]


@pytest.mark.parametrize("error", [OSError("disk full"), KeyboardInterrupt()])
def test_interrupted_write_leaves_the_old_file_and_no_partial(tmp_path, monkeypatch, error):
    """An error or Ctrl-C in the middle of a write keeps the old file and removes the partial one
    (os.replace is atomic on POSIX: common practice)."""
    target = tmp_path / "page.html"
    target.write_text("old")

    real_fdopen = output.os.fdopen

    class Failing:
        def __init__(self, fd, *args, **kwargs):
            self.handle = real_fdopen(fd, *args, **kwargs)

        def __enter__(self):
            return self

        def __exit__(self, *exc):
            self.handle.close()

        def write(self, text):
            self.handle.write(text[:3])
            raise error

    monkeypatch.setattr(output.os, "fdopen", Failing)
    with pytest.raises(type(error)):
        write_text_atomic(target, "new text that never lands")
    assert target.read_text() == "old"
    assert [p.name for p in tmp_path.iterdir()] == ["page.html"]


@pytest.mark.parametrize("name", ["../x", "/etc/passwd", "a/b", "..", ".hidden", "", "a\\b", "x\0y"])
def test_names_cannot_leave_the_output_folder(tmp_path, name):
    """Names from specs never reach outside --out: no .., no absolute paths, no separators."""
    with pytest.raises(ValueError, match="output name"):
        child_path(tmp_path, name)


def test_plain_names_stay_inside(tmp_path):
    """A plain name maps to a file directly inside the folder."""
    assert child_path(tmp_path, "lantern-hall.png") == (tmp_path / "lantern-hall.png").resolve()


def test_writes_go_through_fifos_and_symlinks_and_fail_located(tmp_path):
    """A FIFO (or a device such as /dev/stdout) is written through, never replaced by a file; a symbolic
    link is followed, so it stays a link; an impossible target is an OutputError naming the path."""
    import os
    import threading

    from taskgen.tools.output import OutputError

    fifo = tmp_path / "pipe"
    os.mkfifo(fifo)
    received = []
    reader = threading.Thread(target=lambda: received.append(open(fifo).read()))
    reader.start()
    write_text_atomic(fifo, "through the pipe\n")
    reader.join(timeout=10)
    assert received == ["through the pipe\n"] and fifo.is_fifo()
    real = tmp_path / "real.md"
    real.write_text("old")
    link = tmp_path / "link.md"
    link.symlink_to(real)
    write_text_atomic(link, "new")
    assert link.is_symlink() and real.read_text() == "new"
    (tmp_path / "plain").write_text("a file, not a folder")
    with pytest.raises(OutputError, match="plain/x.json: cannot write"):
        write_text_atomic(tmp_path / "plain" / "x.json", "{}")
    with pytest.raises(OutputError, match="expected a file to write, got a folder"):
        write_text_atomic(tmp_path, "{}")


def test_one_run_at_a_time_per_folder_and_no_silent_overwrite(tmp_path):
    """While a run holds an output folder's lock a second is refused at once; existing results are
    replaced only when forced."""
    from taskgen.tools.output import OutputError, locked_folder, refuse_overwrite

    with locked_folder(tmp_path):
        with pytest.raises(OutputError, match="another taskgen run is writing into this folder"):
            with locked_folder(tmp_path):
                pass
    with locked_folder(tmp_path):      # released when the first run ends
        pass
    (tmp_path / "manifest.yaml").write_text("x")
    with pytest.raises(OutputError, match="manifest.yaml already exists: taskgen variants would replace it; "
                                          "give --force"):
        refuse_overwrite([tmp_path / "manifest.yaml", tmp_path / "other"], False, "taskgen variants")
    refuse_overwrite([tmp_path / "manifest.yaml"], True, "taskgen variants")
