"""A recording opened several times in one process while another process appends to it.

HDF5 refuses to refresh a dataset that is open twice in one process ("can't insert duplicate
key"); the reader keeps one handle per file and dataset, so every Trace of a recording reads and
refreshes. Expected frames come from ``recording_helpers.glide_args`` (a pure function of the frame).
"""
from __future__ import annotations

import h5py
import numpy as np

import recording_helpers as rh
from resweep.core.format.reader import open_trace


def _assert_frames(trace, frames: int):
    """Frames [0, frames) of ``trace`` hold what the recorder was given."""
    assert trace.frame_count == frames
    blk = trace.frames(0, frames)
    for f in (0, frames // 2, frames - 1):
        want = rh.glide_args(f)
        cols = [trace.entity_index(i) for i in want["ids"]]
        np.testing.assert_array_equal(blk.start[f, cols], want["start"])
        np.testing.assert_array_equal(blk.end[f, cols], want["end"])


def _open_files(path) -> int:
    return sum(1 for fid in h5py.h5f.get_obj_ids(types=h5py.h5f.OBJ_FILE)
               if fid.name.decode() == str(path))


def test_traces_of_one_recording_open_together_read_and_refresh(tmp_path):
    path = tmp_path / "live.h5"
    rec = rh.SteppedRecorder(path, 120)
    try:
        rec.commit_to(48)
        first = open_trace(path, swmr=True)
        _assert_frames(first, 48)
        rec.commit_to(96)
        second = open_trace(path)  # the viewer's reload and its background solve open it so
        _assert_frames(second, 96)
        assert second.ended_early and first.poll_committed() == (96, False)
        _assert_frames(first, 48)  # the first keeps to the frames it validated
        assert first.refresh() == 48
        _assert_frames(first, 96)
        rec.commit_to(120)
        assert first.refresh() == 24 and not first.ended_early
        second.close()
        _assert_frames(first, 120)
        assert _open_files(path) == 1  # one handle for both traces, kept while one is open
        first.close()
        assert _open_files(path) == 0
    finally:
        assert rec.wait() == 0
    with open_trace(path) as done:
        _assert_frames(done, 120)
