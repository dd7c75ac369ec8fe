"""The VTK-only off-screen plotter draws what pyvista's plotter draws, and snapshots load no pyvista.

The reference for every picture here is the same picture made on ``pyvista.Plotter`` (the
plotter the viewer and the rest of the scene tests use): equal pixel for pixel.
"""
from __future__ import annotations

import subprocess
import sys

import numpy as np
import pytest

import pyvista as pv  # a hard dependency: a broken install fails here, it does not skip

from resweep.app.scene.offscreen import OffscreenMesh, OffscreenPlotter
from resweep.app.scene.picture import PictureMaker
from resweep.core.analysis.frames import TraceSession

from paths import ROOT
from trace_factory import floor_world, write_rows

QUARRY = ROOT / "sample_traces" / "quarry.h5"


def pyvista_plotter(window_size):
    return pv.Plotter(off_screen=True, window_size=window_size)


def pictures(path, frames, entity, size, plotter_type):
    with TraceSession(path) as s, PictureMaker(s, size, plotter_type=plotter_type) as maker:
        out = [maker.picture(f, entity) for f in frames]
        return out, maker.vp.inset.visible


@pytest.mark.parametrize("frames, entity, size", [
    ((40, 41), 102, (480, 270)),    # tunneling through the plank wall, then the next frame (one plotter)
    ((100,), None, (640, 400)),     # default entity; a small error: the magnified view shows
    ((5,), 104, (333, 217)),        # the crate before it spawns: nothing solved, other entities only
])
def test_quarry_pictures_equal_pyvista_plotters(frames, entity, size):
    ours, inset = pictures(QUARRY, frames, entity, size, OffscreenPlotter)
    theirs, inset_pv = pictures(QUARRY, frames, entity, size, pyvista_plotter)
    assert inset == inset_pv
    for a, b in zip(ours, theirs):
        assert a.shape == b.shape == (size[1], size[0], 3)
        assert np.array_equal(a, b)


def test_magnified_view_picture_equals_pyvista_plotters(tmp_path):
    # A 0.05-voxel snag against the wall of tests/trace_factory.floor_world (test_story_pictures).
    start = np.array([[[6.0, 1.5, 4.0]]])
    ref = np.array([7.499, 1.5, 5.0])
    travel = (ref - start[0, 0]) / np.linalg.norm(ref - start[0, 0])
    path = write_rows(tmp_path / "snag.h5", start, np.array([[[2.0, 0.0, 1.0]]]),
                      (ref - 0.05 * travel)[None, None], world=floor_world())
    (ours,), inset = pictures(path, (0,), None, (640, 400), OffscreenPlotter)
    (theirs,), _ = pictures(path, (0,), None, (640, 400), pyvista_plotter)
    assert inset
    assert np.array_equal(ours, theirs)


def cells(mesh, get) -> list:
    arr = get(mesh)
    return [int(v) for v in pv.convert_array(arr.GetConnectivityArray())] + \
        [int(v) for v in pv.convert_array(arr.GetOffsetsArray())]


def test_offscreen_mesh_builds_the_cells_pyvista_builds():
    quads = np.arange(24, dtype=np.float32).reshape(8, 3)
    faces = np.array([[0, 1, 2, 3], [4, 5, 6, 7]])
    ours, theirs = OffscreenMesh.from_regular_faces(quads, faces), pv.PolyData.from_regular_faces(quads, faces)
    assert ours.points.dtype == theirs.points.dtype == np.float32
    assert np.array_equal(ours.points, theirs.points) and ours.n_points == theirs.n_points == 8
    assert cells(ours, lambda m: m.GetPolys()) == cells(theirs, lambda m: m.GetPolys())
    pts = np.array([[0.0, 0, 0], [1, 0, 0], [1, 1, 0]])
    ours, theirs = OffscreenMesh(np.zeros((2, 3)), lines=[2, 0, 1]), pv.PolyData(np.zeros((2, 3)), lines=[2, 0, 1])
    for m in (ours, theirs):
        m.points = pts
        m.lines = np.array([3, 0, 1, 2])
        m.verts = np.array([1, 0, 1, 1, 1, 2])
        m.cell_data["rgb"] = np.array([[1, 2, 3], [4, 5, 6], [7, 8, 9], [10, 11, 12]], np.uint8)
    for get in (lambda m: m.GetLines(), lambda m: m.GetVerts()):
        assert cells(ours, get) == cells(theirs, get)
    rgb = [pv.convert_array(m.GetCellData().GetArray("rgb")) for m in (ours, theirs)]
    assert np.array_equal(*rgb) and rgb[0].shape == (4, 3)
    copy = OffscreenMesh()
    copy.copy_from(ours)
    assert np.array_equal(copy.points, pts) and copy.GetNumberOfCells() == ours.GetNumberOfCells()


def test_a_snapshot_loads_neither_pyvista_nor_matplotlib(tmp_path):
    # In a fresh interpreter: this test process has imported pyvista itself.
    code = (
        "import sys\n"
        "from resweep.app.cli.main import main\n"
        f"status = main(['snapshot', {str(QUARRY)!r}, '--frame', '40', '--size', '160x120', "
        f"'-o', {str(tmp_path / 'x.png')!r}])\n"
        "real = [m for m, mod in sys.modules.items() if m.split('.')[0] in ('pyvista', 'matplotlib')"
        " and type(mod).__name__ == 'module']\n"
        "print(status, real)\n")
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=300)
    assert r.returncode == 0, r.stderr
    assert r.stdout.strip() == "0 []"
    assert (tmp_path / "x.png").stat().st_size > 0
