"""The crash-safe recorder: kills at several points, spawn/despawn, ring-buffer dumps.

Expected data comes from ``recording_helpers`` (a pure function of the frame index), never from
reading the recorder's own state.
"""
from __future__ import annotations

import numpy as np
import pytest

import recording_helpers as rh
from resweep.core import VoxelWorld, check_trace, open_trace, write_trace
from resweep.core.format.recorder import Recorder
from resweep.core.format.ring import RingRecorder
from resweep.core.world.shapes import unit_cube_shapes

FLUSH = rh.FLUSH


def _assert_prefix(path, min_frames=0):
    """Every committed frame reads back bit for bit; no entity, frame or edit beyond it exists."""
    with open_trace(path) as t:
        F = t.frame_count
        assert t.ended_early
        assert F % FLUSH == 0 and F >= min_frames
        want = rh.dense(F)
        blk = t.frames(0, F)
        np.testing.assert_array_equal(t.ids, want["entity_ids"])
        assert list(t.names) == want["entity_names"]
        np.testing.assert_array_equal(t.half_extents, want["half_extents"])
        np.testing.assert_array_equal(t.time, want["time"])
        for name in ("start", "motion", "end"):
            np.testing.assert_array_equal(getattr(blk, name), want[name])
        np.testing.assert_array_equal(blk.half[blk.active], want["frame_half_extents"][want["active"]])
        np.testing.assert_array_equal(blk.active, want["active"])
        np.testing.assert_array_equal(blk.grounded, want["grounded"])
        np.testing.assert_array_equal(t.edits, want["edits"])
        return F


@pytest.mark.parametrize("mode,n,frames", [
    ("after_frame", 0, 0), ("after_frame", 40, 32), ("after_frame", 95, 96), ("after_frame", 300, 288),
    ("before_commit", 1, 0), ("before_commit", 4, 48), ("mid_rows", 30, None), ("mid_rows", 77, None)])
def test_killed_recorder_keeps_every_flushed_frame(tmp_path, mode, n, frames):
    path, _ = rh.record_and_kill(tmp_path, mode, n)
    F = _assert_prefix(path)
    if frames is not None:  # where the kill lands is known exactly for these modes
        assert F == frames


