"""``resweep explain`` and the solver-model options on the command line: JSON shape, exit status,
one-line errors."""
from __future__ import annotations

import json
import subprocess
import sys

import pytest

from paths import ROOT

AXIS = ROOT / "sample_traces" / "terrace_axis.h5"
PUSHOUT = ROOT / "sample_traces" / "terrace_pushout.h5"


def _cli(*args):
    return subprocess.run([sys.executable, "-m", "resweep.app.cli", *map(str, args)],
                          capture_output=True, text=True, timeout=600)


def test_explain_json_and_human_output():
    r = _cli("explain", PUSHOUT, "--json", "-")
    assert r.returncode == 0, r.stderr
    doc = json.loads(r.stdout)
    assert doc["version"] == 1
    (t,) = doc["traces"]
    assert t["models"][0]["model"] == "pushout" and t["models"][0]["substep"] == 0.5
    assert 0 < t["rows_used"] and 0 <= t["rows_undecided"] <= t["rows_used"]
    h = _cli("explain", AXIS)
    assert h.returncode == 0, h.stderr
    assert "best: axis yxz, step 0.6" in h.stdout
    assert "resweep check" in h.stdout and "--model axis" in h.stdout


def test_check_with_the_suggested_model_reports_the_new_kinds():
    r = _cli("check", AXIS, "--model", "axis", "--step-height", "0.6", "--json", "-", "--fail-on", "none")
    assert r.returncode == 0, r.stderr
    (t,) = json.loads(r.stdout)["traces"]
    assert t["counts"]["step_mismatch"] > 0
    steps = [d for d in t["divergences"] if "step" in d]
    assert steps and all(d["step"]["kept"] in ("plain", "raised") for d in steps)
    g = json.loads(_cli("check", PUSHOUT, "--model", "pushout", "--substep", "0.5", "--json", "-",
                        "--fail-on", "none").stdout)
    assert g["traces"][0]["counts"]["grounded_mismatch"] > 0


@pytest.mark.parametrize("args, needle", [
    (["--model", "pushout", "--step-height", "0.5"], "step_height"),
    (["--model", "axis", "--axis-order", "xxz"], "axis_order"),
    (["--model", "pushout", "--iterations", "0"], "iterations"),
    (["--substep", "-1"], "substep"),
])
def test_bad_model_options_are_one_line_errors(args, needle):
    r = _cli("check", AXIS, *args)
    assert r.returncode == 2
    assert needle in r.stderr and len(r.stderr.strip().splitlines()) == 1 and "Traceback" not in r.stderr


def test_explain_bad_file_is_one_line(tmp_path):
    bad = tmp_path / "not.h5"
    bad.write_bytes(b"nope")
    r = _cli("explain", bad)
    assert r.returncode == 2 and str(bad) in r.stderr and len(r.stderr.strip().splitlines()) == 1
    r = _cli("explain", AXIS, "--frames", "9:3")
    assert r.returncode == 2 and len(r.stderr.strip().splitlines()) == 1
