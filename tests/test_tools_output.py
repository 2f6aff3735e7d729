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
