"""Off-screen pictures: files, sizes, pixels where the boxes project, the caption band, the CLI.

VTK renders through EGL/Mesa without a display. Pixel checks use the unlit line styles, whose
pixels carry the style colour exactly.
"""
from __future__ import annotations

import hashlib
import shutil
import struct
import subprocess
import sys
import zlib
from pathlib import Path

import numpy as np
import pytest

pv = pytest.importorskip("pyvista")

from PIL import Image, ImageDraw  # noqa: E402

from resweep.app.scene import style  # noqa: E402
from resweep.app.scene.caption import BAND_RGB, TEXT_RGB, band_layout, caption_lines  # noqa: E402
from resweep.core.analysis.frames import TraceSession  # noqa: E402
from resweep.app.scene.picture import render_picture, save_png  # noqa: E402
from resweep.app.scene.viewport import Viewport, ViewOptions  # noqa: E402
from resweep.core import SolverSettings, check_trace, open_trace  # noqa: E402

from paths import ROOT  # noqa: E402
QUARRY = ROOT / "sample_traces" / "quarry.h5"
DASHER = 1  # column of entity 102, which dashes through the plank wall at frame 40 (core/demo.py)
CLIMBER = 2  # column of entity 103, near the plank wall's chunk around frames 80..95


@pytest.fixture(scope="module")
def session():
    s = TraceSession(QUARRY)
    yield s
    s.close()


@pytest.fixture(scope="module")
def report():
    with open_trace(QUARRY) as tr:
        return check_trace(tr, SolverSettings(), limit=10 ** 6)


def png_size(path) -> tuple[int, int]:
    """(width, height) from a PNG's signature and IHDR chunk (PNG spec, sec. 5.2 and 11.2.2),
    read without Pillow; also checks the IHDR CRC."""
    data = Path(path).read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    length, kind = struct.unpack(">I4s", data[8:16])
    assert kind == b"IHDR" and length == 13
    body = data[16:29]
    assert struct.unpack(">I", data[29:33])[0] == zlib.crc32(kind + body)
    return struct.unpack(">II", body[:8])


def resweep_exe():
    return shutil.which("resweep") or str(Path(sys.executable).with_name("resweep"))


def test_cli_writes_a_png_of_the_requested_size(tmp_path):
    out = tmp_path / "out.png"
    before = hashlib.sha256(QUARRY.read_bytes()).hexdigest()
    r = subprocess.run([resweep_exe(), "snapshot", str(QUARRY), "--frame", "40", "--size", "640x360",
                        "-o", str(out)], capture_output=True, text=True, timeout=300)
    assert r.returncode == 0, r.stderr
    assert r.stderr == ""
    assert png_size(out) == (640, 360)
    img = np.asarray(Image.open(out))
    assert img.shape == (360, 640, 3) and len(np.unique(img.reshape(-1, 3), axis=0)) > 50
    assert hashlib.sha256(QUARRY.read_bytes()).hexdigest() == before  # input never modified


@pytest.mark.parametrize("argv, message", [
    (["--frame", "240"], "frame 240 is out of range (valid frames are 0..239)"),
    (["--frame", "3", "--entity", "999"], "entity id 999 is not in the trace"),
    (["--frame", "3", "-o", "/nonexistent-folder/x.png"], "cannot write the picture (folder does not exist)"),
    (["--frame", "3", "--passes", "0"], "passes=0"),
    (["--frame", "3", "-o", "{tmp}"], "cannot write the picture (is a directory)"),
])
def test_cli_errors_are_one_line_with_status_2(tmp_path, argv, message):
    if "-o" not in argv:
        argv = argv + ["-o", str(tmp_path / "x.png")]
    argv = [a.replace("{tmp}", str(tmp_path)) for a in argv]
    r = subprocess.run([resweep_exe(), "snapshot", str(QUARRY), *argv], capture_output=True, text=True,
                       timeout=300)
    assert r.returncode == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and message in lines[0] and lines[0].startswith("resweep snapshot: ")
    assert not (tmp_path / "x.png").exists()


