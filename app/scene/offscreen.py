"""A small off-screen plotter built on VTK alone, for pictures made without a window.

:class:`~resweep.app.scene.viewport.Viewport` draws on any object with the few parts of a pyvista
``Plotter`` it uses (``renderer``, ``render_window``, ``camera``, ``add_mesh``, ``add_axes``,
``set_background``, ``render``, ``screenshot``, ``reset_camera``, ``close``). ``resweep snapshot``
hands it an :class:`OffscreenPlotter` (the viewer a widget showing one), which sets up the
render window, lights, actors and axes marker the way pyvista's plotter does for the calls the
viewport makes (so the pixels are the same) but imports only the VTK modules a picture needs:
pyvista's plotting package, with matplotlib and every VTK module it loads, is most of a warm
snapshot's start-up. ``tests/app/scene/test_offscreen.py`` holds the two plotters' pictures equal.
"""
from __future__ import annotations

import os
import sys

if sys.platform.startswith("linux") and not os.environ.get("DISPLAY"):
    # Go straight to the EGL window: trying X first without a display logs a warning on stderr.
    os.environ.setdefault("VTK_DEFAULT_OPENGL_WINDOW", "vtkEGLRenderWindow")

import numpy as np  # noqa: E402
import vtkmodules.vtkRenderingFreeType  # noqa: E402,F401  (text of the axes labels and the magnified view)
import vtkmodules.vtkRenderingOpenGL2  # noqa: E402,F401  (the OpenGL implementations of the classes below)
from vtkmodules.util.numpy_support import numpy_to_vtk, numpy_to_vtkIdTypeArray, vtk_to_numpy  # noqa: E402
from vtkmodules.vtkCommonCore import vtkPoints  # noqa: E402
from vtkmodules.vtkCommonDataModel import vtkCellArray, vtkPolyData  # noqa: E402
from vtkmodules.vtkRenderingAnnotation import vtkAxesActor  # noqa: E402
from vtkmodules.vtkRenderingCore import (vtkActor, vtkDataSetMapper, vtkLightKit,  # noqa: E402
                                         vtkRenderer, vtkRenderWindow, vtkWindowToImageFilter)

#: Multisamples of the render window (pyvista's default theme: MSAA with 8 samples).
MULTI_SAMPLES = 8
#: pyvista's default theme: mesh colour (0..255), and the lighting of every mesh it adds.
_MESH_RGB = (173, 216, 230)
_SPECULAR_POWER = 100.0
_POINT_SIZE = 5.0


def _rgb(c) -> tuple[float, float, float]:
    """0..1 rgb as pyvista passes colours to VTK: rounded to 8 bits per channel."""
    if c == "black":
        c = (0.0, 0.0, 0.0)
    return tuple(round(float(v) * 255) / 255 for v in c)


def mesh_actor(mesh, color=None, opacity=1.0, lighting=True, line_width=None) -> vtkActor:
    """A vtkActor drawing ``mesh`` (vtkPolyData) without scalars in ``color`` (0..1 rgb), with the
    property defaults pyvista's theme gives a mesh (flat shading, specular power 100, 5 px points)."""
    mapper = vtkDataSetMapper()
    mapper.SetInputData(mesh)
    mapper.SetInterpolateScalarsBeforeMapping(True)
    mapper.ScalarVisibilityOff()
    actor = vtkActor()
    actor.SetMapper(mapper)
    prop = actor.GetProperty()
    prop.SetColor(*_rgb(color if color is not None else [c / 255 for c in _MESH_RGB]))
    prop.SetInterpolationToFlat()
    prop.SetSpecularPower(_SPECULAR_POWER)
    prop.SetPointSize(_POINT_SIZE)
    prop.SetOpacity(float(opacity))
    prop.SetLighting(bool(lighting))
    if line_width is not None:
        prop.SetLineWidth(float(line_width))
    return actor


