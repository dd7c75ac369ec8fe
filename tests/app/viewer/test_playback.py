"""The Qt-free playback model: clamping, events, rates, selection, kind filter."""
from __future__ import annotations

import pytest

from resweep.app.viewer.playback import MAX_RATE, MIN_RATE, Playback
from resweep.core.errors import SettingsError
from resweep.core.solve.settings import SolverSettings


@pytest.fixture
def pb():
    p = Playback()
    p.adopt(100, 5)
    return p


def record(pb):
    events = []
    pb.subscribe(lambda ev, model: events.append((ev, model.frame)))
    return events


def test_frame_is_clamped_and_only_real_changes_notify(pb):
    events = record(pb)
    assert pb.set_frame(250) and pb.frame == 99
    assert not pb.set_frame(120)  # still 99: no event
    assert pb.set_frame(-3) and pb.frame == 0
    assert events == [("frame", 99), ("frame", 0)]


def test_step_first_last_stop_playback(pb):
    pb.set_playing(True)
    assert pb.playing
    pb.step(5)
    assert (pb.frame, pb.playing) == (5, False)
    pb.last()
    assert pb.frame == 99
    pb.step(1)
    assert pb.frame == 99
    pb.first()
    assert pb.frame == 0


def test_playing_from_the_last_frame_starts_over(pb):
    pb.set_frame(99)
    events = record(pb)
    pb.toggle_play()
    assert pb.playing and pb.frame == 0
    assert events == [("frame", 0), ("play", 0)]


def test_single_frame_trace_cannot_play():
    p = Playback()
    p.adopt(1, 1)
    p.set_playing(True)
    assert not p.playing


def test_rate_is_clamped_to_quarter_to_four_and_steps_through_offered_rates(pb):
    pb.set_rate(100)
    assert pb.rate == MAX_RATE == 4.0
    pb.set_rate(0.01)
    assert pb.rate == MIN_RATE == 0.25
    seen = []
    for _ in range(6):
        pb.faster()
        seen.append(pb.rate)
    assert seen == [0.5, 1.0, 2.0, 4.0, 4.0, 4.0]
    pb.slower()
    assert pb.rate == 2.0


def test_focus_and_selection_ignore_columns_outside_the_trace(pb):
    events = record(pb)
    pb.set_focus(7)
    assert pb.focus is None
    pb.set_focus(2)
    assert pb.focus == 2
    pb.set_selection([4, 1, 9, 1])
    assert pb.selection == (1, 4)
    assert pb.strip_columns == (1, 4)
    pb.set_selection([])
    assert pb.strip_columns == (0, 1, 2, 3, 4)
    assert [e for e, _ in events] == ["focus", "selection", "selection"]


def test_settings_changes_notify_and_bad_values_raise_the_core_error(pb):
    events = record(pb)
    pb.update_settings(passes=1)
    assert pb.settings == SolverSettings(passes=1)
    pb.update_settings(passes=1)  # unchanged: no event
    with pytest.raises(SettingsError):
        pb.update_settings(skin=0.7)
    assert pb.settings.skin == SolverSettings().skin
    assert [e for e, _ in events] == ["settings"]


def test_kind_filter_accepts_core_kinds_only(pb):
    pb.set_kind("tunneling")
    assert pb.kind == "tunneling"
    with pytest.raises(ValueError):
        pb.set_kind("teleport")
    pb.set_kind(None)
    assert pb.kind is None


def test_adopt_resets_selection_and_play_but_keeps_settings_and_rate(pb):
    pb.set_rate(2)
    pb.update_settings(passes=2)
    pb.set_selection([1, 2])
    pb.set_playing(True)
    pb.adopt(10, 2, frame=30, focus=5)
    assert (pb.frame, pb.focus, pb.selection, pb.playing) == (9, None, (), False)
    assert pb.rate == 2 and pb.settings.passes == 2


def test_unsubscribe(pb):
    events = []
    off = pb.subscribe(lambda ev, m: events.append(ev))
    pb.set_frame(3)
    off()
    pb.set_frame(4)
    assert events == ["frame"]
