"""Solver models against hand-worked truths at their edge cases (exact touches, ties between axes,
step-up under a low ceiling, push-out order dependence, the grounded rule).

Source of every expected value: worked by hand below from the rules in the issue (per-axis
clipping, push-out, step-up, grounded); all inputs are dyadic, so float64 holds them exactly.
"""
from __future__ import annotations

import numpy as np
import pytest

from solver_helpers import world_from_grid
from resweep.core import SolverSettings, shapes_from_lists, solve_rows
from resweep.core.check.kinds import BY_NAME

CUBE = (0.0, 0.0, 0.0, 1.0, 1.0, 1.0)
SKIN = 1 / 64


def _run(grid, s, m, h, shapes=None, up="y", grounded=None, **kw):
    w = world_from_grid(np.asarray(grid, np.uint16), shapes=shapes)
    s, m = np.atleast_2d(np.asarray(s, float)), np.atleast_2d(np.asarray(m, float))
    hh = np.broadcast_to(np.asarray(h, float), s.shape)
    return solve_rows(w, s, m, s + m, hh, SolverSettings(**kw), up=up, grounded=grounded)


def _block(*voxels, size=(6, 6, 6), t=1):
    g = np.zeros(size, np.uint16)
    for v in voxels:
        g[v] = t
    return g


@pytest.mark.parametrize("skin, end, clipped", [(0.0, 1.75, False), (SKIN, 1.75 - SKIN, True)])
def test_axis_exact_touch(skin, end, clipped):
    # Cube x in [2, 3]; the box's leading face at 1.5 moves 0.5: gap 0.5 = |d|, so |d| <= 0.5 - skin.
    # With skin 0 the box ends touching the face and the axis is not clipped (nothing reduced |d|).
    r = _run(_block((2, 0, 0)), (1.25, 0.5, 0.5), (0.5, 0, 0), 0.25, model="axis", skin=skin)
    assert r.ref_end[0].tolist() == [end, 0.5, 0.5]
    assert (r.normal[0, 0, 0] == -1) == clipped


@pytest.mark.parametrize("order, end", [("xzy", (1.0, 0.5, 0.75)), ("zxy", (0.75, 0.5, 1.0)),
                                        ("yxz", (1.0, 0.5, 0.75))])
def test_axis_order_decides_at_a_corner(order, end):
    # Cube x, z in [1, 2]; box (h 0.25) at (0.5, ., 0.5) moves (+0.5, 0, +0.5). x first: x is free
    # (z intervals apart), reaching 1.0; then z meets the cube (x now overlaps) after 0.25. z first:
    # mirrored. y (no motion) changes nothing.
    r = _run(_block((1, 0, 1)), (0.5, 0.5, 0.5), (0.5, 0, 0.5), 0.25, model="axis", axis_order=order, skin=0.0)
    assert tuple(r.ref_end[0]) == end


def _step_world(ceiling: bool):
    """Floor (y in [0, 1]), a slab (y in [1, 1.5]) at x = 3, and optionally a low ceiling whose
    bottom is y = 2.25 over x in [2, 4]."""
    shapes = shapes_from_lists([[], [CUBE], [(0.0, 0.0, 0.0, 1.0, 0.5, 1.0)], [(0.0, 0.25, 0.0, 1.0, 1.0, 1.0)]])
    g = np.zeros((6, 6, 6), np.uint16)
    g[:, 0, :] = 1
    g[3, 1, :] = 2
    if ceiling:
        g[2:4, 2, :] = 3
    return g, shapes


@pytest.mark.parametrize("model", ["slide", "axis"])
@pytest.mark.parametrize("ceiling", [False, True])
def test_step_up_and_step_up_under_a_low_ceiling(model, ceiling):
    # Box h (0.25, 0.5, 0.25) resting skin above the floor: centre y = 1.5 + 1/64, x = 2.5, moving
    # +0.5 in x. Plain: stops skin short of the slab's face x = 3: x = 2.75 - 1/64.
    # Raised try (H = 0.625): up to y = 2.140625; over the slab (bottom 1.640625 > 1.5) to x = 3.0;
    # down by 0.625 onto the slab top 1.5: y = 2.015625. Longer horizontally: kept, climbed 0.625.
    # Under the ceiling (bottom 2.25, box top 2.015625): the climb is clipped to 0.234375 - 1/64 =
    # 0.21875; the bottom 1.234375 stays below the slab top, the raised try gains nothing: plain kept.
    g, shapes = _step_world(ceiling)
    r = _run(g, (2.5, 1.5 + SKIN, 2.5), (0.5, 0, 0), (0.25, 0.5, 0.25), shapes, model=model, skin=SKIN,
             step_height=0.625)
    if ceiling:
        assert r.ref_end[0].tolist() == [2.75 - SKIN, 1.5 + SKIN, 2.5]
        assert not r.raised[0] and r.climb[0] == 0
    else:
        assert r.ref_end[0].tolist() == [3.0, 2.015625, 2.5]
        assert r.raised[0] and r.climb[0] == 0.625


