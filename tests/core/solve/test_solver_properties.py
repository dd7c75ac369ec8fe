"""Properties of the reference solve over seeded random and hypothesis-generated worlds.

What is exactly true of sweep-and-slide (our own reasoning from the method, Ericson 2005 sec. 5.5
plus the slide, which is common practice):
- the end never overlaps solid when the start does not: every pass stops at the first contact and
  backs off the skin from the hit face;
- per axis, each pass moves in the direction of the wanted motion and by at most what is left of
  it: contact times lie in [0, 1], the skin back-off never goes behind the pass start and the
  remainder is scaled by 1 - t. So every axis moves monotonically toward the wanted displacement
  and never past it (float rounding aside), and an axis with no wanted motion never moves;
- the answer does not depend on the order chunks, candidates or rows are visited in.
"""
from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from resweep.core import SolverSettings, overlap_depths, solve_rows
from resweep.core.check.kinds import kinds_of
from resweep.core.demo.engine import push_out_step

from solver_helpers import SHAPE_LISTS, random_grid, solve, world_from_grid

SKIN = 0.001  # voxels, the default
FIELDS = ("ref_end", "npass", "state", "toi", "normal", "voxel", "block", "candidates", "points",
          "flags", "error")


def _random_world(seed, shape=(12, 8, 12), origin=(-4, 0, -4), chunk_size=4, density=0.25):
    rng = np.random.default_rng(seed)
    return rng, random_grid(rng, shape, density), origin, chunk_size


def _free_rows(rng, world, n, lo, hi, max_len=4.0):
    """n rows (start, motion, half) whose start box does not overlap solid, world units."""
    starts, halves = [], []
    while len(starts) < n:
        s = rng.uniform(lo, hi, (4 * n, 3))
        h = rng.uniform(0.1, 0.6, (4 * n, 3))
        free = overlap_depths(world, s, h) == 0
        starts.extend(s[free])
        halves.extend(h[free])
    s, h = np.array(starts[:n]), np.array(halves[:n])
    m = rng.normal(0.0, 1.0, (n, 3)) * rng.uniform(0.1, max_len, (n, 1))
    m[rng.random((n, 3)) < 0.15] = 0.0  # some axes with no wanted motion
    return s, m, h


def _assert_motion_bounds(start, motion, res):
    """Per axis: no motion wanted -> no motion; otherwise monotone toward the wanted displacement
    and never beyond it (1e-12 for float rounding of the slide remainders)."""
    d = res.ref_end - start
    still = motion == 0
    assert np.array_equal(d[still], np.zeros(still.sum()))
    sgn = np.sign(motion)
    assert (d * sgn >= 0).all()
    assert (np.abs(d) <= np.abs(motion) + 1e-12).all()
    steps = np.diff(res.points, axis=1) * sgn[:, None, :]  # each pass moves toward the target
    assert (steps >= 0).all()
    assert (np.linalg.norm(d, axis=1) <= np.linalg.norm(motion, axis=1) + 1e-12).all()


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_end_free_and_motion_bounded_random_worlds(seed):
    # Coverage floor below: most rows really collide.
    rng, grid, origin, S = _random_world(seed)
    world = world_from_grid(grid, origin, S)
    lo = np.array(origin, float) - 1
    hi = lo + np.array(grid.shape) + 2
    start, motion, half = _free_rows(rng, world, 3000, lo, hi)
    res = solve(world, start, motion, half, skin=SKIN, passes=3)
    assert (res.state != 2).all()
    assert (res.state == 1).sum() > 1000  # most rows really collide
    assert (overlap_depths(world, res.ref_end, half) == 0).all()
    _assert_motion_bounds(start, motion, res)


@st.composite
def dyadic_scene(draw):
    """Small world and rows on a 1/8-voxel grid: many exactly touching and tied contacts."""
    n = (draw(st.integers(2, 5)), draw(st.integers(2, 4)), draw(st.integers(2, 5)))
    cells = draw(st.lists(st.tuples(st.integers(0, n[0] - 1), st.integers(0, n[1] - 1),
                                    st.integers(0, n[2] - 1), st.integers(1, len(SHAPE_LISTS) - 1)),
                          min_size=1, max_size=16))
    grid = np.zeros(n, np.uint16)
    for x, y, z, t in cells:
        grid[x, y, z] = t
    rows = []
    for _ in range(draw(st.integers(8, 24))):
        # Start up to 2 voxels around a solid cell, most motions aimed at a point of that cell (the
        # rest anywhere), so most rows really hit something.
        x, y, z, _t = draw(st.sampled_from(cells))
        s8 = [8 * c + draw(st.integers(-16, 24)) for c in (x, y, z)]
        if draw(st.integers(0, 3)):
            k = draw(st.sampled_from([1, 2, 3]))
            m8 = [(8 * c + draw(st.integers(0, 8)) - s8[a]) * k for a, c in enumerate((x, y, z))]
        else:
            m8 = [draw(st.integers(-32, 32)) for _ in range(3)]
        h8 = [draw(st.integers(1, 5)) for _ in range(3)]
        rows.append((tuple(c / 8 for c in s8), tuple(c / 8 for c in m8), tuple(c / 8 for c in h8)))
    skin = draw(st.sampled_from([SKIN, 2.0**-10, 2.0**-6]))
    return grid, rows, skin


