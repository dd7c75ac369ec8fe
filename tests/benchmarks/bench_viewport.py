"""Frame-step cost of the viewport against a bare render of the same scene (run on demand).

    /work/venv/bin/python tests/benchmarks/bench_viewport.py [--steps N] [--size WxH]

Cases, each the median over N steps, all measured in this one run:
- bare render: the meshes of one shown frame added once to a fresh off-screen plotter, then only a
  render per step (the floor no viewer can go under);
- step: ``Viewport.show`` of the next frame + ``render`` (frame states solved beforehand), for
  playback (consecutive frames, focus moving) and for scrubbing (random frames);
- show only: ``Viewport.show`` without the render;
- step + solve: ``session.frame_state`` (uncached) + show + render, what playback costs end to end.
Ratios are to the bare render's median; the machine is shared, so read ratios, not milliseconds.
"""
from __future__ import annotations

import argparse
import os
import statistics
import sys
import time
from pathlib import Path

if sys.platform.startswith("linux") and not os.environ.get("DISPLAY"):
    os.environ.setdefault("VTK_DEFAULT_OPENGL_WINDOW", "vtkEGLRenderWindow")

import numpy as np  # noqa: E402
import pyvista as pv  # noqa: E402

from resweep.core.analysis.frames import TraceSession  # noqa: E402
from resweep.app.scene.viewport import Viewport, ViewOptions  # noqa: E402

QUARRY = Path(__file__).resolve().parents[2] / "sample_traces" / "quarry.h5"
CLIMBER = 2  # walks 200+ frames across floor, stairs and the plank wall's chunk


def render(plotter):
    """One real draw: pyvista's ``Plotter.render`` skips drawing until the plotter was shown
    once, so the render window is driven directly, the same way for every case."""
    plotter.render_window.Render()


def timed(fn) -> float:
    t = time.perf_counter()
    fn()
    return time.perf_counter() - t


def bare_plotter(vp: Viewport, size):
    """A fresh plotter holding copies of the viewport's current meshes, same camera."""
    p = pv.Plotter(off_screen=True, window_size=size)
    for name, mesh in vp._meshes.items():
        actor = vp._actors[name]
        if not actor.GetVisibility():
            continue
        if name == "voxels":
            p.add_mesh(mesh.copy(), scalars="rgb", rgb=True, lighting=False, show_edges=True, reset_camera=False)
        else:
            prop = actor.GetProperty()
            p.add_mesh(mesh.copy(), color=prop.GetColor(), opacity=prop.GetOpacity(),
                       style="wireframe" if prop.GetRepresentation() == 1 else "surface",
                       line_width=prop.GetLineWidth(), reset_camera=False)
    p.camera.position = vp.plotter.camera.position
    p.camera.focal_point = vp.plotter.camera.focal_point
    p.camera.up = vp.plotter.camera.up
    p.renderer.ResetCameraClippingRange()
    return p


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--steps", type=int, default=120)
    ap.add_argument("--size", default="1280x720")
    args = ap.parse_args(argv)
    size = tuple(int(v) for v in args.size.split("x"))
    n = args.steps
    session = TraceSession(QUARRY)
    frames = list(range(20, 20 + n))
    states = {f: session.frame_state(f) for f in frames}  # solver kept out of the step timings
    rng = np.random.default_rng(7)
    scrub = rng.choice(frames, size=n)
    options = ViewOptions()

    plotter = pv.Plotter(off_screen=True, window_size=size)
    vp = Viewport(plotter)
    vp.set_session(session)
    vp.show(states[frames[0]], CLIMBER, options)
    render(plotter)
    for f in frames:  # warm every chunk mesh and the kernels, so steps measure steady state
        vp.show(states[f], CLIMBER, options)
    vp.show(states[frames[0]], CLIMBER, options)
    render(plotter)

    bare = bare_plotter(vp, size)
    render(bare)
    t_bare = [timed(lambda: render(bare)) for _ in range(n)]
    bare.close()

    def step(f):
        vp.show(states[f], CLIMBER, options)
        render(plotter)

    t_play = [timed(lambda f=f: step(f)) for f in frames]
    t_scrub = [timed(lambda f=f: step(int(f))) for f in scrub]
    t_show = [timed(lambda f=f: vp.show(states[f], CLIMBER, options)) for f in frames]
    session.set_settings(session.settings)  # empties the frame cache: every frame_state re-solves

    def solve_step(f):
        vp.show(session.frame_state(f), CLIMBER, options)
        render(plotter)

    t_solve = [timed(lambda f=f: solve_step(f)) for f in frames]
    plotter.close()
    session.close()

    base = statistics.median(t_bare)
    rows = [("bare render (same meshes, added once)", t_bare), ("step: show + render, playback", t_play),
            ("step: show + render, scrubbing", t_scrub), ("show only, playback", t_show),
            ("step + frame_state solve, playback", t_solve)]
    print(f"quarry.h5, climber, {n} steps, window {size[0]}x{size[1]}, "
          f"{len(vp._merged)} cached faces in reach, {vp.chunk_builds} chunk meshes built")
    print(f"{'case':<42}{'median ms':>10}{'p90 ms':>9}{'ratio':>8}")
    for name, t in rows:
        med = statistics.median(t)
        p90 = float(np.percentile(t, 90))
        print(f"{name:<42}{med * 1e3:>10.2f}{p90 * 1e3:>9.2f}{med / base:>8.2f}")


if __name__ == "__main__":
    main()
