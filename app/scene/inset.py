"""The magnified second view of a small error, beside the main view (no Qt).

When a :class:`~resweep.app.scene.story.Story` is ``small``, the render window is split: the
main view keeps the left part, and a second renderer on the right shows the same actors through
a camera framing only the story's dimension (a few times its length), with a dimension line
(end ticks) and a label giving the error's length, axis and unit, and a title with the
magnification. The second renderer shares the main view's actors, so it always shows the same frame.
"""
from __future__ import annotations

import numpy as np
from vtkmodules.vtkRenderingCore import vtkBillboardTextActor3D, vtkRenderer, vtkTextActor

from resweep.app.scene import style as S
from resweep.app.scene.offscreen import mesh_actor
from resweep.app.scene.story import axis_words, inset_radius
from resweep.app.scene.voxel_mesh import mesh_type
from resweep.app.scene.viewport import render_scale

SPLIT = 0.6  # fraction of the window width the main view keeps while the magnified view shows


def dimension_text(story, voxel_size: float) -> str:
    """The label of the dimension line: length with its axis, world units and voxels."""
    p, q = (np.asarray(v, np.float64) for v in story.dim)
    d = q - p
    what = "depth" if story.kind in ("penetration", "start_overlap") else (
        "jump" if story.kind == "discontinuity" else "gap")
    n = float(np.linalg.norm(d))
    return f"{what} {n:.4g} world units\n= {n / voxel_size:.4g} voxels\n{axis_words(d)}"


