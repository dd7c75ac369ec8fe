"""The 3-D view as a plain raster widget: VTK renders off screen, the widget draws the picture.

Why not a GL widget: on a machine without a GPU (Mesa's software GL), Qt composes a
``QOpenGLWidget`` through GL on every paint, whatever changed: measured on the 2-core machine
under Xvfb, repainting an empty 733 x 789 GL widget and a label beside it takes 21-34 ms, the same
through a raster widget drawing a picture of that size 3.4-6 ms. Scrubbing repaints the view on
every step, so that composition was about half of each step. Here VTK renders into its own
off-screen window (:class:`~resweep.app.scene.offscreen.OffscreenPlotter`, the plotter
``resweep snapshot`` uses, so the view and the pictures are drawn by the same code), the pixels are
read back once per render, and Qt only copies them, as part of its ordinary raster paint.

Mouse input drives the camera through VTK's own trackball-camera interactor style (rotate with
the left button, pan with the middle button or shift+left, zoom with the right button or the
wheel), as pyvista's plotters do by default.
"""
from __future__ import annotations

import sys

import numpy as np
from PyQt6.QtCore import Qt
from PyQt6.QtGui import QImage, QPainter
from PyQt6.QtWidgets import QWidget

from resweep.app.scene.offscreen import OffscreenPlotter  # first: it picks the window class without a display
from vtkmodules.util.numpy_support import vtk_to_numpy  # noqa: E402
from vtkmodules.vtkCommonCore import vtkUnsignedCharArray  # noqa: E402
from vtkmodules.vtkInteractionStyle import vtkInteractorStyleTrackballCamera  # noqa: E402
from vtkmodules.vtkRenderingUI import vtkGenericRenderWindowInteractor  # noqa: E402

_BUTTONS = {
    Qt.MouseButton.LeftButton: "Left",
    Qt.MouseButton.MiddleButton: "Middle",
    Qt.MouseButton.RightButton: "Right",
}


def _offscreen_window():
    """A render window of its own GL context, off any display where VTK can: on Linux an EGL
    window (Mesa's or the GPU driver's), which holds no connection to the X server (an X one
    would outlive the display in a test run's virtual X server); None elsewhere, or where EGL
    cannot make a GL context (VTK's default off-screen window then)."""
    if sys.platform.startswith("linux"):
        import vtkmodules.vtkRenderingOpenGL2 as gl
        cls = getattr(gl, "vtkEGLRenderWindow", None)
        if cls is not None:
            rw = cls()
            rw.SetOffScreenRendering(1)
            if rw.SupportsOpenGL():  # makes and drops a context: about 0.1 s, once per window
                return rw
    return None


