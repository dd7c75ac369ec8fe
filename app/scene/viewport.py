"""The 3-D view of one entity-frame on any pyvista Plotter (Qt widget or off screen).

Every actor is made once, when the Viewport is; :meth:`Viewport.show` only copies fresh numpy
geometry into the existing datasets and toggles visibility, so stepping frames never clears
the plotter. Voxel faces are meshed per chunk and cached (:mod:`.voxel_mesh`); the cut-away
around the focused entity is a cell mask over the cached faces, redone only when the focus or
camera moves enough to matter.
"""
from __future__ import annotations

import hashlib
from collections import OrderedDict
from dataclasses import dataclass

import numpy as np

from resweep.app.scene.deferred_imports import defer_plot_modules

defer_plot_modules()  # before pyvista's plotting module loads

from vtkmodules.vtkRenderingCore import vtkRenderer  # noqa: E402

from resweep.app.scene import style as S
from resweep.app.scene.story import tell_story
from resweep.app.scene.voxel_mesh import (Faces, ShapeTables, blocks_sight, box_quads, chunk_faces, concat, contact_quads,
                         cone_quads, empty_faces, mesh_type, padded_types, select, shape_tables, swept_quads,
                         to_polydata)

PRESETS = ("story", "follow", "motion", "top", "side")
_ROLES = ("start", "recorded", "reference", "swept", "hit", "normal", "slide", "trail", "gap", "others",
          "rec_edges", "hit_edges", "gap_tip", "crossed", "path", "overlap", "previous", "jump")
_STYLE = {"start": S.START, "recorded": S.RECORDED, "reference": S.REFERENCE, "swept": S.SWEPT,
          "hit": S.HIT_FACE, "normal": S.NORMAL, "slide": S.SLIDE, "trail": S.TRAIL, "gap": S.GAP,
          "others": S.OTHERS, "rec_edges": S.RECORDED_EDGE, "hit_edges": S.HIT_EDGE, "gap_tip": S.GAP_TIP,
          "crossed": S.CROSSED, "path": S.PATH, "overlap": S.OVERLAP, "previous": S.PREVIOUS, "jump": S.JUMP}
#: Roles drawn in the layer over the scene: the story's key outlines stay in sight even where a
#: translucent surface or a sliver of solid lies in front of them.
_OVER = ("crossed", "overlap", "jump", "gap", "gap_tip")
#: The story's key outlines, in a layer above those (a hit face on a crossed voxel stays seen).
_TOP = ("rec_edges", "hit_edges", "reference")
_VIEW_ANGLE = 30.0  # degrees, the pyvista default
WHOLE_WORLD_MAX = 256.0  # voxels: "fit" draws the world up to this far from its centre
CHUNK_VARIANTS = 256  # chunk meshes kept, current and earlier contents (a few MB for 16^3 chunks)


@dataclass
class ViewOptions:
    """What :meth:`Viewport.show` draws.

    Attributes:
        cutaway_radius: voxels around the focused entity whose faces are drawn.
        show_others, show_swept, show_trail: draw other entities, swept volumes, the trail.
        trail_frames: frames of recorded start centres in the trail.
    """

    cutaway_radius: float = 8.0
    show_others: bool = True
    show_swept: bool = True
    show_trail: bool = True
    trail_frames: int = 30


def _box_lo_hi(centre, half):
    c, h = np.asarray(centre, np.float64), np.asarray(half, np.float64)
    return c - h, c + h


def _finite(v) -> bool:
    return bool(np.isfinite(np.asarray(v, np.float64)).all())


