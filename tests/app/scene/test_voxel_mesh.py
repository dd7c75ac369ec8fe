"""Exposed-face meshing and box hulls, checked against counts and areas worked out by hand.

No display needed: only numpy arrays are compared.
"""
from __future__ import annotations

import itertools

import numpy as np
import pytest

from resweep.app.scene.voxel_mesh import (box_quads, chunk_faces, padded_types, shape_tables, swept_quads)
from resweep.core import VoxelWorld, shapes_from_lists
from resweep.core.demo.quarry import SHAPES as DEMO_SHAPES

CUBE = (0.0, 0.0, 0.0, 1.0, 1.0, 1.0)
LOWER_SLAB = (0.0, 0.0, 0.0, 1.0, 0.5, 1.0)
POST = (0.375, 0.0, 0.375, 0.625, 1.5, 0.625)
# Types: 0 air, 1 cube, 2 lower slab, 3 post (the demo quarry's shapes).
SHAPES = shapes_from_lists([[], [CUBE], [LOWER_SLAB], [POST]], ("air", "stone", "slab", "fence post"))
RGB = np.array([[0, 0, 0], [120, 120, 120], [180, 170, 150], [110, 80, 50]], np.uint8)


def faces_of(cells: dict, size: int = 4, shapes=SHAPES):
    """Faces of one chunk holding ``cells`` {(x, y, z): type}."""
    blocks = np.zeros((1, size, size, size), np.uint16)
    for (x, y, z), t in cells.items():
        blocks[0, x, y, z] = t
    world = VoxelWorld(size, np.zeros((1, 3), np.int64), blocks, shapes)
    return chunk_faces(padded_types(world, 0), world.chunk_origin[0], shape_tables(shapes), RGB)


def quad_area(q):
    """float (n,) areas of planar quads (n, 4, 3): half the norm of the diagonals' cross product."""
    q = np.asarray(q, np.float64)
    return 0.5 * np.linalg.norm(np.cross(q[:, 2] - q[:, 0], q[:, 3] - q[:, 1]), axis=1)


def quad_normal(q):
    q = np.asarray(q, np.float64)
    n = np.cross(q[:, 1] - q[:, 0], q[:, 2] - q[:, 0])
    return n / np.linalg.norm(n, axis=1, keepdims=True)


def test_single_cube_has_six_faces():
    # One cube alone: every neighbour is air, so all 6 faces are exposed.
    f = faces_of({(1, 1, 1): 1})
    assert len(f) == 6
    assert quad_area(f.quads).sum() == pytest.approx(6.0)


def test_two_adjacent_cubes_have_ten_faces():
    # 2 cubes x 6 faces = 12, minus the 2 faces they share (one each) = 10.
    f = faces_of({(1, 1, 1): 1, (2, 1, 1): 1})
    assert len(f) == 10
    # The shared plane x = 2 carries no face.
    xs = f.quads[..., 0]
    assert not ((xs == 2).all(axis=1)).any()


def test_two_by_two_by_two_block_shows_only_its_hull():
    # A 2x2x2 block: 8 cubes x 6 = 48 faces; each of the 12 internal contacts hides 2 faces
    # (48 - 24 = 24), which is 4 faces on each of the 6 sides of the block.
    cells = {(x, y, z): 1 for x, y, z in itertools.product((1, 2), repeat=3)}
    f = faces_of(cells)
    assert len(f) == 24


def test_lower_slab_on_a_cube_hides_the_cube_top():
    # The slab's box spans y 0..0.5 of its cell and all of x and z, so it fills the whole
    # square of the plane it shares with the cube below: the cube's top face is hidden (5 faces).
    # The slab is not a full cube, so it draws all 6 of its faces: 5 + 6 = 11.
    f = faces_of({(1, 1, 1): 1, (1, 2, 1): 2})
    assert len(f) == 11
    cube = f.quads[f.block == 1]
    assert len(cube) == 5
    assert not (cube[..., 1] == 2).all(axis=1).any()  # no cube face on the plane y = 2
    # Slab area by hand: top and bottom 1 x 1, four sides 1 x 0.5 -> 2 + 2 = 4.
    assert quad_area(f.quads[f.block == 2]).sum() == pytest.approx(4.0)


def test_lower_slab_under_a_cube_leaves_the_cube_bottom_drawn():
    # The slab only reaches y = 0.5 of its cell; the cube's bottom face (plane y = 2) looks at the
    # air above the slab, so it stays: 6 + 6 = 12.
    f = faces_of({(1, 1, 1): 2, (1, 2, 1): 1})
    assert len(f) == 12
    assert (f.block == 1).sum() == 6


