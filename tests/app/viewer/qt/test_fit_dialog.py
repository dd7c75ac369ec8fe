"""The viewer's model fit dialog and the model settings in the settings panel."""
from __future__ import annotations

import pytest

from conftest import LOAD_TIMEOUT, open_and_wait
from paths import ROOT

AXIS = ROOT / "sample_traces" / "terrace_axis.h5"


def test_fit_dialog_ranks_and_applies_the_best_model(qtbot, window):
    open_and_wait(qtbot, window, AXIS, solved=False)
    dlg = window.fit_model_dialog()
    qtbot.waitUntil(lambda: dlg.explanation is not None, timeout=LOAD_TIMEOUT)
    assert dlg.table.rowCount() == len(dlg.explanation.models) == 42
    assert dlg.table.item(0, 0).text() == "axis yxz, step 0.6"
    assert "best: axis yxz, step 0.6" in dlg.summary.text()
    dlg.apply_button.click()
    st = window.pb.settings
    assert (st.model, st.axis_order, st.step_height) == ("axis", "yxz", 0.6)
    assert st.skin == dlg.explanation.skin_estimate
    panel = window.settings_panel
    assert panel.model.currentText() == "axis" and panel.axis_order.currentText() == "yxz"
    assert panel.step_height.value() == 0.6 and not panel.substep.isEnabled()
    assert "step-up" in window.frame_panel.toPlainText() or window.pb.focus is None


def test_settings_panel_sets_the_model(qtbot, window):
    open_and_wait(qtbot, window, AXIS, solved=False)
    panel = window.settings_panel
    panel.model.setCurrentText("pushout")
    assert window.pb.settings.model == "pushout" and window.pb.settings.step_height == 0.0
    assert panel.substep.isEnabled() and not panel.step_height.isEnabled() and not panel.passes.isEnabled()
    panel.substep.setValue(0.5)
    assert window.pb.settings.substep == 0.5
    panel.model.setCurrentText("axis")
    panel.step_height.setValue(0.6)
    assert (window.pb.settings.model, window.pb.settings.step_height) == ("axis", 0.6)


def _core_rows(path, settings):
    """(flags int32 (F, N), raised bool (F, N), climb float64 (F, N)) of the whole trace from
    core.check_trace: what the window must show under ``settings``."""
    import numpy as np
    from resweep.core.check.stream import check_trace
    from resweep.core.format.reader import open_trace
    with open_trace(path) as tr:
        shape = (tr.frame_count, tr.entity_count)
        flags, raised, climb = np.zeros(shape, np.int32), np.zeros(shape, bool), np.zeros(shape)

        def keep(b):
            flags[b.frame, b.column] = b.rows.flags
            raised[b.frame, b.column] = b.rows.raised
            climb[b.frame, b.column] = b.rows.climb / tr.voxel_size
        check_trace(tr, settings, limit=0, on_block=keep)
    return flags, raised, climb


def test_model_chosen_in_the_panel_re_solves_the_trace_and_reaches_panel_and_report(qtbot, window):
    """Axis model, x first, step height 0.6, set through the panel's widgets: the whole-trace
    re-solve equals the core's check under the same settings, the Frame panel says which try was
    kept and how high it climbed, and the report's reproduce lines parse back to the same settings."""
    import shlex

    import numpy as np
    from resweep.app.cli.main import build_parser
    from resweep.app.cli.solver_args import settings_from

    open_and_wait(qtbot, window, AXIS)
    panel = window.settings_panel
    panel.model.setCurrentText("axis")
    panel.axis_order.setCurrentText("xyz")
    panel.step_height.setValue(0.6)
    st = window.pb.settings
    assert (st.model, st.axis_order, st.step_height) == ("axis", "xyz", 0.6)
    qtbot.waitUntil(lambda: window.flags.complete and not window.worker.is_busy(), timeout=LOAD_TIMEOUT)
    flags, raised, climb = _core_rows(AXIS, st)
    assert (window.flags.flags == flags).all()
    assert raised.any(), "the axis sample climbs steps under a 0.6 step height"
    frame, col = (int(v) for v in np.argwhere(raised)[0])
    window.pb.set_focus(col)
    window.pb.set_frame(frame)
    step_line = [ln for ln in window.frame_panel.toPlainText().splitlines() if ln.startswith("step-up")]
    assert len(step_line) == 1 and "raised try kept" in step_line[0]
    assert float(step_line[0].split("climbed")[1].split()[0]) == pytest.approx(climb[frame, col], abs=1e-4)
    cmds = [ln for ln in window.report().splitlines() if ln.startswith("resweep ")]
    assert cmds
    parser = build_parser()
    for c in cmds:
        assert settings_from(parser.parse_args(shlex.split(c)[1:])) == st


def test_pushout_settings_from_the_panel_re_solve_the_whole_trace(qtbot, window):
    open_and_wait(qtbot, window, ROOT / "sample_traces" / "terrace_pushout.h5")
    panel = window.settings_panel
    panel.model.setCurrentText("pushout")
    panel.substep.setValue(0.5)
    panel.iterations.setValue(2)
    st = window.pb.settings
    assert (st.model, st.substep, st.iterations, st.step_height) == ("pushout", 0.5, 2, 0.0)
    qtbot.waitUntil(lambda: window.flags.complete and not window.worker.is_busy(), timeout=LOAD_TIMEOUT)
    flags, _, _ = _core_rows(ROOT / "sample_traces" / "terrace_pushout.h5", st)
    assert (window.flags.flags == flags).all()
