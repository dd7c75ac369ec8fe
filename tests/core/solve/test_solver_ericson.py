"""Hand-worked cases of the slab test and the moving-AABB test from Ericson, Real-Time Collision
Detection (2005).

From the book, as remembered (from memory, not checked against a copy):
- sec. 5.3.3, IntersectRayAABB: for each axis ("slab"), if the ray is parallel to the slab there is
  no hit unless the origin lies within the slab; otherwise t1 = (min - p) / d, t2 = (max - p) / d,
  swapped so t1 <= t2; tmin = max of the t1, tmax = min of the t2; no hit when tmin > tmax. The hit
  point is p + tmin d, and the axis giving tmin is the face hit.
- sec. 5.5 (moving objects): a box A moving by v against a static box B is the ray from A's centre
  along v against B grown by A's half extents (the Minkowski sum B + (-A)); sec. 5.5.8,
  IntersectMovingAABBAABB, gives the same first contact time axis by axis: tfirst = max over axes of
  the time the gap on that axis closes, tlast = min of the time it reopens, no contact when
  tfirst > tlast.
- The book's tests are closed (touching counts, tmin == tmax is a hit).

Our own (project rules, documented in core/nb_sweep.py, not from the book): only overlap of open
interiors is contact, so touching, grazing an edge (te == tx) and reaching a face exactly at the end
of the motion (te == 1) are not hits; tied faces all block; the box stops ``skin`` short and slides.

All arithmetic in the comments is ours; every value below is exact in binary floating point unless
the comment says otherwise.
"""
from __future__ import annotations

import numpy as np
import pytest

from solver_helpers import CUBE, one_block_world, solve

SKIN = 0.001  # voxels; the default skin


def test_straight_approach_minkowski_slab():
    # Box half 0.5 at x = 0 moving +4 toward the unit block x in [2, 3] (voxel (2, 0, 0)).
    # Minkowski sum: x slab [2 - 0.5, 3 + 0.5] = [1.5, 3.5]; t1 = 1.5 / 4 = 0.375, t2 = 3.5 / 4 = 0.875.
    # y and z: motion 0 (parallel), slab [-0.5, 1.5] holds the centre 0.5, so no constraint.
    w = one_block_world(CUBE, (2, 0, 0))
    p, r, h = (0.0, 0.5, 0.5), (4.0, 0.0, 0.0), (0.5, 0.5, 0.5)
    res = solve(w, p, r, h, skin=SKIN, passes=3)
    # Contact at t = 0.375: centre x = 4 * 0.375 = 1.5, face normal -x; stop skin short: 1.499.
    # The x motion is removed and nothing is left to slide with, so only one pass runs.
    assert res.toi[0, 0] == 0.375 and res.normal[0, 0].tolist() == [-1, 0, 0]
    assert res.voxel[0, 0].tolist() == [2, 0, 0] and res.block[0, 0] == 1
    assert res.ref_end[0] == pytest.approx([1.5 - SKIN, 0.5, 0.5], abs=1e-12)
    assert res.npass[0] == 1 and res.state[0] == 1


def test_oblique_hit_takes_latest_entry_then_slides():
    # sec. 5.3.3: tmin is the largest slab entry. Box half 0.25 at (0.5, 0.5, 0.5), motion (4, 2, 0),
    # unit block voxel (3, 2, 0):
    #   x slab [2.75, 4.25]: t in [(2.75 - 0.5) / 4, (4.25 - 0.5) / 4] = [0.5625, 0.9375]
    #   y slab [1.75, 3.25]: t in [(1.75 - 0.5) / 2, (3.25 - 0.5) / 2] = [0.625, 1.375]
    #   z: parallel, slab [-0.25, 1.25] holds 0.5.
    # tmin = max(0.5625, 0.625) = 0.625 (y, so the -y face), tmax = min(0.9375, 1.375) = 0.9375.
    w = one_block_world(CUBE, (3, 2, 0))
    p, r, h = (0.5, 0.5, 0.5), (4.0, 2.0, 0.0), (0.25, 0.25, 0.25)
    res = solve(w, p, r, h, skin=SKIN, passes=3)
    # Hit point (0.5 + 4 * 0.625, 0.5 + 2 * 0.625) = (3.0, 1.75); y stops skin short: 1.749.
    # Slide: the rest of x, 4 * (1 - 0.625) = 1.5, runs from x = 3.0 with y = 1.749 below the y slab
    # (parallel and outside), so pass 2 is clear and ends at x = 4.5.
    assert res.toi[0, :2].tolist() == [0.625, 1.0]
    assert res.normal[0, 0].tolist() == [0, -1, 0] and res.block[0, 1] == -1
    assert res.npass[0] == 2
    want = [[0.5, 0.5, 0.5], [3.0, 1.75 - SKIN, 0.5], [4.5, 1.75 - SKIN, 0.5], [4.5, 1.75 - SKIN, 0.5]]
    assert res.points[0] == pytest.approx(np.array(want), abs=1e-12)


