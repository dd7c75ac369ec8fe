"""The walk of long sweeps (core/nb_traverse.py) against the simple broad phase it replaces.

The simple broad phase tests every solid box of the swept bounding box (``broad="scan"``); the
walk visits only the voxel regions the moving box can reach, nearest first. The reference here is
the scan: both must give the same minimum entry time, the same OR-ed axes of tied faces, the same
lexicographically smallest hit voxel, the same slide and the same classification, for both float
types. ``candidates`` counts the boxes the narrow phase actually tested, so it differs by design:
the walk tests a subset of the scan's boxes (each voxel at most once, none outside the swept box),
which is checked as an inequality.
"""
from __future__ import annotations

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from resweep.core import SolverSettings, VoxelWorld, chunks_from_dense, shapes_from_lists, solve_rows

CUBE = (0.0, 0.0, 0.0, 1.0, 1.0, 1.0)
#: Block types, voxel-local boxes; several reach past their own cell (the broad phase widens then).
SHAPES = [
    [],                                                        # air
    [CUBE],
    [(0.0, 0.0, 0.0, 1.0, 0.5, 1.0)],                          # slab
    [(0.4, 0.0, 0.4, 0.6, 1.75, 0.6)],                         # post reaching 0.75 above its cell
    [(0.0, 0.0, 0.0, 1.0, 0.5, 1.0), (0.0, 0.5, 0.5, 1.0, 1.0, 1.0)],  # step: two boxes
    [(-0.5, 0.2, 0.3, 0.25, 0.4, 1.3)],                        # beam reaching into -x and +z cells
    [(0.1, -1.0, 0.1, 0.9, 0.3, 0.9)],                         # hanging block reaching a full cell down
]
CUBES_ONLY = [[], [CUBE]]
COMPARED = ("ref_end", "npass", "state", "toi", "normal", "voxel", "block", "points", "flags", "error")


def _world(grid, origin, chunk_size, voxel_size, shape_lists):
    co, cb = chunks_from_dense(grid, origin, chunk_size)
    return VoxelWorld(chunk_size, co, cb, shapes_from_lists(shape_lists), voxel_size)


def _assert_same(world, s, m, e, h, precision):
    st_ = SolverSettings(precision=precision)
    scan = solve_rows(world, s, m, e, h, st_, broad="scan")
    for broad in ("walk", "auto"):
        got = solve_rows(world, s, m, e, h, st_, broad=broad)
        for name in COMPARED:
            a, b = getattr(scan, name), getattr(got, name)
            assert np.array_equal(a, b, equal_nan=True), (broad, name, np.argwhere(~((a == b) | (a != a))))
        assert (got.candidates <= scan.candidates).all(), broad
    return scan


@st.composite
def cases(draw):
    """A small random world and rows with short and long motions, starts in and around it."""
    seed = draw(st.integers(0, 2**32 - 1))
    rng = np.random.default_rng(seed)
    cubes = draw(st.booleans())
    lists = CUBES_ONLY if cubes else SHAPES
    dims = tuple(draw(st.integers(2, 14)) for _ in range(3))
    density = draw(st.sampled_from([0.05, 0.15, 0.4]))
    grid = np.where(rng.random(dims) < density, rng.integers(1, len(lists), dims), 0).astype(np.uint16)
    S = draw(st.sampled_from([2, 4, 8]))
    far = draw(st.sampled_from([0, 0, 1 << 16, -(1 << 20)]))  # far from the origin stresses float32
    origin = np.array([far, 0, -far]) // S * S
    vs = draw(st.sampled_from([1.0, 0.5, 0.3, 2.0]))
    n = 24
    lo = (origin - 2) * vs
    hi = (origin + np.array(dims) + 2) * vs
    s = rng.uniform(lo, hi, (n, 3))
    length = rng.choice([0.05, 0.7, 3.0, 12.0, 40.0], n) * vs
    d = rng.normal(size=(n, 3))
    d[rng.random((n, 3)) < 0.25] = 0.0                       # axis-parallel components
    d[np.abs(d).sum(axis=1) == 0, 0] = 1.0
    m = d / np.linalg.norm(d, axis=1, keepdims=True) * length[:, None]
    snap = rng.random(n) < 0.3                               # starts on voxel faces: exact ties
    s[snap] = np.round(s[snap] / vs * 2) / 2 * vs
    h = rng.choice([0.05, 0.25, 0.3, 0.5, 0.9, 1.4], (n, 3)) * vs
    e = s + m * rng.choice([0.0, 0.5, 1.0, 1.3], (n, 1))     # recorded ends: tunnels, snags, agreement
    return _world(grid, origin, S, vs, lists), s, m, e, h