class MagnifiedView:
    """Second renderer (and its over-the-scene layer) sharing ``actors`` of the main view.

    Attributes:
        visible: the window is split and the magnified view shows.
        factor: magnification of the last shown view (main framed radius / magnified radius).
        text: the dimension label of the last shown view.
    """

    def __init__(self, plotter, main_layers, actors: dict, over_roles, top_roles, voxel_size_of):
        self.plotter = plotter
        self.main = plotter.renderer
        self.main_layers = main_layers
        self.voxel_size_of = voxel_size_of
        self.visible = False
        self.factor = 1.0
        self.text = ""
        self.ren = vtkRenderer()
        self.ren.SetLayer(0)
        self.ren.InteractiveOff()
        top, bottom = S.BACKGROUND[1], S.BACKGROUND[0]
        self.ren.SetBackground(*[c / 255 for c in bottom])
        self.ren.SetBackground2(*[c / 255 for c in top])
        self.ren.GradientBackgroundOn()
        self.over = vtkRenderer()
        self.over.SetLayer(1)
        self.over.InteractiveOff()
        self.over.SetActiveCamera(self.ren.GetActiveCamera())
        # Key outlines, the dimension and texts in the top layer, over the overlap volume.
        self.top = vtkRenderer()
        self.top.SetLayer(2)
        self.top.InteractiveOff()
        self.top.SetActiveCamera(self.ren.GetActiveCamera())
        for role, actor in actors.items():
            (self.over if role in over_roles else self.top if role in top_roles else self.ren).AddActor(actor)
        self.dim_mesh = mesh_type(plotter)(np.zeros((2, 3)), lines=[2, 0, 1])
        self.dim_actor = mesh_actor(self.dim_mesh, S.DIMENSION.color, lighting=False, line_width=2.0)
        self.top.AddActor(self.dim_actor)
        self.label = vtkBillboardTextActor3D()
        self._text_style(self.label.GetTextProperty(), 15)
        self.top.AddActor(self.label)
        self.title = vtkTextActor()
        self._text_style(self.title.GetTextProperty(), 15)
        self.title.SetPosition(8, 8)
        self.title.GetTextProperty().SetJustificationToLeft()
        self.top.AddViewProp(self.title)

    @staticmethod
    def _text_style(tp, size):
        tp.SetFontSize(size)
        tp.SetColor(*S.DIMENSION.color)
        tp.SetBackgroundColor(1.0, 1.0, 1.0)
        tp.SetBackgroundOpacity(0.85)
        tp.SetFrame(True)
        tp.SetFrameColor(*S.DIMENSION.color)
        tp.SetJustificationToCentered()
        tp.SetVerticalJustificationToBottom()

    def _split(self, on: bool):
        rw = self.plotter.render_window
        right = SPLIT if on else 1.0
        self.main.SetViewport(0.0, 0.0, right, 1.0)
        for ren in self.main_layers:
            ren.SetViewport(0.0, 0.0, right, 1.0)
        have = rw.GetRenderers().IsItemPresent(self.ren)
        if on and not have:
            self.ren.SetViewport(SPLIT, 0.0, 1.0, 1.0)
            self.over.SetViewport(SPLIT, 0.0, 1.0, 1.0)
            self.top.SetViewport(SPLIT, 0.0, 1.0, 1.0)
            rw.SetNumberOfLayers(max(3, rw.GetNumberOfLayers()))
            for ren in (self.ren, self.over, self.top):
                rw.AddRenderer(ren)
        elif not on and have:
            for ren in (self.ren, self.over, self.top):
                rw.RemoveRenderer(ren)
        self.visible = on

    def show(self, story) -> None:
        """Split and frame ``story``'s dimension (None, or a story without one: unsplit)."""
        if story is None or story.dim is None:
            if self.visible:
                self._split(False)
            return
        self._split(True)
        vs = self.voxel_size_of()
        p, q = (np.asarray(v, np.float64) for v in story.dim)
        d = q - p
        n = float(np.linalg.norm(d))
        ax = int(np.argmax(np.abs(d))) if n > 0 else 0
        cam_main = self.main.GetActiveCamera()
        view = np.asarray(cam_main.GetPosition()) - np.asarray(cam_main.GetFocalPoint())
        view[ax] = 0.0  # look across the measured axis so its length shows in full
        if np.linalg.norm(view) < 1e-9:
            view = np.roll(np.eye(3)[ax], 1)
        view /= np.linalg.norm(view)
        r = inset_radius(story)
        mid = (p + q) / 2
        cam = self.ren.GetActiveCamera()
        # Parallel projection from outside the whole story: lengths read the same anywhere in it.
        cam.ParallelProjectionOn()
        w, h = self.plotter.render_window.GetSize()
        aspect = (1 - SPLIT) * max(w, 1) / max(h, 1)
        cam.SetParallelScale(r / min(1.0, aspect))  # r fits the narrower side of the view
        cam.SetFocalPoint(*mid)
        cam.SetPosition(*(mid + view * (2.0 * story.radius + 4.0 * vs)))
        cam.SetViewUp(*cam_main.GetViewUp())
        cam.OrthogonalizeViewUp()
        self.ren.ResetCameraClippingRange()
        # ticks across the line at both ends, in the picture plane
        up = np.asarray(cam.GetViewUp(), np.float64)
        tick = np.cross(view, d / n) if n > 0 else up
        if np.linalg.norm(tick) < 1e-9:
            tick = up
        tick = tick / np.linalg.norm(tick) * 0.4 * max(n, 1e-9)
        pts = np.array([p, q, p - tick, p + tick, q - tick, q + tick])
        self.dim_mesh.points = pts
        self.dim_mesh.lines = np.array([2, 0, 1, 2, 2, 3, 2, 4, 5])
        # in points of the window's full size (a draft renders smaller, its text in fewer dots per inch)
        s = render_scale(self.plotter)
        fs = int(np.clip(round(min(h / s * 0.028, (1 - SPLIT) * w / s * 0.042)), 9, 22))
        for actor in (self.label, self.title):
            actor.GetTextProperty().SetFontSize(fs)
        self.text = dimension_text(story, vs)
        self.label.SetInput(self.text)
        self.label.SetPosition(*(mid - up * 0.55 * r))  # below the line, clear of its ticks
        main_r = story.radius
        self.factor = story.magnification(main_r)
        self.title.SetInput(f"magnified x{self.factor:.0f}")