@pytest.mark.parametrize("ceiling, recorded, flagged", [
    (True, (3.0, 2.015625), True),            # stepped through the ceiling: only the recording stepped
    (False, (2.75 - SKIN, 1.5 + SKIN), True),  # did not step where the reference did
    (False, (3.0, 2.015625), False),           # stepped like the reference
])
def test_step_mismatch_hand_worked(ceiling, recorded, flagged):
    # Ends worked in test_step_up_and_step_up_under_a_low_ceiling; the recording counts as stepped
    # when it ends higher than the reference's plain solve (y = 1.5 + 1/64) by more than the tolerance.
    g, shapes = _step_world(ceiling)
    w = world_from_grid(g, shapes=shapes)
    s = np.array([[2.5, 1.5 + SKIN, 2.5]])
    e = np.array([[recorded[0], recorded[1], 2.5]])
    st = SolverSettings(model="axis", skin=SKIN, step_height=0.625)
    r = solve_rows(w, s, np.array([[0.5, 0, 0]]), e, np.full((1, 3), [0.25, 0.5, 0.25]), st)
    assert bool(r.flags[0] & (1 << BY_NAME["step_mismatch"].bit)) == flagged
    if flagged:
        assert r.error[0, BY_NAME["step_mismatch"].bit] == pytest.approx(recorded[1] - (1.5 + SKIN))


def test_no_step_up_when_not_grounded():
    # The same box 1/8 above the floor (gap 0.125 > 2 skin) is airborne: no raised try.
    g, shapes = _step_world(False)
    r = _run(g, (2.5, 1.625, 2.5), (0.5, 0, 0), (0.25, 0.5, 0.25), shapes, model="axis", skin=SKIN,
             step_height=0.625)
    assert not r.raised[0] and r.ref_end[0, 0] == 2.75 - SKIN


def test_pushout_visit_order_decides():
    # Cubes A = voxel (0, 0, 0) and B = voxel (1, 0, 0); box h 0.5 moved down by 1 to (0.6, 1.2, 0.5):
    # x in [0.1, 1.1], y in [0.7, 1.7]. Ascending voxel order visits A first: x penetration
    # min(0.9, 1.1) = 0.9, y 0.3: pushed up 0.3 to y = 1.5, which leaves B (touching): skipped.
    r = _run(_block((0, 0, 0), (1, 0, 0)), (0.6, 2.2, 0.5), (0, -1.0, 0), 0.5, model="pushout", skin=0.0)
    assert r.ref_end[0].tolist() == [0.6, 1.5, 0.5]
    # Mirrored about x = 1 the order flips: B' = voxel (0, 0, 0) first, x penetration 0.1 < y 0.3:
    # pushed +x to 1.5; then A' (x overlap 1.0) pushes up 0.3: (1.5, 1.5), not the mirror (1.4, 1.5).
    r = _run(_block((0, 0, 0), (1, 0, 0)), (1.4, 2.2, 0.5), (0, -1.0, 0), 0.5, model="pushout", skin=0.0)
    assert r.ref_end[0].tolist() == [1.5, 1.5, 0.5]


@pytest.mark.parametrize("up, end", [("y", (1.2, 1.5, 0.5)), ("x", (1.5, 1.2, 0.5))])
def test_pushout_axis_tie_goes_to_the_up_axis(up, end):
    # Box h 0.5 at (1.2, 1.2, 0.5) over cube voxel (0, 0, 0): penetration 0.3 in x and in y (z 1.0).
    # The tie goes to the up axis.
    r = _run(_block((0, 0, 0)), (1.2, 1.2, 0.5), (0, 0, 0), 0.5, model="pushout", skin=0.0, up=up)
    assert tuple(r.ref_end[0]) == end


