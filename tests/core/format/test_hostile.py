"""The reported hostile traces (tests/hostile_traces.py): one line naming the file, no hang,
bounded work, limits that name how to raise them, and the isolated first open."""
from __future__ import annotations

import os
import subprocess
import sys

import numpy as np
import pytest

from resweep.core import SolverSettings, TraceFormatError, VoxelWorld, open_trace, solve_rows, unit_cube_shapes
from resweep.core.check.rows import overlap_depths
from resweep.core.errors import printable
from resweep.core.format import vet as vetmod
from resweep.core.format.declared import NO_PLUGINS_ENV
from resweep.core.format.limits import Limits
from resweep.core.check.kinds import KINDS
from resweep.core.solve.settings import HIT, STARTED_INSIDE

import hostile_traces as H


@pytest.fixture()
def good(tmp_path):
    return H.one_row(tmp_path / "good.h5")


def _refusal(path, limits=None) -> str:
    with pytest.raises(TraceFormatError) as ei:
        with open_trace(path, limits=limits) as tr:
            for _ in tr.iter_frames():
                pass
    line = ei.value.one_line()
    assert str(path) in line and "\n" not in line and "\r" not in line and "\x1b" not in line
    return line


def test_damaged_symbol_table_node_is_one_line_naming_the_file(good, tmp_path):
    line = _refusal(H.broken_symbol_node(good, tmp_path / "xnod.h5"))
    assert "symbol table" in line or "cannot" in line


def test_link_targets_with_control_characters_are_escaped(good, tmp_path):
    soft = _refusal(H.newline_soft_link(good, tmp_path / "soft.h5"))
    assert "/frames/no\\nsuch\\x1b[2J" in soft
    ext = _refusal(H.newline_external_link(good, tmp_path / "ext.h5"))
    assert "evil\\nfile.h5" in ext


def test_long_and_multiline_attributes(good, tmp_path):
    path = H.long_strings(good, tmp_path / "long.h5")
    line = _refusal(path)  # the up_axis holds a newline: refused, quoted escaped
    assert "sideways\\nand down" in line
    import h5py
    with h5py.File(path, "r+") as f:
        f.attrs["up_axis"] = "y"
    with open_trace(path) as tr:
        assert "\n" not in tr.title and "\\n" in tr.title and len(tr.title) < 300
        assert tr.producer == "p\\r\\nq"


def test_printable_escapes_controls_and_cuts():
    assert printable("a\nb\tc\x1b\x7f\u2028") == "a\\nb\\tc\\x1b\\x7f\\u2028"
    long = printable("x" * 5000)
    assert len(long) < 210 and long.endswith("...")


@pytest.mark.parametrize("build, needle", [
    (H.big_chunk_one_edit, "--max chunk_size=N"),
    (H.declared_blocks_no_storage, "--max chunk_size=N"),
    (lambda p: H.declared_rows_no_storage(p), "--max edits=N"),
    (lambda p: H.declared_rows_no_storage(p, "frames", 40_000_000), "--max frames=N"),
    (H.far_chunks_motion, "--max motion=N"),
    (H.far_chunks_huge_box, "--max extent=N"),
])
def test_size_bombs_are_refused_naming_the_limit(tmp_path, build, needle):
    assert needle in _refusal(build(tmp_path / "bomb.h5"))


def test_chunks_made_for_far_edits_count_against_the_voxel_limit(tmp_path):
    path = H.big_chunk_one_edit(tmp_path / "edit.h5")
    line = _refusal(path, Limits(chunk_size=1024))
    assert "made for edits" in line and "--max voxels=N" in line


def _far_world(solid: bool):
    """Chunk size 16: an air chunk at the origin and one at x = 2^40 - 16 whose voxel
    (FAR, 8, 8) is solid when ``solid``."""
    blocks = np.zeros((2, 16, 16, 16), np.uint16)
    if solid:
        blocks[1, 0, 8, 8] = 1
    return VoxelWorld(16, np.array([[0, 0, 0], [H.FAR, 0, 0]]), blocks, unit_cube_shapes())


