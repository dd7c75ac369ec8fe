"""Side panels of the viewer: Entities, Frame (the numbers) and Solver settings.

Panels write to the :class:`~resweep.app.playback.Playback` model and redraw from it; they never
talk to each other or to the viewport directly.
"""
from __future__ import annotations

import functools
import html

import numpy as np

from PyQt6.QtCore import Qt, QTimer
from PyQt6.QtGui import QBrush, QColor, QTextCursor
from PyQt6.QtWidgets import (QAbstractItemView, QCheckBox, QComboBox, QDoubleSpinBox, QFormLayout, QHeaderView,
                             QLabel, QPushButton, QSpinBox, QTableWidget, QTableWidgetItem, QTextBrowser,
                             QVBoxLayout, QWidget)

from resweep.core.check.kinds import KINDS, SEVERITY, SEVERITY_RANK, kinds_of, short, worst_rank
from resweep.core.errors import SettingsError
from resweep.core.solve.settings import MODELS, PRECISIONS, STEPPING_MODELS, SolverSettings

from resweep.app.viewer.playback import Playback
from resweep.app.viewer.report_md import INPUT_ROWS, FrameFacts, cells, num
from resweep.app.viewer.flags import TraceFlags
from resweep.app.viewer.timeline import SEVERITY_COLOURS



_RIGHT = Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter
_KIND_RANKS = [SEVERITY_RANK[SEVERITY[k]] for k in KINDS]
_ZERO, _PLAIN = "#5d6a74", "#d9e2e8"  # a zero count; an id with no divergence


@functools.cache
def _brush(key) -> QBrush:
    """One shared brush per severity rank (1..3) or colour name (made once, not per cell)."""
    return QBrush(SEVERITY_COLOURS[key] if isinstance(key, int) else QColor(key))


