"""Checking a trace while another process records it (``check --follow``)."""
from __future__ import annotations

import numpy as np

import recording_helpers as rh
from resweep.core.check.follow import follow_trace
from resweep.core.check.kinds import KINDS
from resweep.core.check.rows import warm_up
from resweep.core.check.stream import check_trace
from resweep.core.format.reader import open_trace

FRAMES = 300


def test_follow_checks_every_frame_until_the_writer_closes(tmp_path):
    warm_up()  # kernels compiled before the recording starts, so rounds keep pace with it
    path = tmp_path / "live.h5"
    proc = rh.start_slow_recorder(path, FRAMES)
    rounds = []
    with open_trace(path, swmr=True) as live:
        assert live.ended_early  # still being written
        report = follow_trace(live, poll_seconds=0.1, on_round=lambda r: rounds.append(r.frames))
    assert proc.wait(timeout=60) == 0
    assert len(rounds) > 2 and rounds == sorted(rounds)  # frames arrived over several rounds
    with open_trace(path) as done:
        assert not done.ended_early
        whole = check_trace(done)
    assert (report.frames, report.entities, report.entity_frames) == (FRAMES, whole.entities, whole.entity_frames)
    # Each round starts without the previous frame, so discontinuities at round starts are not seen.
    for k in KINDS:
        if k != "discontinuity":
            assert report.counts[k] == whole.counts[k], k
    assert report.counts["discontinuity"] <= whole.counts["discontinuity"]
    assert sum(report.counts.values()) > 0


def test_follow_stops_on_request_with_counts_so_far(tmp_path):
    warm_up()
    path = tmp_path / "live.h5"
    proc = rh.start_slow_recorder(path, FRAMES)
    try:
        with open_trace(path, swmr=True) as live:
            report = follow_trace(live, poll_seconds=0.05, should_stop=lambda: live.frame_count >= 2 * rh.FLUSH)
        assert report.cancelled
        assert 0 < report.frames < FRAMES
        assert report.entity_frames == int(np.sum([len(rh.present(f)) - (101 in rh.present(f) and f % 7 == 3)
                                                   for f in range(report.frames)]))
    finally:
        proc.kill()
        proc.wait()
