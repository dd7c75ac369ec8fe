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
    assert report.counts == whole.counts  # starts of rounds are checked against the previous round
    assert report.counts["discontinuity"] > 0 and sum(report.counts.values()) > report.counts["discontinuity"]
    assert [d.as_json() for d in report.divergences] == [d.as_json() for d in whole.divergences]


def test_discontinuity_at_the_first_frame_of_a_round_is_found(tmp_path):
    """Rounds end exactly where the test commits (frames 48 and 96); entity 7 teleports at frame 48,
    the first frame of the second round, entity 8 at frame 20 inside the first, and entity 9 first
    appears at frame 48. The worked answer (rh.glide_args): exactly two discontinuities, at
    (frame 48, entity 7, error 1.25) and (frame 20, entity 8, error 0.75), and nothing else (the
    glide is free: every recorded end is the reference end); a plain check of the finished
    file agrees."""
    warm_up()
    path = tmp_path / "rounds.h5"
    rec = rh.SteppedRecorder(path, 120)
    steps = iter([96, 120])
    rounds = []
    try:
        rec.commit_to(48)
        with open_trace(path, swmr=True) as live:
            report = follow_trace(live, on_round=lambda r: rounds.append(r.frames),
                                  sleep=lambda _s: rec.commit_to(next(steps)))
    finally:
        assert rec.wait() == 0
    assert rounds == [48, 96, 120]
    found = sorted((d.frame, d.entity, d.kind, d.error) for d in report.divergences)
    assert found == [(20, 8, "discontinuity", 0.75), (48, 7, "discontinuity", 1.25)]
    assert report.counts == {k: (2 if k == "discontinuity" else 0) for k in KINDS}
    with open_trace(path) as done:
        whole = check_trace(done)
    assert report.counts == whole.counts and report.entity_frames == whole.entity_frames
    assert [d.as_json() for d in report.divergences] == [d.as_json() for d in whole.divergences]


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
