"""Voxel world: chunk lookup, edits over time (incremental, outside chunks, backwards), writer/reader
round trip."""
from __future__ import annotations

import numpy as np

from resweep.core import (SolverSettings, VoxelWorld, check_trace, chunks_from_dense, open_trace,
                          shapes_from_lists, solve_rows, unit_cube_shapes, write_trace)


def test_block_lookup_negative_coordinates():
    g = np.zeros((16, 16, 16), np.uint16)
    g[0, 0, 0] = 3
    g[15, 2, 9] = 4
    origin, blocks = chunks_from_dense(g, (-8, -16, 8), 8)
    w = VoxelWorld(8, origin, blocks, unit_cube_shapes(8))
    assert w.block_at(-8, -16, 8) == 3
    assert w.block_at(7, -14, 17) == 4
    assert w.block_at(-9, -16, 8) == 0 and w.block_at(1000, 0, 0) == 0


def test_edits_apply_in_order_outside_chunks_and_backwards():
    origin, blocks = chunks_from_dense(np.ones((8, 1, 8), np.uint16), (0, 0, 0), 8)
    edits = np.array([[5, 1, 0, 1, 0],      # dig a hole at frame 5
                      [5, 1, 0, 1, 2],      # same frame, later row wins (file order)
                      [9, 100, 0, 0, 1],    # far outside every recorded chunk
                      [7, 1, 0, 1, 0]])     # dug again at frame 7
    w = VoxelWorld(8, origin, blocks, unit_cube_shapes(4), edits=edits)
    seen = {}
    for f in range(12):
        w.advance_to(f)
        seen[f] = (w.block_at(1, 0, 1), w.block_at(100, 0, 0))
    assert seen[4] == (1, 0) and seen[5] == (2, 0) and seen[7] == (0, 0) and seen[9] == (0, 1)
    v = w.version
    w.advance_to(11)
    assert w.version == v  # nothing new to apply: no change
    w.advance_to(6)        # backwards: restarts from the recorded chunks
    assert (w.block_at(1, 0, 1), w.block_at(100, 0, 0)) == (2, 0)


def test_edits_before_counts_what_advancing_would_write():
    """edits_before(f): the edit rows with frame <= f still to write, plus one for restoring the
    recorded chunks when the world goes back after edits; zero exactly when advance_to(f) leaves
    the blocks alone (it returns False). Frames visited forwards, backwards and at random; the
    oracle is the edit table counted by hand."""
    origin, blocks = chunks_from_dense(np.ones((8, 1, 8), np.uint16), (0, 0, 0), 8)
    edits = np.array([[5, 1, 0, 1, 0], [5, 1, 0, 1, 2], [9, 100, 0, 0, 1], [7, 1, 0, 1, 0]])
    rows_up_to = {f: int((edits[:, 0] <= f).sum()) for f in range(13)}  # 0..4: 0, 5..6: 2, 7..8: 3, 9..: 4
    w = VoxelWorld(8, origin, blocks, unit_cube_shapes(4), edits=edits)
    order = list(range(13)) + list(range(12, -1, -1)) + list(np.random.default_rng(5).integers(0, 13, 40))
    at, written = -1, 0  # the frame the world stands at; edit rows in its blocks
    for f in map(int, order):
        back = f < at and written > 0
        want = rows_up_to[f] + 1 if back else rows_up_to[f] - written
        assert w.edits_before(f) == want, (at, f)
        v = w.version
        assert w.advance_to(f) == (want > 0) == (w.version != v), (at, f)
        at, written = f, rows_up_to[f]


