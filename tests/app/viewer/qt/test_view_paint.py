"""Scrubbing: the 3-D view paints drafts while the frame changes and leaves the full picture.

The picture on screen is read back from the render window without rendering again (the front
buffer, what the widget shows); the reference is a full-quality render of the same frame made
here. The Entities panel's per-frame marks are checked against the core's flags of that frame.
"""
from __future__ import annotations

import numpy as np
import pytest

from resweep.core.check.kinds import kinds_of

from test_window import core_flags
from conftest import DEMO, open_and_wait

pytestmark = pytest.mark.gui


def _counter(win):
    n = [0]
    win.plotter.render_window.AddObserver("EndEvent", lambda *_: n.__setitem__(0, n[0] + 1))
    return n


def _on_screen(win) -> np.ndarray:
    """uint8 (H, W, 3): the view's last rendered picture, not rendered again."""
    return np.array(win.plotter.image)[..., :3]


def test_scrub_paints_drafts_then_the_full_picture_of_the_last_frame(qtbot, demo_window):
    win = demo_window
    vp, rw = win.view_paint, win.plotter.render_window
    qtbot.waitUntil(lambda: not vp.draft, timeout=5000)
    samples = rw.GetMultiSamples()
    assert samples > 0  # the full picture is multisampled
    main = win.plotter.renderer
    bottom, top = main.GetBackground(), main.GetBackground2()
    assert main.GetGradientBackground() and bottom != top  # the full picture's background is a gradient
    renders = _counter(win)
    for f in (10, 20, 30, 45):
        seen = renders[0]
        win.pb.set_frame(f)
        qtbot.waitUntil(lambda: renders[0] > seen, timeout=10_000)  # each step is painted
        assert vp.draft and rw.GetMultiSamples() == 0
        # drafts: one colour, the gradient's middle
        assert not main.GetGradientBackground()
        assert np.allclose(main.GetBackground(), (np.array(bottom) + np.array(top)) / 2)
    draft = _on_screen(win)
    mid = (np.array(bottom) + np.array(top)) / 2 * 255
    assert np.abs(draft[2, 2] - mid).max() <= 2  # the top-left corner (sky) in the draft's one colour
    seen = renders[0]
    qtbot.waitUntil(lambda: not vp.draft and renders[0] > seen, timeout=10_000)  # the settle paint
    shown = _on_screen(win)
    assert win.state.frame == 45 and rw.GetMultiSamples() == samples
    assert main.GetGradientBackground() and main.GetBackground() == bottom and main.GetBackground2() == top
    assert np.abs(shown[2, 2] - np.array(top) * 255).max() <= 3  # the gradient is back: its top colour there
    vp.full()
    win.plotter.render()
    full = _on_screen(win)
    assert shown.shape == full.shape and shown.std() > 5
    assert np.array_equal(shown, full)
    # the drafts really are drawn another way, so the equality above could have failed
    assert not np.array_equal(draft, full)


def test_saved_picture_during_a_scrub_is_full_quality(qtbot, demo_window):
    win = demo_window
    win.pb.set_frame(30)
    win.pb.set_frame(31)
    assert win.view_paint.draft
    pic = win.picture_array()
    assert not win.view_paint.draft and win.plotter.render_window.GetMultiSamples() == win.view_paint.full_samples
    win.plotter.render()
    again = win.picture_array()
    assert np.array_equal(pic, again)


def test_entities_panel_marks_follow_the_frame_when_only_changed_rows_are_restyled(qtbot, demo_window):
    win = demo_window
    flags = core_flags(DEMO)
    table = win.entities.table
    for f in (5, 6, 60, 61, 120, 3):
        win.pb.set_frame(f)
        qtbot.waitUntil(lambda: win.state is not None and win.state.frame == f, timeout=10_000)
        active = win.state.active
        for r in range(table.rowCount()):
            it = table.item(r, win.entities.NAME)
            kinds = kinds_of(int(flags[f, r])) if active[r] else []
            assert it.font().bold() == bool(kinds), (f, r)
            assert it.font().italic() == (not active[r]), (f, r)
            want = ", ".join(kinds) if kinds else "agrees" if active[r] else "inactive"
            assert it.toolTip() == "this frame: " + want, (f, r)


def test_entities_panel_counts_and_colours_after_the_cell_by_cell_refresh(qtbot, demo_window):
    from resweep.core.check.kinds import KINDS, SEVERITY, SEVERITY_RANK, kind_mask
    from resweep.app.viewer.timeline import SEVERITY_COLOURS
    win = demo_window
    flags = core_flags(DEMO)
    table = win.entities.table
    for r in range(table.rowCount()):
        worst = 0
        for k, kind in enumerate(KINDS):
            n = int(np.count_nonzero(flags[:, r] & kind_mask(kind)))
            cell = table.item(r, 2 + k)
            assert cell.text() == (str(n) if n else "·"), (r, kind)
            rank = SEVERITY_RANK[SEVERITY[kind]]
            want = SEVERITY_COLOURS[rank].name() if n else "#5d6a74"
            assert cell.foreground().color().name() == want, (r, kind)
            if n:
                worst = max(worst, rank)
        want_id = SEVERITY_COLOURS[worst].name() if worst else "#d9e2e8"
        assert table.item(r, win.entities.ID).foreground().color().name() == want_id, r