class RasterView(QWidget):
    """A QWidget showing an off-screen VTK render window, with the plotter interface the
    viewport uses (``renderer``, ``render_window``, ``camera``, ``add_mesh``, ``add_axes``,
    ``set_background``, ``reset_camera``, ``render``, ``screenshot``, ``close``).

    ``update()`` asks for a render at the next paint (paints asked for before the event loop
    gets to them merge into one); ``render()`` renders now. ``image``: uint8 (H, W, 3), the
    picture as last rendered, top row first. ``renders``: int, renders so far.
    ``render_scale``: float, render pixels per device pixel of the widget (1.0; below 1 for
    drafts, see :meth:`set_render_scale`).
    """

    def __init__(self, parent=None):
        super().__init__(parent)
        self._scene = OffscreenPlotter((max(1, self.width()), max(1, self.height())), _offscreen_window())
        self.mesh_type = self._scene.mesh_type
        self.renderer, self.camera = self._scene.renderer, self._scene.camera
        self.render_window = self._scene.render_window
        self.iren = vtkGenericRenderWindowInteractor()
        self.iren.SetRenderWindow(self.render_window)
        self.iren.SetInteractorStyle(vtkInteractorStyleTrackballCamera())
        # The interactor asks for renders as the camera moves: they become paints of this widget
        # (merged, and rendered when Qt paints) rather than renders inside each mouse event.
        self.iren.EnableRenderOff()
        self.iren.AddObserver("RenderEvent", lambda *_: self.update())
        self.iren.Initialize()
        self.image = np.zeros((1, 1, 3), np.uint8)
        self._rgbx = np.zeros((1, 1, 4), np.uint8)  # what the widget draws (image is a view of it)
        self._pixels_buf = vtkUnsignedCharArray()
        self._qimage = None
        self._stale = True
        self.renders = 0
        self.render_scale = 1.0
        self._dpi = self.render_window.GetDPI()
        self._widths: dict = {}  # actor -> (line width, point size) at scale 1, while scaled
        self.setAttribute(Qt.WidgetAttribute.WA_OpaquePaintEvent)  # the picture covers the widget
        self.setMinimumSize(64, 64)

    # -- the plotter interface the viewport uses -------------------------------------------------
    def add_mesh(self, *args, **kw):
        return self._scene.add_mesh(*args, **kw)

    def add_axes(self, *args, **kw):
        return self._scene.add_axes(*args, **kw)

    def set_background(self, *args, **kw):
        return self._scene.set_background(*args, **kw)

    def reset_camera(self) -> None:
        self._scene.reset_camera()

    def update(self, *args) -> None:
        """Render at the next paint (Qt's ``update``: asks merge into one paint)."""
        self._stale = True
        super().update(*args)

    def render(self, *args) -> None:
        """Render now (the picture is shown at the next paint)."""
        if args:  # QWidget.render(target, ...): Qt's own meaning
            return super().render(*args)
        self._render_now()
        super().update()

    def set_render_scale(self, scale: float) -> None:
        """Render at ``scale`` times the widget's pixels (Qt scales the picture to the widget), with
        text, lines and points scaled alike so that they keep their size on screen. Lines and
        points of actors added while scaled keep their widths."""
        scale = float(scale)
        if scale == self.render_scale or self.render_window is None:
            return
        for actor, (lw, ps) in self._widths.items():  # back to scale 1 first
            actor.GetProperty().SetLineWidth(lw)
            actor.GetProperty().SetPointSize(ps)
        self._widths = {}
        if scale != 1.0:
            rens = self.render_window.GetRenderers()
            rens.InitTraversal()
            for _ in range(rens.GetNumberOfItems()):
                actors = rens.GetNextItem().GetActors()
                actors.InitTraversal()
                for _ in range(actors.GetNumberOfItems()):
                    a = actors.GetNextItem()
                    if a in self._widths:  # shared by two renderers (the magnified view's): once
                        continue
                    prop = a.GetProperty()
                    self._widths[a] = (prop.GetLineWidth(), prop.GetPointSize())
                    prop.SetLineWidth(max(1.0, prop.GetLineWidth() * scale))
                    prop.SetPointSize(max(1.0, prop.GetPointSize() * scale))
        self.render_window.SetDPI(max(1, round(self._dpi * scale)))  # text sizes are in points
        self.render_scale = scale
        self._fit_size()  # now: picking and projecting read the window's size with the scale
        self._stale = True

    def screenshot(self, return_img: bool = True) -> np.ndarray:
        """uint8 (H, W, 3) picture as last rendered (top row first)."""
        return self.image.copy()

    def close(self) -> bool:
        if self.render_window is not None:
            self.iren.RemoveAllObservers()
            self._scene.close()
            self.render_window = None
        return super().close()

    # -- painting -----------------------------------------------------------------------------
    def _render_now(self) -> None:
        rw = self.render_window
        if rw is None:
            return
        w, h = self._fit_size()
        # Without multisampling there is nothing to resolve: the pixels are read from the buffer
        # VTK drew into, and VTK's copy of colour and depth into its display buffers is skipped
        # (about 2 ms of a 12 ms draft at 733 x 789; the same pixels).
        direct = rw.GetMultiSamples() == 0
        if direct:
            rw.SwapBuffersOff()
        try:
            rw.Render()
        finally:
            rw.SwapBuffersOn()
        self.renders += 1
        # Straight into a kept array: 1.0 ms at 733 x 789, against 3.7 ms through
        # vtkWindowToImageFilter (the snapshot's path), the same pixels. Four bytes a pixel: Qt
        # draws (and scales up, for drafts) such a picture in 2.7 ms against 3.0-3.5 for three.
        rw.GetRGBACharPixelData(0, 0, w - 1, h - 1, 0 if direct else 1, self._pixels_buf, 0)
        self._rgbx = np.ascontiguousarray(vtk_to_numpy(self._pixels_buf).reshape(h, w, 4)[::-1])
        self.image = self._rgbx[..., :3]
        self._qimage = QImage(self._rgbx.data, w, h, 4 * w, QImage.Format.Format_RGBX8888)
        self._qimage.setDevicePixelRatio(self.devicePixelRatioF())
        self._stale = False

    def _fit_size(self) -> tuple[int, int]:
        """Size the render window (and the interactor's idea of it) to the widget's device pixels
        times ``render_scale``; returns (W, H)."""
        r = self.devicePixelRatioF() * self.render_scale
        w, h = max(1, round(self.width() * r)), max(1, round(self.height() * r))
        if tuple(self.render_window.GetSize()) != (w, h):
            self.render_window.SetSize(w, h)
            self.iren.UpdateSize(w, h)
        return w, h

    def paintEvent(self, event) -> None:
        if self._stale or self._qimage is None:
            self._render_now()
        p = QPainter(self)
        if self._qimage is not None:
            if self._qimage.width() != round(self.width() * self.devicePixelRatioF()):  # a scaled render
                # each pixel repeated (1.8 ms at 733 x 789) rather than smoothed (2.7 ms): a draft is
                # on screen for a fraction of a second
                p.drawImage(self.rect(), self._qimage)
            else:
                p.drawImage(0, 0, self._qimage)
        p.end()

    def resizeEvent(self, event) -> None:
        self._stale = True
        super().resizeEvent(event)

    # -- mouse input -> VTK's interactor style --------------------------------------------------
    def _tell(self, event, repeat: int = 0) -> None:
        r = self.devicePixelRatioF() * self.render_scale
        pos = event.position()
        mods = event.modifiers()
        self._fit_size()  # the y flip uses the window's height
        self.iren.SetEventInformationFlipY(int(pos.x() * r), int(pos.y() * r),
                                           int(bool(mods & Qt.KeyboardModifier.ControlModifier)),
                                           int(bool(mods & Qt.KeyboardModifier.ShiftModifier)),
                                           chr(0), repeat, None)

    def mousePressEvent(self, event) -> None:
        if not self._button(event, "Press"):
            super().mousePressEvent(event)

    def mouseReleaseEvent(self, event) -> None:
        if not self._button(event, "Release"):
            super().mouseReleaseEvent(event)

    def _button(self, event, what: str) -> bool:
        """Hand a press or release of a button VTK's style uses to the interactor; False for others."""
        name = _BUTTONS.get(event.button())
        if name is None or self.render_window is None:
            return False
        self._tell(event)
        getattr(self.iren, f"{name}Button{what}Event")()
        return True

    def mouseMoveEvent(self, event) -> None:
        if self.render_window is None:
            return
        self._tell(event)
        self.iren.MouseMoveEvent()

    def wheelEvent(self, event) -> None:
        if self.render_window is None:
            return
        self._tell(event)
        dy = event.angleDelta().y()
        if dy > 0:
            self.iren.MouseWheelForwardEvent()
        elif dy < 0:
            self.iren.MouseWheelBackwardEvent()
