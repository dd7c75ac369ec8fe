"""The ``resweep check`` / ``resweep info`` command line: JSON shape, exit status, options."""
from __future__ import annotations

import json
import re
import shlex
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from trace_factory import write_rows

from paths import ROOT
SAMPLE = ROOT / "sample_traces" / "quarry.h5"
Y = 1.501


def _cli(*args):
    return subprocess.run([sys.executable, "-m", "resweep.app.cli", *map(str, args)],
                          capture_output=True, text=True, timeout=300)


@pytest.fixture(scope="module")
def snag_only(tmp_path_factory):
    # One free move of 2 along z recorded as 0.5: a snag (warning) and nothing else.
    start = np.array([[[2.5, Y, 8.5]]])
    return write_rows(tmp_path_factory.mktemp("cli") / "snag.h5", start, [[[0, 0, 2.0]]], [[[2.5, Y, 9.0]]])


def test_json_to_stdout_has_documented_shape():
    r = _cli("check", SAMPLE, "--json", "-", "--limit", "5")
    assert r.returncode == 1  # the demo holds error-severity divergences
    doc = json.loads(r.stdout)
    assert doc["version"] == 1
    assert {"tolerance", "skin", "passes", "precision"} <= set(doc["settings"])
    (t,) = doc["traces"]
    assert set(t) == {"path", "frames", "entities", "entity_frames", "ended_early", "counts", "divergences"}
    assert t["ended_early"] is None  # a finished trace (README: null unless a recorder never closed it)
    assert t["frames"] == 240 and t["entities"] == 5
    assert set(t["counts"]) == {"invalid", "start_overlap", "penetration", "tunneling", "snag", "mismatch",
                                "discontinuity", "grounded_mismatch", "step_mismatch"}
    assert len(t["divergences"]) == 5 and sum(t["counts"].values()) > 5  # list capped, counts exact
    for d in t["divergences"]:
        assert set(d) == {"frame", "time", "entity", "name", "kind", "severity", "start", "motion", "recorded_end",
                          "reference_end", "error", "reason", "passes"}
        assert d["entity"] in (101, 102, 103, 104, 105)
        for p in d["passes"]:
            assert set(p) == {"t", "normal", "voxel"}


def test_exit_status_follows_fail_on(snag_only):
    assert _cli("check", snag_only, "--quiet").returncode == 0          # snag is a warning
    assert _cli("check", snag_only, "--quiet", "--fail-on", "snag").returncode == 1
    assert _cli("check", SAMPLE, "--quiet", "--fail-on", "none").returncode == 0


def test_human_summary_and_json_file(snag_only, tmp_path):
    out = tmp_path / "r.json"
    r = _cli("check", snag_only, "--json", out)
    assert "snag" in r.stdout and "result: pass" in r.stdout
    doc = json.loads(out.read_text())
    assert doc["traces"][0]["counts"]["snag"] == 1
    d = doc["traces"][0]["divergences"][0]
    assert d["frame"] == 0 and d["entity"] == 10 and d["kind"] == "snag" and d["severity"] == "warning"
    assert d["error"] == pytest.approx(1.5)
    assert d["reference_end"] == pytest.approx([2.5, Y, 10.5])


def test_a_bad_trace_among_several_is_found_before_any_is_checked(snag_only, tmp_path):
    bad = tmp_path / "bad.h5"
    bad.write_bytes(b"\x00" * 100)
    missing = tmp_path / "missing.h5"
    r = _cli("check", snag_only, bad, snag_only, missing, "--json", "-")
    assert r.returncode == 2
    assert r.stdout == ""  # nothing was checked: no report of the good trace before the bad one
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 2 and str(bad) in lines[0] and str(missing) in lines[1]
    assert all(ln.startswith("resweep check: ") for ln in lines)


def test_float32_precision_option():
    r = _cli("check", ROOT / "sample_traces" / "quarry_far_f32.h5", "--precision", "float32", "--json", "-")
    doc = json.loads(r.stdout)
    assert doc["settings"]["precision"] == "float32"
    assert doc["traces"][0]["entity_frames"] == 1180


