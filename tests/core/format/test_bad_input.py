"""Malformed, truncated and hostile trace files: each gives a one-line error naming the file and
the problem (exit status 2 from the CLI), never a traceback; bad rows become ``invalid``."""
from __future__ import annotations

import hashlib
import shutil
import subprocess
import sys

import h5py
import numpy as np
import pytest

from resweep.core import SolverSettings, TraceFormatError, check_trace, open_trace

from trace_factory import write_rows

Y = 1.501


@pytest.fixture()
def good(tmp_path):
    start = np.tile(np.array([2.5, Y, 2.5]), (4, 2, 1))
    motion = np.zeros_like(start)
    return write_rows(tmp_path / "good.h5", start, motion, start.copy())


def _mutated(good, tmp_path, edit, name="bad.h5"):
    path = tmp_path / name
    shutil.copy(good, path)
    with h5py.File(path, "r+") as f:
        edit(f)
    return path


def _replace(f, name, data):
    del f[name]
    f[name] = data


def _cli(*args):
    return subprocess.run([sys.executable, "-m", "resweep.app.cli", *map(str, args)],
                          capture_output=True, text=True, timeout=300)


def _assert_one_line_refusal(path, *needles):
    with pytest.raises(TraceFormatError) as ei:
        open_trace(path)
    msg = ei.value.one_line()
    assert str(path) in msg
    for n in needles:
        assert n in msg, msg
    return msg


CASES = {
    "missing_start": (lambda f: f.__delitem__("frames/start"), ["/frames/start", "missing"]),
    "missing_world": (lambda f: f.__delitem__("world"), ["/world", "missing"]),
    "missing_format": (lambda f: f.attrs.__delitem__("format"), ["format", "missing"]),
    "wrong_format": (lambda f: f.attrs.__setitem__("format", "something-else"), ["format"]),
    "unknown_version": (lambda f: f.attrs.__setitem__("version", 7), ["version 7", "not supported"]),
    "float_version": (lambda f: f.attrs.__setitem__("version", 1.5), ["version", "integer"]),
    "bad_voxel_size": (lambda f: f.attrs.__setitem__("voxel_size", -1.0), ["voxel_size"]),
    "bad_up_axis": (lambda f: f.attrs.__setitem__("up_axis", "w"), ["up_axis"]),
    "start_wrong_shape": (lambda f: _replace(f, "frames/start", np.zeros((4, 2, 2))), ["/frames/start", "shape"]),
    "start_wrong_dtype": (lambda f: _replace(f, "frames/start", np.zeros((4, 2, 3), np.int32)),
                          ["/frames/start", "dtype"]),
    "time_decreasing": (lambda f: _replace(f, "frames/time", np.array([0.0, 1.0, 0.5, 2.0])),
                        ["/frames/time", "non-decreasing"]),
    "half_wrong_shape": (lambda f: _replace(f, "entities/half_extents", np.ones((3, 3))),
                         ["/entities/half_extents", "shape"]),
    "duplicate_ids": (lambda f: _replace(f, "entities/id", np.array([5, 5])), ["unique"]),
    "blocks_wrong_dtype": (lambda f: _replace(f, "world/chunk_blocks", f["world/chunk_blocks"][...].astype(np.float32)),
                           ["/world/chunk_blocks", "uint8 or uint16"]),
    "origin_not_multiple": (lambda f: _replace(f, "world/chunk_origin", f["world/chunk_origin"][...] + 1),
                            ["/world/chunk_origin", "multiple"]),
    # rows 0 and 3 of the four chunk origins made equal (not neighbours in file order)
    "duplicate_origin": (lambda f: _replace(f, "world/chunk_origin", f["world/chunk_origin"][...][[0, 1, 2, 0]]),
                         ["/world/chunk_origin", "duplicate chunk origins"]),
    "external_link": (lambda f: (f.__delitem__("frames/motion"),
                                 f["frames"].__setitem__("motion", h5py.ExternalLink("other.h5", "/m"))),
                      ["/frames/motion", "external link"]),
    "dangling_soft_link": (lambda f: (f.__delitem__("frames/end"),
                                      f["frames"].__setitem__("end", h5py.SoftLink("/nowhere/end"))),
                           ["/frames/end", "soft link"]),
    "scaleoffset_filter": (lambda f: (f.__delitem__("frames/time"),
                                      f.create_dataset("frames/time", data=np.arange(4) / 60.0, scaleoffset=3)),
                           ["/frames/time", "filter"]),
    # 1 GB of blocks declared in a file of a few kB (chunked storage never written).
    "huge_declared": (lambda f: (f.__delitem__("world/chunk_blocks"),
                                 f.create_dataset("world/chunk_blocks", shape=(1 << 20, 8, 8, 8), dtype=np.uint16,
                                                  chunks=(1, 8, 8, 8), compression="gzip")),
                      ["/world/chunk_blocks", "plausibly"]),
}


@pytest.mark.parametrize("case", sorted(CASES))
def test_malformed_file_refused_with_one_line(good, tmp_path, case):
    edit, needles = CASES[case]
    path = _mutated(good, tmp_path, edit)
    _assert_one_line_refusal(path, *needles)


