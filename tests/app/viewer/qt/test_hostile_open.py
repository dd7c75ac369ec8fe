"""Twenty hostile files opened in a row in one window: each gives one dialog naming the file,
and the trace that was open stays on screen and still steps frames."""
from __future__ import annotations

import numpy as np
from PyQt6.QtCore import Qt
from PyQt6.QtWidgets import QApplication, QMessageBox

import fuzz_cases
import hostile_traces as H
from conftest import DEMO, LOAD_TIMEOUT, open_and_wait


def _hostile_files(tmp_path, good) -> list:
    named = [H.broken_symbol_node(good, tmp_path / "xnod.h5"), H.heap_size_zero(good, tmp_path / "heap.h5"),
             H.newline_soft_link(good, tmp_path / "soft.h5"), H.newline_external_link(good, tmp_path / "ext.h5"),
             H.far_chunks_motion(tmp_path / "farm.h5"), H.far_chunks_huge_box(tmp_path / "farb.h5"),
             H.big_chunk_one_edit(tmp_path / "edit.h5"), H.declared_blocks_no_storage(tmp_path / "decl.h5"),
             H.declared_rows_no_storage(tmp_path / "edits.h5"), H.long_strings(good, tmp_path / "long.h5")]
    out, k = list(named), 0
    while len(out) < 20:  # fuzz cases that are refused (some mutations leave a valid trace)
        path = tmp_path / f"fuzz{k}.h5"
        fuzz_cases.make_case([good], k, 7, path)
        k += 1
        try:
            from resweep.core.format.vet import vet
            vet(path)
        except Exception:
            out.append(path)
    return out


def test_twenty_hostile_files_in_a_row_each_give_a_dialog_and_the_window_keeps_its_trace(
        qtbot, window, tmp_path, monkeypatch):
    monkeypatch.setenv("RESWEEP_VET_CACHE", str(tmp_path / "vetted.json"))
    monkeypatch.setenv("RESWEEP_VET_CPU", "2")
    good = H.one_row(tmp_path / "good.h5")
    files = _hostile_files(tmp_path, good)
    assert len(files) == 20
    win = open_and_wait(qtbot, window, DEMO, frame=10)
    old = win.session
    shown = []
    monkeypatch.setattr(QMessageBox, "warning", lambda parent, title, text, *a, **k: shown.append(text))
    for n, path in enumerate(files, 1):
        win.open_path(path)
        qtbot.waitUntil(lambda: len(shown) == n, timeout=LOAD_TIMEOUT)
        assert str(path) in shown[-1] and "\n" not in shown[-1], shown[-1]
    assert len(shown) == 20 and win.session is old
    qtbot.waitUntil(lambda: not win.worker.is_busy(), timeout=LOAD_TIMEOUT)
    assert win.pb.frame == 10
    for want in (11, 12, 13):
        qtbot.keyClick(QApplication.focusWidget() or win, Qt.Key.Key_Right)
        assert win.pb.frame == want and win.state.frame == want
    assert np.isfinite(win.state.rows.ref_end[win.state.active]).all()
