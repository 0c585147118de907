"""Atomic writers: complete file or none, no temporary left behind, ordinary permissions."""

from __future__ import annotations

import os

import pytest

from gpctools.report.files import atomic_path, write_text


def test_write_replaces_whole_file(tmp_path):
    p = tmp_path / "a.txt"
    write_text(p, "first")
    write_text(p, "second")
    assert p.read_text() == "second"
    assert [q.name for q in tmp_path.iterdir()] == ["a.txt"]


def test_failure_leaves_previous_file_and_no_partial(tmp_path):
    p = tmp_path / "a.txt"
    write_text(p, "kept")
    with pytest.raises(RuntimeError):
        with atomic_path(p) as tmp:
            tmp.write_text("half")
            raise RuntimeError("crash while writing")
    assert p.read_text() == "kept"
    assert [q.name for q in tmp_path.iterdir()] == ["a.txt"]


def test_regression_outputs_not_owner_only(tmp_path):
    # mkstemp makes 0600 files; outputs should follow the umask like open() (common practice).
    p = write_text(tmp_path / "b.txt", "x")
    mask = os.umask(0)
    os.umask(mask)
    assert os.stat(p).st_mode & 0o777 == 0o666 & ~mask