def test_end_free_and_motion_bounded_dyadic():
    hits = []

    @settings(max_examples=150, deadline=None, database=None, derandomize=True)
    @given(dyadic_scene())
    def check(scene):
        grid, rows, skin = scene
        world = world_from_grid(grid, (0, 0, 0), 4)
        start, motion, half = (np.array([r[j] for r in rows], float) for j in range(3))
        free = overlap_depths(world, start, half) == 0
        start, motion, half = start[free], motion[free], half[free]
        if not len(start):
            return
        res = solve(world, start, motion, half, skin=skin, passes=3)
        assert (overlap_depths(world, res.ref_end, half) == 0).all()
        _assert_motion_bounds(start, motion, res)
        hits.append(int((res.state == 1).sum()))

    check()
    # Coverage floor: the property is only worth something on rows that really hit something.
    assert sum(hits) >= 300, sum(hits)


def _same(a, b, order=None):
    for f in FIELDS:
        x, y = getattr(a, f), getattr(b, f)
        if order is not None:
            x = x[order]
        assert x.dtype == y.dtype and x.tobytes() == y.tobytes(), f


def _tie_heavy_rows(rng, n, size):
    """Rows on a 1/8 grid with unit-ish boxes: falls and pushes onto faces shared by several
    blocks, so equal entry times are common and only the tie rule decides the hit voxel."""
    s = rng.integers(0, 8 * size, (n, 3)) / 8
    m = rng.integers(-24, 25, (n, 3)) / 8
    h = rng.choice([0.25, 0.5, 0.75], (n, 3))
    return s, m, h


def test_bit_identical_under_chunk_candidate_and_row_order():
    rng, grid, _, _ = _random_world(7, shape=(16, 16, 16), origin=(0, 0, 0), density=0.2)
    s1, m1, h1 = _tie_heavy_rows(rng, 1500, 16)
    s2, m2, h2 = _free_rows(rng, world_from_grid(grid, (0, 0, 0), 8), 1500, 0.0, 16.0, max_len=12.0)
    start, motion, half = np.vstack([s1, s2]), np.vstack([m1, m2]), np.vstack([h1, h2])
    base = solve(world_from_grid(grid, (0, 0, 0), 8), start, motion, half, skin=SKIN, passes=3)
    assert (base.normal[:, 0] != 0).sum(axis=1).max() >= 2  # some contacts tie on several axes
    # Chunks listed in another order (other hash slots and chunk indices).
    co_count = len(world_from_grid(grid, (0, 0, 0), 8).chunk_origin)
    for perm_seed in range(3):
        order = np.random.default_rng(perm_seed).permutation(co_count)
        other = solve(world_from_grid(grid, (0, 0, 0), 8, chunk_order=order), start, motion, half,
                      skin=SKIN, passes=3)
        _same(base, other)
    # Other chunk sizes visit candidates in other orders.
    for S in (4, 16):
        _same(base, solve(world_from_grid(grid, (0, 0, 0), S), start, motion, half, skin=SKIN, passes=3))
    # Rows permuted.
    order = rng.permutation(len(start))
    _same(base, solve(world_from_grid(grid, (0, 0, 0), 8), start[order], motion[order], half[order],
                      skin=SKIN, passes=3), order)


@pytest.mark.parametrize("half", [0.5, 0.375])
@pytest.mark.parametrize("gap", ["skin", "touching"])
@pytest.mark.parametrize("down", [0.0, -0.05])
def test_slide_along_seamed_floor_keeps_horizontal_motion(half, gap, down):
    # Floor of 64 x 8 unit cubes (top face y = 1) cut into 8-voxel chunks: a seam every voxel and a
    # chunk boundary every 8. With half 0.5 and motion 1.0 the box's x faces land exactly on seams;
    # halves are dyadic so "touching" (centre y = 1 + half) is exact in float.
    grid = np.zeros((64, 1, 8), np.uint16)
    grid[:, 0, :] = 1
    world = world_from_grid(grid, (0, 0, 0), 8)
    y0 = 1.0 + half + (SKIN if gap == "skin" else 0.0)
    p = np.array([1.5, y0, 2.5])
    m = np.array([1.0, down, 0.0625])
    for frame in range(60):
        res = solve(world, p, m, half, skin=SKIN, passes=3)
        end = res.ref_end[0]
        if down == 0.0:
            assert res.state[0] == 0 and np.array_equal(end, p + m), frame
        else:
            # The downward part is blocked by the floor (normal +y), the horizontal part is kept.
            assert res.state[0] == 1 and res.normal[0, 0].tolist() == [0, 1, 0], frame
            assert abs(end[0] - (p[0] + m[0])) <= 1e-12 and abs(end[2] - (p[2] + m[2])) <= 1e-12, frame
            assert abs(end[1] - y0) <= 1e-12 and end[1] >= 1.0 + half, frame
        p = end.copy()
    assert p[0] == pytest.approx(61.5)


