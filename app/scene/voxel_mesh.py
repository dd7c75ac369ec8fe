"""Quad meshes built with numpy: voxel surfaces (exposed faces only, one quad per face), and the
boxes drawn over them (collider boxes, swept hulls, hit faces, arrows).

Rules (worked through in tests/test_voxel_mesh.py):

- a full-cube block (a type whose only box is the unit cell) draws a face unless the neighbour
  across it covers that whole face with one of its own boxes (another cube, or e.g. a lower
  slab above it: the slab's box spans the full square of the shared plane);
- every other shape (slab, post, ...) draws all six faces of every box it owns, always, so thin
  shapes never lose a side to a neighbour they only partly touch;
- neighbours come from the adjacent chunks, so faces between two chunks are culled too.

Each quad keeps its own four corners (no shared points), so cells can be picked out of a mesh
by a plain index mask (:func:`select`) and colours stay flat per face.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from resweep.app.scene.style import shade

#: Face directions: index d = 2 * axis + side (side 1 = the max side), i.e. -x +x -y +y -z +z.
DIRS = np.array([[-1, 0, 0], [1, 0, 0], [0, -1, 0], [0, 1, 0], [0, 0, -1], [0, 0, 1]], np.int64)


@dataclass
class Faces:
    """A set of quads (n faces).

    Attributes:
        quads: float32 (n, 4, 3) corners in world units, counter-clockwise seen from outside.
        rgb: uint8 (n, 3) face colour.
        centre: float32 (n, 3) centre of the voxel the face belongs to, world units (cut-away key).
        block: int32 (n,) block type.
    """

    quads: np.ndarray
    rgb: np.ndarray
    centre: np.ndarray
    block: np.ndarray

    def __len__(self) -> int:
        return len(self.quads)


def empty_faces() -> Faces:
    return Faces(np.zeros((0, 4, 3), np.float32), np.zeros((0, 3), np.uint8),
                 np.zeros((0, 3), np.float32), np.zeros(0, np.int32))


@dataclass(frozen=True)
class ShapeTables:
    """Per block type facts the mesher needs (T types).

    Attributes:
        is_cube: bool (T,), the type is exactly the unit cell (one box [0, 1]^3).
        covers: bool (T, 6), the type's boxes cover the whole face of its own cell on side d.
        box_start: int64 (T+1,); boxes: float64 (B, 6) (copied from BlockShapes).
    """

    is_cube: np.ndarray
    covers: np.ndarray
    box_start: np.ndarray
    boxes: np.ndarray


def shape_tables(shapes) -> ShapeTables:
    """Build :class:`ShapeTables` from a :class:`resweep.core.BlockShapes`."""
    bs = np.asarray(shapes.box_start, np.int64)
    boxes = np.asarray(shapes.boxes, np.float64).reshape(-1, 6)
    T = len(bs) - 1
    counts = np.diff(bs)
    owner = np.repeat(np.arange(T), counts)
    lo, hi = boxes[:, :3], boxes[:, 3:]
    unit = (lo == 0).all(axis=1) & (hi == 1).all(axis=1)
    is_cube = np.zeros(T, bool)
    single = counts == 1
    is_cube[single] = unit[bs[:-1][single]]
    covers = np.zeros((T, 6), bool)
    for d in range(6):
        a, side = divmod(d, 2)
        others = [b for b in range(3) if b != a]
        full = ((lo[:, others] <= 0) & (hi[:, others] >= 1)).all(axis=1)
        # The box must fill the cell right next to the face, not just reach the plane.
        touch = (hi[:, a] >= 1) & (lo[:, a] < 1) if side else (lo[:, a] <= 0) & (hi[:, a] > 0)
        np.logical_or.at(covers[:, d], owner, full & touch)
    return ShapeTables(is_cube, covers, bs, boxes)


def padded_types(world, c: int) -> np.ndarray:
    """uint16 (S+2, S+2, S+2) block types of chunk ``c`` with a one-voxel border taken from the
    six face-adjacent chunks (air where there is none). Index [x, y, z], [1:-1]^3 is the chunk."""
    S = world.chunk_size
    out = np.zeros((S + 2, S + 2, S + 2), np.uint16)
    out[1:-1, 1:-1, 1:-1] = world.blocks[c]
    cc = world.chunk_origin[c] // S
    for d in range(6):
        a, side = divmod(d, 2)
        n = world.chunk_index(*(cc + DIRS[d]))
        if n < 0:
            continue
        src = [slice(None)] * 3
        dst = [slice(1, -1)] * 3
        src[a] = 0 if side else S - 1          # the neighbour's layer touching our chunk
        dst[a] = S + 1 if side else 0
        out[tuple(dst)] = world.blocks[n][tuple(src)]
    return out


def _quads(v, lo, hi, d, vs, dtype=np.float32):
    """(n, 4, 3) corners in ``dtype`` of face d (n,) of boxes [v+lo, v+hi] (n, 3) voxel-local,
    scaled by ``vs``."""
    n = len(v)
    a, side = d // 2, d % 2
    u, w = (a + 1) % 3, (a + 2) % 3
    base = (v + lo).astype(np.float64)
    top = (v + hi).astype(np.float64)
    rows = np.arange(n)
    out = np.empty((n, 4, 3), np.float64)
    plane = np.where(side == 1, top[rows, a], base[rows, a])
    # (u, w) square walked so that u x w = +axis; the min side walks it backwards.
    uw = np.array([[0, 0], [1, 0], [1, 1], [0, 1]])
    order = np.where(side[:, None] == 1, np.arange(4)[None], np.array([0, 3, 2, 1])[None])
    for k in range(4):
        cu, cw = uw[order[:, k]].T
        out[rows, k, a] = plane
        out[rows, k, u] = np.where(cu == 1, top[rows, u], base[rows, u])
        out[rows, k, w] = np.where(cw == 1, top[rows, w], base[rows, w])
    return (out * vs).astype(dtype)


def _face_shade(v, d, up: int) -> np.ndarray:
    """Baked light per face (n,): tops brightest, sides by axis, and a small per-voxel jitter
    so single blocks stay tellable apart on a flat floor."""
    a, side = d // 2, d % 2
    f = np.where(a == up, np.where(side == 1, 1.0, 0.62), np.where(a == (up + 1) % 3, 0.86, 0.76))
    h = (v[:, 0] * 73856093 ^ v[:, 1] * 19349663 ^ v[:, 2] * 83492791) & 7
    return f * (0.96 + 0.012 * h)


def chunk_faces(types: np.ndarray, origin, tables: ShapeTables, rgb_table: np.ndarray,
                voxel_size: float = 1.0, up: int = 1) -> Faces:
    """Exposed faces of one chunk.

    Args:
        types: uint16 (S+2, S+2, S+2) padded block types (see :func:`padded_types`).
        origin: int (3,) voxel coordinate of ``types[1, 1, 1]``.
        tables: from :func:`shape_tables`; rgb_table: uint8 (T', 3) colour per type.
        voxel_size: world units per voxel; up: index of the up axis (for the baked shading).
    """
    origin = np.asarray(origin, np.int64)
    T = len(tables.is_cube)
    if not types[1:-1, 1:-1, 1:-1].any():
        return empty_faces()  # all air (also the chunks a trace makes for far edits)
    # Stay in the stored 2-byte type (an int64 copy of a padded chunk costs 4x its memory).
    t_all = np.minimum(types, np.uint16(min(T - 1, 65535)))
    inner = t_all[1:-1, 1:-1, 1:-1]
    cube = tables.is_cube[inner] & (inner != 0)
    vox, lo, hi, dd = [], [], [], []
    S = inner.shape
    for d in range(6):
        a, side = divmod(d, 2)
        sl = [slice(1, S[i] + 1) for i in range(3)]
        sl[a] = slice(2, S[a] + 2) if side else slice(0, S[a])
        nbr = t_all[tuple(sl)]
        show = cube & ~tables.covers[nbr, d ^ 1]
        idx = np.argwhere(show)
        vox.append(idx)
        lo.append(np.zeros((len(idx), 3)))
        hi.append(np.ones((len(idx), 3)))
        dd.append(np.full(len(idx), d))
    shaped = (~tables.is_cube[inner]) & (inner != 0)
    sidx = np.argwhere(shaped)
    if len(sidx):
        st = inner[shaped]
        counts = tables.box_start[st + 1] - tables.box_start[st]
        rep = np.repeat(np.arange(len(sidx)), counts)
        first = np.repeat(tables.box_start[st], counts)
        box = first + (np.arange(len(rep)) - np.repeat(np.cumsum(counts) - counts, counts))
        bx = tables.boxes[box]
        for d in range(6):
            vox.append(sidx[rep])
            lo.append(bx[:, :3])
            hi.append(bx[:, 3:])
            dd.append(np.full(len(rep), d))
    v = np.concatenate(vox).astype(np.int64)
    if not len(v):
        return empty_faces()
    lo, hi, d = np.concatenate(lo), np.concatenate(hi), np.concatenate(dd).astype(np.int64)
    block = inner[v[:, 0], v[:, 1], v[:, 2]]
    gv = v + origin
    quads = _quads(gv, lo, hi, d, voxel_size)
    base = rgb_table[np.minimum(block, len(rgb_table) - 1)]
    rgb = shade(base, _face_shade(gv, d, up))
    centre = ((gv + 0.5) * voxel_size).astype(np.float32)
    return Faces(quads, rgb, centre, block.astype(np.int32))


def concat(parts) -> Faces:
    parts = [p for p in parts if len(p)]
    if not parts:
        return empty_faces()
    return Faces(*(np.concatenate([getattr(p, f) for p in parts]) for f in ("quads", "rgb", "centre", "block")))


def select(faces: Faces, mask: np.ndarray) -> Faces:
    """The faces where bool (n,) ``mask`` is set."""
    return Faces(faces.quads[mask], faces.rgb[mask], faces.centre[mask], faces.block[mask])


def mesh_type(plotter):
    """The mesh class to draw on ``plotter``: its own ``mesh_type`` (the off-screen plotter's
    meshes, which need no pyvista) or pyvista's ``PolyData`` (the viewer's Qt plotter)."""
    own = getattr(plotter, "mesh_type", None)
    if own is not None:
        return own
    import pyvista as pv
    return pv.PolyData


def to_polydata(faces: Faces, mesh_cls=None):
    """Mesh of the quads with cell array "rgb" (uint8 (n, 3)): a ``mesh_cls`` (default
    pyvista.PolyData; see :func:`mesh_type`)."""
    if mesh_cls is None:
        import pyvista as pv
        mesh_cls = pv.PolyData
    n = len(faces)
    mesh = mesh_cls.from_regular_faces(faces.quads.reshape(-1, 3), np.arange(4 * n).reshape(n, 4))
    mesh.cell_data["rgb"] = faces.rgb
    return mesh


def _box_template() -> np.ndarray:
    """float64 (6, 4, 3) faces of the unit box in direction order, corners as 0/1 fractions."""
    d = np.arange(6)
    return _quads(np.zeros((6, 3)), np.zeros((6, 3)), np.ones((6, 3)), d, 1.0, np.float64)


_BOX = _box_template()


def box_quads(lo, hi) -> np.ndarray:
    """float64 (6k, 4, 3) the six faces of k boxes ``[lo, hi]`` (float (k, 3), world units),
    box by box, each box's faces in direction order (-x +x -y +y -z +z)."""
    lo = np.asarray(lo, np.float64).reshape(-1, 1, 1, 3)
    hi = np.asarray(hi, np.float64).reshape(-1, 1, 1, 3)
    return (lo + _BOX[None] * (hi - lo)).reshape(-1, 4, 3)


