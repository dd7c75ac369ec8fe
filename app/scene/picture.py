"""Off-screen pictures of one entity-frame: the 3-D view plus a caption band (no Qt).

VTK renders through its off-screen context (EGL/Mesa here), so this runs without a display.
"""
from __future__ import annotations

import os
import sys

if sys.platform.startswith("linux") and not os.environ.get("DISPLAY"):
    # Go straight to the EGL window: trying X first without a display logs a warning on stderr.
    os.environ.setdefault("VTK_DEFAULT_OPENGL_WINDOW", "vtkEGLRenderWindow")

import numpy as np  # noqa: E402
import pyvista as pv  # noqa: E402
from PIL import Image  # noqa: E402

from resweep.app.scene.caption import band_layout, caption_lines, render_band  # noqa: E402
from resweep.app.scene.viewport import Viewport, ViewOptions  # noqa: E402

MIN_VIEW_H = 8  # pixels of 3-D view kept however small the picture


def pick_column(session, frame: int, entity_id=None) -> int:
    """Column of ``entity_id``, or by default the first diverged column at ``frame``, else the
    first active one. Raises ViewRequestError for an unknown id or a frame out of range."""
    session.check_frame(frame)
    if entity_id is None:
        return session.default_column(frame)
    return session.column_of(entity_id)


def render_picture(session, frame, entity_id=None, size=(1280, 720), options=ViewOptions(),
                   camera: str = "follow") -> np.ndarray:
    """uint8 (H, W, 3) picture of ``frame`` focused on ``entity_id`` (see :func:`pick_column`),
    caption band at the bottom; (W, H) = ``size`` exactly."""
    W, H = (int(v) for v in size)
    col = pick_column(session, frame, entity_id)
    state = session.frame_state(frame)
    lines = caption_lines(session, state, col)
    # The legend depends on what gets drawn, so lay out with the widest legend first and redo
    # the band (not the render) when the real one differs in rows.
    plotter = pv.Plotter(off_screen=True, window_size=(W, max(MIN_VIEW_H, H // 2)))
    try:
        vp = Viewport(plotter)
        vp.set_session(session)
        vp.show(state, col, options)
        layout = band_layout(W, H, lines, vp.legend)
        view_h = max(MIN_VIEW_H, H - layout.height)
        plotter.window_size = (W, view_h)
        vp.set_camera(camera)
        plotter.render()
        view = np.asarray(plotter.screenshot(return_img=True))[..., :3]
        legend = vp.legend
    finally:
        plotter.close()
    band = render_band(lines, W, layout, legend)
    out = np.zeros((H, W, 3), np.uint8)
    vh = min(view.shape[0], view_h)
    out[:vh, : min(W, view.shape[1])] = view[:vh, :W]  # guards a window the driver sized otherwise
    out[view_h:] = band[: H - view_h]
    return out


def save_png(img: np.ndarray, path) -> None:
    """Write uint8 (H, W, 3) ``img`` as PNG; OSError when the path cannot be written."""
    Image.fromarray(np.ascontiguousarray(img, np.uint8), "RGB").save(path, format="PNG")
