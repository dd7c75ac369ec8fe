"""Each divergence kind on a purpose-built trace, with answers worked out by hand.

World (trace_factory.floor_world): floor of unit cubes with its top at y = 1, a one-voxel wall
occupying x in [8, 9] for y in [1, 4]. Every entity is a cube of half extent 0.5, so resting on
the floor with the default skin of 0.001 voxel puts its centre at y = 1 + 0.5 + 0.001 = 1.501.
"""
from __future__ import annotations

import numpy as np
import pytest

from resweep.core import SolverSettings, check_trace, open_trace

from trace_factory import write_rows

Y = 1.501
# (name, start, motion, recorded end, expected kinds, expected error of the first listed kind)
ROWS = [
    # Free slide along the floor: reference end = start + motion; recorded agrees.
    ("correct", (2.5, Y, 2.5), (1.0, 0.0, 0.0), (3.5, Y, 2.5), set(), None),
    # Pressing into the floor: the floor face is 0.001 below, so the reference stays at y = 1.501;
    # the recorded end at y = 1.3 overlaps the floor (top 1) by 1 - (1.3 - 0.5) = 0.2.
    ("penetration", (2.5, Y, 4.5), (0.0, -0.5, 0.0), (2.5, 1.3, 4.5), {"penetration"}, 0.2),
    # Dash of 10 at the wall: expanded wall face x = 8 - 0.5 = 7.5, so the reference stops at
    # 7.5 - 0.001 = 7.499; the recorded end 15.5 is past the wall, free: |15.5 - 7.499| = 8.001.
    ("tunneling", (5.5, Y, 6.5), (10.0, 0.0, 0.0), (15.5, Y, 6.5), {"tunneling"}, 8.001),
    # Free move of 2 along z; recorded stops after 0.5: short by 1.5 along the travel.
    ("snag", (2.5, Y, 8.5), (0.0, 0.0, 2.0), (2.5, Y, 9.0), {"snag"}, 1.5),
    # Free move of 1 along x; recorded lands 0.5 off to the side: no shortfall along travel.
    ("mismatch", (2.5, Y, 11.5), (1.0, 0.0, 0.0), (3.5, Y, 12.0), {"mismatch"}, 0.5),
    # Starts sunk 0.2 into the floor (bottom at 0.8) and moves up out of it: the reference lets
    # the motion that leaves the overlap through; only the start is wrong (depth 0.2).
    ("start_overlap", (12.5, 1.3, 2.5), (0.0, 0.5, 0.0), (12.5, 1.8, 2.5), {"start_overlap"}, 0.2),
    # Non-finite motion.
    ("invalid", (12.5, Y, 6.5), (np.nan, 0.0, 0.0), (12.5, Y, 6.5), {"invalid"}, None),
]


@pytest.fixture(scope="module")
def kinds_trace(tmp_path_factory):
    path = tmp_path_factory.mktemp("kinds") / "kinds.h5"
    n = len(ROWS) + 1
    start = np.zeros((2, n, 3))
    motion = np.zeros((2, n, 3))
    end = np.zeros((2, n, 3))
    active = np.zeros((2, n), bool)
    for col, (_, s, m, e, _, _) in enumerate(ROWS):
        start[0, col], motion[0, col], end[0, col] = s, m, e
        active[0, col] = True
    # The last entity stands still on frame 0, then starts frame 1 two voxels away (a teleport).
    d = n - 1
    start[0, d] = end[0, d] = (14.5, Y, 12.5)
    start[1, d] = end[1, d] = (14.5, Y, 14.5)
    active[:, d] = True
    return write_rows(path, start, motion, end, active=active)


def _by_row(report):
    found = {}
    for dv in report.divergences:
        found.setdefault((dv.frame, dv.entity), {})[dv.kind] = dv
    return found