def _actors(rw):
    out = []
    rens = rw.GetRenderers()
    rens.InitTraversal()
    for _ in range(rens.GetNumberOfItems()):
        acts = rens.GetNextItem().GetActors()
        acts.InitTraversal()
        out += [acts.GetNextItem() for _ in range(acts.GetNumberOfItems())]
    return out


def test_a_draft_renders_small_but_keeps_window_pixels_and_sizes_on_screen(qtbot, demo_window):
    """A draft renders at DRAFT_SCALE of the window's pixels: picking and projecting still speak
    window pixels (the full picture's), and lines, points and text (in points, so in dots per inch)
    shrink by the scale so that they keep their size once Qt scales the picture up; the full
    paint after it has every size back."""
    from resweep.app.viewer.view_paint import DRAFT_SCALE
    win = demo_window
    vp, view, paint = win.viewport, win.plotter, win.view_paint
    rw = view.render_window
    qtbot.waitUntil(lambda: not paint.draft, timeout=5000)
    size, dpi = tuple(rw.GetSize()), rw.GetDPI()
    sizes = {a: (a.GetProperty().GetLineWidth(), a.GetProperty().GetPointSize()) for a in _actors(rw)}
    assert any(lw > 1 for lw, _ in sizes.values())  # some lines are wide enough to shrink
    x, y = size[0] * 0.5, size[1] * 0.6  # a window pixel on the floor in front of the focus
    p = vp.pick(x, y)
    assert p is not None
    px = vp.project(p)
    assert abs(px[0] - x) <= 1.01 and abs(px[1] - y) <= 1.01  # (pick counts rows from the pixel centre)
    renders = _counter(win)
    paint.request(draft=True)  # the same scene and camera, as a draft
    qtbot.waitUntil(lambda: renders[0] > 0, timeout=10_000)
    assert paint.draft and view.render_scale == DRAFT_SCALE
    assert tuple(rw.GetSize()) == tuple(round(s * DRAFT_SCALE) for s in size)
    assert rw.GetDPI() == round(dpi * DRAFT_SCALE)
    for a, (lw, ps) in sizes.items():
        assert a.GetProperty().GetLineWidth() == max(1.0, lw * DRAFT_SCALE)
        assert a.GetProperty().GetPointSize() == max(1.0, ps * DRAFT_SCALE)
    dx, dy = vp.project(p)  # the same window pixel, to the half-size picture's rounding
    assert abs(dx - px[0]) <= 1.5 and abs(dy - px[1]) <= 1.5
    q = vp.pick(x, y)  # and the same surface point there (a render pixel is two window pixels)
    assert q is not None and np.linalg.norm(q - p) < 0.1
    seen = renders[0]
    qtbot.waitUntil(lambda: not paint.draft and renders[0] > seen, timeout=10_000)  # the settle paint
    assert tuple(rw.GetSize()) == size and rw.GetDPI() == dpi and view.render_scale == 1.0
    assert {a: (a.GetProperty().GetLineWidth(), a.GetProperty().GetPointSize()) for a in sizes} == sizes


def test_a_draft_with_the_magnified_view_gives_shared_actors_their_widths_back(qtbot, window):
    """With the magnified view shown (the hopper's 0.02-voxel snag at frame 90, entity 105: a small
    error), some actors are drawn by two renderers; a draft shrinks each line and point once and
    the full paint after it puts every width back as it was."""
    from resweep.app.viewer.view_paint import DRAFT_SCALE
    win = window
    open_and_wait(qtbot, win, DEMO, frame=90, entity=105)
    paint, rw = win.view_paint, win.plotter.render_window
    qtbot.waitUntil(lambda: not paint.draft, timeout=5000)
    assert win.viewport.inset is not None and win.viewport.inset.visible
    actors = _actors(rw)
    assert len(actors) > len(set(actors))  # some actor is in two renderers
    sizes = {a: (a.GetProperty().GetLineWidth(), a.GetProperty().GetPointSize()) for a in actors}
    renders = _counter(win)
    paint.request(draft=True)
    qtbot.waitUntil(lambda: renders[0] > 0, timeout=10_000)
    for a, (lw, ps) in sizes.items():
        assert a.GetProperty().GetLineWidth() == max(1.0, lw * DRAFT_SCALE)
        assert a.GetProperty().GetPointSize() == max(1.0, ps * DRAFT_SCALE)
    seen = renders[0]
    qtbot.waitUntil(lambda: not paint.draft and renders[0] > seen, timeout=10_000)
    assert {a: (a.GetProperty().GetLineWidth(), a.GetProperty().GetPointSize()) for a in sizes} == sizes