def test_edit_opens_a_hole_for_the_solver(tmp_path):
    # A box resting on the floor over voxel (2, 0, 2) falls into it once an edit removes it.
    origin, blocks = chunks_from_dense(np.ones((8, 2, 8), np.uint16), (0, 0, 0), 8)
    y = 2 + 0.25 + 0.001
    start = np.tile(np.array([2.5, y, 2.5]), (3, 1, 1))
    motion = np.tile(np.array([0.0, -0.6, 0.0]), (3, 1, 1))
    path = tmp_path / "hole.h5"
    write_trace(path, chunk_size=8, chunk_origin=origin, chunk_blocks=blocks, entity_ids=[7],
                half_extents=[[0.25, 0.25, 0.25]], time=np.arange(3) / 60, start=start, motion=motion,
                end=start.copy(), edits=[[2, 2, 1, 2, 0]])
    with open_trace(path) as tr:
        report = check_trace(tr, SolverSettings())
    # Frames 0 and 1: the floor (top y = 2) holds, recorded end == start == reference. Frame 2:
    # voxel (2, 1, 2) is gone; the box (x, z in [2.25, 2.75], inside that column) drops the full
    # 0.6, its bottom going 2.001 -> 1.401, still above the voxel below (top y = 1). The recorded
    # "stayed put" falls short of that: a snag.
    assert [(d.frame, d.kind) for d in report.divergences] == [(2, "snag")]
    assert report.divergences[0].reference_end[1] == np.float64(y) - 0.6


def test_round_trip_keeps_every_field(tmp_path):
    shapes = shapes_from_lists([[], [(0, 0, 0, 1, 1, 1)], [(0, 0, 0, 1, 0.5, 1), (0.25, 0.5, 0.25, 0.75, 1.5, 0.75)]],
                               ("air", "cube", "lamp"))
    g = np.zeros((4, 4, 4), np.uint16)
    g[1, 1, 1] = 2
    origin, blocks = chunks_from_dense(g, (0, 0, 0), 4)
    F, N = 5, 2
    rng = np.random.default_rng(3)
    start, motion, end = (rng.normal(size=(F, N, 3)).astype(np.float32) for _ in range(3))
    active = rng.random((F, N)) > 0.3
    path = tmp_path / "rt.h5"
    write_trace(path, chunk_size=4, chunk_origin=origin, chunk_blocks=blocks, shapes=shapes, entity_ids=[3, 9],
                entity_names=["a", "b"], half_extents=[[0.3, 0.9, 0.3], [0.5, 0.5, 0.5]], time=np.arange(F) * 0.1,
                start=start, motion=motion, end=end, active=active, voxel_size=0.5, up_axis="z", title="t")
    with open_trace(path) as tr:
        assert tr.frame_dtype == np.float32 and tr.voxel_size == 0.5 and tr.up_axis == "z"
        assert tr.shapes.names == ("air", "cube", "lamp") and tr.shapes.reach == 1
        assert tr.names == ("a", "b") and list(tr.ids) == [3, 9]
        blk = tr.frames(0, F)
        assert np.array_equal(blk.start, start) and np.array_equal(blk.active, active)
        w = tr.world()
        assert w.block_at(1, 1, 1) == 2


def test_tall_shape_reaches_past_its_cell():
    # A post 1.5 tall in voxel (0, 0, 0) blocks a box falling at y between 1 and 1.5 above it:
    # the broad phase must widen by one voxel to find it.
    shapes = shapes_from_lists([[], [(0.25, 0.0, 0.25, 0.75, 1.5, 0.75)]])
    origin, blocks = chunks_from_dense(np.ones((1, 1, 1), np.uint16), (0, 0, 0), 8)
    w = VoxelWorld(8, origin, blocks, shapes)
    s = np.array([[0.5, 2.5, 0.5]])
    m = np.array([[0.0, -2.0, 0.0]])
    r = solve_rows(w, s, m, s + m, np.full((1, 3), 0.2), SolverSettings())
    # Post top at 1.5; box bottom reaches it when the centre is at 1.7; stop 0.001 short.
    assert r.ref_end[0, 1] == 1.7 + 0.001
    assert list(r.voxel[0, 0]) == [0, 0, 0] and r.block[0, 0] == 1 and list(r.normal[0, 0]) == [0, 1, 0]
