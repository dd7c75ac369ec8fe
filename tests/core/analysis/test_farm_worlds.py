"""A farm worker's world cache (core/world/world_cache.py, ``open_trace(worlds=...)``).

Reference: each trace checked alone with a fresh world (``open_trace`` without a cache, then
``check_trace``), the single-process check. Traces that share a cache, in any order and mixed
with frame ranges that leave the shared world part-way through its edits, must report exactly
what they report alone.
"""
from __future__ import annotations

import numpy as np

import hostile_traces as H
from farm_traces import soak_run
from resweep.core import SolverSettings, check_trace, open_trace
from resweep.core.world.world_cache import WorldCache

LIMIT = 50


def _alone(path, frames=None):
    with open_trace(path) as tr:
        return check_trace(tr, SolverSettings(), limit=LIMIT, frames=frames).as_json()


def _cached(path, worlds, frames=None):
    with open_trace(path, worlds=worlds) as tr:
        return check_trace(tr, SolverSettings(), limit=LIMIT, frames=frames).as_json()


def test_traces_sharing_a_cache_report_what_they_report_alone(tmp_path):
    a = soak_run(tmp_path / "a.h5", seed=1, frames=60)
    b = soak_run(tmp_path / "b.h5", seed=2, frames=60)  # same stored chunks, other edits
    c = soak_run(tmp_path / "c.h5", seed=3, frames=40, edits=False)
    worlds = WorldCache()
    # a range that stops after the edits of frames 12 and 13, then whole traces that need the
    # world rewound, then a range that starts after edits
    order = [(a, (0, 20)), (b, None), (a, None), (c, None), (a, (31, 60)), (b, (13, 31)), (c, None)]
    for path, frames in order:
        assert _cached(path, worlds, frames) == _alone(path, frames), (path, frames)
    assert worlds.hits > 0
    with open_trace(a, worlds=worlds) as ta, open_trace(b, worlds=worlds) as tb, open_trace(c, worlds=worlds) as tc:
        assert ta.chunk_blocks is tb.chunk_blocks is tc.chunk_blocks  # decoded once
        assert not ta.chunk_blocks.flags.writeable
        assert len({ta.world_digest(), tb.world_digest(), tc.world_digest()}) == 3  # edits differ
        assert ta.world() is ta.world()


def test_worlds_that_differ_by_one_voxel_are_kept_apart(tmp_path):
    floor = H.one_row(tmp_path / "floor.h5")
    blocks = np.zeros((1, 8, 8, 8), np.uint8)
    blocks[0, :, 0, :] = 1
    blocks[0, 2, 1, 2] = 1  # the box starts inside this one
    bump = H.one_row(tmp_path / "bump.h5", blocks=blocks)
    worlds = WorldCache()
    got = [_cached(p, worlds) for p in (floor, bump, floor)]
    assert got == [_alone(floor), _alone(bump), _alone(floor)]
    assert got[0]["counts"] != got[1]["counts"]


def test_the_cache_drops_least_recently_used_entries_to_stay_in_bounds():
    cache = WorldCache(max_bytes=100)
    cache.put("a", 1, 60)
    cache.put("b", 2, 30)
    assert cache.get("a") == 1  # b is now the oldest
    cache.put("c", 3, 30)
    assert cache.get("b") is None and cache.get("a") == 1 and cache.get("c") == 3
    cache.put("huge", 4, 101)  # over the bound: not kept
    assert cache.get("huge") is None and cache.bytes <= 100