def swept_quads(lo, hi, d) -> np.ndarray:
    """float64 (n, 4, 3) boundary of the convex hull of box ``[lo, hi]`` and the same box moved by
    ``d`` (all float (3,), world units), n <= 12.

    The hull of a convex body swept along a segment is the body's faces turned away from the
    motion at the start, the faces turned toward it at the end, and each silhouette edge (an edge
    between one face of each kind) extruded along the motion (the shadow-volume construction,
    common practice). Faces parallel to the motion count as turned away, so their start copy
    and the extruded band tile that side without overlap.
    """
    lo = np.asarray(lo, np.float64)
    hi = np.asarray(hi, np.float64)
    d = np.asarray(d, np.float64)
    if not np.isfinite(d).all() or not d.any():
        return box_quads(lo, hi)
    front = DIRS @ d > 0  # (6,) outward normal of face k has a positive component along d
    faces = box_quads(lo, hi)  # face index = direction index for a single box
    faces[front] += d
    bands = []
    for a in range(3):
        u, w = (a + 1) % 3, (a + 2) % 3
        for su in (0, 1):
            for sw in (0, 1):
                if front[2 * u + su] == front[2 * w + sw]:
                    continue
                p0 = lo.copy()
                p0[u] = hi[u] if su else lo[u]
                p0[w] = hi[w] if sw else lo[w]
                p1 = p0.copy()
                p1[a] = hi[a]
                bands.append([p0, p1, p1 + d, p0 + d])
    if bands:
        faces = np.concatenate([faces, np.asarray(bands)])
    return faces


