"""The ``resweep check`` / ``resweep info`` command line: JSON shape, exit status, options."""
from __future__ import annotations

import json
import subprocess
import sys

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
    assert set(t) == {"path", "frames", "entities", "entity_frames", "counts", "divergences"}
    assert t["frames"] == 240 and t["entities"] == 5
    assert set(t["counts"]) == {"invalid", "start_overlap", "penetration", "tunneling", "snag", "mismatch",
                                "discontinuity"}
    assert len(t["divergences"]) == 5 and sum(t["counts"].values()) > 5  # list capped, counts exact
    for d in t["divergences"]:
        assert set(d) == {"frame", "entity", "kind", "severity", "recorded_end", "reference_end", "error", "passes"}
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


def test_several_traces_one_bad(snag_only, tmp_path):
    bad = tmp_path / "bad.h5"
    bad.write_bytes(b"\x00" * 100)
    r = _cli("check", snag_only, bad, "--json", "-")
    assert r.returncode == 2
    assert len(json.loads(r.stdout)["traces"]) == 1
    assert str(bad) in r.stderr


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
