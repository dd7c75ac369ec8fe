"""The solid boxes a picture reasons about, against a brute-force walk over the dense grid.

Rule (``story.solid_boxes`` docstring): a region [lo, hi] in world units touches the voxels
``floor(lo / vs) - 1 .. floor(hi / vs) + 1`` on each axis; every solid voxel there gives one box
per box of its block type, scaled to world units. Several regions give each voxel's boxes once.
The oracle below walks every cell of the grid in plain Python from that rule.
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from resweep.app.scene.story import solid_boxes, solid_boxes_any

from solver_helpers import SHAPE_LISTS, random_grid, world_from_grid

ORIGIN = (-8, 0, 8)  # a multiple of the chunk size: grid cell (0, 0, 0) is voxel ORIGIN


def oracle(grid, regions, vs):
    """Sorted rows of every box of every solid voxel touched by a region (plain Python)."""
    ranges = [[(math.floor(a / vs) - 1, math.floor(b / vs) + 1) for a, b in zip(lo, hi)] for lo, hi in regions]
    rows = set()
    for (i, j, k), t in np.ndenumerate(grid):
        if t == 0:
            continue
        v = (i + ORIGIN[0], j + ORIGIN[1], k + ORIGIN[2])
        if any(all(r[a][0] <= v[a] <= r[a][1] for a in range(3)) for r in ranges):
            for box in SHAPE_LISTS[t]:
                rows.add(tuple((v[a] + box[a]) * vs for a in range(3)) + tuple((v[a] + box[3 + a]) * vs for a in range(3)))
    return sorted(rows)


def as_rows(boxes):
    rows = [tuple(float(x) for x in r) for r in boxes]
    assert len(rows) == len(set(rows)), "a voxel's boxes came more than once"
    return sorted(rows)


@pytest.mark.parametrize("vs", [1.0, 0.5])
def test_regions_match_the_walk(vs):
    rng = np.random.default_rng(7)
    grid = random_grid(rng, (24, 16, 24), 0.3)
    world = world_from_grid(grid, origin=ORIGIN, chunk_size=8, voxel_size=vs)
    o = np.array(ORIGIN, float) * vs
    cases = [
        [(o + 2.2 * vs, o + 5.9 * vs)],                                        # one region
        [(o + 2.2 * vs, o + 5.9 * vs), (o + 3.0 * vs, o + 7.5 * vs)],          # overlapping
        [(o + 1.0 * vs, o + 2.0 * vs), (o + 15.5 * vs, o + 18.0 * vs)],        # far apart, across chunks
        [(o + 7.0 * vs, o + 8.0 * vs), (o + 8.0 * vs, o + 9.0 * vs), (o + 7.5 * vs, o + 7.5 * vs)],  # on chunk edges
        [(o - 5.0 * vs, o - 3.0 * vs), (o + 4.0 * vs, o + 4.0 * vs)],          # one outside the world
    ]
    for regions in cases:
        want = oracle(grid, regions, vs)
        assert as_rows(solid_boxes_any(world, regions)) == want
        if len(regions) == 1:
            assert as_rows(solid_boxes(world, *regions[0])) == want
    assert len(oracle(grid, cases[2], vs)) > 0  # the cases do reach solid voxels


def test_a_huge_region_gives_nothing_but_the_others_still_count():
    grid = np.ones((8, 8, 8), np.uint16)
    world = world_from_grid(grid, origin=ORIGIN, chunk_size=8)
    o = np.array(ORIGIN, float)
    small = (o + 3.0, o + 3.5)
    huge = (o - 1e6, o + 1e6)
    assert as_rows(solid_boxes_any(world, [huge])) == []
    assert as_rows(solid_boxes_any(world, [huge, small])) == oracle(grid, [small], 1.0)