class EntitiesPanel(QWidget):
    """Table of entities with divergence counts per kind; the current row is the focused entity,
    the selected rows are the entities the timeline strip summarises."""

    ID, NAME = 0, 1

    def __init__(self, playback: Playback, parent=None):
        super().__init__(parent)
        self.pb = playback
        self.flags: TraceFlags | None = None
        self._ids: list[int] = []
        self._syncing = False
        self._shown = None
        self._frame_rows = None  # (flags, active) of the frame shown by show_frame
        self.table = QTableWidget(0, 2 + len(KINDS), self)
        self.table.setObjectName("entities")
        for c, text in enumerate(["id", "name"] + [short(k) for k in KINDS]):
            item = QTableWidgetItem(text)
            if c >= 2:
                kind = KINDS[c - 2]
                item.setToolTip(f"{kind} ({SEVERITY[kind]}): entity-frames flagged")
            self.table.setHorizontalHeaderItem(c, item)
        self.table.verticalHeader().hide()
        self.table.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
        self.table.setSelectionMode(QAbstractItemView.SelectionMode.ExtendedSelection)
        self.table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        hh = self.table.horizontalHeader()
        hh.setMinimumSectionSize(24)
        hh.setSectionResizeMode(QHeaderView.ResizeMode.Fixed)
        hh.setSectionResizeMode(self.NAME, QHeaderView.ResizeMode.Stretch)
        fm = self.table.fontMetrics()
        self.table.setColumnWidth(self.ID, 44)
        for c, k in enumerate(KINDS):
            self.table.setColumnWidth(2 + c, max(34, fm.horizontalAdvance(short(k)) + 16))
        self.table.verticalHeader().setDefaultSectionSize(24)
        self.only_diverging = QCheckBox("diverging only", self)
        self.only_diverging.setToolTip("Hide entities with no divergence (so far)")
        self.only_diverging.toggled.connect(self._apply_filter)
        self.summary = QLabel("", self)
        self.summary.setObjectName("dim")
        lay = QVBoxLayout(self)
        lay.setContentsMargins(4, 4, 4, 4)
        lay.addWidget(self.only_diverging)
        lay.addWidget(self.table, 1)
        lay.addWidget(self.summary)
        self.table.currentCellChanged.connect(self._on_current)
        self.table.itemSelectionChanged.connect(self._on_selection)
        self._refresh_timer = QTimer(self)  # counts refresh at most 5 times a second while streaming
        self._refresh_timer.setSingleShot(True)
        self._refresh_timer.setInterval(200)
        self._refresh_timer.timeout.connect(self.refresh_counts)
        playback.subscribe(self._on_playback)

    def set_trace(self, ids, names, flags: TraceFlags):
        self.flags = flags
        self._shown = None  # counts on screen, int64 (N, kinds)
        self._frame_rows = None
        self._ids = [int(i) for i in ids]
        self._syncing = True
        self.table.setRowCount(len(self._ids))
        for r, (eid, name) in enumerate(zip(self._ids, names)):
            it = QTableWidgetItem()
            it.setData(Qt.ItemDataRole.DisplayRole, eid)
            it.setData(Qt.ItemDataRole.UserRole, r)
            self.table.setItem(r, self.ID, it)
            self.table.setItem(r, self.NAME, QTableWidgetItem(str(name)))
            for c in range(len(KINDS)):
                cell = QTableWidgetItem("")
                cell.setTextAlignment(_RIGHT)
                self.table.setItem(r, 2 + c, cell)
        self._syncing = False
        self.refresh_counts()
        self._sync_focus()

    def schedule_refresh(self):
        if not self._refresh_timer.isActive():
            self._refresh_timer.start()

    def refresh_counts(self):
        """Show the counts so far; only the cells whose counts moved since the last call are
        touched (the counts themselves are kept up to date block by block by ``TraceFlags``; while
        a re-solve streams, most rows move between calls, so the work per cell is kept small)."""
        if self.flags is None:
            return
        table = self.flags.count_table()
        shown = self._shown
        if shown is None or shown.shape != table.shape:
            rs, cs = np.nonzero(np.ones(table.shape, bool))
        else:
            rs, cs = np.nonzero(table != shown)
        changed = np.unique(rs)
        for r, c in zip(rs.tolist(), cs.tolist()):
            self._show_count(r, c, int(table[r, c]))
        for r in changed.tolist():
            self._show_worst(r, table[r])
        self._shown = table.copy()
        done = self.flags.solved_count
        self.summary.setText(f"{len(self._ids)} entities · {self.flags.diverging_count} diverging entity-frames"
                             + ("" if self.flags.complete else f" · {done}/{self.flags.frame_count} frames solved"))
        if len(changed) or shown is None:
            self._apply_filter()

    def _show_count(self, r: int, c: int, n: int):
        it = self.table.item(r, 2 + c)
        it.setText(str(n) if n else "·")
        it.setForeground(_brush(_KIND_RANKS[c] if n else _ZERO))

    def _show_worst(self, r: int, counts):
        """The id in the colour of the entity's worst severity so far."""
        worst = max((_KIND_RANKS[c] for c in np.flatnonzero(counts).tolist()), default=0)
        self.table.item(r, self.ID).setForeground(_brush(worst if worst else _PLAIN))

    def show_frame(self, flags, active):
        """Mark who diverges at the current frame (bold, in its worst severity) and who is inactive
        (grey italics). flags int32 (N,), active bool (N,). Only rows whose flags or activity
        differ from the frame shown before are touched (a step changes a few rows of many)."""
        n = min(self.table.rowCount(), len(flags))
        flags = np.asarray(flags)[:n]
        active = np.asarray(active, bool)[:n]
        seen = self._frame_rows
        if seen is None or len(seen[0]) != n:
            rows = range(n)
        else:
            rows = np.flatnonzero((seen[0] != flags) | (seen[1] != active))
        self._frame_rows = (flags.copy(), active.copy())
        for r in rows:
            r = int(r)
            it = self.table.item(r, self.NAME)
            kinds = kinds_of(flags[r]) if active[r] else []
            worst = worst_rank(flags[r]) if active[r] else 0
            font = it.font()
            font.setBold(bool(kinds))
            font.setItalic(not active[r])
            it.setFont(font)
            colour = SEVERITY_COLOURS[worst] if kinds else QColor("#d9e2e8" if active[r] else "#5d6a74")
            it.setForeground(QBrush(colour))
            it.setToolTip("this frame: " + (", ".join(kinds) if kinds else "agrees" if active[r] else "inactive"))

    def _apply_filter(self):
        div = self.flags.diverging_columns() if self.flags is not None else None
        for r in range(self.table.rowCount()):
            hide = self.only_diverging.isChecked() and div is not None and not div[r] and r != self.pb.focus
            self.table.setRowHidden(r, bool(hide))

    def _on_current(self, row, *_):
        if not self._syncing and row >= 0:
            self.pb.set_focus(row)

    def _on_selection(self):
        if not self._syncing:
            rows = {i.row() for i in self.table.selectedItems()}
            self.pb.set_selection(rows if len(rows) > 1 else ())

    def _on_playback(self, event, pb):
        if event in ("focus", "trace"):
            self._sync_focus()

    def _sync_focus(self):
        f = self.pb.focus
        if f is None or f >= self.table.rowCount() or self.table.currentRow() == f:
            return
        self._syncing = True
        self.table.setCurrentCell(f, self.ID)
        self._syncing = False


