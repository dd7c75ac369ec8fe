"""Colours and line styles of the viewport, one :class:`Style` per thing drawn.

The palette is our own. Roles are told apart by representation as well as colour (thin
wireframe / translucent solid / bold wireframe), so the three collider boxes stay readable in
a grey-scale print. Line roles are drawn unlit, so their pixels carry exactly the style colour
(the snapshot tests rely on that for the reference box).
"""
from __future__ import annotations

import colorsys
from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class Style:
    """How one role is drawn.

    Attributes:
        label: legend text.
        rgb: 0..255 ints.
        opacity: 0..1.
        representation: "surface", "wireframe" or "lines" (poly lines and points).
        line_width: pixels (wireframes and lines).
        lit: shade with the scene lights (surfaces); False draws the flat colour.
    """

    label: str
    rgb: tuple[int, int, int]
    opacity: float = 1.0
    representation: str = "surface"
    line_width: float = 1.0
    lit: bool = True

    @property
    def color(self) -> tuple[float, float, float]:
        """rgb as 0..1 floats (what pyvista wants)."""
        return tuple(c / 255.0 for c in self.rgb)


START = Style("box at frame start", (52, 56, 70), 1.0, "wireframe", 1.5, False)
RECORDED = Style("recorded end", (236, 112, 28), 0.42, "surface", 1.0, True)
REFERENCE = Style("reference end", (18, 96, 232), 1.0, "wireframe", 4.0, False)
SWEPT = Style("swept volume per pass", (132, 96, 210), 0.16, "surface", 1.0, True)
HIT_FACE = Style("hit face", (240, 38, 150), 0.6, "surface", 1.0, False)
NORMAL = Style("contact normal", (148, 16, 92), 1.0, "surface", 1.0, True)
SLIDE = Style("slide path", (16, 150, 92), 1.0, "lines", 3.0, False)
TRAIL = Style("recent centres", (96, 96, 108), 1.0, "lines", 1.5, False)
GAP = Style("gap to recorded end", (236, 112, 28), 1.0, "lines", 1.5, False)
OTHERS = Style("other entities", (250, 250, 252), 0.55, "surface", 1.0, True)
# Outlines drawn over the scene, so the ends and the hit face keep their exact colour in view.
RECORDED_EDGE = Style(RECORDED.label, RECORDED.rgb, 1.0, "wireframe", 2.5, False)
HIT_EDGE = Style(HIT_FACE.label, HIT_FACE.rgb, 1.0, "wireframe", 3.0, False)
GAP_TIP = Style(GAP.label, GAP.rgb, 1.0, "surface", 1.0, False)
# Per-kind roles (see scene/story.py).
CROSSED = Style("solid the straight recorded path crosses", (250, 200, 24), 1.0, "wireframe", 3.0, False)
PATH = Style("straight recorded path", (190, 60, 0), 1.0, "lines", 3.0, False)
OVERLAP = Style("overlap with solid", (206, 18, 40), 0.85, "surface", 1.0, False)
PREVIOUS = Style("recorded end of the previous frame", (84, 88, 104), 1.0, "wireframe", 2.5, False)
JUMP = Style("jump between frames", (0, 150, 160), 1.0, "lines", 3.0, False)
DIMENSION = Style("measured error (magnified view)", (24, 26, 32), 1.0, "lines", 2.0, False)

#: Scene background, bottom and top of the gradient.
BACKGROUND = ((214, 221, 229), (246, 247, 250))
#: Axis triad colours x, y, z (red/green/blue for x/y/z is common practice).
AXIS_RGB = ((200, 40, 40), (30, 150, 50), (40, 70, 210))

#: Material colours picked by a word in the block type's name (our own picks).
_NAMED = (
    ("stone", (128, 131, 137)), ("rock", (118, 120, 126)), ("dirt", (118, 84, 56)),
    ("grass", (92, 150, 70)), ("sand", (214, 198, 146)), ("gravel", (156, 148, 140)),
    ("plank", (222, 196, 138)), ("wood", (160, 118, 70)), ("fence", (112, 78, 46)),
    ("slab", (182, 172, 150)), ("water", (70, 120, 200)), ("glass", (190, 220, 230)),
)


def block_rgb(names, count: int) -> np.ndarray:
    """uint8 (count, 3) colour per block type: a material colour when the type's name names a
    known material, otherwise a generated hue (golden-ratio hue steps, common practice) so
    neighbouring type numbers differ. Type 0 (air) is never drawn."""
    out = np.zeros((count, 3), np.uint8)
    for t in range(count):
        name = names[t].lower() if t < len(names) else ""
        rgb = next((c for word, c in _NAMED if word in name), None)
        if rgb is None:
            h = (t * 0.618033988749895) % 1.0
            rgb = tuple(int(round(255 * v)) for v in colorsys.hsv_to_rgb(h, 0.35, 0.78))
        out[t] = rgb
    return out


def shade(rgb: np.ndarray, factor: np.ndarray) -> np.ndarray:
    """uint8 (n, 3) colours scaled by float (n,) factors, clipped to 0..255."""
    return np.clip(rgb.astype(np.float32) * factor[:, None], 0, 255).astype(np.uint8)
