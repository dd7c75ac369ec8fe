"""Pictures that tell a divergence on their own: the key roles are in visible pixels, small errors
get the magnified view, hidden ends are cut free.

Cases: the quarry's dasher tunneling through the plank wall (frame 40), a z-up trace whose entity
sank 3 voxels into the floor, and a 0.05-voxel snag against a wall. The two small traces are made
here; where the reference end matters it is checked against the sweep-and-slide rule worked by
hand (Ericson 2005, sec. 5.5: moving box against a static box; then slide along the hit face).
Pixel checks count the exact style colours: those roles are drawn unlit (scene/style.py).
"""
from __future__ import annotations

import numpy as np
import pytest

import pyvista as pv  # noqa: E402

from resweep.app.scene import style  # noqa: E402
from resweep.app.scene.caption import BAND_RGB  # noqa: E402
from resweep.app.scene.inset import SPLIT  # noqa: E402
from resweep.app.scene.picture import render_picture  # noqa: E402
from resweep.app.scene.viewport import Viewport  # noqa: E402
from resweep.core import chunks_from_dense, write_trace  # noqa: E402
from resweep.core.analysis.frames import TraceSession  # noqa: E402

from paths import ROOT  # noqa: E402
from trace_factory import floor_world, write_rows  # noqa: E402

QUARRY = ROOT / "sample_traces" / "quarry.h5"
SIZE = (960, 600)
ROLES = (style.RECORDED, style.REFERENCE, style.HIT_FACE)


def view_part(img):
    """The 3-D view rows of a picture (everything above the caption band)."""
    full = (img == np.array(BAND_RGB, np.uint8)).all(axis=(1, 2))
    top = int(np.argmax(full))
    assert full[top]
    return img[:top]


def count(img, st) -> int:
    return int((img == np.array(st.rgb, np.uint8)).all(axis=2).sum())


def story_viewport(session, frame, entity):
    """A Viewport as render_picture sets it up, for reading what it decided (story, inset)."""
    plotter = pv.Plotter(off_screen=True, window_size=SIZE)
    vp = Viewport(plotter)
    vp.enable_inset()
    vp.set_session(session)
    st = session.frame_state(frame)
    col = session.column_of(entity)
    vp.show(st, col)
    vp.set_camera("story")
    vp.show(st, col)
    plotter.render()
    return plotter, vp


@pytest.fixture(scope="module")
def sank(tmp_path_factory):
    """z-up world: a floor 5 voxels thick (z 0..4) under a 16 x 16 area; a 1-voxel cube entity
    resting on it (centre z 5.5) moves down 1 voxel and the engine puts it 3 voxels into the floor."""
    g = np.zeros((16, 16, 8), np.uint16)
    g[:, :, :5] = 1
    origin, blocks = chunks_from_dense(g, (0, 0, 0), 8)
    path = tmp_path_factory.mktemp("sank") / "sank.h5"
    F = 2
    start = np.array([[[8.0, 8.0, 5.6]]] * F)
    motion = np.array([[[0.0, 0.0, -1.0]]] * F)
    end = np.array([[[8.0, 8.0, 2.6]]] * F)  # 3 voxels under the surface (z = 5)
    write_trace(path, chunk_size=8, chunk_origin=origin, chunk_blocks=blocks, entity_ids=np.array([7]),
                entity_names=["sinker"], half_extents=np.full((1, 3), 0.5), time=np.arange(F) / 60.0,
                start=start, motion=motion, end=end, up_axis="z", compression=None)
    return path


@pytest.fixture(scope="module")
def snag(tmp_path_factory):
    """y-up floor world with the wall at x = 8 (tests/trace_factory.py): a cube at (6, 1.5, 4)
    moves (2, 0, 1) into the wall and the engine stops 0.05 voxel short along its travel."""
    d = tmp_path_factory.mktemp("snag")
    start = np.array([[[6.0, 1.5, 4.0]]])
    motion = np.array([[[2.0, 0.0, 1.0]]])
    # Worked by hand: the box's max x (6.5) meets the wall face x = 8 at t = 1.5 / 2 = 0.75, so the
    # first pass ends at x = 8 - 0.5 - skin (0.001) and z = 4.75; the slide along the face keeps
    # the remaining z motion 0.25: reference end (7.499, 1.5, 5.0).
    ref = np.array([7.499, 1.5, 5.0])
    travel = (ref - start[0, 0]) / np.linalg.norm(ref - start[0, 0])
    path = write_rows(d / "snag.h5", start, motion, (ref - 0.05 * travel)[None, None], world=floor_world())
    return path, ref


def test_dasher_tunneling_picture_shows_both_ends_and_the_hit_face():
    with TraceSession(QUARRY) as s:
        img = view_part(render_picture(s, 40, 102, size=SIZE))
        for st in ROLES:
            assert count(img, st) > 20, st.label
        assert count(img, style.CROSSED) > 20  # the plank wall the straight path went through
        plotter, vp = story_viewport(s, 40, 102)
        try:
            # The recorded end 45.7 voxels past the wall is in the shot, with the start box.
            W, H = plotter.window_size
            for c in (vp.story.start, vp.story.ref, vp.story.rec):
                x, y = vp.project(c)
                assert 0 <= x < W * (SPLIT if vp.inset.visible else 1) and 0 <= y < H
            assert not vp.inset.visible  # a 45-voxel error needs no magnifying
        finally:
            plotter.close()