def test_fence_post_on_a_cube_leaves_the_cube_top_drawn():
    # The post covers 0.25 x 0.25 of the 1 x 1 face below it, so the cube's top stays: 6 + 6 = 12.
    # The post's box (0.25 x 1.5 x 0.25) has area 2 * 0.0625 + 4 * 0.375 = 1.625.
    f = faces_of({(1, 1, 1): 1, (1, 2, 1): 3})
    assert len(f) == 12
    assert quad_area(f.quads[f.block == 3]).sum() == pytest.approx(1.625)
    # It reaches half a voxel into the cell above its own: top face at y = 2 + 1.5.
    assert f.quads[f.block == 3][..., 1].max() == pytest.approx(3.5)


def test_faces_between_chunks_are_culled():
    # Cubes at x = 3 and x = 4 with chunk size 4 sit in two chunks; together they show 10 faces,
    # 5 per chunk, the shared plane x = 4 in neither.
    S = 4
    blocks = np.zeros((2, S, S, S), np.uint16)
    blocks[0, 3, 1, 1] = 1
    blocks[1, 0, 1, 1] = 1
    world = VoxelWorld(S, np.array([[0, 0, 0], [4, 0, 0]]), blocks, SHAPES)
    tables = shape_tables(SHAPES)
    counts = [len(chunk_faces(padded_types(world, c), world.chunk_origin[c], tables, RGB)) for c in (0, 1)]
    assert counts == [5, 5]


def test_face_normals_point_out_of_their_voxel():
    f = faces_of({(1, 1, 1): 1, (2, 1, 1): 1, (1, 2, 1): 2})
    mid = f.quads.astype(np.float64).mean(axis=1)
    inside = f.centre.astype(np.float64)
    inside[f.block == 2, 1] -= 0.25  # the slab's box centre sits a quarter voxel below its cell's
    outward = ((mid - inside) * quad_normal(f.quads)).sum(axis=1)
    assert (outward > 0).all()


def test_demo_cover_table():
    t = shape_tables(DEMO_SHAPES)
    names = DEMO_SHAPES.names
    # Direction order -x +x -y +y -z +z.
    assert t.is_cube.tolist() == [n in ("stone", "dirt", "plank wall", "gravel") for n in names]
    assert t.covers[names.index("slab")].tolist() == [False, False, True, False, False, False]
    assert not t.covers[names.index("fence post")].any()
    assert not t.covers[0].any()


def test_box_quads_cover_the_box_surface():
    q = box_quads([[0, 0, 0]], [[2, 1, 3]])
    # 2 x (2*1 + 1*3 + 2*3) = 22 by hand.
    assert quad_area(q).sum() == pytest.approx(22.0)


def zonotope_area(gens):
    """Surface area of the zonotope spanned by generators: 2 * sum over pairs |g_i x g_j| (each
    pair of generators spans two opposite parallelogram faces; from memory, standard zonotope
    geometry, and it checks out on a box: 2(ab + bc + ca))."""
    return 2 * sum(np.linalg.norm(np.cross(a, b)) for a, b in itertools.combinations(gens, 2))


@pytest.mark.parametrize("d", [(2.0, 0.0, 0.0), (1.0, -0.7, 0.0), (0.6, 1.1, -2.3), (-0.3, 0.0, 0.9)])
def test_swept_hull_is_the_convex_hull(d):
    lo, hi = np.array([1.0, 2.0, 3.0]), np.array([1.6, 3.8, 3.6])
    d = np.array(d)
    q = swept_quads(lo, hi, d)
    # Area equals that of the zonotope with generators the box edges and the motion.
    gens = [np.array([hi[0] - lo[0], 0, 0]), np.array([0, hi[1] - lo[1], 0]), np.array([0, 0, hi[2] - lo[2]]), d]
    assert quad_area(q).sum() == pytest.approx(zonotope_area(gens), rel=1e-12)
    # Each quad lies in a supporting plane of the 16 corners (all on one side): it is on the hull.
    corners = np.array([[a, b, c] for a in (lo[0], hi[0]) for b in (lo[1], hi[1]) for c in (lo[2], hi[2])])
    pts = np.concatenate([corners, corners + d])
    n = quad_normal(q)
    side = np.einsum("qk,pk->qp", n, pts) - (n * q[:, 0]).sum(axis=1, keepdims=True)
    eps = 1e-9
    assert ((side <= eps).all(axis=1) | (side >= -eps).all(axis=1)).all()


def test_swept_along_an_axis_is_the_stretched_box():
    # [0,1]^3 moved by (2, 0, 0): hull [0,3] x [0,1] x [0,1], area 2 * (3 + 3 + 1) = 14 by hand.
    q = swept_quads(np.zeros(3), np.ones(3), np.array([2.0, 0, 0]))
    assert quad_area(q).sum() == pytest.approx(14.0)
    assert q[..., 0].min() == 0 and q[..., 0].max() == 3
