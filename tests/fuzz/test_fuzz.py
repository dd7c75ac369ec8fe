"""Fuzzing in CI: a few hundred mutated traces (tests/fuzz_cases.py) through ``check``, ``info``
and ``snapshot`` as users run them (isolated validator included), in one runner process.

Pass criteria (issue: hostile and broken traces): 0 crashes, 0 tracebacks, 0 hangs, exit
statuses only 0/1/2, stderr exactly one line naming the file on status 2 (nothing otherwise),
peak memory under 1 GB (the runner's from after its kernel warm-up, and every validator child's), inputs
unchanged. ``RESWEEP_FUZZ_CASES`` changes the case count.
"""
from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

RUNNER = Path(__file__).with_name("run_fuzz.py")
GIB = 1 << 30


def test_mutated_traces_give_one_line_no_crash_no_hang_bounded_memory(tmp_path):
    cases = int(os.environ.get("RESWEEP_FUZZ_CASES", "210"))
    # The runner's own settings only: no kernel folder, limits or isolation switch left over by
    # whatever ran before in this process.
    env = {k: v for k, v in os.environ.items() if not k.startswith("RESWEEP_")}
    env.update(RESWEEP_VET_CACHE=str(tmp_path / "vetted.json"), RESWEEP_VET_CPU="3")
    proc = subprocess.run([sys.executable, str(RUNNER), "--cases", str(cases), "--seed", "3",
                           "--snapshot-every", "15", "--workdir", str(tmp_path / "work")],
                          capture_output=True, text=True, timeout=1200, env=env)
    assert proc.returncode == 0, proc.stderr[-3000:]  # a crash of the runner (signal) shows here
    doc = json.loads(proc.stdout)
    assert doc["failure_count"] == 0, json.dumps(doc["failures"][:5], indent=1)
    statuses = {k.rsplit(" ", 1)[-1] for k in doc["outcomes"] if " exit " in k}
    assert statuses <= {"0", "1", "2"}, doc["outcomes"]
    # Every family was exercised, and some mutated files were still valid traces that reached the solver.
    assert set(doc["families"]) >= {"flip", "overwrite", "truncate", "structure", "declared", "link", "named"}
    assert doc["outcomes"].get("check exit 0", 0) + doc["outcomes"].get("check exit 1", 0) > 0
    assert doc["peak_child_rss_bytes"] is not None  # the isolated validator ran and reported its peak
    assert doc["peak_rss_bytes"] < GIB and doc["peak_child_rss_bytes"] < GIB, doc