class OffscreenMesh(vtkPolyData):
    """A vtkPolyData with the few pyvista ``PolyData`` members the viewport uses (``points``,
    ``n_points``, ``lines``, ``verts``, ``regular_faces``, ``cell_data[name] =``, ``copy_from``,
    ``from_regular_faces``), built the same way, so an :class:`OffscreenPlotter` draws the same
    cells without importing pyvista. Points keep a float dtype given (float32 or float64)."""

    def __init__(self, points=None, lines=None):
        super().__init__()
        if points is not None:
            self.points = points
        if lines is not None:
            self.lines = lines

    @classmethod
    def from_regular_faces(cls, points, faces) -> "OffscreenMesh":
        """Mesh of float (m, 3) ``points`` and int (n, k) ``faces`` (k corners each)."""
        mesh = cls(points)
        mesh.regular_faces = faces
        return mesh

    @property
    def n_points(self) -> int:
        return self.GetNumberOfPoints()

    @property
    def n_cells(self) -> int:
        return self.GetNumberOfCells()

    @property
    def points(self) -> np.ndarray:
        """(m, 3) writable view of the points (call ``GetPoints().Modified()`` after writing)."""
        pts = self.GetPoints()
        return np.zeros((0, 3)) if pts is None else vtk_to_numpy(pts.GetData())

    @points.setter
    def points(self, value):
        arr = np.asarray(value)
        if arr.dtype not in (np.float32, np.float64):
            arr = arr.astype(np.float64)
        pts = vtkPoints()
        pts.SetData(numpy_to_vtk(np.ascontiguousarray(arr.reshape(-1, 3)), deep=True))
        self.SetPoints(pts)

    @property
    def cell_data(self):
        return _CellArrays(self)

    @staticmethod
    def _cells(legacy) -> vtkCellArray:
        """vtkCellArray of cells in the legacy layout [k, i0 .. ik-1, k, ...] (int)."""
        cells = vtkCellArray()
        cells.ImportLegacyFormat(numpy_to_vtkIdTypeArray(np.ascontiguousarray(legacy, np.int64), deep=True))
        return cells

    @property
    def lines(self):
        raise AttributeError("OffscreenMesh.lines is write-only")

    @lines.setter
    def lines(self, legacy):
        self.SetLines(self._cells(legacy))

    @property
    def verts(self):
        raise AttributeError("OffscreenMesh.verts is write-only")

    @verts.setter
    def verts(self, legacy):
        self.SetVerts(self._cells(legacy))

    @property
    def regular_faces(self):
        raise AttributeError("OffscreenMesh.regular_faces is write-only")

    @regular_faces.setter
    def regular_faces(self, faces):
        faces = np.asarray(faces, np.int64)
        n, k = faces.shape
        cells = vtkCellArray()
        cells.SetData(numpy_to_vtkIdTypeArray(np.arange(0, n * k + 1, k, dtype=np.int64), deep=True),
                      numpy_to_vtkIdTypeArray(np.ascontiguousarray(faces.ravel()), deep=True))
        self.SetPolys(cells)

    def copy_from(self, other) -> None:
        self.DeepCopy(other)


class _CellArrays:
    """``mesh.cell_data[name] = array``: adds (or replaces) a named cell array, (n,) or (n, c)."""

    def __init__(self, mesh):
        self._mesh = mesh

    def __setitem__(self, name: str, values) -> None:
        arr = numpy_to_vtk(np.ascontiguousarray(values), deep=True)
        arr.SetName(name)
        self._mesh.GetCellData().AddArray(arr)


def _camera_vector(name: str) -> property:
    """A (3,) property read and written through the active VTK camera's Get<name>/Set<name>."""
    return property(lambda self: getattr(self._cam, "Get" + name)(),
                    lambda self, value: getattr(self._cam, "Set" + name)(*(float(v) for v in value)))


class OffscreenCamera:
    """The renderer's active camera with pyvista-style ``position``, ``focal_point`` and ``up``
    (tuples of 3 floats, world units)."""

    def __init__(self, renderer):
        self._renderer = renderer

    @property
    def _cam(self):
        return self._renderer.GetActiveCamera()

    position = _camera_vector("Position")
    focal_point = _camera_vector("FocalPoint")
    up = _camera_vector("ViewUp")