class FramePanel(QTextBrowser):
    """The focused entity's numbers at the current frame; selectable and copyable text."""

    def __init__(self, parent=None):
        super().__init__(parent)
        self.setObjectName("frame_panel")
        self.setOpenLinks(False)
        self.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse
                                     | Qt.TextInteractionFlag.TextSelectableByKeyboard)
        self.document().setUndoRedoEnabled(False)  # replaced on every frame: no history to keep
        self.facts: FrameFacts | None = None
        self.setHtml(facts_html(None))

    def show_facts(self, facts: FrameFacts | None, note: str = "", legend=()):
        """``legend``: (label, rgb 0..255) of what the viewport draws, shown under the numbers."""
        self.facts = facts
        # Replaced in one edit block: setHtml first empties the document, so on every frame step
        # the scroll bars hid and showed again and the window laid itself out anew (2 ms a step).
        c = QTextCursor(self.document())
        c.beginEditBlock()
        c.select(QTextCursor.SelectionType.Document)
        c.insertHtml(facts_html(facts, note) + legend_html(legend))
        c.endEditBlock()


def legend_html(legend) -> str:
    if not legend:
        return ""
    items = " &nbsp; ".join(f"<span style='color:#{r:02x}{g:02x}{b:02x}'>&#9632;</span>&nbsp;"
                            f"{html.escape(label).replace(' ', '&nbsp;')}"
                            for label, (r, g, b) in legend)
    return f"<p style='color:#aab6bf'>{items}</p>"


def _chip(kind: str) -> str:
    c = SEVERITY_COLOURS[SEVERITY_RANK[SEVERITY[kind]]].name()
    return f"<span style='background:{c}; color:#11161a'>&nbsp;{kind}&nbsp;</span>"


LABEL_W, CELL_W = 14, 11