@pytest.mark.parametrize("size", [(640, 360), (333, 217)])
def test_render_picture_is_exactly_the_requested_size(session, tmp_path, size):
    img = render_picture(session, 40, size=size)
    assert img.dtype == np.uint8 and img.shape == (size[1], size[0], 3)
    save_png(img, tmp_path / "p.png")
    assert png_size(tmp_path / "p.png") == size


def test_picture_changes_between_frames(session):
    a = render_picture(session, 40, 102, size=(480, 270))
    b = render_picture(session, 41, 102, size=(480, 270))
    c = render_picture(session, 40, 102, size=(480, 270))
    assert np.array_equal(a, c)  # same frame, same picture: the difference below is real
    changed = (a != b).any(axis=2)
    assert changed.mean() > 0.01


def render_view(session, frame, col, size=(640, 400), preset="follow"):
    plotter = pv.Plotter(off_screen=True, window_size=size)
    vp = Viewport(plotter)
    vp.set_session(session)
    st = session.frame_state(frame)
    vp.show(st, col, ViewOptions())
    vp.set_camera(preset)
    plotter.render()
    return plotter, vp, st, np.asarray(plotter.screenshot(return_img=True))[..., :3]


def style_mask(img, st):
    return (img == np.array(st.rgb, np.uint8)).all(axis=2)


def box_rect(vp, centre, half):
    corners = np.array([[i, j, k] for i in (-1, 1) for j in (-1, 1) for k in (-1, 1)]) * half + centre
    px = np.array([vp.project(c) for c in corners])
    return px.min(axis=0), px.max(axis=0)


@pytest.mark.parametrize("frame, col, preset", [(40, DASHER, "follow"), (40, DASHER, "top"),
                                                (150, 3, "side"), (100, 4, "motion")])
