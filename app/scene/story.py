"""The story of one entity-frame: what a picture of it must show and from where (numpy, no VTK).

A :class:`Story` gathers, for the focused column of a :class:`FrameState`, the boxes and points
of its divergence (start, reference end, recorded end, hit faces, and per kind: the solid the
straight recorded path crossed, the overlap with solid, the previous frame's end), the region
that frames them all, a camera direction that sees the gap between the two ends, and whether the
error is small enough to need a magnified second view. The viewport draws it; the caption words it.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from resweep.core.check.kinds import BY_NAME, SEVERITY_RANK

AXES = "xyz"
#: The error is "small" (gets a magnified second view) below this fraction of the box's smallest size.
SMALL_FRACTION = 0.35
#: Most solid cells looked at when choosing a view or kind geometry (bounds the work on huge boxes).
MAX_CELLS = 200_000


@dataclass
class Story:
    """What one picture shows (world units throughout; float64 unless noted).

    Attributes:
        kind: the kind told (worst severity, then table order), or None when the row agrees.
        kinds: every kind of the row, in bit order.
        error: that kind's error value (world units) or None.
        start, ref, rec, half: (3,) box centres and half extents (NaN where not recorded/solved).
        gap: (3,) recorded end minus reference end; gap_len: its length.
        axis: 0..2, the axis of the gap's largest component (the error's axis), or -1.
        lo, hi: (3,) bounds framing everything below.
        targets: (k, 3) points that must stay in sight (box corners pulled in, centres, hit faces).
        crossed: (m, 6) solid boxes [lo, hi] the straight recorded path crosses (tunneling).
        overlap: (m, 6) boxes [lo, hi], the part of the recorded end (or start box) inside solid.
        prev_end: (3,) previous frame's recorded end (discontinuity) or None.
        small: the gap (or overlap depth) is small next to the box: draw the magnified view.
        dim: ((3,), (3,)) ends of the dimension line of the magnified view, or None.
        view_dir: (3,) unit vector from the framed centre toward the camera.
        normals: float (3,) hit normals of the reference passes (out of the hit faces).
    """

    kind: str | None
    kinds: list
    error: float | None
    start: np.ndarray
    ref: np.ndarray
    rec: np.ndarray
    half: np.ndarray
    gap: np.ndarray
    gap_len: float
    axis: int
    lo: np.ndarray
    hi: np.ndarray
    targets: np.ndarray
    crossed: np.ndarray = field(default_factory=lambda: np.zeros((0, 6)))
    overlap: np.ndarray = field(default_factory=lambda: np.zeros((0, 6)))
    prev_end: np.ndarray | None = None
    small: bool = False
    dim: tuple | None = None
    normals: list = field(default_factory=list)
    # The camera direction, or a function choosing it: the search costs milliseconds per frame
    # and only a camera that is being pointed reads it (the viewer's scrub keeps its camera).
    _view: object = field(default=None, repr=False)

    @property
    def view_dir(self) -> np.ndarray:
        """float64 (3,) unit vector from the framed centre toward the camera, chosen on first use."""
        if callable(self._view):
            self._view = self._view()
        return self._view if self._view is not None else np.array([0.0, 1.0, 0.0])

    @property
    def centre(self) -> np.ndarray:
        return (self.lo + self.hi) / 2

    @property
    def radius(self) -> float:
        return float(np.linalg.norm(self.hi - self.lo) / 2)

    def segments(self) -> np.ndarray:
        """float64 (k, 2, 3): the lines the world is drawn around: start to each end (the hit
        faces lie on the way to the reference end) and the jump from the previous end."""
        segs = [(self.start, c) for c in (self.ref, self.rec) if _fin(c)]
        if self.prev_end is not None:
            segs.append((self.prev_end, self.start))
        return np.asarray(segs or [(self.start, self.start)], np.float64)

    def magnification(self, main_radius: float) -> float:
        """How much the second view enlarges next to a main view framing ``main_radius``."""
        return max(1.0, main_radius / inset_radius(self))


def inset_radius(story: Story) -> float:
    """World radius the magnified view frames: a few times the dimension it shows."""
    if story.dim is None:
        return 1.0
    d = float(np.linalg.norm(np.subtract(story.dim[1], story.dim[0])))
    return max(3.0 * d, 1e-6)


def axis_words(d) -> str:
    """"along x" for a vector (3,) on one axis; "mostly along x (x -0.04, z -0.03)" otherwise."""
    d = np.asarray(d, np.float64)
    n = float(np.linalg.norm(d))
    if n == 0:
        return ""
    ax = int(np.argmax(np.abs(d)))
    parts = [f"{AXES[i]} {d[i]:+.3g}" for i in range(3) if abs(d[i]) > 0.01 * n]
    if len(parts) == 1:
        return f"along {AXES[ax]}"
    return f"mostly along {AXES[ax]} ({', '.join(parts)})"


def _fin(v) -> bool:
    return v is not None and bool(np.isfinite(np.asarray(v, np.float64)).all())


def primary_kind(kinds) -> str | None:
    """The kind a picture tells: worst severity first, then table order."""
    if not kinds:
        return None
    return max(kinds, key=lambda k: (SEVERITY_RANK[BY_NAME[k].severity], -BY_NAME[k].bit))


# -- solid queries -----------------------------------------------------------------------------------
def solid_boxes(world, lo, hi) -> np.ndarray:
    """float64 (m, 6) world boxes [lo, hi] of the solid block shapes in voxels touching the world
    region [lo, hi] (float (3,), world units), as the world stands now; at most MAX_CELLS cells."""
    return solid_boxes_any(world, [(lo, hi)])


def solid_boxes_any(world, regions) -> np.ndarray:
    """:func:`solid_boxes` of the voxels touching any of ``regions`` (list of (lo, hi), float (3,)
    world units), each voxel's boxes once: every chunk is scanned once over the regions' union,
    masked to the regions (a region over 64 * MAX_CELLS voxels contributes nothing)."""
    vs = world.voxel_size
    S = world.chunk_size
    ranges = []
    for lo, hi in regions:
        vlo = np.floor(np.asarray(lo, np.float64) / vs).astype(np.int64) - 1
        vhi = np.floor(np.asarray(hi, np.float64) / vs).astype(np.int64) + 1
        if np.prod(np.maximum(vhi - vlo + 1, 0).astype(np.float64)) <= 64 * MAX_CELLS:
            ranges.append((vlo, vhi))
    if not ranges:
        return np.zeros((0, 6))
    ulo = np.min([r[0] for r in ranges], axis=0)
    uhi = np.max([r[1] for r in ranges], axis=0)
    out: list = []
    origin = world.chunk_origin
    hit = np.flatnonzero(((origin + S) > ulo).all(axis=1) & (origin <= uhi).all(axis=1))
    shapes = world.shapes
    for c in hit:
        o = origin[c]
        a = np.maximum(ulo - o, 0)
        b = np.minimum(uhi - o + 1, S)
        sub = world.blocks[c, a[0]:b[0], a[1]:b[1], a[2]:b[2]]
        if len(ranges) > 1:  # only the voxels inside some region (the union's box has more)
            inside = np.zeros(sub.shape, bool)
            for vlo, vhi in ranges:
                ra = np.maximum(vlo - o - a, 0)
                rb = np.minimum(vhi - o + 1 - a, b - a)
                if (rb > ra).all():
                    inside[ra[0]:rb[0], ra[1]:rb[1], ra[2]:rb[2]] = True
            sub = np.where(inside, sub, 0)
        for t in np.unique(sub):
            if t == 0:
                continue
            v = (np.argwhere(sub == t)[:MAX_CELLS] + o + a).astype(np.float64)
            boxes = shapes.boxes_of(int(t)) if t < shapes.count else np.array([[0, 0, 0, 1, 1, 1.0]])
            for bx in boxes:  # one row per (cell, box of its type), vectorised over cells
                out.append(np.concatenate([(v + bx[:3]) * vs, (v + bx[3:]) * vs], axis=1))
    if not out:
        return np.zeros((0, 6))
    return np.concatenate(out)


def overlap_boxes(solid: np.ndarray, lo, hi, min_depth: float = 0.0) -> np.ndarray:
    """float64 (m, 6): the parts of box [lo, hi] inside each of ``solid`` (m0, 6) with a
    thickness above ``min_depth`` on every axis (touching faces are not overlap)."""
    a = np.maximum(solid[:, :3], lo)
    b = np.minimum(solid[:, 3:], hi)
    keep = ((b - a) > min_depth).all(axis=1)
    return np.concatenate([a[keep], b[keep]], axis=1)


def crossed_boxes(solid: np.ndarray, start, end, half) -> np.ndarray:
    """The ``solid`` boxes (m0, 6) that a box of ``half`` moving in a straight line from centre
    ``start`` to ``end`` passes through (open interiors overlap at some time in [0, 1]).

    Slab test of the centre's segment against each box grown by ``half`` (Minkowski sum;
    Ericson 2005, sec. 5.3.3 for the segment-box slab test)."""
    if not len(solid):
        return solid
    lo = solid[:, :3] - half
    hi = solid[:, 3:] + half
    p = np.asarray(start, np.float64)
    d = np.asarray(end, np.float64) - p
    with np.errstate(divide="ignore", invalid="ignore"):
        t1, t2 = (lo - p) / d, (hi - p) / d
        tin = np.where(d == 0, np.where((p > lo) & (p < hi), -np.inf, np.inf), np.minimum(t1, t2))
        tout = np.where(d == 0, np.where((p > lo) & (p < hi), np.inf, -np.inf), np.maximum(t1, t2))
    enter = tin.max(axis=1)
    leave = tout.min(axis=1)
    return solid[(enter < leave) & (leave > 0) & (enter < 1)]


def _box_points(c, half, pull=0.95):
    corners = np.array([[i, j, k] for i in (-1, 1) for j in (-1, 1) for k in (-1, 1)], np.float64)
    return np.concatenate([c[None], c + corners * half * pull])


# -- the story ---------------------------------------------------------------------------------------
def tell_story(session, state, col: int) -> Story | None:
    """The :class:`Story` of column ``col`` of ``state`` (None when the column is inactive or its
    start box is not finite). Reads the world as it stands (the session advanced it to the frame)."""
    half = np.asarray(state.half[col], np.float64)
    start = np.asarray(state.start[col], np.float64)
    if not (state.active[col] and _fin(start) and _fin(half)):
        return None
    world = session.world
    vs = world.voxel_size
    rows = state.rows
    ref = np.asarray(rows.ref_end[col], np.float64)
    rec = np.asarray(state.recorded_end[col], np.float64)
    kinds = state.kinds(col)
    kind = primary_kind(kinds)
    err = state.errors(col).get(kind) if kind else None
    gap = rec - ref if _fin(rec) and _fin(ref) else np.zeros(3)
    gap_len = float(np.linalg.norm(gap))
    tol = session.settings.tolerance * vs
    axis = int(np.argmax(np.abs(gap))) if gap_len > tol else -1
    centres = [c for c in (start, ref, rec) if _fin(c)]
    hits = _hit_points(rows, col)
    prev_end = _previous_end(session, state.frame, col) if "discontinuity" in kinds else None
    pts = [c + s * half for c in centres for s in (-1, 1)] + list(hits)
    if prev_end is not None:
        pts += [prev_end - half, prev_end + half]
    lo, hi = np.min(pts, axis=0), np.max(pts, axis=0)
    solid = solid_boxes(world, lo - vs, hi + vs)
    story = Story(kind, kinds, err, start, ref, rec, half, gap, gap_len, axis, lo, hi, np.zeros((0, 3)),
                  prev_end=prev_end)
    story.normals = [np.asarray(rows.normal[col, k], np.float64) for k in range(int(rows.npass[col]))
                     if int(rows.block[col, k]) >= 0]
    if "tunneling" in kinds and _fin(rec):
        story.crossed = crossed_boxes(solid, start, rec, half)
    for k, box_c in (("penetration", rec), ("start_overlap", start)):
        if k in kinds and _fin(box_c):
            story.overlap = np.concatenate([story.overlap, overlap_boxes(solid, box_c - half, box_c + half,
                                                                         0.001 * vs)])
    _dimension(story, tol)
    tg = [_box_points(c, half) for c in centres] + [np.asarray(hits).reshape(-1, 3)]
    if len(story.overlap):
        tg.append((story.overlap[:, :3] + story.overlap[:, 3:]) / 2)
    story.targets = np.concatenate(tg)
    # Occluders that matter are near the key points: look 8 voxels around each (fast for far pairs).
    # Read now: the world moves on with the session, the direction is chosen later.
    view_solid = solid_boxes_any(world, [(c - half - 8 * vs, c + half + 8 * vs) for c in centres])
    motion, up = _motion(state, col).copy(), "xyz".index(session.trace.up_axis)

    def view():
        return choose_view(story, motion, up, view_solid)

    story._view = view
    return story


def _motion(state, col):
    m = np.asarray(state.motion[col], np.float64)
    return m if _fin(m) else np.zeros(3)


def _hit_points(rows, col) -> list:
    """Centres of the hit voxels of the reference passes (float (3,) each), world units."""
    out = []
    n = int(rows.npass[col])
    for k in range(n):
        if int(rows.block[col, k]) >= 0:
            out.append(np.asarray(rows.voxel[col, k], np.float64) + 0.5)
    return out


def _previous_end(session, frame: int, col: int):
    if frame <= 0:
        return None
    blk = session.frames(frame - 1, frame)
    if not bool(blk.active[0, col]):
        return None
    e = np.asarray(blk.end[0, col], np.float64)
    return e if _fin(e) else None


def _dimension(story: Story, tol: float) -> None:
    """The dimension the magnified view measures, and whether it is small next to the box:
    overlap depth for penetration and start overlap, the jump for a discontinuity, else the gap
    between the reference and recorded ends along its main axis."""
    size = float(np.min(2 * story.half))
    deep = story.overlap[:, 3:] - story.overlap[:, :3] if len(story.overlap) else np.zeros((0, 3))
    fell = story.kind == "penetration" and story.axis >= 0 and story.gap_len > float(deep.max(initial=0.0))
    if story.kind in ("penetration", "start_overlap") and len(story.overlap) and not fell:
        ov = story.overlap
        vol = np.prod(ov[:, 3:] - ov[:, :3], axis=1)
        b = ov[int(np.argmax(vol))]
        ext = b[3:] - b[:3]
        ax = int(np.argmin(ext))
        a = (b[:3] + b[3:]) / 2
        p, q = a.copy(), a.copy()
        p[ax], q[ax] = b[ax], b[3 + ax]
        story.dim = (p, q)
        story.small = bool(ext[ax] < SMALL_FRACTION * size)
        return
    if story.kind == "discontinuity" and story.prev_end is not None:
        story.dim = (story.prev_end, story.start)
        jump = float(np.linalg.norm(story.start - story.prev_end))
        story.small = bool(0 < jump < SMALL_FRACTION * size)
        return
    if story.axis < 0:
        return
    ax = story.axis
    s = np.sign(story.gap[ax])
    p = story.ref.copy()
    p[ax] += s * story.half[ax]  # the reference box's face the recorded box moved past or fell short of
    story.dim = (p, p + story.gap)
    story.small = bool(story.gap_len < SMALL_FRACTION * size)


def choose_view(story: Story, motion, up: int, solid: np.ndarray) -> np.ndarray:
    """Unit vector from the framed centre toward the camera: of 36 directions above the horizon
    (azimuth every 30 degrees, elevation 25, 45 or 70), the one that best sees the gap
    (perpendicular to it), sees across the motion, and whose sight lines to the story's key
    points cross the fewest solid boxes."""
    e_up = np.eye(3)[up]
    h1, h2 = np.eye(3)[(up + 1) % 3], np.eye(3)[(up + 2) % 3]
    g = story.gap if story.gap_len > 0 else (story.start - story.prev_end if story.prev_end is not None
                                               else np.zeros(3))
    gn = np.linalg.norm(g)
    mn = np.linalg.norm(motion)
    keys = [c for c in (story.start, story.ref, story.rec) if _fin(c)]
    reach = 2.5 * story.radius + 2.0
    dirs = []
    for elev in (25.0, 45.0, 70.0):
        for az in range(0, 360, 30):
            e, a = np.radians(elev), np.radians(az)
            dirs.append((elev, np.cos(e) * (np.cos(a) * h1 + np.sin(a) * h2) + np.sin(e) * e_up))
    if len(solid) and keys:  # sight lines of every direction at once, per key point
        along = np.array([d for _, d in dirs])
        blocked_all = sum(_blocked_many(solid, p, along * reach, story.half)
                          for p in keys)
    best, best_score = None, -np.inf
    for i, (elev, d) in enumerate(dirs):
        score = 0.0
        if gn > 0:
            score += 1.0 * np.linalg.norm(np.cross(d, g / gn))
        if mn > 0:
            score += 0.5 * np.linalg.norm(np.cross(d, motion / mn)) - 0.15 * (d @ motion) / mn
        score -= 0.1 * abs(elev - 40.0) / 45.0
        for nrm in story.normals:  # see the hit faces from their front
            score += 0.12 * float(d @ nrm) / max(1, len(story.normals))
        if len(solid) and keys:
            score -= 0.6 * blocked_all[i] / len(keys)
        if score > best_score:
            best, best_score = d, score
    return best


def _blocked_many(solid, p, steps, half) -> np.ndarray:
    """For each sight line from ``p`` (float (3,)) to ``p + steps[i]`` (float (k, 3)): the solid
    boxes it crosses (:func:`crossed_boxes` of a point, same arithmetic), not counting the ones
    that already overlap the box of ``half`` around ``p`` (they hide it from every side alike),
    capped at 3 and divided by 3. float64 (k,)."""
    own = ((solid[:, :3] < p + half) & (solid[:, 3:] > p - half)).all(axis=1)
    boxes = solid[~own]
    if not len(boxes):
        return np.zeros(len(steps))
    lo, hi = boxes[None, :, :3], boxes[None, :, 3:]  # grown by a zero half: unchanged
    d = ((p + steps) - p)[:, None, :]
    inside = (p > lo) & (p < hi)
    with np.errstate(divide="ignore", invalid="ignore"):
        t1, t2 = (lo - p) / d, (hi - p) / d
        tin = np.where(d == 0, np.where(inside, -np.inf, np.inf), np.minimum(t1, t2))
        tout = np.where(d == 0, np.where(inside, np.inf, -np.inf), np.maximum(t1, t2))
    enter, leave = tin.max(axis=2), tout.min(axis=2)
    n = ((enter < leave) & (leave > 0) & (enter < 1)).sum(axis=1)
    return np.minimum(n, 3) / 3.0