def test_disjoint_slab_intervals_miss():
    # sec. 5.3.3: no hit when tmin > tmax. Box half 0.25 at (0.5, 0.5, 0.5), motion (4, 4, 0),
    # unit block voxel (3, 0, 0): x slab [2.75, 4.25] -> t in [0.5625, 0.9375];
    # y slab [-0.25, 1.25] -> t in [-0.75 / 4, 0.75 / 4] = [-0.1875, 0.1875]. The box has left the
    # y slab before it enters the x slab: 0.5625 > 0.1875.
    w = one_block_world(CUBE, (3, 0, 0))
    p, r, h = (0.5, 0.5, 0.5), (4.0, 4.0, 0.0), (0.25, 0.25, 0.25)
    res = solve(w, p, r, h, skin=SKIN)
    assert res.state[0] == 0 and res.block[0, 0] == -1 and res.toi[0, 0] == 1.0
    assert res.ref_end[0].tolist() == [4.5, 4.5, 0.5]


@pytest.mark.parametrize("y, hit", [(1.25, True), (1.75, False)])
def test_parallel_slab_needs_origin_inside(y, hit):
    # sec. 5.3.3: a ray parallel to a slab misses unless its origin is within the slab.
    # Box half 0.5 moving +4 in x from x = 0.5 toward the unit block voxel (3, 0, 0): y slab
    # [-0.5, 1.5]. At y = 1.25 (inside) the x slab [2.5, 4.5] is entered at (2.5 - 0.5) / 4 = 0.5;
    # at y = 1.75 (outside) the box passes over the block.
    w = one_block_world(CUBE, (3, 0, 0))
    res = solve(w, (0.5, y, 0.5), (4.0, 0.0, 0.0), 0.5, skin=SKIN)
    if hit:
        assert res.toi[0, 0] == 0.5
        assert res.ref_end[0] == pytest.approx([2.5 - SKIN, y, 0.5], abs=1e-12)
    else:
        assert res.block[0, 0] == -1 and res.ref_end[0].tolist() == [4.5, y, 0.5]


def test_negative_direction_swaps_slab_ends():
    # sec. 5.3.3: with d < 0, t1 > t2 and the two are swapped. Box half 0.5 at x = 6.5 moving -4
    # toward the unit block voxel (2, 0, 0): t1 = (1.5 - 6.5) / -4 = 1.25, t2 = (3.5 - 6.5) / -4 = 0.75,
    # so the interval is [0.75, 1.25]; contact at x = 6.5 - 3 = 3.5 on the +x face; skin: 3.501.
    w = one_block_world(CUBE, (2, 0, 0))
    p, r, h = (6.5, 0.5, 0.5), (-4.0, 0.0, 0.0), (0.5, 0.5, 0.5)
    res = solve(w, p, r, h, skin=SKIN)
    assert res.toi[0, 0] == 0.75 and res.normal[0, 0].tolist() == [1, 0, 0]
    assert res.ref_end[0] == pytest.approx([3.5 + SKIN, 0.5, 0.5], abs=1e-12)


def test_moving_aabb_intervals_agree_with_minkowski_ray():
    # sec. 5.5.8 axis by axis. Moving A = [0, 1]^3 (centre 0.5, half 0.5) with velocity (3, -1.5, 0);
    # static B = voxel (2, -1, 0) = [2, 3] x [-1, 0] x [0, 1].
    #   x (v > 0, A.max 1 < B.min 2): tfirst = (2 - 1) / 3 = 1/3, tlast = (3 - 0) / 3 = 1.
    #   y (v < 0, A.min 0 == B.max 0): tfirst = (0 - 0) / -1.5 = 0, tlast = (-1 - 1) / -1.5 = 4/3.
    #   z (v = 0): [0, 1] overlaps [0, 1], no constraint.
    # tfirst = 1/3, tlast = min(1, 4/3) = 1: first contact at 1/3 on the x faces.
    # Minkowski ray (sec. 5.5): x slab [1.5, 3.5] from 0.5 at speed 3 -> [1/3, 1]; y slab
    # [-1.5, 0.5] from 0.5 at speed -1.5 -> [0, 4/3]: the same interval. 1/3 is not exact in binary;
    # both it and the end positions below are compared to 1e-12.
    w = one_block_world(CUBE, (2, -1, 0))
    p, r, h = (0.5, 0.5, 0.5), (3.0, -1.5, 0.0), (0.5, 0.5, 0.5)
    res = solve(w, p, r, h, skin=SKIN, passes=3)
    assert res.toi[0, 0] == pytest.approx(1 / 3, abs=1e-15)
    # At t = 1/3: x = 0.5 + 1 = 1.5 (stop at 1.499), y = 0.5 - 0.5 = 0.0. The rest of y,
    # -1.5 * 2/3 = -1.0, slides clear (x = 1.499 is outside B's x slab): end (1.499, -1.0, 0.5).
    assert res.normal[0, 0].tolist() == [-1, 0, 0] and res.npass[0] == 2
    assert res.ref_end[0] == pytest.approx([1.5 - SKIN, -1.0, 0.5], abs=1e-12)


