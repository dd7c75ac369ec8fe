"""The caption of a picture: what is shown (text lines) and the band they are drawn in (Pillow).

Band layout: text lines at the left, one every ``line_h`` pixels from ``pad``; the legend
(colour swatch + label per entry) flows in rows to the right of the widest text line.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from PIL import Image, ImageDraw, ImageFont

from resweep.core.check.kinds import SEVERITY

BAND_RGB = (30, 34, 42)
TEXT_RGB = (236, 238, 242)
DIM_RGB = (160, 166, 178)


def settings_line(settings) -> str:
    """The reference solver settings a picture was made with, in words."""
    return (f"reference: sweep and slide, {settings.passes} passes, skin {settings.skin:g}, "
            f"tolerance {settings.tolerance:g} voxels, {settings.precision}")


def caption_lines(session, state, col: int) -> list[str]:
    """Four lines: trace file and frame/time; entity id and name; divergence kinds with their
    errors (world units) and the first hit of the reference solve; the solver settings."""
    tr = session.trace
    last = tr.frame_count - 1
    lines = [f"{session.name}   frame {state.frame} of 0..{last}   t = {state.time:.3f} s"]
    who = f"entity {int(tr.ids[col])}"
    if tr.names[col] != who:  # traces without names call entities "entity <id>" already
        who += f" {tr.names[col]}"
    if not state.active[col]:
        lines.append(who + "   (not active at this frame)")
        lines.append("nothing solved")
        return lines + [settings_line(session.settings)]
    lines.append(who)
    kinds = state.kinds(col)
    if not kinds:
        lines.append(f"no divergence (tolerance {session.settings.tolerance:g} voxels)")
    else:
        parts = []
        for k, err in state.errors(col).items():
            parts.append(f"{k} [{SEVERITY[k]}]" + ("" if err is None else f" {err:.4f}"))
        lines.append(", ".join(parts))
    hit = np.flatnonzero(state.rows.block[col] >= 0)
    if len(hit) and not lines[-1].startswith("no "):
        k = int(hit[0])
        v = ", ".join(str(int(x)) for x in state.rows.voxel[col, k])
        lines[-1] += f"; reference stops at {session.world.shapes.name(int(state.rows.block[col, k]))} ({v})"
    return lines + [settings_line(session.settings)]


@dataclass(frozen=True)
class BandLayout:
    """Pixel layout of a caption band: font size, margin, line pitch, band height, and where the
    legend starts (x, and the text row it starts on: beside the text or below it)."""

    font_size: int
    pad: int
    line_h: int
    height: int
    legend_x: int = 0
    legend_row: int = 0

    def font(self):
        return ImageFont.load_default(size=self.font_size)

    def line_origin(self, i: int) -> tuple[int, int]:
        """Top-left of text line ``i``."""
        return self.pad, self.pad + i * self.line_h


def band_layout(width: int, height: int, lines: list[str], legend=()) -> BandLayout:
    """Layout of the band for a picture of ``width`` x ``height`` pixels (the band's share of the
    height included); the band takes at most half the picture. The legend goes right of the
    text, or below it when that makes the band lower."""
    fs = int(np.clip(round(height * 0.03), 10, 30))
    pad = max(3, fs // 2)
    line_h = int(round(fs * 1.3))
    base = BandLayout(fs, pad, line_h, 0)
    beside = pad + _text_width(base, lines) + 3 * fs
    n = len(lines)
    rows_beside = max(n, len(_legend_rows(base, width, beside, legend)))
    rows_below = n + len(_legend_rows(base, width, pad, legend))
    x, row0, rows = (beside, 0, rows_beside) if rows_beside <= rows_below else (pad, n, rows_below)
    return BandLayout(fs, pad, line_h, min(height // 2, 2 * pad + rows * line_h), x, row0)


def _text_width(layout: BandLayout, lines) -> int:
    font = layout.font()
    return max((int(np.ceil(font.getlength(t))) for t in lines), default=0)


def _legend_rows(layout: BandLayout, width: int, x0: int, legend) -> list[list]:
    """Legend entries (label, rgb, width) flowed into rows between ``x0`` and the right margin."""
    if not legend:
        return []
    font = layout.font()
    avail = max(width - x0 - layout.pad, 1)
    sw = layout.font_size
    rows, row, used = [], [], 0
    for label, rgb in legend:
        w = sw + 4 + int(np.ceil(font.getlength(label))) + sw
        if row and used + w > avail:
            rows.append(row)
            row, used = [], 0
        row.append((label, rgb, w))
        used += w
    rows.append(row)
    return rows


def render_band(lines: list[str], width: int, layout: BandLayout, legend=()) -> np.ndarray:
    """uint8 (layout.height, width, 3) band image: ``lines`` at the left, ``legend`` (label, rgb)
    entries where ``layout`` puts them. Rows that do not fit the band are cut off."""
    img = Image.new("RGB", (width, layout.height), BAND_RGB)
    draw = ImageDraw.Draw(img)
    font = layout.font()
    for i, text in enumerate(lines):
        draw.text(layout.line_origin(i), text, font=font, fill=TEXT_RGB)
    sw = layout.font_size
    for r, row in enumerate(_legend_rows(layout, width, layout.legend_x, legend)):
        x = layout.legend_x
        y = layout.pad + (layout.legend_row + r) * layout.line_h
        for label, rgb, w in row:
            top = y + (layout.line_h - sw) // 2 - 1
            draw.rectangle([x, top, x + sw - 1, top + sw - 1], fill=tuple(int(c) for c in rgb),
                           outline=(200, 200, 205))
            draw.text((x + sw + 4, y), label, font=font, fill=DIM_RGB)
            x += w
    return np.asarray(img, np.uint8)
