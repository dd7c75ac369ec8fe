"""Baseline comparison (is tonight worse?) and how a farm finds its traces. Expected values are
worked out by hand from the rule in the issue: a failing kind that appears in a trace, or grows,
is a regression; shrinking kinds, non-failing kinds and vanished traces are not."""
from __future__ import annotations

import json

import pytest

from resweep.core.analysis.farm_baseline import Regression, compare, load_baseline, vanished
from resweep.core.analysis.farm_inputs import find_traces
from resweep.core.check.kinds import DEFAULT_FAIL_ON, KINDS
from resweep.core.errors import ReportFileError


def counts(**kw):
    return {k: kw.get(k, 0) for k in KINDS}


YESTERDAY = {"a.h5": counts(tunneling=2, snag=5), "b.h5": counts(), "gone.h5": counts(penetration=1)}


@pytest.mark.parametrize("today,want", [
    ({"a.h5": counts(tunneling=2, snag=9), "b.h5": counts()}, []),              # warning grew: fine
    ({"a.h5": counts(tunneling=1), "b.h5": counts()}, []),                      # fewer: fine
    ({"a.h5": counts(tunneling=3)}, [Regression("a.h5", "tunneling", 2, 3)]),  # grows
    ({"b.h5": counts(penetration=1, invalid=2)},
     [Regression("b.h5", "invalid", 0, 2), Regression("b.h5", "penetration", 0, 1)]),  # appear, kind order
    ({"new.h5": counts(tunneling=1)}, [Regression("new.h5", "tunneling", None, 1)]),    # new failing trace
    ({"new.h5": counts(snag=4)}, []),                                           # new clean trace
])
def test_regressions(today, want):
    assert compare(today, YESTERDAY, DEFAULT_FAIL_ON) == want


def test_fail_on_decides_which_kinds_count():
    assert compare({"a.h5": counts(tunneling=2, snag=6)}, YESTERDAY, ("snag",)) == [Regression("a.h5", "snag", 5, 6)]
    assert compare({"a.h5": counts(tunneling=9)}, YESTERDAY, ()) == []


def test_vanished_and_one_lines():
    assert vanished({"a.h5": counts()}, YESTERDAY) == ["b.h5", "gone.h5"]
    assert Regression("k", "tunneling", 0, 2).one_line() == "k: tunneling appears (2)"
    assert Regression("k", "tunneling", 1, 2).one_line() == "k: tunneling grows 1 -> 2"


def test_load_farm_and_single_check_reports(tmp_path):
    farm = {"version": 1, "farm": {"index": [
        {"key": "x/a.h5", "path": "/n1/x/a.h5", "status": "checked", "counts": counts(snag=1)},
        {"key": "bad.h5", "path": "/n1/bad.h5", "status": "unreadable", "reason": "..."}]}}
    (tmp_path / "f.json").write_text(json.dumps(farm))
    assert load_baseline(tmp_path / "f.json") == {"x/a.h5": counts(snag=1)}
    single = {"version": 1, "traces": [{"path": "/tmp/q/run.h5", "counts": counts(tunneling=3)}]}
    (tmp_path / "s.json").write_text(json.dumps(single))
    assert load_baseline(tmp_path / "s.json") == {"run.h5": counts(tunneling=3)}


@pytest.mark.parametrize("text,word", [
    ("{not json", "not JSON"), ("[1, 2]", "version"), ('{"version": 2, "traces": []}', "version"),
    ('{"version": 1}', "counts"), ('{"version": 1, "traces": [{"path": "a", "counts": {"snag": -1}}]}', "counts"),
])
def test_bad_baselines_are_one_line_errors(tmp_path, text, word):
    (tmp_path / "b.json").write_text(text)
    with pytest.raises(ReportFileError) as e:
        load_baseline(tmp_path / "b.json")
    assert word in str(e.value) and str(tmp_path / "b.json") in str(e.value)
    with pytest.raises(ReportFileError, match="cannot read"):
        load_baseline(tmp_path / "missing.json")


def test_find_traces_folders_globs_and_missing(tmp_path):
    for rel in ("n/b/2.h5", "n/a/1.h5", "n/a/deep/3.hdf5", "n/a/readme.txt", "other/4.h5"):
        (tmp_path / rel).parent.mkdir(parents=True, exist_ok=True)
        (tmp_path / rel).write_bytes(b"")
    found, missing = find_traces([tmp_path / "n", str(tmp_path / "o*" / "*.h5"), tmp_path / "n" / "a" / "1.h5",
                                  tmp_path / "nope", str(tmp_path / "z*.h5")])
    assert [t.key for t in found] == ["a/1.h5", "a/deep/3.hdf5", "b/2.h5", "other/4.h5"]  # glob keys: from the part before "*"
    assert [t.path for t in found] == sorted(t.path for t in found)
    assert [(m.input, m.reason) for m in missing] == [(str(tmp_path / "nope"), "no such file or folder"),
                                                      (str(tmp_path / "z*.h5"), "the pattern matches no file")]