def test_info_json_and_text():
    r = _cli("info", SAMPLE, "--json", "-")
    assert r.returncode == 0
    info = json.loads(r.stdout)
    assert info["frames"] == 240 and info["entities"] == 5 and info["chunk_size"] == 16
    assert info["world_bounds"] == [[0, 0, 0], [64, 16, 48]]
    assert info["invalid_entity_frames"] == 1 and info["problems"]
    names = {t["name"] for t in info["block_types"]}
    assert {"slab", "fence post"} <= names
    r = _cli("info", SAMPLE)
    assert "240" in r.stdout and "problems" in r.stdout


# -- exit status: closed pipes, the README table, --fail-on ---------------------------------------
@pytest.fixture(scope="module")
def many_snags(tmp_path_factory):
    # 3000 free moves of 2 along z recorded as 0.5: 3000 snags, so the JSON list (--limit 3000)
    # is far larger than a pipe's buffer and the writer must meet the closed pipe.
    n = 3000
    start = np.tile([[[2.5, Y, 8.5]]], (n, 1, 1))
    return write_rows(tmp_path_factory.mktemp("cli") / "snags.h5", start, np.tile([[[0, 0, 2.0]]], (n, 1, 1)),
                      np.tile([[[2.5, Y, 9.0]]], (n, 1, 1)))


def _pipe(cmd: str):
    return subprocess.run(["bash", "-c", f"set -o pipefail; {cmd}"], capture_output=True, text=True, timeout=300)


@pytest.mark.parametrize("fail_on, status", [("snag", 1), ("none", 0)])
def test_exit_status_survives_a_closed_pipe(many_snags, fail_on, status):
    exe = f"{shlex.quote(sys.executable)} -m resweep.app.cli check {shlex.quote(str(many_snags))}"
    # head leaves after one line; the JSON (about 1 MB) then meets a closed pipe.
    r = _pipe(f"{exe} --fail-on {fail_on} --limit 3000 --json - | head -1")
    assert r.stdout == "{\n"
    assert r.returncode == status, r.stderr
    assert "Traceback" not in r.stderr and "BrokenPipe" not in r.stderr and "Exception ignored" not in r.stderr
    # A reader that leaves before anything is written: the human summary meets the closed pipe.
    r = _pipe(f"{exe} --fail-on {fail_on} | true")
    assert r.returncode == status, r.stderr
    assert r.stderr == ""


def test_readme_documents_every_exit_status():
    from resweep.app.cli import exits
    codes = {v for k, v in vars(exits).items() if k.startswith("EXIT_")}
    assert codes == {0, 1, 2, 3, 130}
    text = (ROOT / "README.md").read_text()
    table = re.search(r"\| exit status \| meaning \|\n\|[-|: ]+\|\n((?:\|.*\|\n)+)", text)
    assert table, "README needs an '| exit status | meaning |' table"
    documented = {int(row.split("|")[1].strip().strip("`")) for row in table.group(1).splitlines()}
    assert documented == codes


def test_fail_on_takes_severities(snag_only):
    # snag_only holds one snag (warning) and nothing else.
    assert _cli("check", snag_only, "--quiet", "--fail-on", "warning").returncode == 1
    assert _cli("check", snag_only, "--quiet", "--fail-on", "info").returncode == 1   # info or worse
    assert _cli("check", snag_only, "--quiet", "--fail-on", "error").returncode == 0
    assert _cli("check", snag_only, "--quiet", "--fail-on", "penetration,warning").returncode == 1
    r = _cli("check", snag_only, "--fail-on", "warning", "--json", "-")
    from resweep.core.check.kinds import TABLE
    want = [k.name for k in TABLE if k.severity in ("warning", "error")]
    assert json.loads(r.stdout)["settings"]["fail_on"] == want


@pytest.mark.parametrize("value, message", [("", "empty kind"), ("snag,", "empty kind"),
                                            ("none,snag", "'none' only alone"), ("fatal", "unknown kind or severity")])
