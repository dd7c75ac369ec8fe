"""Outputs are created or replaced whole (core/format/atomic.py)."""
from __future__ import annotations

import pytest

from resweep.core.format.atomic import write_atomic


def test_replaces_whole_and_leaves_no_temporary_file(tmp_path):
    dest = tmp_path / "out.json"
    dest.write_text("old")
    write_atomic(dest, lambda fh: fh.write(b"new"))
    assert dest.read_text() == "new"
    assert [p.name for p in tmp_path.iterdir()] == ["out.json"]


def test_a_failed_write_keeps_the_old_file(tmp_path):
    dest = tmp_path / "out.json"
    dest.write_text("old")

    def half_then_fail(fh):
        fh.write(b"half of the new")
        raise OSError(28, "No space left on device")
    with pytest.raises(OSError):
        write_atomic(dest, half_then_fail)
    assert dest.read_text() == "old"
    assert [p.name for p in tmp_path.iterdir()] == ["out.json"]


def test_missing_folder_is_an_os_error(tmp_path):
    with pytest.raises(OSError):
        write_atomic(tmp_path / "no" / "out.json", lambda fh: fh.write(b"x"))