def test_motion_across_2_to_the_40_voxels_meets_the_far_voxel(tmp_path):
    # Worked example: a box of half extent 0.25 centred at (8, 8.5, 8.5) moving +x by 1.1e12 enters
    # voxel [FAR, FAR+1) x [8, 9) x [8, 9) when its +x face reaches FAR, i.e. at centre x = FAR - 0.25;
    # the reference stops ``skin`` short of that face (skin 0.001 voxels, the default).
    world = _far_world(True)
    got = solve_rows(world, [[8, 8.5, 8.5]], [[1.1e12, 0, 0]], [[8, 8.5, 8.5]], [[0.25] * 3], SolverSettings(passes=1))
    assert got.state[0] == HIT
    assert got.ref_end[0, 0] == pytest.approx(H.FAR - 0.25 - 0.001, abs=1e-3)
    assert got.ref_end[0, 1:].tolist() == [8.5, 8.5]
    assert got.candidates[0].sum() <= 64  # only the voxels the box reaches near the far chunk


def test_box_spanning_2_to_the_40_voxels_is_inside_the_far_voxel():
    world = _far_world(True)
    got = solve_rows(world, [[8, 8.5, 8.5]], [[0, 0, 0]], [[8, 8.5, 8.5]], [[1.2e12] * 3], SolverSettings())
    assert got.state[0] == STARTED_INSIDE
    assert got.flags[0] & (1 << KINDS.index("start_overlap"))
    # The overlap query visits the two chunks, not 2^36 chunk coordinates: the solid voxel lies
    # fully inside the box, so its least per-axis overlap is one voxel.
    assert overlap_depths(world, [[8, 8.5, 8.5]], [[1.2e12] * 3])[0] == 1.0


def test_long_sweep_through_empty_far_world_is_clear():
    world = _far_world(False)
    got = solve_rows(world, [[8, 8.5, 8.5]], [[1.1e12, 3e11, -2e11]], [[8, 8.5, 8.5]], [[0.5] * 3], SolverSettings())
    assert got.state[0] == 0 and got.candidates[0].sum() == 0


def test_hang_inside_hdf5_is_stopped_by_the_isolated_validator(good, tmp_path, monkeypatch):
    monkeypatch.setenv("RESWEEP_VET_CACHE", str(tmp_path / "vetted.json"))
    monkeypatch.setenv(vetmod.CPU_ENV, "2")
    path = H.heap_size_zero(good, tmp_path / "heap.h5")
    with pytest.raises(TraceFormatError) as ei:
        vetmod.vet(path)
    line = ei.value.one_line()
    assert str(path) in line and "limit" in line and "\n" not in line
    # The verdict is cached by path, size and modification time: no second child.
    monkeypatch.setattr(vetmod, "_start", lambda: pytest.fail("validated twice"))
    with pytest.raises(TraceFormatError):
        vetmod.vet(path)


def test_isolated_validator_accepts_a_good_trace_once(good, tmp_path, monkeypatch):
    monkeypatch.setenv("RESWEEP_VET_CACHE", str(tmp_path / "vetted.json"))
    monkeypatch.setenv("HDF5_PLUGIN_PATH", str(tmp_path))  # removed from the child's environment
    vetmod.vet(good)
    calls = []
    real = vetmod._Child.ask
    monkeypatch.setattr(vetmod._Child, "ask", lambda self, p: calls.append(p) or real(self, p))
    vetmod.vet(good)
    assert calls == []
    import os
    os.utime(good, ns=(1, 1))  # another modification time: validated again
    vetmod.vet(good)
    assert calls == [str(good)]


