"""The 3-D view as a raster widget (app/viewer/raster_view.py): it shows what VTK rendered, and the
mouse moves the camera.

References: for what Qt shows (Qt's ``grab`` of the widget), the render window's own pixels read
back through ``vtkWindowToImageFilter`` (the snapshot's path, held equal to pyvista's pictures in
``tests/app/scene/test_offscreen.py``; the widget reads them another way). For the camera, the
geometry of VTK's trackball-camera style (common practice in 3-D viewers): a left-button drag turns
the camera about its focal point, keeping its distance to it; the wheel moves it along its line of
sight, towards the focal point when turned forward.
"""
from __future__ import annotations

import numpy as np
import pytest
from PyQt6.QtCore import QEvent, QPoint, QPointF, Qt
from PyQt6.QtGui import QImage, QMouseEvent, QWheelEvent
from PyQt6.QtWidgets import QApplication

pytestmark = pytest.mark.gui


def _shown(widget) -> np.ndarray:
    """uint8 (H, W, 3): what Qt draws for ``widget``."""
    img = widget.grab().toImage().convertToFormat(QImage.Format.Format_RGB888)
    h, w, stride = img.height(), img.width(), img.bytesPerLine()
    return np.frombuffer(img.constBits().asstring(h * stride), np.uint8).reshape(h, stride)[:, :w * 3].reshape(h, w, 3)


def _settled(qtbot, win):
    qtbot.waitUntil(lambda: not win.view_paint.draft, timeout=5000)
    qtbot.wait(50)


def _camera(win):
    cam = win.plotter.renderer.GetActiveCamera()
    return np.array(cam.GetPosition()), np.array(cam.GetFocalPoint())


def _mouse(widget, kind, x, y, button=Qt.MouseButton.NoButton, buttons=Qt.MouseButton.NoButton):
    pos = QPointF(x, y)
    ev = QMouseEvent(kind, pos, QPointF(widget.mapToGlobal(QPoint(x, y))), button, buttons,
                     Qt.KeyboardModifier.NoModifier)
    QApplication.sendEvent(widget, ev)


def test_the_widget_shows_exactly_what_vtk_rendered(qtbot, demo_window):
    win = demo_window
    _settled(qtbot, win)
    view = win.plotter
    vtk_pixels = view._scene.screenshot()  # vtkWindowToImageFilter: not the widget's own read-back
    shown = _shown(view)
    assert shown.shape == vtk_pixels.shape == (view.height(), view.width(), 3)
    depth = view.screen().depth()
    if depth < 24:  # a 16-bit screen (the test X server's default) keeps 5, 6, 5 bits of r, g, b
        keep = np.array([5, 6, 5]) if depth == 16 else np.array([8, 8, 8])
        shown, vtk_pixels = (a.astype(np.int16) >> (8 - keep) for a in (shown, vtk_pixels))
    assert np.array_equal(shown, vtk_pixels)
    assert len(np.unique(shown.reshape(-1, 3), axis=0)) > 50  # a scene, not a blank widget


def test_a_draft_is_rendered_small_and_shown_over_the_whole_widget(qtbot, demo_window):
    """Drafts render at DRAFT_SCALE of the widget's pixels, read from the buffer VTK draws into
    (no copy to VTK's display buffers). Reference: VTK's ordinary render of the same draft, read by
    the filter. Qt shows it scaled up to the whole widget: against a plain enlargement of the
    picture (each pixel repeated, as Qt draws it) it differs at most by rounding at the seams."""
    from resweep.app.viewer.view_paint import DRAFT_SCALE
    win = demo_window
    _settled(qtbot, win)
    view = win.plotter
    full = view.image.copy()
    renders = view.renders
    win.pb.set_frame(win.pb.frame + 1)
    qtbot.waitUntil(lambda: view.renders > renders, timeout=10_000)
    assert win.view_paint.draft and view.render_window.GetMultiSamples() == 0
    H, W = full.shape[:2]
    ours = view.image.copy()
    assert ours.shape == (round(H * DRAFT_SCALE), round(W * DRAFT_SCALE), 3)
    view.render_window.Render()  # VTK's own way, in the same draft settings
    assert np.array_equal(ours, view._scene.screenshot())
    shown = _shown(view)
    assert shown.shape == (H, W, 3) == (view.height(), view.width(), 3)
    k = round(1 / DRAFT_SCALE)
    big = np.repeat(np.repeat(ours, k, axis=0), k, axis=1)[:H, :W]
    big = np.pad(big, ((0, H - len(big)), (0, W - big.shape[1]), (0, 0)), mode="edge")
    depth = view.screen().depth()
    keep = np.array([5, 6, 5]) if depth == 16 else np.array([8, 8, 8])
    shown, big = (a.astype(np.int16) >> (8 - keep) for a in (shown, big))
    for rows in (slice(0, H // 2), slice(H // 2, H)):  # every quarter of the widget shows its part
        for cols in (slice(0, W // 2), slice(W // 2, W)):
            diff = np.abs(shown[rows, cols] - big[rows, cols])
            assert diff.mean() < 1.0 and (diff > 2).mean() < 0.1
    assert len(np.unique(ours.reshape(-1, 3), axis=0)) > 20


def test_left_drag_turns_the_camera_about_its_focal_point(qtbot, demo_window):
    win = demo_window
    _settled(qtbot, win)
    view = win.plotter
    before = _shown(view)
    p0, f0 = _camera(win)
    cx, cy = view.width() // 2, view.height() // 2
    left = Qt.MouseButton.LeftButton
    _mouse(view, QEvent.Type.MouseButtonPress, cx, cy, left, left)
    for k in range(1, 6):
        _mouse(view, QEvent.Type.MouseMove, cx + 12 * k, cy + 4 * k, buttons=left)
    _mouse(view, QEvent.Type.MouseButtonRelease, cx + 60, cy + 20, left)
    _settled(qtbot, win)
    p1, f1 = _camera(win)
    assert np.allclose(f1, f0)  # the focal point stays
    assert not np.allclose(p1, p0)  # the camera moved
    assert np.isclose(np.linalg.norm(p1 - f1), np.linalg.norm(p0 - f0), rtol=1e-9)  # on a sphere about it
    assert not np.array_equal(_shown(view), before)  # and the picture shows it


def test_wheel_forward_moves_the_camera_towards_its_focal_point(qtbot, demo_window):
    win = demo_window
    _settled(qtbot, win)
    view = win.plotter
    p0, f0 = _camera(win)
    at = QPointF(view.width() / 2, view.height() / 2)
    ev = QWheelEvent(at, QPointF(view.mapToGlobal(at.toPoint())), QPoint(0, 0), QPoint(0, 120),
                     Qt.MouseButton.NoButton, Qt.KeyboardModifier.NoModifier, Qt.ScrollPhase.NoScrollPhase, False)
    QApplication.sendEvent(view, ev)
    _settled(qtbot, win)
    p1, f1 = _camera(win)
    assert np.allclose(f1, f0)
    d0, d1 = p0 - f0, p1 - f1
    assert np.linalg.norm(d1) < np.linalg.norm(d0)  # closer
    assert np.allclose(np.cross(d0, d1), 0, atol=1e-9 * np.linalg.norm(d0) ** 2)  # along the line of sight