def test_fail_on_bad_values_are_usage_errors(snag_only, value, message):
    r = _cli("check", snag_only, "--fail-on", value)
    assert r.returncode == 2 and r.stdout == ""
    assert len(r.stderr.strip().splitlines()) == 1 and message in r.stderr


# -- outputs checked before the work; JSON records; threads -------------------------------------
@pytest.mark.parametrize("dest, why", [("{tmp}/no/such/folder/r.json", "folder does not exist"),
                                       ("{tmp}", "is a directory"), ("{trace}", "is an input trace")])
def test_json_destination_is_checked_before_the_work(snag_only, tmp_path, dest, why):
    bad = tmp_path / "bad.h5"
    bad.write_bytes(b"\x00" * 100)
    dest = dest.replace("{tmp}", str(tmp_path)).replace("{trace}", str(snag_only))
    before = Path(snag_only).read_bytes()
    # The destination is refused first, before any trace is opened (the bad one is not even named).
    r = _cli("check", snag_only, bad, "--json", dest)
    assert r.returncode == 2 and r.stdout == ""
    assert r.stderr.strip().splitlines() == [f"resweep check: {dest}: cannot write the JSON report ({why}"
                                             + ("; pick another output)" if "input" in why else ")")]
    assert Path(snag_only).read_bytes() == before


def test_json_records_carry_time_start_motion_and_name():
    r = _cli("check", SAMPLE, "--json", "-", "--limit", "100000")
    doc = json.loads(r.stdout)
    from resweep.core import open_trace
    with open_trace(SAMPLE) as tr:
        blk = tr.frames(0, tr.frame_count)
        names = dict(zip(tr.ids.tolist(), tr.names))
        for d in doc["traces"][0]["divergences"]:
            c = tr.entity_index(d["entity"])
            assert d["time"] == float(tr.time[d["frame"]])
            assert d["name"] == names[d["entity"]]
            want_start = [float(x) if np.isfinite(x) else None for x in blk.start[d["frame"], c]]
            want_motion = [float(x) if np.isfinite(x) else None for x in blk.motion[d["frame"], c]]
            assert d["start"] == want_start and d["motion"] == want_motion
    (inv,) = [d for d in doc["traces"][0]["divergences"] if d["kind"] == "invalid"]
    assert inv["reason"] == "motion.x is NaN" and inv["motion"][0] is None  # frame 77, the hopper


def test_summary_more_line_tells_where_the_rest_is(tmp_path):
    out = tmp_path / "r.json"
    r = _cli("check", SAMPLE, "--json", out, "--limit", "30")
    doc = json.loads(out.read_text())["traces"][0]
    total = sum(doc["counts"].values())
    assert total > 30
    # 20 are shown, 10 more are in the JSON, the rest is cut by --limit.
    assert f"  ... {total - 20} more; 10 of them listed in {out}, the other {total - 30} cut by --limit 30" \
           in r.stdout
    r = _cli("check", SAMPLE, "--json", out)
    assert f"  ... {total - 20} more, listed in {out}\n" in r.stdout
    r = _cli("check", SAMPLE)
    assert f"  ... {total - 20} more (--json PATH lists them" in r.stdout


def test_invalid_row_says_what_is_invalid_in_summary_and_info():
    r = _cli("check", SAMPLE)
    (line,) = [ln for ln in r.stdout.splitlines() if " invalid " in ln and "motion" in ln]
    assert line.split() == ["77", "105", "invalid", "-", "motion.x", "is", "NaN"]
    r = _cli("info", SAMPLE)
    assert "frame 77, entity 105: motion.x is NaN (reported as invalid)" in r.stdout


def test_threads_above_the_cores_are_clamped_with_a_notice(snag_only):
    import numba
    cores = numba.config.NUMBA_NUM_THREADS
    r = _cli("check", snag_only, "--threads", cores + 5, "--quiet")
    assert r.returncode == 0
    assert r.stderr.strip().splitlines() == [
        f"resweep check: --threads {cores + 5} is more than the {cores} cores here; using {cores}"]
    r = _cli("check", snag_only, "--threads", 0)
    assert r.returncode == 2 and "--threads must be >= 1" in r.stderr