def test_max_option_raises_a_limit_and_rejects_unknown_names(tmp_path, monkeypatch, capsys):
    from resweep.app.cli.main import main
    monkeypatch.setenv("RESWEEP_MAX", "")  # main() writes the raised limits here; restored after
    monkeypatch.setenv("RESWEEP_VET_CACHE", str(tmp_path / "vetted.json"))
    path = H.far_chunks_motion(tmp_path / "farm.h5")
    assert main(["check", "--quiet", str(path)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "--max motion=N" in err and str(path) in err
    # Raised, the row is solved (the broad phase visits the two chunks, not 2^36 coordinates).
    assert main(["check", "--quiet", "--max", "motion=1e13", str(path)]) == 0
    assert capsys.readouterr().err == ""
    with pytest.raises(SystemExit) as ei:
        main(["info", "--max", "bogus=3", str(path)])
    assert ei.value.code == 2 and "unknown limit 'bogus=3'" in capsys.readouterr().err


def test_one_child_validates_a_batch_and_a_hang_in_it_costs_only_that_file(good, tmp_path, monkeypatch):
    """vet_many (farm workers): one child for the batch; the file that hangs HDF5 is refused with
    the limit it hit, the files after it go on in a second child, which is kept for the next batch."""
    monkeypatch.setenv("RESWEEP_VET_CACHE", str(tmp_path / "vetted.json"))
    monkeypatch.setenv(vetmod.CPU_ENV, "2")
    import shutil
    other = shutil.copy(good, tmp_path / "other.h5")
    hang = H.heap_size_zero(good, tmp_path / "heap.h5")
    notes = tmp_path / "notes.h5"
    notes.write_text("not a trace\n")
    started = []
    real = vetmod._start
    monkeypatch.setattr(vetmod, "_start", lambda: started.append(1) or real())
    got = vetmod.vet_many([good, hang, other, notes], keep=True)
    assert len(started) == 2
    assert got[str(good)] is None and got[str(other)] is None
    for path, word in ((hang, "limit"), (notes, "HDF5")):
        line = got[str(path)].one_line()
        assert line.startswith(str(path)) and word in line and "\n" not in line
    third = shutil.copy(good, tmp_path / "third.h5")
    again = vetmod.vet_many([third, hang], keep=True)
    assert again[str(third)] is None and again[str(hang)].one_line() == got[str(hang)].one_line()
    assert len(started) == 2  # the kept child answered; the hang's verdict came from the cache
    kept = vetmod._kept
    vetmod._kept = None
    kept.close()


PLUGIN_PROBE = """
import h5py
before = h5py.h5pl.size()
import resweep.core.format.h5safe
print(before, h5py.h5pl.size())
"""


@pytest.mark.parametrize("switch", ["1", None])
def test_children_clear_hdf5_plugin_path_as_h5py_loads(tmp_path, switch):
    """HDF5 starts with one plugin folder on its search path (its default, or HDF5_PLUGIN_PATH);
    with the children's switch set, loading the h5py reader empties it before any file is opened."""
    env = {k: v for k, v in os.environ.items() if k != NO_PLUGINS_ENV}
    env["HDF5_PLUGIN_PATH"] = str(tmp_path)
    if switch:
        env[NO_PLUGINS_ENV] = switch
    r = subprocess.run([sys.executable, "-c", PLUGIN_PROBE], env=env, capture_output=True, text=True, timeout=120)
    assert r.returncode == 0, r.stderr
    before, after = map(int, r.stdout.split())
    assert before >= 1
    assert after == (0 if switch else before)


def test_isolated_children_get_both_plugin_switches():
    child = vetmod.IsolatedChild()
    try:
        with open(f"/proc/{child.proc.pid}/environ", "rb") as fh:
            env = dict(item.split(b"=", 1) for item in fh.read().split(b"\0") if b"=" in item)
    finally:
        child.close()
    assert env[NO_PLUGINS_ENV.encode()] == b"1" and env[b"HDF5_PLUGIN_PRELOAD"] == b"::"