def arrow_quads(origin, direction, length: float) -> np.ndarray:
    """float64 (11, 4, 3) a square-section arrow from ``origin`` along unit ``direction``, world
    units; the tip is a pyramid written as quads with two equal corners."""
    d = np.asarray(direction, np.float64)
    helper = np.array([0.0, 0.0, 1.0]) if abs(d[2]) < 0.9 else np.array([1.0, 0.0, 0.0])
    u = np.cross(d, helper)
    u /= np.linalg.norm(u)
    w = np.cross(d, u)
    shaft = box_quads([0.0, -0.04, -0.04], [0.68, 0.04, 0.04])
    b, tip = 0.12, [1.0, 0.0, 0.0]
    base = [[0.68, -b, -b], [0.68, b, -b], [0.68, b, b], [0.68, -b, b]]
    pyramid = [[base[i], base[(i + 1) % 4], tip, tip] for i in range(4)] + [base[::-1]]
    local = np.concatenate([shaft, np.asarray(pyramid)]) * length
    return local @ np.stack([d, u, w]) + np.asarray(origin, np.float64)


def contact_quads(voxel, normal, boxes, end, half, skin: float, vs: float = 1.0):
    """Hit faces and contact-normal arrows of one reference pass.

    Args:
        voxel: int (3,) hit voxel; normal: int (3,) hit normal (one or more axes set, pointing out
            of the hit face); boxes: float (k, 6) the hit block type's boxes, voxel-local.
        end: float (3,) box centre after the pass; half: float (3,); skin, vs: world units.
    Returns:
        faces float64 (m, 4, 3) and arrows float64 (11 m, 4, 3), one per normal axis set: the face
        of the block box whose side lies nearest the contact plane, lifted 0.01 voxel off it, and
        an arrow from the middle of the contact patch (that face clipped to the moving box).
    """
    v = np.asarray(voxel, np.float64)
    faces, arrows = [], []
    for ax in np.flatnonzero(normal):
        if not len(boxes):
            break
        sgn = int(normal[ax])
        plane = end[ax] - sgn * (half[ax] + skin)
        side = 3 if sgn > 0 else 0
        j = int(np.argmin(np.abs((v[ax] + boxes[:, side + ax]) * vs - plane)))
        blo, bhi = (v + boxes[j, :3]) * vs, (v + boxes[j, 3:]) * vs
        face = box_quads(blo, bhi)[2 * ax + (sgn > 0)] + np.eye(3)[ax] * sgn * 0.01 * vs
        faces.append(face[None])
        plo, phi = np.maximum(blo, end - half), np.minimum(bhi, end + half)
        mid = np.where(plo <= phi, (plo + phi) / 2, (blo + bhi) / 2)
        mid[ax] = face[0, ax]
        arrows.append(arrow_quads(mid, np.eye(3)[ax] * sgn, 1.2 * vs))
    if not faces:
        return np.zeros((0, 4, 3)), np.zeros((0, 4, 3))
    return np.concatenate(faces), np.concatenate(arrows)