def facts_lines(f: FrameFacts) -> list[str]:
    """Fixed-width text of the numbers (what a copy from the panel gives): one line per quantity.
    Columns widen to the longest number (far from the origin, e.g. 65536.123456), so they never
    run together; NaN values show as NaN and a line names the fields that hold them."""
    unit = "world units" + ("" if f.voxel_size == 1.0 else f", 1 voxel = {f.voxel_size:g}")
    texts = [c for label, v, _ in f.vectors for c in cells(label, v)] + [num(n) for _, _, n in f.vectors if n is not None]
    w = max([CELL_W] + [len(c) + 2 for c in texts])
    out = [f"{'(' + unit + ')':<{LABEL_W}}" + "".join(f"{h:>{w}}" for h in ("x", "y", "z", "|v|"))]
    nan_fields = []
    for label, v, length in f.vectors:
        row = "".join(f"{c:>{w}}" for c in cells(label, v))
        out.append(f"{label:<{LABEL_W}}{row}" + (f"{num(length):>{w}}" if length is not None else ""))
        bad = [a for a, x in zip("xyz", v) if np.isnan(x)]
        if bad and label in INPUT_ROWS:
            nan_fields.append(f"{label} {', '.join(bad)}")
    if nan_fields:
        out.append("NaN in: " + "; ".join(nan_fields))
    for k in f.kinds:
        if k == "invalid":
            out.append(f"{'invalid':<{LABEL_W}}{f.invalid}")
        else:
            out.append(f"{'error':<{LABEL_W}}{num(f.errors[k]):>{w}}  {k}")
    if f.step:
        out.append(f"{'step-up':<{LABEL_W}}{f.step}")
    if f.passes:
        out += ["", "pass toi        normal    hit voxel   block        tested",
                "     (toi: time of impact, fraction of the pass's motion)"]
        for p in f.passes:
            vox = " ".join(str(x) for x in p.voxel) if p.voxel is not None else "-"
            nrm = " ".join(f"{x:+d}" for x in p.normal)
            out.append(f"{p.index:<5}{num(p.toi):<11}{nrm:<10}{vox:<12}{p.block[:12]:<12}{p.candidates:>7}")
    return out


def facts_html(f: FrameFacts | None, note: str = "") -> str:
    """The Frame panel's HTML: a header with the kinds, then the numbers as preformatted text."""
    if f is None:
        return f"<p style='color:#7d8b96'>{html.escape(note or 'Focus an entity to see its numbers.')}</p>"
    head = (f"<p><b>{f.entity_id}</b> {html.escape(f.name)} &nbsp; <span style='color:#7d8b96'>frame {f.frame} "
            f"· t = {f.time:.6f} s</span></p>")
    if not f.active:
        return head + "<p>inactive at this frame (no row recorded)</p>"
    chips = " ".join(_chip(k) for k in f.kinds) if f.kinds else "<span style='color:#2f9d7f'>agrees</span>"
    why = f" &nbsp; <b>{html.escape(f.invalid)}</b>" if f.invalid else ""
    out = [head, f"<p>{chips}{why} &nbsp; <span style='color:#7d8b96'>reference: {f.state}</span></p>",
           "<pre style='font-size:9pt'>" + html.escape("\n".join(facts_lines(f))) + "</pre>"]
    if note:
        out.append(f"<p style='color:#7d8b96'>{html.escape(note)}</p>")
    return "".join(out)