def test_resting_box_does_not_catch_on_floor_seam():
    # Smallest form of the floor slide above: unit cubes at voxels (1, 0, 0) and (2, 0, 0), a box of
    # half 0.5 resting exactly on the first (centre (1.5, 1.5, 0.5), x faces on the seams x = 1, 2)
    # moving (1, -0.05, 0). The floor's top face y = 1 blocks the downward part. Block (2, 0, 0) is
    # reached along the shared edge (x = 2, y = 1) at t = 0 on x and y at once, but its -x face at
    # x = 2 is glued to block (1, 0, 0): the floor is flat and the x motion must be kept,
    # end (2.5, 1.5, 0.5).
    grid = np.zeros((4, 1, 1), np.uint16)
    grid[1:3, 0, 0] = 1
    world = world_from_grid(grid, (0, 0, 0), 4)
    res = solve(world, (1.5, 1.5, 0.5), (1.0, -0.05, 0.0), 0.5, skin=SKIN, passes=3)
    assert res.normal[0, 0].tolist() == [0, 1, 0]
    assert res.ref_end[0].tolist() == [2.5, 1.5, 0.5]


def test_dash_stops_at_thin_wall_where_push_out_tunnels():
    # One-voxel wall x in [30, 31]; box half 0.5 dashing 50 voxels in one frame.
    grid = np.zeros((64, 8, 8), np.uint16)
    grid[30, :, :] = 1
    world = world_from_grid(grid, (0, 0, 0), 8)
    p, m, h = np.array([10.5, 2.5, 4.5]), np.array([50.0, 0.0, 0.0]), np.full(3, 0.5)
    # resweep's own toy push-out engine (core/demo/engine.py: move, then push out of overlaps, no
    # sweep; common practice in quick engines) lands at 60.5, overlapping nothing, past the wall.
    engine_end, _ = push_out_step(world, p, m, h, np.float64)
    assert engine_end.tolist() == [60.5, 2.5, 4.5]
    res = solve_rows(world, p[None], m[None], engine_end[None], h[None], SolverSettings())
    # Expanded wall face 30 - 0.5 = 29.5; stop skin short: 29.499.
    assert res.ref_end[0].tolist() == pytest.approx([30 - 0.5 - SKIN, 2.5, 4.5], abs=1e-12)
    assert kinds_of(res.flags[0]) == ["tunneling"]
    # On a small motion the engine is right: 29.0 + 0.7 overlaps the wall by 0.2 and is pushed back
    # to 29.5, where the reference stops too (less the skin): no divergence.
    q, small = np.array([29.0, 2.5, 4.5]), np.array([0.7, 0.0, 0.0])
    engine_end, _ = push_out_step(world, q, small, h, np.float64)
    assert engine_end[0] == pytest.approx(29.5)
    res = solve_rows(world, q[None], small[None], engine_end[None], h[None], SolverSettings())
    assert res.ref_end[0, 0] == pytest.approx(29.5 - SKIN) and res.flags[0] == 0


def test_float32_solve_agrees_with_float64_near_origin():
    rng, grid, origin, S = _random_world(11)
    world = world_from_grid(grid, origin, S)
    lo = np.array(origin, float) - 1
    start, motion, half = _free_rows(rng, world, 2000, lo, lo + np.array(grid.shape) + 2)
    # Inputs representable in float32, so both precisions solve the same rows.
    start, motion, half = (a.astype(np.float32).astype(np.float64) for a in (start, motion, half))
    r64 = solve(world, start, motion, half, skin=SKIN, passes=3)
    r32 = solve(world, start, motion, half, skin=SKIN, passes=3, precision="float32")
    for f in ("ref_end", "toi", "points", "error"):
        assert getattr(r32, f).dtype == np.float32, f
    assert (r32.state == 1).sum() > 500
    assert np.abs(r32.ref_end.astype(np.float64) - r64.ref_end).max() <= 1e-4