def test_pushout_substeps_stop_what_one_move_tunnels():
    # A one-voxel wall x in [2, 3]; box h 0.25 at x = 1.25 moves +1.5. One move: x in [2.5, 3.0],
    # x penetration min(3 - 2.5, 3.0 - 2) = 0.5 pushes +x out the far side: x = 3.25. Substeps of 0.5:
    # n = 3, the first substep to 1.75 touches, the second to 2.25 penetrates 0.5 from the near face
    # (1.0 from the far) and is pushed back to 1.75, and so on: ends at 1.75.
    g = _block((2, 0, 0))
    one = _run(g, (1.25, 0.5, 0.5), (1.5, 0, 0), 0.25, model="pushout", skin=0.0)
    sub = _run(g, (1.25, 0.5, 0.5), (1.5, 0, 0), 0.25, model="pushout", skin=0.0, substep=0.5)
    assert one.ref_end[0, 0] == 3.25 and sub.ref_end[0, 0] == 1.75


@pytest.mark.parametrize("gap, flag, expect", [(2 * SKIN, 1, False), (2 * SKIN + 1 / 64, 1, True),
                                               (2 * SKIN, 0, True), (0.5, 0, False)])
def test_grounded_mismatch_at_the_rule_boundary(gap, flag, expect):
    # Floor top y = 1; box h 0.25 with its bottom ``gap`` above it. Grounded iff gap <= 2 skin.
    g = np.zeros((4, 4, 4), np.uint16)
    g[:, 0, :] = 1
    c = (1.5, 1.25 + gap, 1.5)
    r = _run(g, c, (0, 0, 0), 0.25, skin=SKIN, tolerance=0.0, grounded=np.array([flag]))
    assert bool(r.flags[0] & (1 << BY_NAME["grounded_mismatch"].bit)) == expect


def test_grounded_needs_overlapping_footprints():
    # A block whose footprint only touches the box's (x faces meet at 2) does not support it.
    g = np.zeros((4, 4, 4), np.uint16)
    g[2, 0, 1] = 1
    r = _run(g, (1.75, 1.25, 1.5), (0, 0, 0), 0.25, skin=SKIN, tolerance=0.0, grounded=np.array([0]))
    assert not r.flags[0] & (1 << BY_NAME["grounded_mismatch"].bit)


@pytest.mark.parametrize("ahead, moved", [(1 / 128, 0.0), (1 / 32, 1 / 32 - SKIN)])
def test_axis_back_off_stays_on_the_stretch_just_swept(ahead, moved):
    # Cubes at x in [0, 1] and [2, 3]; the box spans x in [1 + 1/128, 2 - ahead]: the clearance
    # behind it is 1/128 (less than the skin 1/64) and the gap ahead is ``ahead``; it moves +1/4. The rule (gap minus skin, never below zero, never reversing d) keeps the end on the
    # stretch between the start and the contact, which the box has just swept through, so the
    # back-off can never create a contact behind it: a gap ahead under the skin means no move.
    hx = (1 - 1 / 128 - ahead) / 2
    sx = 1 + 1 / 128 + hx
    r = _run(_block((0, 0, 0), (2, 0, 0)), (sx, 0.5, 0.5), (0.25, 0, 0), (hx, 0.25, 0.25), model="axis", skin=SKIN)
    assert r.ref_end[0, 0] - sx == moved
    assert r.ref_end[0, 0] - hx >= 1 + 1 / 128  # the clearance behind never shrinks


@pytest.mark.parametrize("iterations, y", [(1, 1.5 + SKIN), (2, 1.5 - SKIN), (4, 1.5 - SKIN)])
def test_pushout_skin_can_push_a_tight_box_into_the_far_block(iterations, y):
    # The push-out rule on purpose (the discrete step as engines write it): a box exactly one voxel
    # tall (h 0.5) in a one-voxel gap between cubes y in [0, 1] and [2, 3] sinks 1/8 into the lower
    # cube. Iteration 1: y penetration min(1 - 0.875, 1.875 - 0) = 1/8 < x, z (0.75): pushed up
    # 1/8 + skin, so it now overlaps the upper cube by the skin. Iteration 2: pushed down skin + skin,
    # overlapping the lower cube by the skin; and so on. Unlike the sweep models' back-off, the
    # push-out skin may create an overlap; the model reproduces that, it does not repair it.
    r = _run(_block((0, 0, 0), (0, 2, 0)), (0.5, 1.5, 0.5), (0, -1 / 8, 0), (0.25, 0.5, 0.25), model="pushout",
             skin=SKIN, iterations=iterations)
    assert r.ref_end[0].tolist() == [0.5, y, 0.5]