class Viewport:
    """Draws :class:`FrameState` s of a session into ``plotter``.

    Attributes:
        plotter: the pyvista Plotter.
        legend: list of (label, rgb 0..255) of the styles drawn by the last :meth:`show`.
        block_legend: list of (block name, rgb) of the block types in the cut-away.
    """

    def __init__(self, plotter):
        self.plotter = plotter
        self.session = None
        self.legend: list[tuple[str, tuple]] = []
        self.block_legend: list[tuple[str, tuple]] = []
        self._mesh_cls = mesh_type(plotter)  # pyvista's PolyData, or the off-screen plotter's own
        self._meshes: dict = {}
        self._actors = {}
        self._preset = "story"
        self.story = None           # Story of the focused column (scene/story.py)
        self._story_state = None    # the state, and (session, column, world version), the story
        self._story_key = None      # was told for
        self.inset = None           # MagnifiedView, made by enable_inset()
        self.locked_dir = None      # float (3,): the "story" preset keeps this direction (animations)
        self.whole_world = False    # fit(): draw the whole world (up to WHOLE_WORLD_MAX voxels out)
        self._camera_ready = False
        self._focus = None          # float (3,) world point the camera tracks
        self._interest = None       # (lo, hi) bounds of the focused entity's geometry
        self._state = None
        self._col = 0
        self._options = ViewOptions()
        self._tables: ShapeTables | None = None
        self._rgb = None
        self._chunks: dict[int, tuple] = {}   # chunk -> (world version seen, padded types, Faces, build id)
        self._builds = 0
        self._variants: OrderedDict[tuple, tuple] = OrderedDict()  # (chunk, content digest) -> (Faces, build id)
        self._merged_key = None
        self._merged = empty_faces()
        self._cut_key = None
        self._tracked = None
        self._topo: dict[str, tuple] = {}
        self._quad_cells: dict[int, np.ndarray] = {}
        self.chunk_builds = 0        # chunk meshes built so far (tests and benchmarks read it)
        top, bottom = S.BACKGROUND[1], S.BACKGROUND[0]
        plotter.set_background([c / 255 for c in bottom], top=[c / 255 for c in top])
        self._add_actors()
        # Cameras also move by mouse (Qt) or by callers: recheck the cut-away as each render starts
        # (a few comparisons unless the camera moved by a tenth of its distance).
        plotter.renderer.AddObserver("StartEvent", lambda *_: self._refresh_cutaway())

    # -- actors ----------------------------------------------------------------------------------
    def _add_actors(self):
        p = self.plotter
        vox = to_polydata(_one_face(), self._mesh_cls)
        self._meshes["voxels"] = vox
        self._actors["voxels"] = p.add_mesh(vox, scalars="rgb", rgb=True, lighting=False, show_edges=True,
                                            edge_color=(0.22, 0.22, 0.24), line_width=0.5,
                                            preference="cell", show_scalar_bar=False, reset_camera=False)
        for role in _ROLES:
            st = _STYLE[role]
            if st.representation == "lines":
                mesh = self._mesh_cls(np.zeros((2, 3)), lines=[2, 0, 1])
            else:
                mesh = self._mesh_cls.from_regular_faces(box_quads(np.zeros(3), np.ones(3)).reshape(-1, 3),
                                                      np.arange(24).reshape(6, 4))
            self._meshes[role] = mesh
            kw = dict(color=st.color, opacity=st.opacity, lighting=st.lit, reset_camera=False,
                      show_scalar_bar=False)
            if st.representation == "wireframe":
                kw.update(style="wireframe", line_width=st.line_width)
            elif st.representation == "lines":
                kw.update(line_width=st.line_width, point_size=st.line_width * 2.5, render_points_as_spheres=True)
            elif role == "others":
                kw.update(show_edges=True, edge_color=(0.45, 0.45, 0.5))
            self._actors[role] = p.add_mesh(mesh, **kw)
            self._actors[role].SetVisibility(False)
        # The reference box goes in a layer drawn over the scene: it sits inside the last swept
        # hull and against hit faces, and translucent surfaces must not tint or hide it.
        self._overlay = vtkRenderer()
        self._overlay.SetLayer(1)
        self._overlay.InteractiveOff()
        self._overlay.SetActiveCamera(p.renderer.GetActiveCamera())
        self._overlay.SetViewport(p.renderer.GetViewport())
        rw = p.render_window
        rw.SetNumberOfLayers(max(2, rw.GetNumberOfLayers()))
        rw.AddRenderer(self._overlay)
        self._top = vtkRenderer()
        self._top.SetLayer(2)
        self._top.InteractiveOff()
        self._top.SetActiveCamera(p.renderer.GetActiveCamera())
        self._top.SetViewport(p.renderer.GetViewport())
        rw.SetNumberOfLayers(max(3, rw.GetNumberOfLayers()))
        rw.AddRenderer(self._top)
        for role in _OVER + _TOP:
            vtkRenderer.RemoveActor(p.renderer, self._actors[role])
            (self._overlay if role in _OVER else self._top).AddActor(self._actors[role])
        self._actors["voxels"].SetVisibility(False)

    def _put(self, role: str, mesh) -> bool:
        """Copy ``mesh`` into the role's existing dataset (or hide the role when None/empty)."""
        actor = self._actors[role]
        if mesh is None or mesh.n_points == 0:
            actor.SetVisibility(False)
            return False
        self._meshes[role].copy_from(mesh)
        actor.SetVisibility(True)
        return True

    def _set(self, role: str, points, cells=None, lines: bool = False) -> bool:
        """Write float (m, 3) ``points`` into the role's dataset: in place when the topology
        (int (n, 4) quads, or one poly line through all points) is the one already there, else
        replace points and cells. None or no points hides the role."""
        actor = self._actors[role]
        if points is None or not len(points):
            actor.SetVisibility(False)
            return False
        mesh = self._meshes[role]
        pts = np.asarray(points, np.float64)
        topo = (len(pts), lines, None if cells is None else cells.tobytes())
        if self._topo.get(role) == topo:
            mesh.points[:] = pts
            mesh.GetPoints().Modified()
        else:
            mesh.points = pts
            if lines:
                k = len(pts)
                mesh.lines = np.concatenate([[k], np.arange(k)])
                mesh.verts = np.column_stack([np.ones(k, np.int64), np.arange(k)]).ravel()
            else:
                mesh.regular_faces = cells
            self._topo[role] = topo
        actor.SetVisibility(True)
        return True

    def _set_quads(self, role: str, quads) -> bool:
        if quads is None or not len(quads):
            return self._set(role, None)
        n = len(quads)
        cells = self._quad_cells.get(n)
        if cells is None:
            cells = self._quad_cells.setdefault(n, np.arange(4 * n).reshape(n, 4))
        return self._set(role, np.asarray(quads).reshape(-1, 3), cells)

    def enable_inset(self) -> None:
        """Make the magnified second view (shown beside the main view for small errors)."""
        if self.inset is None:
            from resweep.app.scene.inset import MagnifiedView
            shared = {r: a for r, a in self._actors.items()
                      if r in ("voxels", "start", "recorded", "hit") + _OVER + _TOP}
            self.inset = MagnifiedView(self.plotter, (self._overlay, self._top), shared, _OVER, _TOP,
                                       lambda: self.session.world.voxel_size if self.session else 1.0)

    # -- session ---------------------------------------------------------------------------------
    def set_session(self, session) -> None:
        """Use ``session``'s world; chunk meshes are built on first need and cached."""
        self.session = session
        tr = session.trace
        self._tables = shape_tables(session.world.shapes)
        used = int(session.world.blocks.max()) if session.world.blocks.size else 0
        if len(session.world.edits):
            used = max(used, int(session.world.edits[:, 4].max()))
        self._rgb = S.block_rgb(session.world.shapes.names, used + 1)
        self._chunks.clear()
        self._variants.clear()
        self._merged_key = self._cut_key = None
        self._camera_ready = False
        self._up = "xyz".index(tr.up_axis)
        labels = {a: (a + " up" if a == tr.up_axis else a) for a in "xyz"}
        cx, cy, cz = ([c / 255 for c in rgb] for rgb in S.AXIS_RGB)
        self.plotter.add_axes(xlabel=labels["x"], ylabel=labels["y"], zlabel=labels["z"], color="black",
                              line_width=2, x_color=cx, y_color=cy, z_color=cz)  # replaces the old marker
        self.plotter.camera.up = tuple(np.eye(3)[self._up])

    # -- voxels ----------------------------------------------------------------------------------
    def _chunk(self, c: int):
        """(world version seen, padded types, Faces, build id) of chunk ``c``, re-meshed only when
        its blocks or its neighbours' border layers changed; meshes of earlier contents are kept
        a while, so scrubbing back and forth over an edit does not re-mesh."""
        world = self.session.world
        entry = self._chunks.get(c)
        if entry is not None and entry[0] == world.version:
            return entry
        types = padded_types(world, c)
        if entry is not None and np.array_equal(entry[1], types):
            entry = (world.version, entry[1], entry[2], entry[3])
        else:
            key = (c, hashlib.blake2b(types.tobytes(), digest_size=16).digest())
            hit = self._variants.get(key)
            if hit is None:
                faces = chunk_faces(types, world.chunk_origin[c], self._tables, self._rgb, world.voxel_size,
                                    self._up)
                self._builds += 1
                self.chunk_builds += 1
                hit = self._variants[key] = (faces, self._builds)
                while len(self._variants) > CHUNK_VARIANTS:
                    self._variants.popitem(last=False)
            else:
                self._variants.move_to_end(key)
            entry = (world.version, types, hit[0], hit[1])
        self._chunks[c] = entry
        return entry

    def _near_chunks(self, segs, radius: float) -> np.ndarray:
        """Chunks with a part within ``radius`` of one of float (k, 2, 3) segments (only these are
        meshed: a far-apart pair loads the chunks along its path, not a ball around both)."""
        w = self.session.world
        vs = w.voxel_size
        half = 0.5 * w.chunk_size * vs
        centre = (w.chunk_origin * vs) + half
        reach = radius + vs + half * np.sqrt(3.0)
        return np.flatnonzero(seg_distance(centre, segs) <= reach)

    def _update_voxels(self, focus, radius_vox: float, targets, segs=None):
        """Cut-away: faces of voxels within ``radius_vox`` voxels of the ``segs`` (float (k, 2, 3);
        default the point ``focus``), minus the voxels that block the line of sight from the camera
        to any of ``targets`` (float (k, 3), e.g. the corners of the focused boxes), so walls and
        floors never hide them."""
        w = self.session.world
        vs = w.voxel_size
        radius = radius_vox * vs
        segs = np.asarray([[focus, focus]] if segs is None else segs, np.float64).reshape(-1, 2, 3)
        near = self._near_chunks(segs, radius)
        entries = [self._chunk(int(c)) for c in near]
        key = tuple(e[3] for e in entries)
        if key != self._merged_key:
            self._merged = concat([e[2] for e in entries])
            self._merged_key = key
            self._cut_key = None
        cam = np.asarray(self.plotter.camera.position, np.float64)
        # Redo the mask only when the focus moved by a voxel or the camera by a tenth of its
        # distance: finer moves change which voxels block the sight by at most a sliver.
        dist = max(np.linalg.norm(cam - focus), vs)
        cut = (key, radius, np.round(segs / vs).tobytes(), cam, dist, len(targets))
        old = self._cut_key
        if (old is not None and old[:3] == cut[:3]
                and np.linalg.norm(old[3] - cam) < 0.1 * old[4] and old[5] == cut[5]):
            return
        self._cut_key = cut
        f = self._merged
        centre = f.centre.astype(np.float64)
        keep = seg_distance(centre, segs) <= radius
        if len(targets) and keep.any():
            # one sight test per voxel, not per face: faces grouped by their voxel's index (an
            # int64 key sorts several times faster than rows of floats; the same voxels, in order)
            near = centre[keep]
            ijk = np.floor(near / vs).astype(np.int64)
            ijk -= ijk.min(axis=0)
            span = ijk.max(axis=0) + 1
            _, first, inv = np.unique((ijk[:, 0] * span[1] + ijk[:, 1]) * span[2] + ijk[:, 2],
                                      return_index=True, return_inverse=True)
            blocked = blocks_sight(near[first], 0.5 * vs - 0.02 * vs, cam, np.asarray(targets, np.float64))
            idx = np.flatnonzero(keep)
            keep[idx[blocked[inv.ravel()]]] = False
        shown = select(f, keep)
        self._put("voxels", to_polydata(shown, self._mesh_cls) if len(shown) else None)
        types = np.unique(shown.block)
        self.block_legend = [(w.shapes.name(int(t)), tuple(int(v) for v in self._rgb[t]))
                             for t in types if t < len(self._rgb)]

    # -- frame -----------------------------------------------------------------------------------
    def show(self, state, focus_col: int, options: ViewOptions = ViewOptions()) -> None:
        """Draw column ``focus_col`` of ``state``; updates the existing actors in place."""
        if self.session is None:
            raise RuntimeError("Viewport.show needs set_session first")
        world = self.session.world
        if world.frame != state.frame:
            world.advance_to(state.frame)  # someone asked the session for another frame meanwhile
        self._state, self._col, self._options = state, int(focus_col), options
        col = self._col
        rows = state.rows
        drawn = set()
        start, rec, ref, half = state.start[col], state.recorded_end[col], rows.ref_end[col], state.half[col]
        active = bool(state.active[col]) and _finite(start) and _finite(half)

        def box(role, centre):
            if active and _finite(centre):
                lo, hi = _box_lo_hi(centre, half)
                if self._set_quads(role, box_quads(lo, hi)):
                    drawn.add(role)
                    return lo, hi
            self._set(role, None)
            return None

        bounds = [b for b in (box("start", start), box("reference", ref)) if b is not None]
        rec_box = box("recorded", rec)
        if rec_box is not None and self._set_quads("rec_edges", box_quads(*rec_box)):
            drawn.add("rec_edges")
        else:
            self._set("rec_edges", None)
        self._draw_passes(state, col, active, options, drawn, bounds)
        self._draw_lines(state, col, active, options, drawn)
        self._draw_others(state, col, options, drawn)
        # A picture shows each state twice (before and after pointing the camera): one story.
        key = (self.session, col, world.version)
        if self._story_state is not state or self._story_key != key:
            self.story = tell_story(self.session, state, col) if active else None
            self._story_state, self._story_key = state, key
        self._draw_story(self.story, drawn)
        vs = world.voxel_size
        if self.story is not None:
            st = self.story
            self._focus = st.centre
            lo = np.min([st.lo] + [b[0] for b in bounds], axis=0)
            hi = np.max([st.hi] + [b[1] for b in bounds], axis=0)
            self._interest = (lo, hi)
        elif self._focus is None:  # nothing to follow yet: look where the entity is nearest in time
            near = self.session.nearest_position(state.frame, col)
            self._focus = near if near is not None else self._world_centre()
            self._interest = (self._focus - 2 * vs, self._focus + 2 * vs)
        if not self._camera_ready:
            self.set_camera(self._preset)
        else:
            self._track()
            self._refresh_cutaway()
        if self.inset is not None:
            was = self.inset.visible
            self.inset.show(self.story if (self.story is not None and self.story.small) else None)
            if was != self.inset.visible and self._camera_ready:  # the main view changed shape
                self.set_camera(self._preset)
                self.inset.show(self.story if self.inset.visible else None)
            if self.inset.visible:
                drawn.add("dimension")
        self.legend = legend_of(drawn)

    def _world_centre(self):
        w = self.session.world
        return (w.lo + w.hi) / 2.0 * w.voxel_size

    def _refresh_cutaway(self):
        state = self._state
        if state is None or self._focus is None:
            return
        st = getattr(self, "story", None)
        targets = st.targets if st is not None else np.zeros((0, 3))
        radius = self._options.cutaway_radius
        if self.whole_world:
            w = self.session.world
            self._update_voxels((w.lo + w.hi) / 2.0 * w.voxel_size, min(WHOLE_WORLD_MAX, float(
                np.linalg.norm(w.hi - w.lo)) / 2 + 1), targets)
        elif st is not None:  # the world drawn follows the whole story (start, both ends, jump)
            self._update_voxels(self._focus, radius, targets, st.segments())
        else:
            self._update_voxels(self._focus, radius, targets)

    def _draw_story(self, st, drawn):
        """The kind's own geometry: crossed solid, overlap volume, previous end and the jump, the
        straight recorded path, the arrow tip of the gap."""
        vs = self.session.world.voxel_size
        parts = {"crossed": None, "overlap": None, "previous": None, "path": None, "jump": None, "gap_tip": None}
        if st is not None:
            if len(st.crossed):
                parts["crossed"] = box_quads(st.crossed[:, :3], st.crossed[:, 3:])
                parts["path"] = np.stack([st.start, st.rec])
            if len(st.overlap):
                parts["overlap"] = box_quads(st.overlap[:, :3], st.overlap[:, 3:])
            if st.prev_end is not None:
                parts["previous"] = box_quads(st.prev_end - st.half, st.prev_end + st.half)
                parts["jump"] = np.stack([st.prev_end, st.start])
            if "gap" in drawn and st.gap_len > 0:
                size = min(0.35 * st.gap_len, 0.06 * max(st.radius, vs))
                parts["gap_tip"] = cone_quads(st.rec, st.gap / st.gap_len, size)
        for role, geo in parts.items():
            ok = (self._set(role, geo, lines=True) if _STYLE[role].representation == "lines"
                  else self._set_quads(role, geo))
            if ok:
                drawn.add(role)

    def _draw_passes(self, state, col, active, options, drawn, bounds):
        rows = state.rows
        half = state.half[col]
        n = int(rows.npass[col]) if active else 0
        pts = rows.points[col]
        swept, hits, arrows = [], [], []
        vs = self.session.world.voxel_size
        skin = self.session.settings.skin * vs
        shapes = self.session.world.shapes
        for k in range(n):
            a, b = pts[k], pts[k + 1]
            if not (_finite(a) and _finite(b)):
                continue
            lo, hi = _box_lo_hi(a, half)
            if options.show_swept and np.any(a != b):
                q = swept_quads(lo, hi, b - a)
                swept.append(q)
                bounds.append((q.reshape(-1, 3).min(axis=0), q.reshape(-1, 3).max(axis=0)))
            t = int(rows.block[col, k])
            if t >= 0:
                boxes = shapes.boxes_of(t) if t < shapes.count else np.array([[0, 0, 0, 1, 1, 1.0]])
                f, arr = contact_quads(rows.voxel[col, k], rows.normal[col, k], boxes, b, half, skin, vs)
                hits.append(f)
                arrows.append(arr)
        for role, parts in (("swept", swept), ("hit", hits), ("hit_edges", hits), ("normal", arrows)):
            if self._set_quads(role, np.concatenate(parts) if parts else None):
                drawn.add(role)
        path = pts[: n + 1] if n else np.zeros((0, 3))
        path = path[np.isfinite(path).all(axis=1)] if len(path) else path
        if self._set("slide", path if len(path) >= 2 else None, lines=True):
            drawn.add("slide")

    def _draw_lines(self, state, col, active, options, drawn):
        start, rec, ref = state.start[col], state.recorded_end[col], state.rows.ref_end[col]
        tol = self.session.settings.tolerance * self.session.world.voxel_size
        if active and _finite(rec) and _finite(ref) and np.linalg.norm(rec - ref) > tol:
            self._set("gap", np.stack([ref, rec]), lines=True)
            drawn.add("gap")
        else:
            self._set("gap", None)
        trail = np.zeros((0, 3))
        if options.show_trail and active:
            trail = self.session.trail(state.frame, col, options.trail_frames)
            trail = np.concatenate([trail, start[None]])
        if self._set("trail", trail if len(trail) >= 2 else None, lines=True):
            drawn.add("trail")

    def _draw_others(self, state, col, options, drawn):
        others = np.flatnonzero(state.active & np.isfinite(state.start).all(axis=1)
                                & np.isfinite(state.half).all(axis=1))
        others = others[others != col]
        if options.show_others and len(others):
            lo, hi = _box_lo_hi(state.start[others], state.half[others])
            self._set_quads("others", box_quads(lo, hi))
            drawn.add("others")
        else:
            self._set("others", None)

    # -- camera ----------------------------------------------------------------------------------
    def _axes_frame(self):
        up = np.eye(3)[self._up]
        h1, h2 = np.eye(3)[(self._up + 1) % 3], np.eye(3)[(self._up + 2) % 3]
        return up, h1, h2

    def _motion_dir(self, horizontal: bool):
        st = self._state
        up = self._axes_frame()[0]
        if st is None or not st.active[self._col]:
            return None
        m = np.asarray(st.motion[self._col], np.float64)
        if not _finite(m):
            return None
        if horizontal:
            m = m - (m @ up) * up
        n = np.linalg.norm(m)
        return m / n if n > 1e-9 else None

    def set_camera(self, preset: str) -> None:
        """Point the camera: "story" (the direction that sees the divergence's gap, see
        :func:`.story.choose_view`; "follow" when nothing is focused), "follow" (three-quarter view
        from above and behind), "motion" (look
        along the motion), "top" (down the up axis), "side" (across the motion); then frame the
        focused story (start, both ends, hit faces and the kind's geometry)."""
        self.whole_world = False
        if preset not in PRESETS:
            raise ValueError(f"camera preset must be one of {', '.join(PRESETS)}, got {preset!r}")
        self._preset = preset
        up, h1, h2 = self._axes_frame()
        view_up = up
        st = getattr(self, "story", None)
        if preset == "story" and st is not None:
            to_cam = self.locked_dir if self.locked_dir is not None else st.view_dir
        elif preset in ("story", "follow"):
            back = self._motion_dir(True)
            back = -back if back is not None else -h2
            side = np.cross(up, back)
            to_cam = 0.75 * back + 0.35 * side + 0.75 * up
        elif preset == "motion":
            m = self._motion_dir(False)
            m = m if m is not None else h2
            to_cam = -m + 0.25 * up
        elif preset == "top":
            to_cam = up
            m = self._motion_dir(True)
            view_up = m if m is not None else -h2
        else:
            m = self._motion_dir(True)
            m = m if m is not None else h1
            to_cam = np.cross(m, up) + 0.12 * up  # motion runs left to right
        to_cam = to_cam / np.linalg.norm(to_cam)
        centre, dist = self._framing(to_cam, view_up)
        cam = self.plotter.camera
        cam.focal_point = tuple(centre)
        cam.position = tuple(centre + to_cam * dist)
        cam.up = tuple(view_up)
        self._tracked = None if self._focus is None else self._focus.copy()
        self._camera_ready = True
        self._refresh_cutaway()
        self.plotter.renderer.ResetCameraClippingRange()

    def _aspect(self) -> float:
        """Width / height of the main view in pixels."""
        w, h = self.plotter.render_window.GetSize()
        x0, y0, x1, y1 = self.plotter.renderer.GetViewport()
        return max(1e-3, (x1 - x0) * max(w, 1)) / max(1e-3, (y1 - y0) * max(h, 1))

    def _track(self):
        """Move the camera with the focus, keeping its direction and distance; back off along the
        same direction when the frame's story no longer fits the view (a long step, a tunneling
        jump: the camera never zooms in by itself)."""
        if self._focus is None:
            return
        cam = self.plotter.camera
        if self._tracked is not None:
            delta = self._focus - self._tracked
            if np.any(delta):
                cam.position = tuple(np.asarray(cam.position) + delta)
                cam.focal_point = tuple(np.asarray(cam.focal_point) + delta)
        self._tracked = self._focus.copy()
        if self._interest is not None:
            pos, fp = np.asarray(cam.position, np.float64), np.asarray(cam.focal_point, np.float64)
            dist = float(np.linalg.norm(pos - fp))
            if dist > 0:
                to_cam = (pos - fp) / dist
                centre, need = self._framing(to_cam, np.asarray(cam.up, np.float64))
                need += float(np.linalg.norm(centre - fp))  # framed about the focus, not the box's centre
                if need > dist * 1.02:
                    cam.position = tuple(fp + to_cam * need)
        self.plotter.renderer.ResetCameraClippingRange()

    def _framing(self, to_cam, view_up):
        """(centre float64 (3,), distance) of a camera looking along -``to_cam`` (unit) that frames
        the story's region with a voxel and a half of context around it."""
        lo, hi = self._interest if self._interest is not None else (np.zeros(3), np.ones(3))
        vs = self.session.world.voxel_size if self.session else 1.0
        pad = 1.5 * vs
        return (lo + hi) / 2, frame_distance(lo - pad, hi + pad, to_cam, view_up, self._aspect())

    def turn(self, degrees: float) -> None:
        """Turntable: orbit the camera ``degrees`` about the up axis through the focused story's
        centre; the horizon stays level (view up = the trace's up axis)."""
        up = self._axes_frame()[0]
        cam = self.plotter.camera
        centre = (self._interest[0] + self._interest[1]) / 2 if self._interest is not None else \
            np.asarray(cam.focal_point, np.float64)
        a = np.radians(degrees)
        k = up
        def rot(v):  # Rodrigues' rotation about unit k (common practice)
            return v * np.cos(a) + np.cross(k, v) * np.sin(a) + k * (k @ v) * (1 - np.cos(a))
        cam.position = tuple(centre + rot(np.asarray(cam.position, np.float64) - centre))
        cam.focal_point = tuple(centre + rot(np.asarray(cam.focal_point, np.float64) - centre))
        cam.up = tuple(up)
        self._tracked = None if self._focus is None else self._focus.copy()
        self._refresh_cutaway()
        self.plotter.renderer.ResetCameraClippingRange()

    def zoom(self, factor: float) -> None:
        """Move the camera toward its focal point (``factor`` > 1 nearer), keeping its direction."""
        cam = self.plotter.camera
        f = np.asarray(cam.focal_point, np.float64)
        cam.position = tuple(f + (np.asarray(cam.position, np.float64) - f) / float(factor))
        self._refresh_cutaway()
        self.plotter.renderer.ResetCameraClippingRange()

    def pick(self, x: float, y: float):
        """World point (float64 (3,)) of the surface drawn at window pixel (x right, y down), or None
        (window pixels: the picture at full size, see :func:`render_scale`)."""
        from vtkmodules.vtkRenderingCore import vtkCellPicker
        picker = vtkCellPicker()
        picker.SetTolerance(0.0005)
        h = self.plotter.render_window.GetSize()[1]
        s = render_scale(self.plotter)
        if not picker.Pick(float(x) * s, float(h - 1 - y * s), 0.0, self.plotter.renderer):
            return None
        return np.asarray(picker.GetPickPosition(), np.float64)

    def fit(self) -> None:
        """Keep the view direction, draw the whole world (up to WHOLE_WORLD_MAX voxels from its
        centre) and frame everything drawn. The next camera preset goes back to the story."""
        self.whole_world = True
        self._refresh_cutaway()
        self.plotter.reset_camera()
        self._refresh_cutaway()
        self.plotter.renderer.ResetCameraClippingRange()

    def project(self, point) -> tuple[float, float]:
        """Window pixel (x right, y down from the top-left corner) where world ``point`` is drawn."""
        ren = self.plotter.renderer
        x, y, z = (float(v) for v in point)
        ren.SetWorldPoint(x, y, z, 1.0)
        ren.WorldToDisplay()
        dx, dy, _ = ren.GetDisplayPoint()
        h = self.plotter.render_window.GetSize()[1]
        s = render_scale(self.plotter)
        return float(dx) / s, float(h - dy) / s