def test_each_kind_detected_with_hand_worked_error(kinds_trace):
    with open_trace(kinds_trace) as tr:
        report = check_trace(tr, SolverSettings())
        found = _by_row(report)
        for col, (name, s, m, e, kinds, err) in enumerate(ROWS):
            got = found.get((0, int(tr.ids[col])), {})
            assert set(got) == kinds, name
            if err is not None:
                assert got[sorted(kinds)[0]].error == pytest.approx(err, abs=1e-9), name
        d = int(tr.ids[len(ROWS)])
        assert set(found[(1, d)]) == {"discontinuity"}
        assert found[(1, d)]["discontinuity"].error == pytest.approx(2.0)
        assert (0, d) not in found
        # Counts are exact and match the list.
        assert report.counts == {"invalid": 1, "start_overlap": 1, "penetration": 1, "tunneling": 1,
                                 "snag": 1, "mismatch": 1, "discontinuity": 1, "grounded_mismatch": 0,
                                 "step_mismatch": 0}
        assert report.entity_frames == len(ROWS) + 2


def test_reference_ends_hand_worked(kinds_trace):
    with open_trace(kinds_trace) as tr:
        report = check_trace(tr, SolverSettings())
    ref = {(dv.frame, dv.entity): dv.reference_end for dv in report.divergences}
    assert ref[(0, 20)] == pytest.approx([2.5, Y, 4.5], abs=1e-12)    # floor stop keeps y
    assert ref[(0, 30)] == pytest.approx([7.499, Y, 6.5], abs=1e-12)  # wall stop
    assert ref[(0, 40)] == pytest.approx([2.5, Y, 10.5], abs=1e-12)   # free slide
    assert ref[(0, 60)] == pytest.approx([12.5, 1.8, 2.5], abs=1e-12)  # leaves the overlap


def test_tolerance_setting_moves_the_threshold(kinds_trace):
    # With a tolerance of 2 voxels the snag (1.5) and mismatch (0.5) no longer count, the
    # tunneling (8.001) still does.
    with open_trace(kinds_trace) as tr:
        report = check_trace(tr, SolverSettings(tolerance=2.0))
    assert report.counts["snag"] == 0 and report.counts["mismatch"] == 0
    assert report.counts["tunneling"] == 1


def test_correct_recording_has_no_divergence(tmp_path):
    """A recording made by an engine that does what the reference does (here: free moves and
    floor slides worked out by hand, chained frame to frame) yields nothing."""
    F, n = 30, 3
    start = np.zeros((F, n, 3))
    motion = np.zeros((F, n, 3))
    end = np.zeros((F, n, 3))
    pos = np.array([[2.5, Y, 2.5], [2.5, Y, 5.5], [10.5, 3.0, 10.5]])
    for f in range(F):
        m = np.array([[0.1, 0.0, 0.0], [0.0, -0.2, 0.05], [0.0, -0.05, 0.0]])
        e = pos + m
        e[1, 1] = Y  # pressing into the floor: stays at rest height, slides along z
        e[2, 1] = max(e[2, 1], Y)  # falls onto the floor
        start[f], motion[f], end[f] = pos, m, e
        pos = e.copy()
    path = write_rows(tmp_path / "clean.h5", start, motion, end)
    with open_trace(path) as tr:
        report = check_trace(tr, SolverSettings())
    assert sum(report.counts.values()) == 0, report.divergences[:3]
    assert report.entity_frames == F * n


def test_readme_kinds_table_and_tests_match_the_kinds_table():
    """README's kinds table and list of precise tests say exactly what core/check/kinds.py says."""
    from paths import ROOT
    from resweep.core.check.kinds import TABLE
    text = (ROOT / "README.md").read_text()
    section = text[text.index("### Divergence kinds"):text.index("### The reference solver")]
    rows = [ln for ln in section.splitlines() if ln.startswith("| `")]
    assert rows == [f"| `{k.name}` | {k.severity} | {k.meaning} |" for k in TABLE]
    tests = [ln for ln in section.splitlines() if ln.startswith("- `")]
    assert tests == [f"- `{k.name}`: {k.test}" for k in TABLE]
