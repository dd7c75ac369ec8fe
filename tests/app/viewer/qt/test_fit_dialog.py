"""The viewer's model fit dialog and the model settings in the settings panel."""
from __future__ import annotations

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
