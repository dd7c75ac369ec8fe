"""TraceSession frame states agree with the core's whole-trace check, frame by frame.

The reference here is ``check_trace`` streaming the whole trace (its own world advance, its own
discontinuity test across frame blocks): a second, independent path to the same rows.
"""
from __future__ import annotations


import h5py
import numpy as np
import pytest

from resweep.core.analysis.frames import CACHE_FRAMES, TraceSession, ViewRequestError
from resweep.core import KINDS, SolverSettings, check_trace, open_trace
from resweep.core.demo.quarry import AIR, PLANK
from resweep.core.errors import TraceFormatError

from paths import SAMPLES

QUARRY = SAMPLES / "quarry.h5"
# 5 (crate not spawned yet), 40 (dash: tunneling), 77 (hopper's NaN motion: invalid), 90 and 150
# (world edits), 200 (walker respawn: discontinuity), 239 (last frame).
FRAMES = (0, 5, 40, 77, 90, 91, 150, 200, 239)


@pytest.fixture(scope="module")
def reference():
    """{frame: {column: (row index, RowResults)}} from check_trace, plus its report."""
    rows = {}

    def on_block(b):
        for i, (f, c) in enumerate(zip(b.frame.tolist(), b.column.tolist())):
            rows.setdefault(f, {})[c] = (i, b.rows)

    with open_trace(QUARRY) as tr:
        report = check_trace(tr, SolverSettings(), limit=10 ** 6, on_block=on_block)
    return rows, report


@pytest.fixture
def session():
    s = TraceSession(QUARRY)
    yield s
    s.close()


def same(a, b):
    return np.array_equal(np.asarray(a), np.asarray(b), equal_nan=True)


@pytest.mark.parametrize("frame", FRAMES)
def test_frame_state_matches_check_trace(session, reference, frame):
    ref_rows, _ = reference
    st = session.frame_state(frame)
    N = session.trace.entity_count
    assert st.frame == frame and st.time == pytest.approx(frame / 60.0)
    assert st.start.shape == (N, 3) and st.start.dtype == np.float64
    want = ref_rows.get(frame, {})
    assert sorted(want) == np.flatnonzero(st.active).tolist()
    for col in range(N):
        if col not in want:
            assert st.rows.flags[col] == 0 and np.isnan(st.rows.ref_end[col]).all()
            assert np.isnan(st.start[col]).all() and st.rows.block[col].tolist() == [-1] * 3
            continue
        i, r = want[col]
        for field in ("ref_end", "npass", "state", "toi", "normal", "voxel", "block", "points", "flags", "error"):
            assert same(getattr(st.rows, field)[col], getattr(r, field)[i]), (frame, col, field)


@pytest.mark.parametrize("frame", FRAMES)
def test_kinds_match_the_reported_divergences(session, reference, frame):
    _, report = reference
    st = session.frame_state(frame)
    for col, eid in enumerate(session.trace.ids.tolist()):
        want = [d.kind for d in report.divergences if d.frame == frame and d.entity == eid]
        assert st.kinds(col) == sorted(want, key=KINDS.index)


def test_the_demo_frames_hold_the_kinds_they_were_built_for(session):
    # core/demo.py scripts these: the dasher's 50-voxel dash at frame 40, the hopper's NaN motion
    # at 77, the walker's respawn at 200; the crate spawns at frame 20.
    assert "tunneling" in session.frame_state(40).kinds(1)
    assert session.frame_state(77).kinds(4) == ["invalid"]
    assert "discontinuity" in session.frame_state(200).kinds(0)
    assert not session.frame_state(5).active[3] and session.frame_state(20).active[3]


def test_world_follows_the_frame_asked_for(session):
    # Edits (core/demo.py): frame 90 opens (20,4,12) and (20,5,12) in the plank wall; frame 150
    # puts a plank block at (9,4,22).
    w = session.world
    session.frame_state(89)
    assert w.block_at(20, 4, 12) == PLANK and w.block_at(9, 4, 22) == AIR
    v89 = session.frame_state(89).world_version
    st = session.frame_state(90)
    assert w.block_at(20, 4, 12) == AIR and st.world_version > v89
    session.frame_state(160)
    assert w.block_at(9, 4, 22) == PLANK
    session.frame_state(40)  # back in time: the wall is whole again
    assert w.block_at(20, 4, 12) == PLANK and w.block_at(9, 4, 22) == AIR
    # A cached state handed out again carries the world's current version.
    assert session.frame_state(90).world_version == w.version


def test_trail_holds_recent_active_starts(session):
    with open_trace(QUARRY) as tr:
        blk = tr.frames(0, 30)
    t = session.trail(10, 0, 3)
    assert t.shape == (3, 3) and np.array_equal(t, blk.start[7:10, 0])
    # The crate (column 3) is active from frame 20: at frame 22 only frames 20 and 21 count.
    t = session.trail(22, 3, 5)
    assert np.array_equal(t, blk.start[20:22, 3])
    assert session.trail(0, 0, 30).shape == (0, 3)


def test_bad_requests_name_the_trace_and_the_range(session):
    with pytest.raises(ViewRequestError, match=r"quarry\.h5: frame 240 is out of range \(valid frames are 0\.\.239\)"):
        session.frame_state(240)
    with pytest.raises(ViewRequestError, match="frame -1"):
        session.frame_state(-1)
    with pytest.raises(ViewRequestError, match=r"entity id 7 is not in the trace \(ids: 101, 102, 103, 104, 105\)"):
        session.column_of(7)
    assert session.column_of(104) == 3


