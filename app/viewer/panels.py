"""Side panels of the viewer: Entities, Frame (the numbers) and Solver settings.

Panels write to the :class:`~resweep.app.playback.Playback` model and redraw from it; they never
talk to each other or to the viewport directly.
"""
from __future__ import annotations

import html

from PyQt6.QtCore import Qt, QTimer
from PyQt6.QtGui import QBrush, QColor
from PyQt6.QtWidgets import (QAbstractItemView, QCheckBox, QComboBox, QDoubleSpinBox, QFormLayout, QHeaderView,
                             QLabel, QPushButton, QSpinBox, QTableWidget, QTableWidgetItem, QTextBrowser,
                             QVBoxLayout, QWidget)

from resweep.core.check.kinds import KINDS, SEVERITY, SEVERITY_RANK, kinds_of, short, worst_rank
from resweep.core.errors import SettingsError
from resweep.core.solve.settings import PRECISIONS, SolverSettings

from resweep.app.viewer.playback import Playback
from resweep.app.viewer.report_md import FrameFacts, num
from resweep.app.viewer.flags import TraceFlags
from resweep.app.viewer.timeline import SEVERITY_COLOURS



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
                self.table.setItem(r, 2 + c, QTableWidgetItem(""))
        self._syncing = False
        self.refresh_counts()
        self._sync_focus()

    def schedule_refresh(self):
        if not self._refresh_timer.isActive():
            self._refresh_timer.start()

    def refresh_counts(self):
        if self.flags is None:
            return
        for r in range(len(self._ids)):
            counts = self.flags.counts(r)
            worst = 0
            for c, k in enumerate(KINDS):
                n = counts[k]
                it = self.table.item(r, 2 + c)
                it.setText(str(n) if n else "·")
                it.setTextAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
                rank = SEVERITY_RANK[SEVERITY[k]]
                it.setForeground(QBrush(SEVERITY_COLOURS[rank] if n else QColor("#5d6a74")))
                if n:
                    worst = max(worst, rank)
            self.table.item(r, self.ID).setForeground(QBrush(SEVERITY_COLOURS[worst] if worst else QColor("#d9e2e8")))
        total = int((self.flags.flags != 0).sum())
        done = int(self.flags.solved.sum())
        self.summary.setText(f"{len(self._ids)} entities · {total} diverging entity-frames"
                             + ("" if self.flags.complete else f" · {done}/{self.flags.frame_count} frames solved"))
        self._apply_filter()

    def show_frame(self, flags, active):
        """Mark who diverges at the current frame (bold, in its worst severity) and who is inactive
        (grey italics). flags int32 (N,), active bool (N,)."""
        for r in range(min(self.table.rowCount(), len(flags))):
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
        self.facts: FrameFacts | None = None
        self.show_facts(None)

    def show_facts(self, facts: FrameFacts | None, note: str = "", legend=()):
        """``legend``: (label, rgb 0..255) of what the viewport draws, shown under the numbers."""
        self.facts = facts
        self.setHtml(facts_html(facts, note) + legend_html(legend))


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
    """Fixed-width text of the numbers (what a copy from the panel gives): one line per quantity."""
    unit = "world units" + ("" if f.voxel_size == 1.0 else f", 1 voxel = {f.voxel_size:g}")
    out = [f"{'(' + unit + ')':<{LABEL_W}}" + "".join(f"{h:>{CELL_W}}" for h in ("x", "y", "z", "|v|"))]
    for label, v, length in f.vectors:
        cells = "".join(f"{num(x):>{CELL_W}}" for x in v)
        out.append(f"{label:<{LABEL_W}}{cells}" + (f"{num(length):>{CELL_W}}" if length is not None else ""))
    for k in f.kinds:
        out.append(f"{'error':<{LABEL_W}}{num(f.errors[k]):>{CELL_W}}  {k}")
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
    out = [head, f"<p>{chips} &nbsp; <span style='color:#7d8b96'>reference: {f.state}</span></p>",
           "<pre style='font-size:9pt'>" + html.escape("\n".join(facts_lines(f))) + "</pre>"]
    if note:
        out.append(f"<p style='color:#7d8b96'>{html.escape(note)}</p>")
    return "".join(out)


class SettingsPanel(QWidget):
    """Tolerance, skin, passes and precision of the reference solver; every change applies at once."""

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
        for w in (self.tolerance, self.skin, self.passes):
            w.setKeyboardTracking(False)  # apply on Enter / arrows, not on every keystroke
        self.defaults = QPushButton("Defaults", self)
        self.message = QLabel("", self)
        self.message.setWordWrap(True)
        self.message.setObjectName("dim")
        form = QFormLayout(self)
        form.setContentsMargins(6, 6, 6, 6)
        form.addRow("tolerance", self.tolerance)
        form.addRow("skin", self.skin)
        form.addRow("passes", self.passes)
        form.addRow("precision", self.precision)
        form.addRow("", self.defaults)
        form.addRow(self.message)
        self.tolerance.valueChanged.connect(self._changed)
        self.skin.valueChanged.connect(self._changed)
        self.passes.valueChanged.connect(self._changed)
        self.precision.currentIndexChanged.connect(self._changed)
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
            self.pb.update_settings(tolerance=round(self.tolerance.value(), 6), skin=round(self.skin.value(), 6),
                                    passes=int(self.passes.value()), precision=self.precision.currentText())
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
        self._syncing = False

