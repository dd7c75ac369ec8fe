"""The scrub bar along the bottom of the viewer: transport buttons, time ruler, divergence strip.

The strip marks every frame by the worst severity among the selected entities; at any trace
length each pixel column shows the worst of the frames it covers (:func:`results.bin_worst`), so
a single error frame in a million still shows. Zoom with the wheel, or drag with the right button
(or Shift + left) over a range; double-click the ruler to see the whole trace again.
"""
from __future__ import annotations

import functools
import math

import numpy as np
from PyQt6.QtCore import QElapsedTimer, QPointF, QRectF, Qt, QTimer, pyqtSignal
from PyQt6.QtGui import QColor, QIcon, QImage, QPainter, QPainterPath, QPen, QPixmap, QPolygonF
from PyQt6.QtWidgets import QComboBox, QHBoxLayout, QLabel, QSizePolicy, QToolButton, QVBoxLayout, QWidget

from resweep.core.check.kinds import KINDS, kind_mask

from resweep.app.viewer.playback import RATES, Playback
from resweep.app.viewer.flags import UNSOLVED, TraceFlags
from resweep.app.viewer.strip_model import StripBins

# The viewer's palette (our own): slate background, teal accent, severities warm to cool.
INK = QColor("#d9e2e8")
DIM = QColor("#7d8b96")
PANEL = QColor("#1c2329")
GROOVE = QColor("#262f37")
ACCENT = QColor("#36c2b4")
SEVERITY_COLOURS = {UNSOLVED: QColor("#3a444d"), 0: QColor("#2f5d50"), 1: QColor("#5aa9e6"),
                    2: QColor("#f2b134"), 3: QColor("#ef5b4c")}
FALLBACK_FPS = 60.0  # when /frames/time does not move (all equal), play at a common game rate


def draw_icon(name: str, colour: QColor = INK, size: int = 32) -> QIcon:
    """Transport and tool icons drawn with QPainter (no image files to ship)."""
    pm = QPixmap(size, size)
    pm.fill(Qt.GlobalColor.transparent)
    p = QPainter(pm)
    p.setRenderHint(QPainter.RenderHint.Antialiasing)
    p.scale(size / 32.0, size / 32.0)
    p.setPen(Qt.PenStyle.NoPen)
    p.setBrush(colour)

    def tri(x0, x1, y0=8, y1=24):
        p.drawPolygon(QPolygonF([QPointF(x0, y0), QPointF(x1, (y0 + y1) / 2), QPointF(x0, y1)]))

    if name == "play":
        tri(10, 25)
    elif name == "pause":
        p.drawRect(QRectF(9, 8, 5, 16))
        p.drawRect(QRectF(18, 8, 5, 16))
    elif name == "step_fwd":
        tri(9, 20)
        p.drawRect(QRectF(21, 8, 3, 16))
    elif name == "step_back":
        tri(23, 12)
        p.drawRect(QRectF(8, 8, 3, 16))
    elif name == "last":
        tri(5, 15)
        tri(15, 25)
        p.drawRect(QRectF(25, 8, 3, 16))
    elif name == "first":
        tri(27, 17)
        tri(17, 7)
        p.drawRect(QRectF(4, 8, 3, 16))
    elif name in ("next_div", "prev_div"):
        p.setBrush(SEVERITY_COLOURS[3])
        d = QPainterPath()
        cx = 11 if name == "next_div" else 21
        d.addPolygon(QPolygonF([QPointF(cx, 9), QPointF(cx + 6, 16), QPointF(cx, 23), QPointF(cx - 6, 16)]))
        p.drawPath(d)
        p.setBrush(colour)
        tri(20, 28, 10, 22) if name == "next_div" else tri(12, 4, 10, 22)
    elif name == "zoom_out":
        p.setPen(QPen(colour, 3))
        p.setBrush(Qt.BrushStyle.NoBrush)
        p.drawEllipse(QRectF(6, 6, 15, 15))
        p.drawLine(QPointF(19, 19), QPointF(27, 27))
        p.drawLine(QPointF(10, 13.5), QPointF(17, 13.5))
    elif name == "logo":  # a box sweeping past a wall: the tool's mark
        p.setBrush(QColor("#3a444d"))
        p.drawRoundedRect(QRectF(1, 1, 30, 30), 6, 6)
        p.setBrush(SEVERITY_COLOURS[3])
        p.drawRect(QRectF(18, 5, 4, 22))
        for i, a in enumerate((70, 130, 255)):
            c = QColor(ACCENT)
            c.setAlpha(a)
            p.setBrush(c)
            p.drawRect(QRectF(4 + 4 * i, 12, 8, 8))
    p.end()
    return QIcon(pm)


