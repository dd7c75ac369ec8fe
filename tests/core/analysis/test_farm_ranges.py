"""A trace checked in frame ranges gives exactly the whole-trace check (no Dask needed).

References: the whole-trace ``check_trace`` (one pass over every frame), and for the frame-to-frame
gaps an independent numpy count from the recorded arrays (discontinuity: the previous frame is
active and |start(f) - end(f-1)| > tolerance, as documented in core/check/kinds.py).
"""
from __future__ import annotations

import numpy as np
import pytest

from farm_traces import EDIT_FRAMES, soak_run
from resweep.core import SolverSettings, check_trace, open_trace
from resweep.core.analysis.farm_plan import plan_batches, plan_ranges
from resweep.core.analysis.farm_report import merge_ranges

SPLITS = [
    [(0, 12), (12, 13), (13, 30), (30, 31), (31, 60)],    # cut exactly at edit frames and one after
    [(0, 11), (11, 12), (12, 14), (14, 29), (29, 59), (59, 60)],  # ranges ending just before edits
    [(0, 1), (1, 60)],
    [(0, 37), (37, 60)],                                  # a cut far from any edit
]


@pytest.fixture(scope="module")
def trace(tmp_path_factory):
    return soak_run(tmp_path_factory.mktemp("ranges") / "run.h5", seed=3)


def _ranges(path, ranges, limit, rows_per_block=1 << 17):
    with open_trace(path) as tr:
        return merge_ranges([check_trace(tr, SolverSettings(), limit=limit, frames=r, rows_per_block=rows_per_block)
                             for r in ranges], limit)


@pytest.mark.parametrize("ranges", SPLITS)
def test_ranges_add_up_to_the_whole_check(trace, ranges):
    with open_trace(trace) as tr:
        assert set(EDIT_FRAMES) <= set(tr.edits[:, 0].tolist())
        whole = check_trace(tr, SolverSettings(), limit=100000)
    assert sum(whole.counts.values()) > 50 and whole.counts["discontinuity"] > 3  # the test has teeth
    assert whole.counts["penetration"] + whole.counts["tunneling"] > 0
    got = _ranges(trace, ranges, 100000, rows_per_block=7 * 5)  # 5-frame blocks inside the ranges too
    assert got.as_json() == whole.as_json()


def test_divergence_list_is_cut_at_limit_like_a_whole_check(trace):
    with open_trace(trace) as tr:
        whole = check_trace(tr, SolverSettings(), limit=25)
    got = _ranges(trace, SPLITS[0], 25)
    assert len(got.divergences) == 25 and got.as_json() == whole.as_json()
    frames = [d.frame for d in got.divergences]
    assert frames == sorted(frames)


def test_gaps_at_range_edges_counted_once_against_numpy(trace):
    import h5py
    with h5py.File(trace) as f:
        start, end, active = f["/frames/start"][()], f["/frames/end"][()], f["/frames/active"][()]
    gap = np.linalg.norm(start[1:] - end[:-1], axis=-1)
    want = int((active[1:] & active[:-1] & (gap > 0.01)).sum())
    for ranges in SPLITS:
        assert _ranges(trace, ranges, 0).counts["discontinuity"] == want


def test_edits_matter_in_this_trace(trace, tmp_path):
    """Without its edits the same run reads differently, so the range tests above would notice a
    range that started from the recorded world instead of the edited one."""
    with open_trace(trace) as tr, open_trace(soak_run(tmp_path / "no_edits.h5", seed=3, edits=False)) as plain:
        for r in SPLITS[0][1:]:
            a = check_trace(tr, SolverSettings(), limit=100000, frames=r)
            b = check_trace(plain, SolverSettings(), limit=100000, frames=r)
            assert a.entity_frames == b.entity_frames
        whole = check_trace(tr, SolverSettings(), limit=100000)
        bare = check_trace(plain, SolverSettings(), limit=100000)
    assert whole.as_json()["divergences"] != bare.as_json()["divergences"]


@pytest.mark.parametrize("F,N,step,rows", [(30000, 200, 655, 1 << 20), (100, 10, 100, 50), (7, 3, 1, 2),
                                           (1000, 1, 1000, 10), (0, 5, 10, 10), (150, 7, 4096, 100)])
def test_plan_covers_every_frame_once_on_block_starts(F, N, step, rows):
    plan = plan_ranges(F, N, step, rows)
    assert plan[0][0] == 0 and plan[-1][1] == F
    assert all(a[1] == b[0] for a, b in zip(plan, plan[1:]))
    if plan[0][1] >= step:
        assert all(f0 % step == 0 for f0, _ in plan)
    if F * N > 1.5 * rows:
        assert len(plan) > 1
        sizes = [f1 - f0 for f0, f1 in plan]
        assert max(sizes[:-1]) - min(sizes[:-1], default=0) == 0  # equal ranges, the last one shorter


@pytest.mark.parametrize("sizes,workers,want", [
    ([1] * 10, 1, [range(0, 3), range(3, 6), range(6, 9), range(9, 10)]),  # <= 10 / (4 x 1) per batch
    ([5, 5, 5, 5, 30, 5], 1, [range(0, 2), range(2, 4), range(4, 5), range(5, 6)]),  # bytes cap 10
    ([50] + [1] * 7, 1, [range(0, 1), range(1, 3), range(3, 5), range(5, 7), range(7, 8)]),  # big file alone
    ([0] * 200, 2, [range(i, i + 25) for i in range(0, 200, 25)]),          # 200 / 8 = 25 per batch
    ([], 3, []),
])
def test_batches_cover_the_traces_in_order(sizes, workers, want):
    assert plan_batches(sizes, workers, max_bytes=10, max_count=64) == want
