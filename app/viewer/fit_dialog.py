"""The viewer's "Fit solver model" dialog: runs ``explain`` on the open trace off the GUI thread,
lists the ranking, and applies the chosen model to the solver settings."""
from __future__ import annotations

import threading
from dataclasses import replace

from PyQt6.QtCore import QObject, pyqtSignal
from PyQt6.QtWidgets import (QAbstractItemView, QDialog, QDialogButtonBox, QHeaderView, QLabel, QTableWidget,
                             QTableWidgetItem, QVBoxLayout)

from resweep.core.analysis.explain import explain_trace, model_label
from resweep.core.format.reader import open_trace

from resweep.app.viewer.worker import error_line

COLUMNS = ("model", "agree", "rows", "ties")


class _Relay(QObject):
    done = pyqtSignal(object)
    failed = pyqtSignal(str)


class FitDialog(QDialog):
    """Ranking of the model family on ``path``; Apply sets the selected model on ``playback``
    (tolerance and precision are kept; the skin becomes the estimated one)."""

    def __init__(self, path: str, playback, parent=None):
        super().__init__(parent)
        self.setWindowTitle("Fit solver model")
        self.pb = playback
        self.explanation = None
        self.summary = QLabel("Fitting the model family to the recording…", self)
        self.summary.setWordWrap(True)
        self.table = QTableWidget(0, len(COLUMNS), self)
        self.table.setHorizontalHeaderLabels(COLUMNS)
        self.table.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
        self.table.setSelectionMode(QAbstractItemView.SelectionMode.SingleSelection)
        self.table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.table.horizontalHeader().setSectionResizeMode(0, QHeaderView.ResizeMode.Stretch)
        self.buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Apply | QDialogButtonBox.StandardButton.Close,
                                        self)
        self.apply_button = self.buttons.button(QDialogButtonBox.StandardButton.Apply)
        self.apply_button.setEnabled(False)
        self.apply_button.clicked.connect(self.apply_selected)
        self.buttons.rejected.connect(self.reject)
        lay = QVBoxLayout(self)
        lay.addWidget(self.summary)
        lay.addWidget(self.table)
        lay.addWidget(self.buttons)
        self.resize(520, 420)
        self._relay = _Relay(self)
        self._relay.done.connect(self.show_explanation)
        self._relay.failed.connect(lambda msg: self.summary.setText(f"Fit failed: {msg}"))
        tol, prec = playback.settings.tolerance, playback.settings.precision
        threading.Thread(target=self._run, args=(path, tol, prec), daemon=True, name="resweep-fit").start()

    def _run(self, path, tol, prec):
        try:
            with open_trace(path) as trace:
                ex = explain_trace(trace, tol, precision=prec)
        except Exception as exc:  # the boundary of this thread: one line in the dialog
            self._relay.failed.emit(error_line(exc))
            return
        self._relay.done.emit(ex)

    def show_explanation(self, ex):
        """Fill the table with ``ex`` (an Explanation), best first, and select the best."""
        self.explanation = ex
        self.table.setRowCount(len(ex.models))
        for r, m in enumerate(ex.models):
            tie = "" if m.tie == r else f"#{m.tie + 1}"
            for c, text in enumerate((model_label(m.settings), f"{m.agree:.2%}", str(m.rows), tie)):
                self.table.setItem(r, c, QTableWidgetItem(text))
        skin = "no face contact to estimate it" if ex.skin_estimate is None else \
            f"{ex.skin_estimate:g} voxels from {ex.skin_rows} rows"
        verdict = "cannot decide: no row tells the best models apart" if not ex.decided else \
            f"best: {model_label(ex.best)}"
        self.summary.setText(f"{ex.rows_used} moving entity-frames, {ex.rows_undecided} tell no model apart; "
                             f"engine skin {skin}. {verdict}.")
        self.table.selectRow(0)
        self.apply_button.setEnabled(bool(ex.models))

    def selected_settings(self):
        rows = self.table.selectionModel().selectedRows() if self.explanation else []
        if not rows:
            return None
        return self.explanation.models[rows[0].row()].settings

    def apply_selected(self):
        st = self.selected_settings()
        if st is not None:
            cur = self.pb.settings
            self.pb.set_settings(replace(st, tolerance=cur.tolerance, precision=cur.precision))
