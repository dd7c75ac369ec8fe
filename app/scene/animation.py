"""Animated pictures of a frame range of one entity (GIF through Pillow; no Qt).

Every frame is the same captioned picture as ``resweep snapshot`` (scene/picture.py), made with
one reused plotter; the camera is pointed at the first frame and then follows the entity, so the
motion reads as motion. MP4 is not written: it needs a video encoder this package does not ship.
"""
from __future__ import annotations

import os
import tempfile
from pathlib import Path

import numpy as np
from PIL import Image

from resweep.app.scene.picture import PictureMaker

MAX_FRAMES = 2000  # bounds memory: 2000 frames of 640x360 RGB are about 1.4 GB before palette coding


def render_frames(session, first: int, last: int, entity_id=None, size=(640, 360), on_frame=None,
                  cancelled=None) -> list[np.ndarray]:
    """uint8 (H, W, 3) pictures of frames ``first..last`` (inclusive) of ``entity_id``.

    ``on_frame(done, total)`` is called after each picture; ``cancelled()`` returning True stops
    early (the pictures so far are returned). ViewRequestError for a frame out of range.
    """
    session.check_frame(first)
    session.check_frame(last)
    if last < first:
        first, last = last, first
    frames = range(first, last + 1)
    if len(frames) > MAX_FRAMES:
        from resweep.core.analysis.frames import ViewRequestError
        raise ViewRequestError(session.path, f"{len(frames)} frames is more than {MAX_FRAMES} for one animation")
    out = []
    with PictureMaker(session, size, reframe=False) as maker:
        maker.lock_direction(key_frame(session, frames, entity_id), entity_id)
        for i, f in enumerate(frames):
            if cancelled is not None and cancelled():
                break
            out.append(maker.picture(f, entity_id))
            if on_frame is not None:
                on_frame(i + 1, len(frames))
    return out


def key_frame(session, frames, entity_id=None) -> int:
    """The frame of ``frames`` whose story the animation is seen from: the first with the worst
    severity of the entity's divergences (the first frame when none diverges)."""
    from resweep.app.scene.picture import pick_column
    from resweep.core.check.kinds import worst_rank
    best, best_rank = frames[0], 0
    for f in frames:
        st = session.frame_state(f)
        col = pick_column(session, f, entity_id)
        rank = worst_rank(st.rows.flags[col]) if st.active[col] else 0
        if rank > best_rank:
            best, best_rank = f, rank
    return best


def save_gif(pictures, path, fps: float = 30.0) -> None:
    """Write ``pictures`` (uint8 (H, W, 3) each, one size) as a looping GIF, atomically (temporary
    file beside ``path``, then rename). OSError when the folder cannot be written."""
    if not pictures:
        raise ValueError("no pictures to write")
    path = Path(path)
    imgs = [Image.fromarray(np.ascontiguousarray(p, np.uint8), "RGB") for p in pictures]
    # One palette for the whole animation (from up to 16 frames spread over it) keeps colours
    # from flickering between frames and keeps a role that appears late (e.g. crossed solid).
    pick = imgs[:: max(1, len(imgs) // 16)][:16]
    w, h = pick[0].size
    sheet = Image.new("RGB", (w, h * len(pick)))
    for i, im in enumerate(pick):
        sheet.paste(im, (0, i * h))
    pal = sheet.quantize(colors=255, method=Image.Quantize.MEDIANCUT)
    frames = [im.quantize(palette=pal, dither=Image.Dither.NONE) for im in imgs]
    fd, tmp = tempfile.mkstemp(prefix=path.name + ".", suffix=".tmp", dir=path.parent)
    os.close(fd)
    try:
        frames[0].save(tmp, format="GIF", save_all=True, append_images=frames[1:], loop=0,
                       duration=max(20, int(round(1000.0 / fps))), optimize=False)
        os.replace(tmp, path)
    finally:
        if os.path.exists(tmp):
            os.unlink(tmp)