def blocks_sight(centre, h: float, eye, targets) -> np.ndarray:
    """bool (n,): cubes of half size ``h`` around float (n, 3) ``centre`` that a segment from
    ``eye`` to one of float (k, 3) ``targets`` passes through (slab test per segment, Ericson 2005,
    sec. 5.3.3; section number from memory)."""
    lo, hi = centre - h, centre + h
    out = np.zeros(len(centre), bool)
    with np.errstate(divide="ignore", invalid="ignore"):
        for p in targets:
            d = p - eye
            t1, t2 = (lo - eye) / d, (hi - eye) / d
            enter = np.fmax.reduce(np.minimum(t1, t2), axis=1)
            leave = np.fmin.reduce(np.maximum(t1, t2), axis=1)
            out |= (enter < leave) & (leave > 0) & (enter < 1)
    return out


def cone_quads(tip, direction, size: float) -> np.ndarray:
    """float64 (5, 4, 3) a square pyramid (arrow head) with its point at ``tip``, pointing along
    unit ``direction``, ``size`` long and ``size`` wide, world units."""
    d = np.asarray(direction, np.float64)
    helper = np.array([0.0, 0.0, 1.0]) if abs(d[2]) < 0.9 else np.array([1.0, 0.0, 0.0])
    u = np.cross(d, helper)
    u /= np.linalg.norm(u)
    w = np.cross(d, u)
    tip = np.asarray(tip, np.float64)
    c = tip - d * size
    h = 0.5 * size
    base = [c - h * u - h * w, c + h * u - h * w, c + h * u + h * w, c - h * u + h * w]
    return np.asarray([[base[i], base[(i + 1) % 4], tip, tip] for i in range(4)] + [base[::-1]])