def test_fall_through_picture_shows_the_end_under_the_floor(sank):
    with TraceSession(sank) as s:
        st = s.frame_state(0)
        assert "penetration" in st.kinds(0)
        # Reference stops on the floor: bottom face z = 5 reached after 0.6 of the motion, minus skin.
        assert st.rows.ref_end[0] == pytest.approx([8.0, 8.0, 5.501], abs=1e-9)
        img = view_part(render_picture(s, 0, 7, size=SIZE))
        for role in ROLES:
            assert count(img, role) > 20, role.label
        plotter, vp = story_viewport(s, 0, 7)
        try:
            # The recorded end's centre projects inside the view and nothing solid is drawn over it:
            # the floor cells between the camera and the end are cut away.
            x, y = vp.project(vp.story.rec)
            shot = np.asarray(plotter.screenshot(return_img=True))[..., :3]
            patch = shot[int(y) - 6:int(y) + 7, int(x) - 6:int(x) + 7]
            near = (np.abs(patch.astype(int) - np.array(style.RECORDED.rgb)).sum(axis=2) < 120).sum() + \
                count(patch, style.OVERLAP) + count(patch, style.RECORDED)
            assert near > 0
        finally:
            plotter.close()


def test_small_snag_gets_the_magnified_view_with_its_dimension(snag):
    path, ref = snag
    with TraceSession(path) as s:
        st = s.frame_state(0)
        np.testing.assert_allclose(st.rows.ref_end[0], ref, atol=1e-9)
        assert st.kinds(0) == ["snag"] and st.errors(0)["snag"] == pytest.approx(0.05, abs=1e-9)
        img = view_part(render_picture(s, 0, 10, size=SIZE))
        for role in ROLES:
            assert count(img, role) > 20, role.label
        W = img.shape[1]
        right = img[:, int(SPLIT * W) + 2:]
        left = img[:, :int(SPLIT * W) - 2]
        # The magnified view: the dimension line, and both ends' outlines, on the right only.
        assert count(right, style.DIMENSION) > 10 and count(left, style.DIMENSION) == 0
        assert count(right, style.RECORDED) > 20 and count(right, style.REFERENCE) > 20
        plotter, vp = story_viewport(s, 0, 10)
        try:
            assert vp.inset.visible and vp.inset.factor > 5
            assert "gap 0.05 world units\n= 0.05 voxels" in vp.inset.text
            assert "mostly along x (x -0.0416, z -0.0277)" in vp.inset.text  # 0.05 * (1.499, 0, 1) / 1.802
            assert ("measured error (magnified view)", style.DIMENSION.rgb) in vp.legend
        finally:
            plotter.close()


def test_agreeing_row_has_no_magnified_view(snag, tmp_path):
    start = np.array([[[3.0, 1.5, 3.0]]])
    motion = np.array([[[0.5, 0.0, 0.0]]])
    path = write_rows(tmp_path / "ok.h5", start, motion, start + motion)
    with TraceSession(path) as s:
        assert s.frame_state(0).kinds(0) == []
        plotter, vp = story_viewport(s, 0, 10)
        try:
            assert not vp.inset.visible and vp.story.kind is None
            assert all(label != "measured error (magnified view)" for label, _ in vp.legend)
        finally:
            plotter.close()


def test_sight_lines_of_every_direction_at_once_count_as_one_at_a_time():
    """The view chooser counts the boxes each sight line crosses in one batch; each count must
    equal crossed_boxes (Ericson 2005 slab test) of that one line, boxes around the start left out."""
    from resweep.app.scene.story import _blocked_many, crossed_boxes
    rng = np.random.default_rng(5)
    lo = rng.integers(-4, 4, (60, 3)).astype(np.float64)
    solid = np.concatenate([lo, lo + 1.0], axis=1)
    half = np.array([0.3, 0.9, 0.3])
    for p in (np.array([0.5, 0.5, 0.5]), np.array([0.0, 1.0, -2.0]), np.array([2.2, -1.3, 0.7])):
        steps = rng.normal(size=(36, 3)) * 6.0
        steps[0] = 0.0
        steps[1, 1] = 0.0  # a line parallel to a slab
        own = ((solid[:, :3] < p + half) & (solid[:, 3:] > p - half)).all(axis=1)
        want = [min(len(crossed_boxes(solid[~own], p, p + s, np.zeros(3))), 3) / 3.0 for s in steps]
        assert _blocked_many(solid, p, steps, half).tolist() == want


def test_camera_direction_is_chosen_once_when_read_and_not_on_a_scrub(monkeypatch):
    """The story's camera direction is searched only when a camera is pointed: a scrub that keeps
    the camera must not pay for it, and a direction read later is the one its own frame gives."""
    from resweep.app.scene import story as story_mod
    calls = []
    real = story_mod.choose_view
    monkeypatch.setattr(story_mod, "choose_view", lambda *a: calls.append(1) or real(*a))
    with TraceSession(QUARRY) as s:
        col = s.column_of(102)
        told = story_mod.tell_story(s, s.frame_state(40), col)
        assert calls == []
        s.frame_state(41)  # the session moves on before the direction is read
        late = told.view_dir
        assert len(calls) == 1 and np.array_equal(told.view_dir, late) and len(calls) == 1
        fresh = story_mod.tell_story(s, s.frame_state(40), col).view_dir
        assert np.array_equal(late, fresh) and abs(np.linalg.norm(late) - 1.0) < 1e-12
        plotter, vp = story_viewport(s, 40, 102)
        try:
            before = len(calls)
            for f in (41, 42, 43):
                vp.show(s.frame_state(f), col)
            assert len(calls) == before  # scrubbing keeps the camera: no search
        finally:
            plotter.close()