def nice_step(span: float, target: int) -> float:
    """Round tick step (1, 2 or 5 times a power of ten) giving about ``target`` ticks over ``span``."""
    if not span > 0 or target < 1:
        return 1.0
    raw = span / target
    mag = 10.0 ** math.floor(math.log10(raw))
    for m in (1.0, 2.0, 5.0, 10.0):
        if m * mag >= raw:
            return m * mag
    return 10.0 * mag


def time_label(t: float, step: float) -> str:
    """Seconds with as many decimals as the tick step needs; minutes once past a minute."""
    dec = max(0, min(4, -math.floor(math.log10(step)) if step < 1 else 0))
    if abs(t) >= 60:
        m, s = divmod(t, 60.0)
        return f"{int(m)}:{s:0{3 + dec if dec else 2}.{dec}f}"
    return f"{t:.{dec}f} s"


def _image_pixels(img: QImage) -> np.ndarray:
    """uint32 (height, width) view of a 32-bit ``img``'s own pixels: writes show in the image."""
    ptr = img.bits()
    ptr.setsize(img.sizeInBytes())
    return np.frombuffer(ptr, np.uint32).reshape(img.height(), img.bytesPerLine() // 4)[:, :img.width()]


@functools.cache
def _strip_columns() -> np.ndarray:
    """uint32 (5, STRIP_H): one pixel column of the strip per severity -1..3 (index severity + 1):
    the groove with a full-height bar for a divergence, a thin centred bar otherwise."""
    h = TimeStrip.STRIP_H
    out = np.full((5, h), GROOVE.rgb(), np.uint32)
    for v in range(UNSOLVED, 4):
        bar = h if v > 0 else int(round(h * 0.35))
        y = (h - bar) // 2
        out[v - UNSOLVED, y:y + bar] = SEVERITY_COLOURS[v].rgb()
    return out


class TimeStrip(QWidget):
    """Ruler, divergence strip and cursor over the visible frame range ``[view0, view1)``."""

    RULER_H, STRIP_H = 18, 22

    def __init__(self, playback: Playback, parent=None):
        super().__init__(parent)
        self.pb = playback
        self.flags: TraceFlags | None = None
        self.time = np.zeros(0)
        self.view0, self.view1 = 0, 1
        self._drag_select: tuple[int, int] | None = None
        self._scrubbing = False
        self.bins = StripBins()
        self._img: QImage | None = None
        self._img_px = None
        self.setMinimumHeight(self.RULER_H + self.STRIP_H + 8)
        self.setSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Fixed)
        self.setMouseTracking(True)
        self.setFocusPolicy(Qt.FocusPolicy.NoFocus)
        self.setToolTip("Click or drag to move; wheel zooms; right-drag (or Shift+drag) zooms to a range; "
                        "double-click shows the whole trace")

    def set_trace(self, time: np.ndarray, flags: TraceFlags):
        self.time = np.asarray(time, np.float64)
        self.flags = flags
        self.bins = StripBins(flags)
        self.reset_zoom()

    # -- coordinates --------------------------------------------------------------------------
    @property
    def frame_count(self) -> int:
        return len(self.time)

    def _x0x1(self):
        return 6.0, max(7.0, self.width() - 6.0)

    def frame_at(self, x: float) -> int:
        x0, x1 = self._x0x1()
        u = (x - x0) / (x1 - x0)
        f = self.view0 + math.floor(u * (self.view1 - self.view0))
        return int(min(max(f, self.view0), self.view1 - 1))

    def x_of(self, frame: float) -> float:
        """Left edge of ``frame``'s slot, pixels."""
        x0, x1 = self._x0x1()
        return x0 + (frame - self.view0) / max(1, self.view1 - self.view0) * (x1 - x0)

    def set_view(self, f0: int, f1: int):
        """Show frames ``[f0, f1)``, at least two frames wide, inside the trace."""
        n = self.frame_count
        f0, f1 = int(max(0, f0)), int(min(n, f1))
        if f1 - f0 < 2:
            mid = (f0 + f1) // 2
            f0, f1 = max(0, mid - 1), min(n, max(0, mid - 1) + 2)
        self.view0, self.view1 = f0, max(f0 + 1, f1)
        self.update()

    def reset_zoom(self):
        self.view0, self.view1 = 0, max(1, self.frame_count)
        self.update()

    @property
    def zoomed(self) -> bool:
        return (self.view0, self.view1) != (0, max(1, self.frame_count))

    def ensure_visible(self, frame: int):
        """Scroll (keeping the zoom) so that ``frame`` is on screen; used while playing."""
        w = self.view1 - self.view0
        if frame < self.view0 or frame >= self.view1:
            f0 = max(0, min(frame - w // 10, self.frame_count - w))
            self.set_view(f0, f0 + w)

    # -- painting -------------------------------------------------------------------------------
    def strip_values(self, pixels: int) -> np.ndarray:
        """Worst severity per pixel column over the visible range: int8 (pixels,)."""
        if self.flags is None or not self.frame_count:
            return np.full(pixels, UNSOLVED, np.int8)
        return self.flags.strip(pixels, self.view0, self.view1, self.pb.strip_columns, self.pb.kind)

    def _strip_image(self, pixels: int) -> QImage:
        """The strip as an image ``pixels`` wide, redrawn only where the flags changed since the
        last paint (a streamed block touches a few pixel columns; the image is kept and updated in
        place, so painting costs the same on any trace length)."""
        new_layout = self.bins.layout(pixels, self.view0, self.view1, self.pb.strip_columns, self.pb.kind)
        if new_layout or self._img is None or self._img.width() != pixels:
            self._img = QImage(max(1, pixels), self.STRIP_H, QImage.Format.Format_RGB32)
            self._img_px = _image_pixels(self._img)
            self.bins.invalidate()
        moved = self.bins.refresh()
        if moved is not None:
            i0, i1 = moved
            self._img_px[:, i0:i1] = _strip_columns()[self.bins.values[i0:i1] - UNSOLVED].T
        return self._img

    def paintEvent(self, event):
        p = QPainter(self)
        p.fillRect(self.rect(), PANEL)
        if not self.frame_count:
            p.setPen(DIM)
            p.drawText(self.rect(), Qt.AlignmentFlag.AlignCenter, "no trace open")
            return
        x0, x1 = self._x0x1()
        self._paint_ruler(p, x0, x1)
        top = self.RULER_H + 2
        p.drawImage(QPointF(x0, top), self._strip_image(int(x1 - x0)))
        if self._drag_select is not None:
            a, b = sorted(self._drag_select)
            sel = QColor(ACCENT)
            sel.setAlpha(70)
            p.fillRect(QRectF(self.x_of(a), 0, self.x_of(b + 1) - self.x_of(a), self.height()), sel)
        f = self.pb.frame
        if self.view0 <= f < self.view1:
            xa, xb = self.x_of(f), self.x_of(f + 1)
            xc = (xa + xb) / 2
            p.setPen(QPen(ACCENT, 2))
            p.drawLine(QPointF(xc, 2), QPointF(xc, self.height() - 2))
            p.setPen(Qt.PenStyle.NoPen)
            p.setBrush(ACCENT)
            p.drawPolygon(QPolygonF([QPointF(xc - 6, 0), QPointF(xc + 6, 0), QPointF(xc, 8)]))
        p.end()

    def _paint_ruler(self, p: QPainter, x0: float, x1: float):
        t = self.time
        ta, tb = t[self.view0], t[self.view1 - 1]
        p.setPen(DIM)
        fm = p.fontMetrics()
        if tb > ta:
            step = nice_step(tb - ta, max(1, int((x1 - x0) / 90)))
            k = math.ceil(ta / step)
            while k * step <= tb:
                tt = k * step
                f = self.view0 + int(np.searchsorted(t[self.view0:self.view1], tt))
                x = self.x_of(min(f, self.view1 - 1) + 0.5)
                p.drawLine(QPointF(x, self.RULER_H - 5), QPointF(x, self.RULER_H))
                p.drawText(QPointF(x + 3, self.RULER_H - 6), time_label(tt, step))
                k += 1
        right = f"frames {self.view0}-{self.view1 - 1}" if self.zoomed else f"{self.frame_count} frames"
        p.drawText(QPointF(x1 - fm.horizontalAdvance(right), fm.ascent()), right)

    # -- mouse ----------------------------------------------------------------------------------
    def _selecting(self, event) -> bool:
        return event.button() == Qt.MouseButton.RightButton or (
            event.button() == Qt.MouseButton.LeftButton and event.modifiers() & Qt.KeyboardModifier.ShiftModifier)

    def mousePressEvent(self, event):
        if not self.frame_count:
            return
        f = self.frame_at(event.position().x())
        if self._selecting(event):
            self._drag_select = (f, f)
        elif event.button() == Qt.MouseButton.LeftButton:
            self._scrubbing = True
            self.pb.set_playing(False)
            self.pb.set_frame(f)
        self.update()

    def mouseMoveEvent(self, event):
        if not self.frame_count:
            return
        f = self.frame_at(event.position().x())
        if self._drag_select is not None:
            self._drag_select = (self._drag_select[0], f)
            self.update()
        elif self._scrubbing:
            self.pb.set_frame(f)
        t = self.time[f]
        self.setToolTip(f"frame {f}  ·  {t:.4f} s")

    def mouseReleaseEvent(self, event):
        if self._drag_select is not None:
            a, b = sorted(self._drag_select)
            self._drag_select = None
            if b > a:
                self.set_view(a, b + 1)
            self.update()
        self._scrubbing = False

    def mouseDoubleClickEvent(self, event):
        self.reset_zoom()

    def wheelEvent(self, event):
        if not self.frame_count:
            return
        steps = event.angleDelta().y() / 120.0
        if not steps:
            return
        self.zoom(0.8 ** steps, self.frame_at(event.position().x()))

    def zoom(self, factor: float, around: int):
        """Scale the visible range by ``factor`` (< 1 zooms in) keeping frame ``around`` in place."""
        w = self.view1 - self.view0
        nw = int(min(self.frame_count, max(2, round(w * factor))))
        u = (around - self.view0) / max(1, w)
        f0 = int(round(around - u * nw))
        f0 = max(0, min(f0, self.frame_count - nw))
        self.set_view(f0, f0 + nw)


class Timeline(QWidget):
    """Transport row plus :class:`TimeStrip`; plays at the recorded rate times ``playback.rate``."""

    jumped = pyqtSignal(int)  # a divergence jump landed on this frame (the view frames its story)

    TIPS = {"first": "First frame (Home)", "prev_div": "Previous divergence (Shift+Left / P)",
            "step_back": "Step back (Left / ,)", "play": "Play / pause (Space)",
            "step_fwd": "Step forward (Right / .)", "next_div": "Next divergence (Shift+Right / N)",
            "last": "Last frame (End)", "zoom_out": "Show the whole trace (double-click the strip)"}

    def __init__(self, playback: Playback, parent=None):
        super().__init__(parent)
        self.pb = playback
        self.flags: TraceFlags | None = None
        self.strip = TimeStrip(playback, self)
        self._timer = QTimer(self)
        self._timer.setInterval(15)
        self._timer.timeout.connect(self._tick)
        self._clock = QElapsedTimer()
        self._play_t = 0.0
        self.buttons = {name: self._tool_button(name) for name in self.TIPS}
        self.rate_box = self._combo("Playback rate, times the recorded rate ([ and ])",
                                    [(f"×{r:g}", r) for r in RATES])
        self.kind_box = self._combo("Divergence kind marked on the strip and used by the jump buttons",
                                    [("every kind", None)] + [(k, k) for k in KINDS])
        self.position = QLabel("–", self)
        self.position.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        # A fixed size (set per trace in _show_position): a label whose size can change makes every
        # new frame number lay the window out anew.
        self.position.setFixedSize(230, self.position.sizeHint().height())
        self._position_for = None
        self._lay_out()
        self._connect()
        self.rate_box.setCurrentIndex(RATES.index(1.0))

    def _tool_button(self, name: str) -> QToolButton:
        b = QToolButton(self)
        b.setIcon(draw_icon(name))
        b.setToolTip(self.TIPS[name])
        b.setAutoRaise(True)
        b.setFocusPolicy(Qt.FocusPolicy.NoFocus)
        return b

    def _combo(self, tip: str, items) -> QComboBox:
        box = QComboBox(self)
        for text, data in items:
            box.addItem(text, data)
        box.setToolTip(tip)
        box.setFocusPolicy(Qt.FocusPolicy.NoFocus)
        return box

    def _lay_out(self):
        """Transport buttons, rate, kind filter and position in one row above the strip."""
        row = QHBoxLayout()
        row.setContentsMargins(4, 2, 4, 0)
        row.setSpacing(2)
        for name in self.TIPS:
            if name != "zoom_out":
                row.addWidget(self.buttons[name])
        row.addSpacing(8)
        row.addWidget(self.rate_box)
        row.addWidget(QLabel("jump to", self))
        row.addWidget(self.kind_box)
        row.addSpacing(8)
        row.addWidget(self.position)
        row.addStretch(1)
        row.addWidget(self.buttons["zoom_out"])
        lay = QVBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 2)
        lay.setSpacing(0)
        lay.addLayout(row)
        lay.addWidget(self.strip)

    def _connect(self):
        b = self.buttons
        b["first"].clicked.connect(self.pb.first)
        b["last"].clicked.connect(self.pb.last)
        b["step_back"].clicked.connect(lambda: self.pb.step(-1))
        b["step_fwd"].clicked.connect(lambda: self.pb.step(1))
        b["play"].clicked.connect(self.pb.toggle_play)
        b["next_div"].clicked.connect(lambda: self.jump(+1))
        b["prev_div"].clicked.connect(lambda: self.jump(-1))
        b["zoom_out"].clicked.connect(self.strip.reset_zoom)
        self.rate_box.currentIndexChanged.connect(lambda i: self.pb.set_rate(self.rate_box.itemData(i)))
        self.kind_box.currentIndexChanged.connect(lambda i: self.pb.set_kind(self.kind_box.itemData(i)))
        self.pb.subscribe(self._on_playback)

    def set_trace(self, time: np.ndarray, flags: TraceFlags):
        self.flags = flags
        self.strip.set_trace(time, flags)
        self._show_position()

    # -- divergence jumps -----------------------------------------------------------------------
    def jump(self, direction: int, any_entity: bool = False) -> int | None:
        """Move to the next (+1) or previous (-1) divergence of the filter kind of the focused entity
        (of the strip's entities when none is focused, or with ``any_entity``; the focus then moves
        to the first entity diverging there). Returns the frame, or None when there is none."""
        if self.flags is None:
            return None
        own = self.pb.focus is not None and not any_entity
        cols = (self.pb.focus,) if own else self.pb.strip_columns
        fn = self.flags.next_divergence if direction > 0 else self.flags.previous_divergence
        f = fn(self.pb.frame, cols, self.pb.kind)
        if f is not None:
            self.pb.set_playing(False)
            self.pb.set_frame(f)
            if not own:
                hit = [c for c in cols if self.flags.flags[f, c] & kind_mask(self.pb.kind)]
                if hit:
                    self.pb.set_focus(hit[0])
            self.jumped.emit(f)
        return f

    # -- playback -------------------------------------------------------------------------------
    def _on_playback(self, event, pb):
        if event == "play":
            self.buttons["play"].setIcon(draw_icon("pause" if pb.playing else "play"))
            if pb.playing:
                t = self.strip.time
                moving = len(t) > 1 and t[-1] > t[0]
                self._play_t = float(t[pb.frame]) if moving else float(pb.frame)
                self._clock.start()
                self._timer.start()
            else:
                self._timer.stop()
        elif event == "rate":
            i = self.rate_box.findData(pb.rate)
            if i >= 0 and i != self.rate_box.currentIndex():
                self.rate_box.setCurrentIndex(i)
        elif event == "filter":
            i = self.kind_box.findData(pb.kind)
            if i != self.kind_box.currentIndex():
                self.kind_box.setCurrentIndex(i)
            self.strip.update()
        elif event in ("frame", "trace"):
            if pb.playing:
                self.strip.ensure_visible(pb.frame)
            self._show_position()
        self.strip.update()

    def _tick(self):
        """Advance by wall-clock time times the rate, following the recorded /frames/time."""
        t = self.strip.time
        elapsed = self._clock.restart() / 1000.0
        if len(t) < 2:
            self.pb.set_playing(False)
            return
        if t[-1] > t[0]:
            self._play_t += elapsed * self.pb.rate
            f = int(np.searchsorted(t, self._play_t, side="right")) - 1
            f = max(f, self.pb.frame)  # never step backward while playing (repeated times)
        else:
            self._play_t += elapsed * self.pb.rate * FALLBACK_FPS
            f = int(self._play_t)
        if f >= len(t) - 1:
            self.pb.set_frame(len(t) - 1)
            self.pb.set_playing(False)
        elif f != self.pb.frame:
            self.pb.set_frame(f)

    def _show_position(self):
        t = self.strip.time
        if not len(t):
            self.position.setText("–")
            return
        f = self.pb.frame
        text = "frame {} / {}    t = {:.4f} s"
        n = len(t) - 1
        if self._position_for != (n, t[0], t[-1]):  # wide enough for this trace's longest text
            self._position_for = (n, t[0], t[-1])
            lo, hi = float(np.nanmin(t)), float(np.nanmax(t))
            widest = max((text.format(n, n, v) for v in (lo, hi) if np.isfinite(v)), key=len, default="")
            digits = "".join("8" if ch.isdigit() else ch for ch in widest)
            fm = self.position.fontMetrics()
            self.position.setFixedWidth(max(230, fm.horizontalAdvance(digits) + 8))
        self.position.setText(text.format(f, n, t[f]))
