"""Farms on a real dask.distributed LocalCluster (2 worker processes, started once for this module).

Reference: each trace checked alone in this process by ``check_trace`` (the single-process check);
the farm must reproduce its JSON exactly, whatever the workers and the finishing order.
"""
from __future__ import annotations

import os
import signal

import pytest

from farm_traces import broken_files, soak_run
from resweep.core import SolverSettings, check_trace, open_trace
from resweep.core.analysis.farm_engines import DaskEngine
from resweep.core.analysis.farm_inputs import find_traces
from resweep.core.analysis.farm_run import run_farm
from resweep.core.analysis.farm_task import FarmOptions

import distributed  # noqa: E402,F401  (a dependency: a broken install fails here)
LIMIT = 40


@pytest.fixture(scope="module")
def cluster():
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  dashboard_address=":0") as c:
        yield c


@pytest.fixture(scope="module")
def soak(tmp_path_factory):
    """A soak folder: 6 runs in two subfolders (one long enough to be split), 3 broken files."""
    root = tmp_path_factory.mktemp("soak")
    (root / "night" / "a").mkdir(parents=True)
    (root / "night" / "b").mkdir()
    for i in range(6):
        soak_run(root / "night" / "ab"[i % 2] / f"bot_{i}.h5", seed=10 + i, frames=150 if i == 4 else 40)
    bad = broken_files(root / "night" / "b")
    return root / "night", bad


def _alone(path, limit=LIMIT):
    with open_trace(path) as tr:
        return check_trace(tr, SolverSettings(), limit=limit).as_json()


def _farm(cluster, folder, **kw):
    traces, missing = find_traces([str(folder)])
    engine = DaskEngine(address=cluster.scheduler_address)
    try:
        opts = FarmOptions(SolverSettings(), limit=LIMIT, range_rows=kw.pop("range_rows", 200), threads=1)
        return run_farm(traces, opts, engine, missing=missing, **kw), traces
    finally:
        engine.close()


def test_cluster_farm_matches_single_process_checks(cluster, soak):
    folder, bad = soak
    res, traces = _farm(cluster, folder)
    good = [t.path for t in traces if os.path.basename(t.path).startswith("bot_")]
    assert len(good) == 6 and [t.path for t in traces] == sorted(t.path for t in traces)
    assert sorted(res.reports) == sorted(good)
    for p in good:
        assert res.reports[p].as_json() == _alone(p)
    assert {os.path.basename(p) for p in res.unreadable} == set(bad)
    for p, why in res.unreadable.items():
        assert why.startswith(p) and bad[os.path.basename(p)] in why and "\n" not in why
    assert not res.interrupted and res.not_checked() == []


def test_the_long_trace_was_split_and_still_matches(cluster, soak):
    folder, _ = soak
    long = str(folder / "a" / "bot_4.h5")
    seen = []
    res, _ = _farm(cluster, folder, range_rows=100, progress=lambda d, t, rows: seen.append((d, t, rows)))
    assert res.reports[long].as_json() == _alone(long)
    assert seen[-1][0] == 9 and seen[-1][1] == 9
    assert seen[-1][2] == sum(r.entity_frames for r in res.reports.values())
    # 9 traces go out in 5 batches (at most 9 / (4 x 2 workers) -> 2 per batch); 150 frames x 7
    # entities in ranges of ~100 entity-frames add 10 or more range tasks
    assert len(seen) >= 5 + 10


def test_a_killed_worker_loses_no_trace(cluster, soak):
    folder, _ = soak
    client = distributed.Client(cluster.scheduler_address)
    killed = []

    def kill_one(done, total, rows):
        if killed:
            return
        busy = [w for w, tasks in client.processing().items() if tasks]
        if busy:
            pid = client.run(os.getpid, workers=[busy[0]])[busy[0]]
            os.kill(pid, signal.SIGKILL)
            killed.append(pid)

    try:
        res, traces = _farm(cluster, folder, range_rows=60, progress=kill_one)
    finally:
        client.close()
    assert killed, "a worker was busy when the first task finished"
    good = [t.path for t in traces if os.path.basename(t.path).startswith("bot_")]
    assert sorted(res.reports) == sorted(good) and len(res.unreadable) == 3
    for p in good:
        assert res.reports[p].as_json() == _alone(p)


@pytest.fixture()
def hostile(tmp_path):
    """A soak folder with two good runs and two hostile files: one that makes HDF5 loop forever
    while reading it, one whose damaged symbol table makes link lookups fail."""
    import hostile_traces as H
    folder = tmp_path / "hostile"
    folder.mkdir()
    good = [soak_run(folder / f"bot_{i}.h5", seed=40 + i, frames=30) for i in range(2)]
    small = H.one_row(tmp_path / "one_row.h5")  # the builders patch this layout
    H.heap_size_zero(small, folder / "hang.h5")
    H.broken_symbol_node(small, folder / "snod.h5")
    return folder, good