@pytest.mark.parametrize("kill_at", [20, 150])
def test_recorder_killed_from_outside(tmp_path, kill_at):
    path, last = rh.record_and_kill(tmp_path, "external", 0, parent_kill_at=kill_at)
    F = _assert_prefix(path, min_frames=(last + 1) // FLUSH * FLUSH)
    assert F <= last + 1 + FLUSH  # nothing beyond what the child had recorded


def test_killed_trace_info_and_check_say_it_ended_early(tmp_path, capsys):
    """Killed after frame 40 with commits every 16 frames: frames 0..31 are read, frame 31 is the
    last flushed one (time 31/60 s); info and check say so in their text and their JSON alike."""
    import json
    from resweep.app.cli.main import main
    path, _ = rh.record_and_kill(tmp_path, "after_frame", 40)
    line = f"trace ended early (the recorder did not close it): 32 frames read, last flushed at {31 / rh.FPS:.3f} s"
    record = {"frames_read": 32, "last_flushed_time": 31 / rh.FPS}
    assert main(["info", str(path)]) == 0
    assert line in capsys.readouterr().out
    assert main(["info", str(path), "--json", "-"]) == 0
    assert json.loads(capsys.readouterr().out)["ended_early"] == record
    main(["check", str(path), "--json", str(tmp_path / "r.json")])
    assert line in capsys.readouterr().err
    entry = json.loads((tmp_path / "r.json").read_text())["traces"][0]
    assert entry["ended_early"] == record and entry["frames"] == 32
    main(["check", rh.TESTS.parent.joinpath("sample_traces", "quarry.h5").as_posix(), "--json", "-", "--quiet"])
    assert json.loads(capsys.readouterr().out)["traces"][0]["ended_early"] is None


def test_spawn_despawn_resolves_like_write_trace(tmp_path):
    F = 150
    S, origin, blocks = rh.world()
    with Recorder(tmp_path / "rec.h5", chunk_size=S, chunk_origin=origin, chunk_blocks=blocks, flush_every=7) as rec:
        rh.record(rec, F)
    write_trace(tmp_path / "one.h5", **rh.dense(F))
    reports = []
    for name in ("rec.h5", "one.h5"):
        with open_trace(tmp_path / name) as t:
            assert not t.ended_early and t.frame_count == F
            reports.append(check_trace(t))
    a, b = (r.as_json() for r in reports)
    a.pop("path"), b.pop("path")
    assert a == b
    assert sum(reports[0].counts.values()) > 0  # the comparison covers divergences, not only clean rows


def _world_grid(world: VoxelWorld, lo=(-8, -8, -16), hi=(56, 16, 24)) -> np.ndarray:
    return np.array([[[world.block_at(x, y, z) for z in range(lo[2], hi[2])] for y in range(lo[1], hi[1])]
                     for x in range(lo[0], hi[0])])


@pytest.mark.parametrize("total", [45, 200])
def test_ring_dump_holds_last_seconds_and_world(tmp_path, total):
    seconds = 1.0
    S, origin, blocks = rh.world()
    ring = RingRecorder(seconds, chunk_size=S, chunk_origin=origin, chunk_blocks=blocks)
    rh.record(ring, total)
    ring.dump(tmp_path / "dump.h5")
    full = rh.dense(total)
    times = full["time"]
    first = int(np.flatnonzero(times >= times[-1] - seconds)[0])  # frames within the last `seconds`
    write_trace(tmp_path / "full.h5", **full)
    with open_trace(tmp_path / "dump.h5") as d, open_trace(tmp_path / "full.h5") as t:
        assert d.frame_count == total - first
        np.testing.assert_array_equal(d.time, times[first:])
        order = []  # ids present in the kept frames, by first appearance
        for f in range(first, total):
            order += [i for i in rh.present(f) if i not in order]
        np.testing.assert_array_equal(d.ids, order)
        cols = [int(np.flatnonzero(full["entity_ids"] == i)[0]) for i in d.ids]
        blk = d.frames(0, d.frame_count)
        for name in ("start", "motion", "end"):
            np.testing.assert_array_equal(getattr(blk, name), full[name][first:][:, cols])
        np.testing.assert_array_equal(blk.active, full["active"][first:][:, cols])
        dw, tw = d.world(), t.world()
        for k in range(0, d.frame_count, 7):
            dw.advance_to(k)
            tw.advance_to(first + k)
            np.testing.assert_array_equal(_world_grid(dw), _world_grid(tw))


def test_recorder_refuses_new_entity_without_size(tmp_path):
    from resweep.core.errors import RecordingError
    S, origin, blocks = rh.world()
    with Recorder(tmp_path / "r.h5", chunk_size=S, chunk_origin=origin, chunk_blocks=blocks,
                  shapes=unit_cube_shapes(4)) as rec:
        rec.frame(0.0, [1], [[1, 2, 1]], [[0, 0, 0]], [[1, 2, 1]], half_extents=[[0.4, 0.4, 0.4]])
        with pytest.raises(RecordingError, match="frame 1: entity 3 appears for the first time without half extents"):
            rec.frame(0.1, [3, 1, 2], np.ones((3, 3)), np.zeros((3, 3)), np.ones((3, 3)))
        assert rec.frame_count == 1 and len(rec._entities) == 1  # a refused frame adds nothing
        with pytest.raises(RecordingError, match="earlier than"):
            rec.frame(-0.5, [1], [[1, 2, 1]], [[0, 0, 0]], [[1, 2, 1]])
        with pytest.raises(RecordingError, match="block type 4 is not in 0..3"):
            rec.edit(1, 1, 1, 4)


def test_recorder_caches_stay_bounded_while_the_trace_grows(tmp_path):
    """The recorder's HDF5 caches do not grow with the recording (memory flat over hours; the
    growth itself is measured by tests/benchmarks/bench_recorder.py). Values read back from HDF5's
    own accessors: the file's chunk cache and the metadata cache's size, limit and entries."""
    from resweep.core.format.recorder import METADATA_CACHE_BYTES
    S, origin, blocks = rh.world()
    with Recorder(tmp_path / "r.h5", chunk_size=S, chunk_origin=origin, chunk_blocks=blocks, flush_every=8) as rec:
        fid = rec._f.id
        assert fid.get_access_plist().get_cache()[2] == 0  # rdcc_nbytes: no chunk cache
        assert rec._ds["start"].id.get_access_plist().get_chunk_cache()[1] == 0
        sizes = []
        for f in range(2400):  # about 40 storage-chunk rows: hundreds of chunk index records
            rec.frame(f / 60, np.arange(2 + f // 100), np.ones((2 + f // 100, 3)), np.zeros((2 + f // 100, 3)),
                      np.ones((2 + f // 100, 3)), half_extents=np.full((2 + f // 100, 3), 0.4))
            if f % 400 == 399:
                max_size, _, cur_size, _ = fid.get_mdc_size()
                sizes.append(cur_size)
                assert max_size == METADATA_CACHE_BYTES and cur_size <= METADATA_CACHE_BYTES
        assert sizes[-1] > 0
