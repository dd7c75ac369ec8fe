"""Each divergence kind just inside and just outside its boundary, worked out by hand from the
precise tests in the kinds table (core/check/kinds.py ``test``), with the tolerance 0.01 voxel.

World (voxel size 1, unit cubes): a floor with top y = 1 everywhere, raised by one voxel (top y = 2)
for x < 8, so there is a step edge at x = 8; a one-voxel wall x in [12, 13], y in [1, 4] on the low
floor. Boxes are cubes of half extent 0.5; resting with the default skin 0.001 puts the centre at
y = 2.501 on the high floor and 1.501 on the low one.
"""
from __future__ import annotations

import numpy as np
import pytest

from resweep.core import (SolverSettings, VoxelWorld, check_trace, chunks_from_dense, open_trace, solve_rows,
                          unit_cube_shapes)
from resweep.core.check.kinds import BY_NAME, kinds_of

from trace_factory import write_rows

Y2, Y1 = 2.501, 1.501


def _world():
    g = np.zeros((16, 8, 16), np.uint16)
    g[:, 0, :] = 1
    g[:8, 1, :] = 1
    g[12, 1:4, :] = 1
    origin, blocks = chunks_from_dense(g, (0, 0, 0), 8)
    return VoxelWorld(8, origin, blocks, unit_cube_shapes(), 1.0)


# (name, start, motion, recorded end, half extents, expected kinds, expected error of that kind)
CASES = [
    # penetration by depth: pressing into the high floor is blocked (reference stays at the start,
    # the back-off to 2.501 is not behind the pass start); the recorded box's bottom at
    # 2.489 - 0.5 = 1.989 overlaps the floor by 0.011 > tol.
    ("pe depth above", (3.5, Y2, 2.5), (0, -0.1, 0), (3.5, 2.489, 2.5), 0.5, {"penetration"}, 0.011),
    # Same end 0.009 deep, moved 0.02 along z so the ends still differ (|(0, 0.012, 0.02)| > tol):
    # no penetration; the reference did not move, so no shortfall: mismatch.
    ("pe depth below", (3.5, Y2, 2.5), (0, -0.1, 0), (3.5, 2.491, 2.52), 0.5, {"mismatch"}, None),
    # tunneling: dash of 8 at the wall; the reference stops at x = 12 - 0.5 - 0.001 = 11.499
    # (contact centre c = 11.5, hit normal -x). Recorded end x = 13.491: box [12.991, 13.991]
    # overlaps the wall by 0.009 <= tol, and -(11.5 - 13.491) = 1.991 >= 2 h = 1: wholly past the
    # hit face; error |e - r| = 13.491 - 11.499 = 1.992.
    ("tu above", (9.5, Y1, 4.5), (8, 0, 0), (13.491, Y1, 4.5), 0.5, {"tunneling"}, 1.992),
    # Recorded end x = 13.489 overlaps the wall by 0.011 > tol: penetration (depth 0.011).
    ("tu below", (9.5, Y1, 4.5), (8, 0, 0), (13.489, Y1, 4.5), 0.5, {"penetration"}, 0.011),
    # A dip over the step edge. Start x = 8.48: the box overlaps the high floor by 0.02 in x. Motion
    # (0.025, -0.1, 0): the reference is blocked on y at t = 0.01 (contact centre y = 2.5) and slides
    # to x = 8.505, y = 2.501. Recorded end (8.505, 2.47): box x from 8.005, free. The box shrunk by
    # tol (half 0.49) crosses y = 2 at fraction (2.011 - 2) / (2.501 - 2.47) = 0.355 of the path,
    # when its x starts at 7.99 + 0.025 * 0.355 = 7.9989 < 8: it enters the high floor. Its leading
    # face is 2.5 - 2.47 = 0.03 past the hit face, not wholly past (0.03 < 1): penetration 0.03.
    ("dip above", (8.48, Y2, 6.5), (0.025, -0.1, 0), (8.505, 2.47, 6.5), 0.5, {"penetration"}, 0.03),
    # Same with x motion 0.03 (reference x = 8.51): the shrunk box's x starts at
    # 7.99 + 0.03 * 0.355 = 8.0006 > 8 when it crosses y = 2: the path never enters solid. The
    # reference moved along +x only, so the shortfall is 0 and nothing goes against: mismatch.
    ("dip below", (8.48, Y2, 6.5), (0.03, -0.1, 0), (8.51, 2.47, 6.5), 0.5, {"mismatch"}, None),
    # snag: free move of 2 along z; recorded 0.011 short along the travel.
    ("sn above", (3.5, Y2, 8.5), (0, 0, 2), (3.5, Y2, 10.489), 0.5, {"snag"}, 0.011),
    ("sn below", (3.5, Y2, 8.5), (0, 0, 2), (3.5, Y2, 10.491), 0.5, set(), None),
    # Moved back by 0.009 (not against by more than tol): snag, shortfall 2.009.
    ("sn not against", (3.5, Y2, 8.5), (0, 0, 2), (3.5, Y2, 8.491), 0.5, {"snag"}, 2.009),
    # Moved back by 0.011, against the motion: not stopped short, it ends elsewhere: mismatch 2.011.
    ("sn against", (3.5, Y2, 8.5), (0, 0, 2), (3.5, Y2, 8.489), 0.5, {"mismatch"}, 2.011),
    # A fall of 3.2 with a step of 1 along x: the reference lands on the high floor (bottom reaches
    # y = 2 at t = 3 / 3.2), slides the rest of x and ends at (4.5, 2.501, 12.5). The recorded box
    # was pushed back up to y = 5.7, above its start: against the wanted motion on y, so mismatch
    # (the shortfall along the reference's travel would read 3.04).
    ("pushed back up", (3.5, 5.5, 12.5), (1, -3.2, 0), (4.5, 5.7, 12.5), 0.5, {"mismatch"}, 3.199),
    # mismatch: free move of 1 along x, recorded 0.011 off to the side (no shortfall).
    ("mm above", (1.5, Y2, 14.5), (1, 0, 0), (2.5, Y2, 14.511), 0.5, {"mismatch"}, 0.011),
    ("mm below", (1.5, Y2, 14.5), (1, 0, 0), (2.5, Y2, 14.509), 0.5, set(), None),
    # start_overlap: starts 0.011 deep in the high floor and moves up out of it (the reference lets
    # a motion that leaves the overlap through): only the start is wrong.
    ("so above", (5.5, 2.489, 4.5), (0, 0.1, 0), (5.5, 2.589, 4.5), 0.5, {"start_overlap"}, 0.011),
    ("so below", (5.5, 2.491, 4.5), (0, 0.1, 0), (5.5, 2.591, 4.5), 0.5, set(), None),
    # invalid: a zero half extent; a tiny positive one is a valid box.
    ("iv above", (5.5, 5.5, 10.5), (0, 0, 0), (5.5, 5.5, 10.5), (0.5, 0.5, 0.0), {"invalid"}, None),
    ("iv below", (5.5, 5.5, 10.5), (0, 0, 0), (5.5, 5.5, 10.5), (0.5, 0.5, 2.0**-20), set(), None),
]


