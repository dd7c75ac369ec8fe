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

from resweep.app.scene.caption import BandLayout, band_layout, caption_lines, render_band  # noqa: E402
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
    return compose(view, lines, legend, layout, (W, H))


def compose(view: np.ndarray, lines: list[str], legend, layout: BandLayout | None = None,
            size: tuple[int, int] | None = None) -> np.ndarray:
    """The picture: ``view`` uint8 (h, w, 3) above a caption band of ``lines`` and ``legend``.

    The one composer of captioned pictures (``resweep snapshot`` and the viewer's Save picture).
    ``layout`` defaults to a band sized for a picture a third taller than the view; ``size``
    (W, H) pads or crops the result to exactly that size. Returns uint8 (H, W, 3).
    """
    h, w = view.shape[:2]
    if layout is None:
        layout = band_layout(w, h + h // 3, lines, legend)
    band = render_band(lines, w, layout, legend)
    W, H = size if size is not None else (w, h + layout.height)
    top = max(0, H - layout.height)  # rows of the picture above the band
    out = np.zeros((H, W, 3), np.uint8)
    vh = min(h, top)
    out[:vh, : min(W, w)] = view[:vh, :W]  # guards a window the driver sized otherwise
    out[top:, : min(W, w)] = band[: H - top, :W]
    return out


def save_png(img: np.ndarray, path) -> None:
    """Write uint8 (H, W, 3) ``img`` as PNG; OSError when the path cannot be written."""
    Image.fromarray(np.ascontiguousarray(img, np.uint8), "RGB").save(path, format="PNG")