def seg_distance(points, segs) -> np.ndarray:
    """float64 (n,) distance from each of float (n, 3) ``points`` to the nearest of float (k, 2, 3)
    segments (a zero-length segment is a point)."""
    p = np.asarray(points, np.float64)
    out = np.full(len(p), np.inf)
    for a, b in np.asarray(segs, np.float64).reshape(-1, 2, 3):
        d = b - a
        dd = float(d @ d)
        t = np.clip(((p - a) @ d) / dd, 0.0, 1.0) if dd > 0 else np.zeros(len(p))
        out = np.minimum(out, np.linalg.norm(p - (a + t[:, None] * d), axis=1))
    return out


def frame_distance(lo, hi, to_cam, view_up, aspect: float) -> float:
    """Camera distance from the centre of box [lo, hi] (float (3,)) along unit ``to_cam`` at which
    the whole box fits a perspective view of vertical angle _VIEW_ANGLE and ``aspect`` (w / h)."""
    lo, hi = np.asarray(lo, np.float64), np.asarray(hi, np.float64)
    c = (lo + hi) / 2
    back = np.asarray(to_cam, np.float64)
    up = np.asarray(view_up, np.float64) - (np.asarray(view_up, np.float64) @ back) * back
    if np.linalg.norm(up) < 1e-9:
        up = np.roll(back, 1)
        up -= (up @ back) * back
    up /= np.linalg.norm(up)
    right = np.cross(back, up)
    corners = np.array([[a, b, d] for a in (0, 1) for b in (0, 1) for d in (0, 1)], np.float64)
    pts = lo + corners * (hi - lo) - c
    t = np.tan(np.radians(_VIEW_ANGLE / 2))
    # each corner at depth z toward the camera needs dist - z >= |u| / t (and |r| / (t * aspect))
    need = np.maximum(np.abs(pts @ up) / t, np.abs(pts @ right) / (t * aspect)) + pts @ back
    return float(max(need.max(), 1e-6)) * 1.04


def legend_of(roles) -> list[tuple[str, tuple]]:
    """One (label, rgb) per label among ``roles`` drawn (outlines share their fill's entry), in role order."""
    out, seen = [], set()
    for r in _ROLES + ("dimension",):
        st = S.DIMENSION if r == "dimension" else _STYLE[r]
        if r in roles and st.label not in seen:
            seen.add(st.label)
            out.append((st.label, st.rgb))
    return out


def _one_face():
    """A single placeholder quad so the voxel actor is made with its "rgb" array in place."""
    q = np.array([[[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0]]], np.float32)
    return Faces(q, np.zeros((1, 3), np.uint8), np.zeros((1, 3), np.float32), np.zeros(1, np.int32))


def render_scale(plotter) -> float:
    """Render pixels per window pixel of ``plotter``: below 1 while the viewer draws a draft
    (app/viewer/view_paint.py), 1 for every other plotter. Window pixels are what the viewport's
    ``pick`` and ``project`` take and give, and what text sizes are set in, whatever the scale."""
    return float(getattr(plotter, "render_scale", 1.0))