@pytest.fixture(scope="module")
def solved():
    s, m, e = (np.array([c[k] for c in CASES], float) for k in (1, 2, 3))
    h = np.array([np.broadcast_to(np.asarray(c[4], float), (3,)) for c in CASES])
    return solve_rows(_world(), s, m, e, h, SolverSettings())


@pytest.mark.parametrize("i", range(len(CASES)), ids=[c[0] for c in CASES])
def test_kind_near_its_boundary(solved, i):
    name, _, _, _, _, kinds, err = CASES[i]
    assert set(kinds_of(solved.flags[i])) == kinds, name
    if err is not None:
        (kind,) = kinds
        assert solved.error[i, BY_NAME[kind].bit] == pytest.approx(err, abs=1e-9), name


def test_reference_ends_of_boundary_cases(solved):
    # Hand-worked reference ends used above.
    names = [c[0] for c in CASES]
    assert solved.ref_end[names.index("tu above")] == pytest.approx([11.499, Y1, 4.5], abs=1e-12)
    assert solved.ref_end[names.index("dip above")] == pytest.approx([8.505, Y2, 6.5], abs=1e-12)
    assert solved.ref_end[names.index("pushed back up")] == pytest.approx([4.5, Y2, 12.5], abs=1e-12)
    assert solved.ref_end[names.index("pe depth above")] == pytest.approx([3.5, Y2, 2.5], abs=1e-12)


@pytest.mark.parametrize("jump, kinds", [(0.011, {"discontinuity"}), (0.009, set())])
def test_discontinuity_near_its_boundary(tmp_path, jump, kinds):
    # One entity standing still on the low floor of the factory world; frame 1 starts `jump` away
    # along z from where frame 0 ended.
    p = np.array([2.5, Y1, 12.5])
    start = np.array([[p], [p + (0, 0, jump)]])
    path = write_rows(tmp_path / "d.h5", start, np.zeros_like(start), start.copy())
    with open_trace(path) as tr:
        report = check_trace(tr, SolverSettings())
    assert {d.kind for d in report.divergences} == kinds
