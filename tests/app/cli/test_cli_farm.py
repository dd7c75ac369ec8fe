"""``resweep check`` over folders: JSON per trace as a single check writes it, the farm summary,
unreadable files, --summary-only, --baseline exit statuses, and Ctrl-C keeping a partial summary.
Reference for per-trace results: ``resweep check FILE --json -`` run on each file alone."""
from __future__ import annotations

import json
import os
import subprocess
import sys

import pytest

from farm_traces import broken_files, soak_run
from resweep.core import SolverSettings
from resweep.core.analysis.farm_engines import ThreadEngine
from resweep.core.analysis.farm_inputs import find_traces
from resweep.core.analysis.farm_run import run_farm
from resweep.core.analysis.farm_task import FarmOptions
from resweep.core.check.kinds import KINDS, SEVERITY


def _cli(*args):
    return subprocess.run([sys.executable, "-m", "resweep.app.cli", "check", *map(str, args)],
                          capture_output=True, text=True, timeout=600)


@pytest.fixture(scope="module")
def night(tmp_path_factory):
    root = tmp_path_factory.mktemp("night")
    (root / "sub").mkdir()
    for i in range(3):
        soak_run(root / ("sub" if i == 1 else ".") / f"bot_{i}.h5", seed=40 + i, frames=30)
    return root


def test_folder_json_matches_single_checks_and_lists_unreadable(night, tmp_path):
    folder = tmp_path / "n"
    subprocess.run(["cp", "-r", str(night), str(folder)], check=True)
    bad = broken_files(folder / "sub")
    r = _cli(folder, "--workers", "1", "--json", tmp_path / "out.json", "--limit", "7")
    assert r.returncode == 1, r.stderr  # the soak runs hold penetrations (error severity)
    doc = json.loads((tmp_path / "out.json").read_text())
    paths = [t["path"] for t in doc["traces"]]
    assert paths == sorted(paths) and len(paths) == 3
    for t in doc["traces"]:
        alone = json.loads(_cli(t["path"], "--json", "-", "--limit", "7").stdout)["traces"][0]
        assert t == alone
    farm = doc["farm"]
    assert farm["traces"] == 6 and farm["checked"] == 3 and farm["failing"] >= 1
    assert sorted(os.path.basename(u["path"]) for u in farm["unreadable"]) == sorted(bad)
    assert [w["failing"] for w in farm["worst"]] == sorted((w["failing"] for w in farm["worst"]), reverse=True)
    assert farm["counts"] == {k: sum(t["counts"][k] for t in doc["traces"]) for k in farm["counts"]}
    for name, word in bad.items():
        assert any(name in line and word in line for line in r.stdout.splitlines())


def test_summary_only_and_baseline(night, tmp_path):
    r = _cli(night, "--workers", "1", "--summary-only", "--json", tmp_path / "base.json")
    assert r.returncode == 1 and "farm: 3 traces, 3 checked" in r.stdout
    base = json.loads((tmp_path / "base.json").read_text())
    assert "traces" not in base and len(base["farm"]["index"]) == 3
    # The kind table reads back as name, severity, count for every kind (the longest name,
    # grounded_mismatch, once ran into its severity), with the JSON's counts.
    table = r.stdout.split("farm: ", 1)[1].splitlines()[2:2 + len(KINDS)]
    assert [line.split() for line in table] == [[k, SEVERITY[k], str(base["farm"]["counts"][k])] for k in KINDS]
    same = _cli(night, "--workers", "1", "--summary-only", "--baseline", tmp_path / "base.json", "--quiet")
    assert same.returncode == 0, same.stdout + same.stderr   # failing as yesterday, but no worse
    for row in base["farm"]["index"]:                         # yesterday was clean: everything appears
        row["counts"] = {k: 0 for k in row["counts"]}
    (tmp_path / "clean.json").write_text(json.dumps(base))
    worse = _cli(night, "--workers", "1", "--summary-only", "--baseline", tmp_path / "clean.json")
    assert worse.returncode == 1 and "regressions" in worse.stdout and "0 ->" in worse.stdout
    (tmp_path / "junk.json").write_text("{")
    bad = _cli(night, "--workers", "1", "--baseline", tmp_path / "junk.json")
    assert bad.returncode == 2 and bad.stderr.count("\n") == 1 and "junk.json" in bad.stderr


def test_interrupt_keeps_the_finished_traces(night):
    traces, _ = find_traces([str(night)])
    engine = ThreadEngine()

    def ctrl_c(done, total, rows):
        if done >= 1:  # Ctrl-C once the first trace is in, while the second one's task runs
            raise KeyboardInterrupt  # what the main thread gets from Ctrl-C while it waits for results

    try:
        res = run_farm(traces, FarmOptions(SolverSettings(), limit=5), engine, progress=ctrl_c)
    finally:
        engine.close()
    assert res.interrupted and len(res.reports) == 1
    assert len(res.not_checked()) == 2 and not res.unreadable


def test_no_trace_found_is_a_usage_error(tmp_path):
    r = _cli(tmp_path / "empty*", "--workers", "1")
    assert r.returncode == 2 and "matches no file" in r.stderr and "no trace" in r.stderr


def test_a_trace_that_breaks_its_task_does_not_sink_its_batch(night, monkeypatch):
    """A task that raises (a bug, or a worker dying on one trace) is retried trace by trace."""
    from resweep.core.analysis import farm_run, farm_task
    traces, _ = find_traces([str(night)])
    real = farm_task.check_part
    victim = traces[1].path

    def flaky(path, *a, **kw):
        if path == victim:
            raise RuntimeError("boom")
        return real(path, *a, **kw)

    monkeypatch.setattr(farm_task, "check_part", flaky)
    monkeypatch.setattr(farm_run, "plan_batches", lambda sizes, workers: [range(len(sizes))])
    monkeypatch.setenv("RESWEEP_ISOLATE", "0")  # jobs run in this process, where check_part is patched
    engine = ThreadEngine()
    try:
        res = run_farm(traces, FarmOptions(SolverSettings(), limit=5), engine)
    finally:
        engine.close()
    assert sorted(res.reports) == sorted(t.path for t in traces if t.path != victim)
    assert list(res.unreadable) == [victim] and "internal error: RuntimeError: boom" in res.unreadable[victim]
