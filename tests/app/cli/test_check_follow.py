"""``resweep check TRACE --follow`` on a trace another process is recording."""
from __future__ import annotations

import json
import os
import signal
import threading
import time

import recording_helpers as rh
from resweep.app.cli.main import main
from resweep.core.check.rows import warm_up


def test_check_follow_reports_the_whole_recording(tmp_path, capsys):
    """The followed report is the report of a plain check of the finished file, in text and JSON
    (the scenario's starts jump between frames, so every round boundary holds discontinuities)."""
    warm_up()
    path = tmp_path / "live.h5"
    proc = rh.start_slow_recorder(path, 200)
    status = main(["check", str(path), "--follow", "--json", str(tmp_path / "followed.json")])
    assert proc.wait(timeout=60) == 0
    captured = capsys.readouterr()
    assert "following the recording until it is closed" in captured.err
    assert "ended early" not in captured.err
    assert captured.out.startswith(f"{path}: 200 frames, ")
    assert status == 1  # the scenario's recorded ends disagree with the reference (penetrations)
    assert main(["check", str(path), "--json", str(tmp_path / "plain.json")]) == 1
    followed = json.loads((tmp_path / "followed.json").read_text())
    plain = json.loads((tmp_path / "plain.json").read_text())
    assert followed == plain and plain["traces"][0]["ended_early"] is None
    assert plain["traces"][0]["counts"]["discontinuity"] > 0
    assert main(["check", str(path), str(path), "--follow"]) == 2
    assert "--follow takes exactly one TRACE" in capsys.readouterr().err


def test_check_follow_of_a_killed_recording_stops_on_ctrl_c_saying_it_ended_early(tmp_path, capsys):
    """A writer killed after frame 40 (commits every 16 frames) never closes the file: following
    it runs until Ctrl-C, then reports the 32 committed frames and says the trace ended early,
    with the same record as a plain check."""
    warm_up()
    path, _ = rh.record_and_kill(tmp_path, "after_frame", 40)
    default = signal.getsignal(signal.SIGINT)

    def interrupt_once_following():
        deadline = time.monotonic() + 120
        while signal.getsignal(signal.SIGINT) is default and time.monotonic() < deadline:
            time.sleep(0.02)  # the command installs its own handler once it follows
        time.sleep(0.3)
        os.kill(os.getpid(), signal.SIGINT)
    t = threading.Thread(target=interrupt_once_following)
    t.start()
    status = main(["check", str(path), "--follow", "--json", "-"])
    t.join()
    assert status == 130
    captured = capsys.readouterr()
    record = {"frames_read": 32, "last_flushed_time": 31 / rh.FPS}
    entry = json.loads(captured.out)["traces"][0]
    assert entry["ended_early"] == record and entry["frames"] == 32
    assert (f"trace ended early (the recorder did not close it): 32 frames read, "
            f"last flushed at {31 / rh.FPS:.3f} s") in captured.err
    assert main(["check", str(path), "--json", "-", "--quiet"]) == 1
    plain = json.loads(capsys.readouterr().out)["traces"][0]
    assert plain == entry