class OffscreenPlotter:
    """One off-screen render window with one main renderer (light kit, MSAA), sized
    ``window_size`` (W, H) pixels. Use :meth:`close` when done."""

    #: The meshes this plotter draws (the viewport makes its meshes of this class).
    mesh_type = OffscreenMesh

    def __init__(self, window_size=(1024, 768), render_window=None):
        """``render_window``: a VTK render window of a class of the caller's choice (default:
        VTK's default class for this platform)."""
        self.render_window = rw = vtkRenderWindow() if render_window is None else render_window
        rw.SetMultiSamples(0)
        rw.SetBorders(True)
        self.renderer = ren = vtkRenderer()
        rw.AddRenderer(ren)
        rw.SetOffScreenRendering(1)
        rw.SetSize(int(window_size[0]), int(window_size[1]))
        rw.SetMultiSamples(MULTI_SAMPLES)
        vtkLightKit().AddLightsToRenderer(ren)
        lights = ren.GetLights()
        for i in range(lights.GetNumberOfItems()):
            light = lights.GetItemAsObject(i)
            for get, put in ((light.GetAmbientColor, light.SetAmbientColor),
                             (light.GetDiffuseColor, light.SetDiffuseColor),
                             (light.GetSpecularColor, light.SetSpecularColor)):
                put(*_rgb(get()))
        ren.AutomaticLightCreationOff()
        ren.LightFollowCameraOn()
        self.camera = OffscreenCamera(ren)
        self._axes_renderer = None
        self._axes = None

    def set_background(self, color, top=None) -> None:
        """Background ``color`` (0..1 rgb), a vertical gradient up to ``top`` when given."""
        self.renderer.SetBackground(*color)
        if top is not None:
            self.renderer.SetGradientBackground(True)
            self.renderer.SetBackground2(*top)

    def add_mesh(self, mesh, color=None, opacity=1.0, lighting=True, style="surface", line_width=None,
                 point_size=None, render_points_as_spheres=False, show_edges=False, edge_color=None,
                 scalars=None, rgb=False, preference="point", show_scalar_bar=False, reset_camera=False):
        """An actor drawing ``mesh`` (a vtkPolyData) in the main renderer, with the properties the
        same keywords give in pyvista's ``add_mesh``; ``scalars`` with ``rgb``: a uint8 (n, 3)
        cell array of that name gives the colours directly."""
        actor = mesh_actor(mesh, color, opacity, lighting, line_width)
        mapper, prop = actor.GetMapper(), actor.GetProperty()
        if scalars is not None:
            mapper.SetScalarModeToUseCellFieldData() if preference == "cell" else \
                mapper.SetScalarModeToUsePointFieldData()
            mapper.SelectColorArray(scalars)
            mapper.SetColorModeToDirectScalars()
            mapper.ScalarVisibilityOn()
        if style == "wireframe":
            prop.SetRepresentationToWireframe()
        if point_size is not None:
            prop.SetPointSize(float(point_size))
        prop.SetRenderPointsAsSpheres(bool(render_points_as_spheres))
        if show_edges:
            prop.EdgeVisibilityOn()
            prop.SetEdgeColor(*_rgb(edge_color))
        self.renderer.AddActor(actor)
        return actor

    def add_axes(self, xlabel="X", ylabel="Y", zlabel="Z", color=(0.0, 0.0, 0.0), line_width=2,
                 x_color=(1, 0, 0), y_color=(0, 1, 0), z_color=(0, 0, 1)) -> None:
        """The axes marker in the lower left fifth of the window, as pyvista's ``add_axes`` draws it."""
        color, x_color, y_color, z_color = (_rgb(c) for c in (color, x_color, y_color, z_color))
        axes = vtkAxesActor()
        for rgb, shaft, tip in ((x_color, axes.GetXAxisShaftProperty(), axes.GetXAxisTipProperty()),
                                (y_color, axes.GetYAxisShaftProperty(), axes.GetYAxisTipProperty()),
                                (z_color, axes.GetZAxisShaftProperty(), axes.GetZAxisTipProperty())):
            for prop in (shaft, tip):
                prop.SetColor(*rgb)
                prop.SetAmbient(0.5)
            shaft.SetLineWidth(line_width)
        axes.SetXAxisLabelText(xlabel)
        axes.SetYAxisLabelText(ylabel)
        axes.SetZAxisLabelText(zlabel)
        axes.SetConeRadius(0.4)
        axes.SetNormalizedShaftLength(0.8, 0.8, 0.8)
        axes.SetNormalizedTipLength(0.2, 0.2, 0.2)
        for label in (axes.GetXAxisCaptionActor2D(), axes.GetYAxisCaptionActor2D(),
                      axes.GetZAxisCaptionActor2D()):
            label.SetWidth(0.25)
            label.SetHeight(0.1)
            tp = label.GetCaptionTextProperty()
            tp.SetColor(*color)
            tp.SetShadow(False)
        if self._axes_renderer is None:
            # What VTK's orientation marker widget does, without the widgets module (a tenth of a
            # CPU-second to import): a renderer over the main one in the lower left fifth of the
            # window whose camera takes the main camera's direction and frames the marker.
            ren = self._axes_renderer = vtkRenderer()
            ren.SetLayer(1)
            ren.InteractiveOff()
            ren.SetViewport(0.0, 0.0, 0.2, 0.2)
            rw = self.render_window
            rw.AddRenderer(ren)
            if rw.GetNumberOfLayers() < 2:
                rw.SetNumberOfLayers(2)
            ren.GetActiveCamera().SetParallelProjection(self.renderer.GetActiveCamera().GetParallelProjection())
            self.renderer.AddObserver("StartEvent", self._point_axes, 1.0)
        else:  # one marker: a new one replaces the old
            self._axes_renderer.RemoveViewProp(self._axes)
        self._axes_renderer.AddViewProp(axes)
        self._axes = axes

    def _point_axes(self, *_):
        main = self.renderer.GetActiveCamera()
        cam = self._axes_renderer.GetActiveCamera()
        cam.SetPosition(main.GetPosition())
        cam.SetFocalPoint(main.GetFocalPoint())
        cam.SetViewUp(main.GetViewUp())
        self._axes_renderer.ResetCamera()

    def reset_camera(self) -> None:
        self.renderer.ResetCamera()

    def render(self) -> None:
        self.render_window.Render()

    def screenshot(self, return_img=True) -> np.ndarray:
        """uint8 (H, W, 3) picture of the window as last rendered (top row first)."""
        f = vtkWindowToImageFilter()
        f.SetInput(self.render_window)
        f.SetScale(1)
        f.FixBoundaryOn()
        f.ShouldRerenderOff()
        f.SetInputBufferTypeToRGB()
        f.ReadFrontBufferOn()
        f.Update()
        img = f.GetOutput()
        w, h, _ = img.GetDimensions()
        arr = vtk_to_numpy(img.GetPointData().GetScalars()).reshape(h, w, -1)
        return np.ascontiguousarray(arr[::-1])

    def close(self) -> None:
        if self.render_window is not None:
            self.render_window.Finalize()
        self.render_window = None