@settings(max_examples=120, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(cases(), st.sampled_from(["float64", "float32"]))
def test_walk_matches_scan_on_random_worlds(case, precision):
    world, s, m, e, h = case
    _assert_same(world, s, m, e, h, precision)


def _pillar_world(n=80, height=6, seed=7):
    """Unit-cube floor of n x n voxels with scattered pillars of ``height``; chunk size 16."""
    rng = np.random.default_rng(seed)
    g = np.zeros((n, height + 1, n), np.uint16)
    g[:, 0, :] = 1
    for x, z in rng.integers(0, n, (n * n // 40, 2)):
        g[x, 1:height + 1, z] = 1
    return _world(g, (0, 0, 0), 16, 1.0, CUBES_ONLY)


@pytest.mark.parametrize("precision", ["float64", "float32"])
@pytest.mark.parametrize("length", [4, 16, 64])
def test_long_diagonal_sweeps_through_pillars(precision, length):
    # Diagonal motions over the pillar field, some dipping into the floor: the walk must find the
    # same first pillar as the scan while testing far fewer boxes once the sweep is long.
    world = _pillar_world()
    rng = np.random.default_rng(length)
    n = 300
    s = np.column_stack([rng.uniform(2, 20, n), rng.uniform(1.5, 5.0, n), rng.uniform(2, 20, n)])
    d = np.column_stack([np.ones(n), rng.uniform(-0.05, 0.05, n), rng.uniform(0.5, 1.0, n)])
    m = d / np.linalg.norm(d, axis=1, keepdims=True) * length
    h = np.tile([0.3, 0.9, 0.3], (n, 1))
    scan = _assert_same(world, s, m, s + m, h, precision)
    assert (scan.block[:, 0] >= 0).mean() > 0.3  # the sweeps do hit pillars
    if length == 64:
        walk = solve_rows(world, s, m, s + m, h, SolverSettings(precision=precision), broad="walk")
        assert walk.candidates.sum() * 5 < scan.candidates.sum()


def test_ties_across_regions_keep_the_least_voxel():
    # A row of cubes entered at exactly t = 0.5 across a long sweep: every one ties, so the walk
    # must still visit all regions holding a tied face (not stop at the first) and report the
    # lexicographically smallest voxel with the OR of the tied axes, as the scan does.
    g = np.zeros((64, 3, 3), np.uint16)
    g[:, 0, 1] = 1
    world = _world(g, (0, 0, 0), 4, 1.0, CUBES_ONLY)
    s = np.array([[32.0, 2.0, 1.5]])
    m = np.array([[0.0, -1.0, 0.0]])
    for half in ([31.5, 0.5, 0.25], [20.0, 0.5, 0.25]):
        h = np.array([half])
        scan = _assert_same(world, s, m, s + m, h, "float64")
        assert scan.toi[0, 0] == 0.5 and scan.normal[0, 0].tolist() == [0, 1, 0]
    assert scan.voxel[0, 0].tolist() == [12, 0, 1]  # x from 32 - 20 - 0 = 12: the least tied voxel


def test_zero_length_axes_and_empty_world():
    world = _world(np.zeros((4, 4, 4), np.uint16), (0, 0, 0), 4, 1.0, CUBES_ONLY)
    s = np.array([[1.0, 1.0, 1.0], [1.0, 1.0, 1.0]])
    m = np.array([[50.0, 0.0, 0.0], [0.0, 0.0, 0.0]])
    res = _assert_same(world, s, m, s + m, np.full((2, 3), 0.4), "float64")
    assert res.ref_end.tolist() == [[51.0, 1.0, 1.0], [1.0, 1.0, 1.0]]


@pytest.mark.parametrize("broad", ["walk", "auto"])
def test_boxes_tested_do_not_depend_on_chunk_size(broad):
    # The walk splits regions on absolute power-of-two voxel boundaries, never on chunk borders, so
    # for the same world extent even the diagnostic count of boxes tested depends on the geometry
    # alone. (The walk starts from the swept box clamped to the world's chunks, so the extent must
    # match: solid corners make every chunk size cover [0, 32) x [0, 16) x [0, 32).)
    rng = np.random.default_rng(3)
    g = np.where(rng.random((32, 16, 32)) < 0.08, rng.integers(1, len(SHAPES), (32, 16, 32)), 0).astype(np.uint16)
    g[0, 0, 0] = g[-1, -1, -1] = 1
    n = 200
    s = rng.uniform([0, 0, 0], [32, 16, 32], (n, 3))
    m = rng.normal(size=(n, 3)) * rng.choice([1.0, 8.0, 30.0], (n, 1))
    h = rng.uniform(0.1, 0.8, (n, 3))
    worlds = [_world(g, (0, 0, 0), S, 1.0, SHAPES) for S in (4, 8, 16)]
    assert len({(tuple(w.lo), tuple(w.hi)) for w in worlds}) == 1
    got = [solve_rows(w, s, m, s + m, h, SolverSettings(), broad=broad) for w in worlds]
    for other in got[1:]:
        for name in COMPARED + ("candidates",):
            assert np.array_equal(getattr(got[0], name), getattr(other, name), equal_nan=True), name
