"""Off-screen pictures of one entity-frame: the 3-D view plus a caption band (no Qt).

VTK renders through its off-screen context (EGL/Mesa here), so this runs without a display; the
render window is :class:`~resweep.app.scene.offscreen.OffscreenPlotter`'s (no pyvista).
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
from PIL import Image

from resweep.core.format.atomic import write_atomic

from resweep.app.scene.caption import BandLayout, band_layout, caption_lines, render_band
from resweep.app.scene.offscreen import OffscreenPlotter  # first: it picks the EGL window without a display
from resweep.app.scene.viewport import Viewport, ViewOptions

MIN_VIEW_H = 8  # pixels of 3-D view kept however small the picture


def pick_column(session, frame: int, entity_id=None) -> int:
    """Column of ``entity_id``, or by default the first diverged column at ``frame``, else the
    first active one. Raises ViewRequestError for an unknown id or a frame out of range."""
    session.check_frame(frame)
    if entity_id is None:
        return session.default_column(frame)
    return session.column_of(entity_id)


class PictureMaker:
    """Off-screen pictures of one session, reusing one plotter and its chunk meshes (a frame range
    renders much faster than one :func:`render_picture` per frame). Use as a context manager.

    The camera is pointed (``camera`` preset) for every picture; with ``reframe=False`` the
    direction of the first picture is kept for the later ones (an animation keeps one point of
    view while each frame's story is still framed whole). ``plotter_type(window_size=(W, H))``
    makes the plotter (default :class:`OffscreenPlotter`; pyvista's off-screen ``Plotter`` draws
    the same pixels, which the tests hold).
    """

    def __init__(self, session, size=(1280, 720), options=ViewOptions(), camera: str = "story",
                 reframe: bool = True, plotter_type=OffscreenPlotter):
        self.session = session
        self.size = tuple(int(v) for v in size)
        self.options = options
        self.camera = camera
        self.reframe = reframe
        W, H = self.size
        self.plotter = plotter_type(window_size=(W, max(MIN_VIEW_H, H // 2)))
        self.vp = Viewport(self.plotter)
        self.vp.enable_inset()
        self.vp.set_session(session)
        self._pointed = False

    def picture(self, frame, entity_id=None) -> np.ndarray:
        """uint8 (H, W, 3) picture of ``frame`` focused on ``entity_id`` (see :func:`pick_column`)."""
        W, H = self.size
        col = pick_column(self.session, frame, entity_id)
        state = self.session.frame_state(frame)
        vp, plotter = self.vp, self.plotter
        vp.show(state, col, self.options)
        lines = caption_lines(self.session, state, col, vp.story)
        # The legend depends on what gets drawn, so the band is laid out after the first show.
        layout = band_layout(W, H, lines, vp.legend)
        view_h = max(MIN_VIEW_H, H - layout.height)
        if tuple(plotter.render_window.GetSize()) != (W, view_h):
            plotter.render_window.SetSize(W, view_h)  # (pyvista's window_size setter would render as well)
        if not self.reframe and not self._pointed and vp.story is not None and vp.locked_dir is None:
            vp.locked_dir = np.asarray(vp.story.view_dir, np.float64)
        vp.set_camera(self.camera)
        self._pointed = True
        vp.show(state, col, self.options)  # again: the magnified view follows the final camera
        plotter.render()
        view = np.asarray(plotter.screenshot(return_img=True))[..., :3]
        return compose(view, lines, vp.legend, layout, (W, H))

    def lock_direction(self, frame, entity_id=None) -> None:
        """Keep the story direction of ``frame`` for every later picture."""
        from resweep.app.scene.story import tell_story
        col = pick_column(self.session, frame, entity_id)
        story = tell_story(self.session, self.session.frame_state(frame), col)
        if story is not None:
            self.vp.locked_dir = np.asarray(story.view_dir, np.float64)

    def close(self):
        self.plotter.close()

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()


def render_picture(session, frame, entity_id=None, size=(1280, 720), options=ViewOptions(),
                   camera: str = "story") -> np.ndarray:
    """uint8 (H, W, 3) picture of ``frame`` focused on ``entity_id`` (see :func:`pick_column`),
    caption band at the bottom; (W, H) = ``size`` exactly."""
    with PictureMaker(session, size, options, camera) as maker:
        return maker.picture(frame, entity_id)


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


#: Picture file types by file name suffix -> Pillow format name.
PICTURE_TYPES = {".png": "PNG", ".jpg": "JPEG", ".jpeg": "JPEG"}


def picture_type(path) -> str | None:
    """Pillow format for ``path``'s suffix (case-insensitive), or None when it is not one we write."""
    return PICTURE_TYPES.get(Path(path).suffix.lower())


def save_picture(img: np.ndarray, path) -> None:
    """Write uint8 (H, W, 3) ``img`` to ``path`` as its suffix says (PNG, or JPEG at quality 92),
    atomically; ValueError for another suffix, OSError when the path cannot be written."""
    fmt = picture_type(path)
    if fmt is None:
        raise ValueError(f"{path}: unknown picture type (use {', '.join(PICTURE_TYPES)})")
    im = Image.fromarray(np.ascontiguousarray(img, np.uint8), "RGB")
    opts = {"quality": 92} if fmt == "JPEG" else {}
    write_atomic(path, lambda fh: im.save(fh, format=fmt, **opts))

