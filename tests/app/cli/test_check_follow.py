"""``resweep check TRACE --follow`` on a trace another process is recording."""
from __future__ import annotations

import recording_helpers as rh
from resweep.app.cli.main import main
from resweep.core.check.rows import warm_up


def test_check_follow_reports_the_whole_recording(tmp_path, capsys):
    warm_up()
    path = tmp_path / "live.h5"
    proc = rh.start_slow_recorder(path, 200)
    status = main(["check", str(path), "--follow"])
    assert proc.wait(timeout=60) == 0
    captured = capsys.readouterr()
    assert "following the recording until it is closed" in captured.err
    assert captured.out.startswith(f"{path}: 200 frames, ")
    assert status == 1  # the scenario's recorded ends disagree with the reference (penetrations)
    assert main(["check", str(path), str(path), "--follow"]) == 2
    assert "--follow takes exactly one TRACE" in capsys.readouterr().err