def test_touching_is_not_contact():
    # Project rule (the book's closed test would report these as hits, from memory).
    w = one_block_world(CUBE, (2, 0, 0))
    # Sliding over the block's top: y slab [-0.5, 1.5], centre y = 1.5 is on the slab boundary.
    res = solve(w, (0.5, 1.5, 0.5), (3.0, 0.0, 0.0), 0.5, skin=SKIN)
    assert res.block[0, 0] == -1 and res.ref_end[0].tolist() == [3.5, 1.5, 0.5]
    # Grazing the top edge: motion (2, 2, 0) from (0.5, 0.5, 0.5), x slab [1.5, 3.5] -> [0.5, 1.5],
    # y slab [-0.5, 1.5] -> [-0.5, 0.5]; te = tx = 0.5, the boxes meet along an edge for an instant.
    res = solve(w, (0.5, 0.5, 0.5), (2.0, 2.0, 0.0), 0.5, skin=SKIN)
    assert res.block[0, 0] == -1 and res.ref_end[0].tolist() == [2.5, 2.5, 0.5]
    # Reaching the face exactly at the end of the motion: t1 = (1.5 - 0.5) / 1 = 1, not a hit.
    res = solve(w, (0.5, 0.5, 0.5), (1.0, 0.0, 0.0), 0.5, skin=SKIN)
    assert res.block[0, 0] == -1 and res.ref_end[0].tolist() == [1.5, 0.5, 0.5]


def test_corner_tie_blocks_both_axes():
    # Project rule: faces entered at the same time all block. Box half 0.5 at (0.5, 0.5, 0.5),
    # motion (2, 2, 0), unit block voxel (2, 2, 0): x slab [1.5, 3.5] -> [0.5, 1.5], y the same, so
    # both entries are 0.5 (bits x and y). Both axes stop skin short: (1.499, 1.499); no motion left.
    w = one_block_world(CUBE, (2, 2, 0))
    res = solve(w, (0.5, 0.5, 0.5), (2.0, 2.0, 0.0), 0.5, skin=SKIN, passes=3)
    assert res.normal[0, 0].tolist() == [-1, -1, 0] and res.npass[0] == 1
    assert res.ref_end[0] == pytest.approx([1.5 - SKIN, 1.5 - SKIN, 0.5], abs=1e-12)


def test_partial_block_shape_in_minkowski_sum():
    # A bottom half slab (local box y in [0, 0.5]) at voxel (0, 0, 0); box half (0.25, 0.5, 0.25)
    # falling by 3 from y = 2.5: y slab [0 - 0.5, 0.5 + 0.5] = [-0.5, 1.0];
    # t1 = (1.0 - 2.5) / -3 = 0.5, t2 = (-0.5 - 2.5) / -3 = 1.0; x and z slabs [-0.25, 1.25] hold 0.5.
    # Lands on the slab's top face (+y): y = 1.0 + skin.
    w = one_block_world((0.0, 0.0, 0.0, 1.0, 0.5, 1.0), (0, 0, 0))
    p, r, h = (0.5, 2.5, 0.5), (0.0, -3.0, 0.0), (0.25, 0.5, 0.25)
    res = solve(w, p, r, h, skin=SKIN)
    assert res.normal[0, 0].tolist() == [0, 1, 0]
    assert res.ref_end[0] == pytest.approx([0.5, 1.0 + SKIN, 0.5], abs=1e-12)


def test_voxel_size_scales_lengths_not_times():
    # The first case at voxel size 0.5: block voxel (2, 0, 0) is x in [1.0, 1.5]; box half 0.25 at
    # x = 0 moving +2: slab [0.75, 1.75], t = 0.75 / 2 = 0.375 (all lengths halved, t unchanged).
    # The skin is in voxels: 0.001 voxel = 0.0005 world units, so the end is x = 0.7495.
    w = one_block_world(CUBE, (2, 0, 0), voxel_size=0.5)
    res = solve(w, (0.0, 0.25, 0.25), (2.0, 0.0, 0.0), 0.25, skin=SKIN)
    assert res.toi[0, 0] == 0.375
    assert res.ref_end[0] == pytest.approx([0.75 - SKIN * 0.5, 0.25, 0.25], abs=1e-12)