def test_reference_style_is_drawn_where_the_reference_box_projects(session, frame, col, preset):
    plotter, vp, st, img = render_view(session, frame, col, preset=preset)
    try:
        ref, half = st.rows.ref_end[col], st.half[col]
        (x0, y0), (x1, y1) = box_rect(vp, ref, half)
        H, W = img.shape[:2]
        assert 0 <= x0 < x1 < W and 0 <= y0 < y1 < H, "reference box should be in view"
        mask = style_mask(img, style.REFERENCE)
        inside = mask[int(y0) - 3:int(y1) + 4, int(x0) - 3:int(x1) + 4].sum()
        # A 4 px wireframe around a box tens of pixels wide: well over 50 pixels of the colour.
        assert inside > 50
        assert mask.sum() - inside < 0.05 * inside  # nearly all of that colour is at the box
        corner = mask[:H // 8, :W // 8].sum() + mask[:H // 8, -W // 8:].sum()
        assert corner == 0
        assert ("reference end", style.REFERENCE.rgb) in vp.legend
        # The projection agrees with VTK's own: the box centre maps inside the rectangle.
        cx, cy = vp.project(ref)
        assert x0 < cx < x1 and y0 < cy < y1
    finally:
        plotter.close()


def test_start_and_reference_styles_sit_apart_when_the_boxes_do(session):
    # Frame 40: the dasher starts at x ~ 15.4 and the reference stops at the wall (x ~ 19.7).
    plotter, vp, st, img = render_view(session, 40, DASHER, preset="top")
    try:
        (sx0, sy0), (sx1, sy1) = box_rect(vp, st.start[DASHER], st.half[DASHER])
        (rx0, ry0), (rx1, ry1) = box_rect(vp, st.rows.ref_end[DASHER], st.half[DASHER])
        mask = style_mask(img, style.REFERENCE)
        assert mask[int(sy0):int(sy1) + 1, int(sx0):int(sx1) + 1].sum() == 0
        assert mask[int(ry0):int(ry1) + 1, int(rx0):int(rx1) + 1].sum() > 20
    finally:
        plotter.close()


def test_show_updates_actors_in_place_and_edits_rebuild_one_chunk(session):
    plotter = pv.Plotter(off_screen=True, window_size=(320, 200))
    try:
        vp = Viewport(plotter)
        vp.set_session(session)
        vp.show(session.frame_state(80), CLIMBER)
        plotter.render()
        actors = dict(plotter.renderer.actors)
        meshes = dict(vp._meshes)
        built = vp.chunk_builds
        assert built > 0
        vp.show(session.frame_state(85), CLIMBER)
        assert vp.chunk_builds == built  # no edit between 80 and 85: nothing re-meshed
        # Frame 90 opens (20,4,12) and (20,5,12): voxel-local (4,4,12) and (4,5,12) of chunk
        # (1,0,0), both off its faces, so no neighbour's border changes: one chunk re-meshed.
        st = session.frame_state(95)
        vp.show(st, CLIMBER)
        plotter.render()
        assert vp.chunk_builds == built + 1
        assert dict(plotter.renderer.actors) == actors
        assert all(vp._meshes[k] is meshes[k] for k in meshes)
    finally:
        plotter.close()


def test_inactive_entity_draws_no_boxes(session):
    plotter, vp, st, img = render_view(session, 5, 3)  # the crate spawns at frame 20
    try:
        assert not st.active[3]
        for s in (style.REFERENCE, style.START):
            assert style_mask(img, s).sum() == 0
        labels = [lab for lab, _ in vp.legend]
        assert "reference end" not in labels and "box at frame start" not in labels
        assert "other entities" in labels
    finally:
        plotter.close()


# -- caption band -------------------------------------------------------------------------------
def band_of(img):
    """Rows of the caption band: from the first row that is all band colour to the bottom."""
    full = (img == np.array(BAND_RGB, np.uint8)).all(axis=(1, 2))
    top = int(np.argmax(full))
    assert full[top] and top > img.shape[0] // 2
    return img[top:]


def expected_lines(report, frame, eid):
    """The caption text written out by hand from check_trace's findings (not from caption.py)."""
    ds = [d for d in report.divergences if d.frame == frame and d.entity == eid]
    line3 = ", ".join(f"{d.kind} [{d.severity}]" + ("" if d.error is None else f" {d.error:.4f}") for d in ds)
    hit = ds[0].passes[0]["voxel"] if ds and ds[0].passes and ds[0].passes[0]["voxel"] else None
    if hit:
        line3 += f"; reference stops at plank wall ({hit[0]}, {hit[1]}, {hit[2]})"
    settings = "reference: sweep and slide, 3 passes, skin 0.001, tolerance 0.01 voxels, float64"  # the defaults
    return [f"quarry.h5   frame {frame} of 0..239   t = {frame / 60:.3f} s", "entity 102 dasher", line3, settings]


def test_caption_lines_say_file_frame_time_entity_kind_and_error(session, report):
    st = session.frame_state(40)
    lines = caption_lines(session, st, DASHER)
    assert lines == expected_lines(report, 40, 102)
    assert "tunneling [error] 45.7010" in lines[2]  # recorded 65.4, reference 19.699 (see check)


def test_caption_band_pixels_match_an_independent_rendering_of_the_text(session, report):
    W, H = 800, 450
    img = render_picture(session, 40, 102, size=(W, H))
    band = band_of(img)
    lines = expected_lines(report, 40, 102)
    lay = band_layout(W, H, lines)
    font = lay.font()
    text_w = max(int(np.ceil(font.getlength(t))) for t in lines) + lay.pad
    want = Image.new("RGB", (W, band.shape[0]), BAND_RGB)
    draw = ImageDraw.Draw(want)
    for i, t in enumerate(lines):
        draw.text((lay.pad, lay.pad + i * lay.line_h), t, font=font, fill=TEXT_RGB)
    want = np.asarray(want)
    text_h = lay.pad + len(lines) * lay.line_h  # the legend may sit right of or below these rows
    assert np.array_equal(band[:text_h, :text_w], want[:text_h, :text_w])
    # And the same check fails for the next frame's text: the band really shows the frame.
    other = band_of(render_picture(session, 41, 102, size=(W, H)))
    assert not np.array_equal(other[:text_h, :text_w], want[:text_h, :text_w])


def test_default_entity_is_the_first_diverged_one(session, report, tmp_path):
    ids = sorted({d.entity for d in report.divergences if d.frame == 40})
    img = render_picture(session, 40, size=(800, 450))
    lines = caption_lines(session, session.frame_state(40), session.trace.entity_index(ids[0]))
    lay = band_layout(800, 450, lines)
    band = band_of(img)
    want = Image.new("RGB", (800, lay.line_h), BAND_RGB)
    ImageDraw.Draw(want).text((lay.pad, 0), lines[1], font=lay.font(), fill=TEXT_RGB)
    w = int(np.ceil(lay.font().getlength(lines[1])))
    y = lay.pad + lay.line_h
    assert np.array_equal(band[y:y + lay.line_h, :w], np.asarray(want)[:, :w])
    assert lines[1].startswith(f"entity {ids[0]} ")


def test_in_place_updates_draw_what_a_fresh_viewport_draws(session):
    # Step one viewport through several frames (actors updated in place), then compare with a
    # viewport that only ever saw the last frame; same camera preset, so same picture.
    size = (400, 260)
    p1 = pv.Plotter(off_screen=True, window_size=size)
    try:
        vp = Viewport(p1)
        vp.set_session(session)
        for f in (30, 38, 39):
            vp.show(session.frame_state(f), DASHER)
            p1.render()
        vp.show(session.frame_state(40), DASHER)
        vp.set_camera("follow")
        stepped = np.asarray(p1.screenshot(return_img=True))[..., :3]
    finally:
        p1.close()
    p2, _, _, fresh = render_view(session, 40, DASHER, size=size)
    p2.close()
    assert np.array_equal(stepped, fresh)


def segment_hits_quads(p0, p1, quads):
    """bool (n,): the segment p0 -> p1 crosses axis-aligned quad i (float (n, 4, 3)): where it
    meets the quad's plane, that point lies inside the quad's rectangle."""
    q = np.asarray(quads, np.float64)
    lo, hi = q.min(axis=1), q.max(axis=1)
    axis = np.argmin(hi - lo, axis=1)  # the flat axis of each quad
    rows = np.arange(len(q))
    d = p1 - p0
    with np.errstate(divide="ignore", invalid="ignore"):
        t = (lo[rows, axis] - p0[axis]) / d[axis]
    x = p0 + t[:, None] * d
    inside = ((x >= lo - 1e-9) & (x <= hi + 1e-9)).all(axis=1)
    return inside & (t > 0) & (t < 1)


def test_walls_between_camera_and_entity_are_cut_away(session):
    # Frame 40: the dasher's start box (x 15.1..15.7, y 4..5.8, z 10.2..10.8) seen from behind the
    # plank wall (x = 20, y 4..8, z 0..20): the wall is on the line of sight and must go.
    plotter, vp, st, _ = render_view(session, 40, DASHER, size=(400, 300))
    try:
        centre, half = st.start[DASHER], st.half[DASHER]
        eye = np.array([centre[0] + 9.0, centre[1] + 1.0, centre[2]])
        # Without the sight cut the wall is in the way: faces within the radius, camera ignored.
        f = vp._merged
        near = ((f.centre - centre) ** 2).sum(axis=1) <= ViewOptions().cutaway_radius ** 2
        assert segment_hits_quads(eye, centre, f.quads[near]).any()
        plotter.camera.focal_point = tuple(centre)
        plotter.camera.position = tuple(eye)
        plotter.camera.up = (0.0, 1.0, 0.0)
        plotter.render()  # the cut-away is rechecked as the render starts
        quads = vp._meshes["voxels"].points.reshape(-1, 4, 3)
        corners = np.array([[i, j, k] for i in (-1, 1) for j in (-1, 1) for k in (-1, 1)]) * half * 0.9 + centre
        for target in [centre, *corners]:
            assert not segment_hits_quads(eye, target, quads).any()
        # The wall is still drawn around the cut.
        on_wall = (np.abs(quads[:, :, 0] - 20.0) < 1e-6).all(axis=1)
        assert on_wall.sum() > 10
    finally:
        plotter.close()