def test_bad_file_raises_the_core_format_error(tmp_path):
    p = tmp_path / "junk.h5"
    p.write_bytes(b"not hdf5")
    with pytest.raises(TraceFormatError):
        TraceSession(p)


def test_settings_change_clears_the_cache(session):
    a = session.frame_state(40)
    assert session.frame_state(40) is a  # cached
    session.set_settings(SolverSettings(passes=1))
    b = session.frame_state(40)
    assert b is not a and b.rows.toi.shape == (5, 1) and a.rows.toi.shape == (5, 3)


def test_cache_is_bounded(session):
    for f in range(CACHE_FRAMES + 10):
        session.frame_state(f)
    assert len(session._cache) == CACHE_FRAMES
    assert 0 not in session._cache and CACHE_FRAMES + 9 in session._cache


def test_default_column_prefers_a_divergence(session, reference):
    _, report = reference
    for frame in (0, 40, 77, 200):
        ids = {d.entity for d in report.divergences if d.frame == frame}
        cols = sorted(session.trace.entity_index(i) for i in ids)
        want = cols[0] if cols else int(np.flatnonzero(session.frame_state(frame).active)[0])
        assert session.default_column(frame) == want


def test_nearest_position_of_an_inactive_entity(session):
    with open_trace(QUARRY) as tr:
        blk = tr.frames(0, 40)
    # The crate (column 3) spawns at frame 20: the nearest active frame to 5 is 20.
    assert np.array_equal(session.nearest_position(5, 3), blk.start[20, 3])
    assert np.array_equal(session.nearest_position(30, 3), blk.start[30, 3])
    assert session.nearest_position(5, 3, reach=10) is None


@pytest.fixture(scope="module")
def striped(tmp_path_factory):
    """700 frames x 150 entities with per-frame half extents, on-ground flags and gaps in activity:
    storage chunks of 436 frames, so spans cross a window's edge; entity 30 (column 2) wants a
    motion over the limit at frame 300 only."""
    from resweep.core.format.limits import Limits
    from trace_factory import write_rows
    rng = np.random.default_rng(3)
    F, N = 700, 150
    start = rng.uniform(-4, 4, (F, N, 3))
    motion = rng.uniform(-0.3, 0.3, (F, N, 3))
    motion[300, 2, 0] = 2.0 * Limits().motion
    active = rng.random((F, N)) > 0.1
    active[300, 2] = True
    path = write_rows(tmp_path_factory.mktemp("striped") / "striped.h5", start, motion, start + motion,
                      active=active, frame_half_extents=rng.uniform(0.2, 0.6, (F, N, 3)),
                      grounded=rng.random((F, N)) > 0.5)
    with h5py.File(path, "r") as f:  # the file's own bytes, read without the project
        raw = {k: f["frames"][k][()] for k in ("start", "motion", "end", "active", "half_extents", "grounded")}
    return path, raw


def test_session_frames_are_the_file_frames(striped):
    """Spans inside a window, across a window's edge, longer than a window and at the ends,
    in any order: the same numbers as h5py reads from the file."""
    path, raw = striped
    rng = np.random.default_rng(4)
    spans = [(0, 1), (0, 2), (434, 438), (435, 437), (299, 300), (301, 305), (698, 700), (10, 600), (0, 700)]
    spans += [tuple(sorted(rng.integers(0, 701, 2))) for _ in range(40)]
    with TraceSession(path) as s:
        assert s._window < 700  # the spans do cross windows
        for a, b in spans:
            if a <= 300 < b:
                continue  # the over-limit frame: see the next test
            blk = s.frames(a, b)
            assert (blk.f0, blk.f1) == (a, b)
            np.testing.assert_array_equal(blk.start, raw["start"][a:b])
            np.testing.assert_array_equal(blk.motion, raw["motion"][a:b])
            np.testing.assert_array_equal(blk.end, raw["end"][a:b])
            np.testing.assert_array_equal(blk.active, raw["active"][a:b])
            np.testing.assert_array_equal(blk.half, raw["half_extents"][a:b])
            np.testing.assert_array_equal(blk.grounded, raw["grounded"][a:b].astype(np.int8))


def test_session_frames_refuse_only_the_frames_over_the_limits(striped):
    """The over-limit motion at frame 300 stops a read that includes frame 300, with the file's
    one-line reason; frames of the same decoded window around it still read."""
    path, _ = striped
    with TraceSession(path) as s:
        s.frames(290, 300)
        s.frames(301, 320)
        s.frame_state(299)
        s.frame_state(302)
        for span in ((299, 301), (300, 301), (250, 350)):
            with pytest.raises(TraceFormatError, match="frame 300, entity 30: motion"):
                s.frames(*span)
        with pytest.raises(TraceFormatError, match="frame 300, entity 30"):
            s.frame_state(300)


def test_quick_frames_are_the_ones_without_world_edits_to_apply(session):
    """The demo's world changes at frames 90 and 150 (module docstring): a frame is quick when it
    is cached or the world needs no edit to reach it (a caller then solves it on its own thread)."""
    session.frame_state(10)
    assert session.is_quick(10) and session.is_quick(50) and session.is_quick(89)
    assert not session.is_quick(90) and not session.is_quick(200)
    session.frame_state(95)
    assert session.is_quick(95) and session.is_quick(149) and not session.is_quick(150)
    assert not session.is_quick(20)  # back before the edit: the recorded chunks come back
    session.frame_state(20)
    assert session.is_quick(95)  # cached