class SettingsPanel(QWidget):
    """Model, tolerance, skin, passes, the models' own parameters and precision of the reference
    solver; every change applies at once (parameters a model does not use are disabled)."""

    def __init__(self, playback: Playback, parent=None):
        super().__init__(parent)
        self.pb = playback
        self._syncing = False
        self.tolerance = self._voxels(10.0, 0.005, "Recorded and reference ends closer than this agree (voxels)")
        self.skin = self._voxels(0.4999, 0.001, "Gap kept between the box and a hit face (voxels)")
        self.passes = QSpinBox(self)
        self.passes.setRange(1, 8)
        self.passes.setToolTip("Sweep-and-slide passes per frame")
        self.precision = QComboBox(self)
        self.precision.addItems(PRECISIONS)
        self.precision.setToolTip("Arithmetic of the reference solve")
        self.model = QComboBox(self)
        self.model.addItems(list(MODELS))
        self.model.setToolTip("Reference model: sweep and slide, per-axis clipping, or move then push out")
        self.axis_order = QComboBox(self)
        self.axis_order.addItems(["up first", "xyz", "xzy", "yxz", "yzx", "zxy", "zyx"])
        self.axis_order.setToolTip("Axis model: order in which the axes are clipped")
        self.substep = self._voxels(1000.0, 0.25, "Push-out model: substep length, 0 = one move (voxels)")
        self.iterations = QSpinBox(self)
        self.iterations.setRange(1, 32)
        self.iterations.setToolTip("Push-out model: push-out rounds after each (sub)step")
        self.step_height = self._voxels(4.0, 0.1, "Slide and axis models: step-up height, 0 = off (voxels)")
        for w in (self.tolerance, self.skin, self.passes, self.substep, self.iterations, self.step_height):
            w.setKeyboardTracking(False)  # apply on Enter / arrows, not on every keystroke
        self.defaults = QPushButton("Defaults", self)
        self.message = QLabel("", self)
        self.message.setWordWrap(True)
        self.message.setObjectName("dim")
        form = QFormLayout(self)
        form.setContentsMargins(6, 6, 6, 6)
        form.addRow("model", self.model)
        form.addRow("tolerance", self.tolerance)
        form.addRow("skin", self.skin)
        form.addRow("passes", self.passes)
        form.addRow("axis order", self.axis_order)
        form.addRow("substep", self.substep)
        form.addRow("iterations", self.iterations)
        form.addRow("step height", self.step_height)
        form.addRow("precision", self.precision)
        form.addRow("", self.defaults)
        form.addRow(self.message)
        self.tolerance.valueChanged.connect(self._changed)
        self.skin.valueChanged.connect(self._changed)
        self.passes.valueChanged.connect(self._changed)
        self.precision.currentIndexChanged.connect(self._changed)
        for w in (self.substep, self.iterations, self.step_height):
            w.valueChanged.connect(self._changed)
        self.model.currentIndexChanged.connect(self._changed)
        self.axis_order.currentIndexChanged.connect(self._changed)
        self.defaults.clicked.connect(lambda: self.pb.set_settings(SolverSettings()))
        playback.subscribe(self._on_playback)
        self._sync()

    def _voxels(self, top: float, step: float, tip: str) -> QDoubleSpinBox:
        box = QDoubleSpinBox(self)
        box.setRange(0.0, top)
        box.setDecimals(4)
        box.setSingleStep(step)
        box.setSuffix(" vox")
        box.setToolTip(tip)
        return box

    def _changed(self, *_):
        if self._syncing:
            return
        try:
            model = self.model.currentText()
            order = self.axis_order.currentText()
            self.pb.update_settings(tolerance=round(self.tolerance.value(), 6), skin=round(self.skin.value(), 6),
                                    passes=int(self.passes.value()), precision=self.precision.currentText(),
                                    model=model, axis_order=None if order == "up first" else order,
                                    substep=round(self.substep.value(), 6), iterations=int(self.iterations.value()),
                                    step_height=round(self.step_height.value(), 6) if model in STEPPING_MODELS else 0.0)
        except SettingsError as exc:
            self.message.setText(str(exc))
            return
        self.message.setText("")

    def _on_playback(self, event, pb):
        if event == "settings":
            self._sync()

    def _sync(self):
        s = self.pb.settings
        self._syncing = True
        self.tolerance.setValue(s.tolerance)
        self.skin.setValue(s.skin)
        self.passes.setValue(s.passes)
        self.precision.setCurrentText(s.precision)
        self.model.setCurrentText(s.model)
        self.axis_order.setCurrentText(s.axis_order or "up first")
        self.substep.setValue(s.substep)
        self.iterations.setValue(s.iterations)
        self.step_height.setValue(s.step_height)
        self.passes.setEnabled(s.model == "slide")
        self.axis_order.setEnabled(s.model == "axis")
        self.substep.setEnabled(s.model == "pushout")
        self.iterations.setEnabled(s.model == "pushout")
        self.step_height.setEnabled(s.model in STEPPING_MODELS)
        self._syncing = False