def test_hostile_files_in_a_farm_folder_are_refused_and_the_batch_goes_on(cluster, hostile, tmp_path):
    folder, good = hostile
    client = distributed.Client(cluster.scheduler_address)
    client.wait_for_workers(2, timeout=60)  # a worker killed by an earlier test is back
    env = {"RESWEEP_VET_CPU": "2", "RESWEEP_VET_CACHE": str(tmp_path / "vetted.json")}
    before = client.run(lambda: {k: os.environ.get(k) for k in env})
    client.run(lambda: os.environ.update(env))
    try:
        pids = set(client.run(os.getpid).values())
        res, _ = _farm(cluster, folder)
        assert set(client.run(os.getpid).values()) == pids  # no worker hung, crashed or was replaced
    finally:
        for addr, old in before.items():
            client.run(lambda old=old: [os.environ.pop(k, None) if v is None else os.environ.__setitem__(k, v)
                                        for k, v in old.items()], workers=[addr])
        client.close()
    assert sorted(res.reports) == sorted(good)
    for p in good:
        assert res.reports[p].as_json() == _alone(p)
    reasons = {os.path.basename(p): why for p, why in res.unreadable.items()}
    assert sorted(reasons) == ["hang.h5", "snod.h5"]
    assert "isolated validator" in reasons["hang.h5"] and "limit" in reasons["hang.h5"]
    for p, why in res.unreadable.items():
        assert why.startswith(p) and "\n" not in why


def test_workers_report_progress_while_their_tasks_run(cluster, soak):
    """Running tasks send their tallies as worker events (throttled to one a second per task):
    the scheduler logged some for this farm's topic."""
    folder, _ = soak
    traces, _ = find_traces([str(folder)])
    engine = DaskEngine(address=cluster.scheduler_address)
    try:
        run_farm(traces, FarmOptions(SolverSettings(), limit=LIMIT, range_rows=200, threads=1), engine)
        events = engine.client.get_events(engine._topic)
    finally:
        engine.close()
    assert events and all(len(msg) == 3 for _, msg in events)
    assert max(msg[1] for _, msg in events) >= 1  # a task told of a trace it had finished


def _child_pids():
    from resweep.core.analysis import farm_task
    child = farm_task._child
    return child.proc.pid if child is not None and child.alive else None


def _end_child():
    from resweep.core.analysis import farm_task
    farm_task._close_child()


def test_prewarm_starts_every_workers_child_and_the_first_job_uses_it(cluster, soak):
    """Before a farm's first task the engine asks every worker to start its isolated child (so a
    worker idle until a big trace's plan comes back does not start one only then); the farm's
    jobs then run in those children, not in new ones."""
    folder, _ = soak
    traces, _ = find_traces([str(folder)])
    engine = DaskEngine(address=cluster.scheduler_address)
    try:
        engine.client.run(_end_child)
        assert set(engine.client.run(_child_pids).values()) == {None}  # no child on any worker
        opts = FarmOptions(SolverSettings(), limit=LIMIT, range_rows=200, threads=1)
        engine.prewarm(opts)
        distributed.wait(engine._warm)
        assert [f.result() for f in engine._warm] == [True, True]
        started = engine.client.run(_child_pids)
        assert len(started) == 2 and None not in started.values()
        run_farm(traces, opts, engine)
        assert engine.client.run(_child_pids) == started  # the same children did the jobs
    finally:
        engine.close()


def _gone(pid: int) -> bool:
    try:
        with open(f"/proc/{pid}/stat") as fh:
            return fh.read().split(")")[-1].split()[0] == "Z"
    except FileNotFoundError:
        return True


def test_cancelling_a_running_task_kills_its_isolated_child_at_once(cluster, hostile):
    """A job that would hang for its whole CPU-time limit (60 s here: the file makes HDF5 loop)
    ends as soon as the client cancels its task (what Ctrl-C does): the worker's check sees the
    cancellation while it waits for its child and kills the child, instead of the task (and the
    cluster's close) waiting for the limit."""
    import time
    folder, _ = hostile
    client = distributed.Client(cluster.scheduler_address)
    client.wait_for_workers(2, timeout=60)
    before = client.run(lambda: os.environ.get("RESWEEP_VET_CPU"))
    client.run(lambda: os.environ.__setitem__("RESWEEP_VET_CPU", "60"))
    engine = DaskEngine(address=cluster.scheduler_address)
    try:
        fut = engine.submit([(str(folder / "hang.h5"), None)], FarmOptions(SolverSettings(), threads=1), 1)
        deadline, busy = time.monotonic() + 60, {}
        while not busy and time.monotonic() < deadline:  # the worker running the job has its child
            time.sleep(0.5)
            running = [a for a, keys in client.processing().items() if fut.key in keys]
            busy = {a: p for a, p in client.run(_child_pids, workers=running).items() if p is not None}
        assert busy, "no worker started a child for the job"
        time.sleep(1.5)  # the child has the file and spins
        engine.cancel([fut])
        deadline = time.monotonic() + 20  # far below the 60 s the child would otherwise spin
        while not all(_gone(p) for p in busy.values()) and time.monotonic() < deadline:
            time.sleep(0.2)
        assert all(_gone(p) for p in busy.values())
    finally:
        engine.close()
        for addr, old in before.items():
            client.run(lambda old=old: os.environ.pop("RESWEEP_VET_CPU", None) if old is None
                       else os.environ.__setitem__("RESWEEP_VET_CPU", old), workers=[addr])
        client.close()