@pytest.mark.parametrize("case", ["missing_start", "unknown_version", "external_link", "huge_declared"])
def test_cli_exit_2_one_line_no_traceback(good, tmp_path, case):
    edit, needles = CASES[case]
    path = _mutated(good, tmp_path, edit)
    before = hashlib.sha256(path.read_bytes()).hexdigest()
    for cmd in (["check", path], ["info", path], ["view", path],
                ["snapshot", path, "--frame", "0", "-o", tmp_path / "x.png"]):
        r = _cli(*cmd)
        assert r.returncode == 2, r.stderr
        lines = [ln for ln in r.stderr.splitlines() if ln.strip() and "compiling" not in ln]
        assert len(lines) == 1, r.stderr
        assert str(path) in lines[0] and needles[0] in lines[0]
        assert "Traceback" not in r.stderr
    assert hashlib.sha256(path.read_bytes()).hexdigest() == before  # input never modified


def test_virtual_dataset_refused(good, tmp_path):
    src = tmp_path / "src.h5"
    with h5py.File(src, "w") as f:
        f["m"] = np.zeros((4, 2, 3))

    def edit(f):
        del f["frames/motion"]
        layout = h5py.VirtualLayout(shape=(4, 2, 3), dtype="f8")
        layout[...] = h5py.VirtualSource(str(src), "m", shape=(4, 2, 3))
        f["frames"].create_virtual_dataset("motion", layout)

    _assert_one_line_refusal(_mutated(good, tmp_path, edit), "/frames/motion", "virtual")


def test_external_storage_refused(good, tmp_path):
    raw = tmp_path / "raw.bin"
    np.zeros((4, 2, 3)).tofile(raw)

    def edit(f):
        del f["frames/motion"]
        f["frames"].create_dataset("motion", shape=(4, 2, 3), dtype="f8", external=[(str(raw), 0, h5py.h5f.UNLIMITED)])

    _assert_one_line_refusal(_mutated(good, tmp_path, edit), "/frames/motion", "external raw storage")


def test_in_file_soft_link_is_followed(good, tmp_path):
    def edit(f):
        f["stash/motion"] = f["frames/motion"][...]
        del f["frames/motion"]
        f["frames"]["motion"] = h5py.SoftLink("/stash/motion")

    with open_trace(_mutated(good, tmp_path, edit)) as tr:
        assert tr.frames(0, 4).motion.shape == (4, 2, 3)


@pytest.mark.parametrize("content,needle", [(b"", "empty file"), (b"hello, not hdf5\n" * 50, "not an HDF5 file")])
def test_non_hdf5_and_empty(tmp_path, content, needle):
    path = tmp_path / "junk.h5"
    path.write_bytes(content)
    _assert_one_line_refusal(path, needle)
    r = _cli("check", path)
    assert r.returncode == 2 and needle in r.stderr and "Traceback" not in r.stderr


def test_truncated_file(good, tmp_path):
    data = good.read_bytes()
    path = tmp_path / "cut.h5"
    path.write_bytes(data[: len(data) // 2])
    r = _cli("check", path)
    assert r.returncode == 2, r.stdout + r.stderr
    assert str(path) in r.stderr and "Traceback" not in r.stderr
    assert len([ln for ln in r.stderr.splitlines() if ln.strip() and "compiling" not in ln]) == 1


def test_missing_file_and_directory(tmp_path):
    for p, needle in ((tmp_path / "nope.h5", "cannot open"), (tmp_path, "directory")):
        r = _cli("check", p)
        assert r.returncode == 2 and needle in r.stderr and "Traceback" not in r.stderr


def test_nan_rows_reported_invalid_rest_checked(tmp_path):
    start = np.tile(np.array([2.5, Y, 2.5]), (3, 2, 1))
    motion = np.zeros_like(start)
    end = start.copy()
    start[1, 0, 1] = np.nan          # NaN start
    end[2, 1, 0] = np.inf            # infinite recorded end
    half = np.full((3, 2, 3), 0.5)
    half[0, 1, 2] = 0.0              # non-positive half extent override
    path = write_rows(tmp_path / "nan.h5", start, motion, end, frame_half_extents=half)
    with open_trace(path) as tr:
        report = check_trace(tr, SolverSettings())
    invalid = sorted((d.frame, d.entity, d.reason) for d in report.divergences if d.kind == "invalid")
    assert invalid == [(0, 20, "half_extents.z is 0 (must be > 0)"), (1, 10, "start.y is NaN"),
                       (2, 20, "end.x is inf")]
    assert report.entity_frames == 6
    assert report.counts["invalid"] == 3
    r = _cli("check", path)
    assert r.returncode == 1 and "invalid" in r.stdout
    assert "start.y is NaN" in r.stdout and "end.x is inf" in r.stdout


def test_inactive_rows_are_never_read(tmp_path):
    start = np.tile(np.array([2.5, Y, 2.5]), (3, 2, 1))
    end = start.copy()
    start[1, 1] = np.nan  # garbage in an inactive row
    active = np.ones((3, 2), bool)
    active[1, 1] = False
    path = write_rows(tmp_path / "inactive.h5", start, np.zeros_like(start), end, active=active)
    with open_trace(path) as tr:
        report = check_trace(tr, SolverSettings())
    assert sum(report.counts.values()) == 0
    assert report.entity_frames == 5


def test_usage_errors_one_line(good):
    for args in (["check", good, "--tolerance", "abc"], ["check", good, "--fail-on", "wobble"],
                 ["check", good, "--passes", "0"], ["check"], ["frobnicate"], ["check", good, "--limit", "-3"]):
        r = _cli(*args)
        assert r.returncode == 2, args
        assert "Traceback" not in r.stderr
        assert len([ln for ln in r.stderr.splitlines() if ln.strip()]) == 1, (args, r.stderr)
