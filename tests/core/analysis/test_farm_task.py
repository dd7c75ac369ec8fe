"""The farm task (core/analysis/farm_task.py): the kernel cache folder is a setting farm workers
receive (FarmOptions.cache_dir): a worker that has not loaded the kernel module yet exports it
before the module fixes its folder; a batch reports its progress while it runs."""
from __future__ import annotations

import os
import subprocess
import sys

from resweep.core import SolverSettings
from resweep.core.analysis.farm_task import FarmOptions

PROBE = """
import sys

from resweep.core import SolverSettings
from resweep.core.analysis.farm_task import FarmOptions
from resweep.core import SolverSettings
from resweep.core.analysis.farm_task import FarmOptions, configure
configure(FarmOptions(SolverSettings(), cache_dir=sys.argv[1], threads=1))
from resweep.core.jit import nb_jit
import numba
print(nb_jit.CACHE_DIR.parent, numba.get_num_threads())
"""


def test_workers_take_the_cache_folder_and_thread_count_they_are_given(tmp_path):
    env = {k: v for k, v in os.environ.items() if k != "RESWEEP_CACHE_DIR"}
    r = subprocess.run([sys.executable, "-c", PROBE, str(tmp_path / "shared")], capture_output=True, text=True,
                       timeout=120, env=env)
    assert r.returncode == 0, r.stderr
    assert r.stdout.split() == [str(tmp_path / "shared"), "1"]


def test_a_batch_reports_its_running_tally_as_it_goes(tmp_path):
    """check_batch tells its engine what it has done after every trace (and, inside a trace, per
    frame block with frames read times entities), so progress moves before the task ends."""
    from farm_traces import soak_run
    from resweep.core.analysis.farm_task import check_batch, unpack
    a = soak_run(tmp_path / "a.h5", seed=1, frames=40)
    b = soak_run(tmp_path / "b.h5", seed=2, frames=40)
    heard = []
    parts = check_batch([(a, None), (b, None)], FarmOptions(SolverSettings(), limit=0, threads=1),
                        report=lambda traces, rows: heard.append((traces, rows)))
    rows = [unpack(p).report.entity_frames for p in parts]
    assert (1, rows[0]) in heard and heard[-1] == (2, sum(rows))
    assert any(t == 0 and r > 0 for t, r in heard)  # the first trace's block, before it finished
    assert [t for t, _ in heard] == sorted(t for t, _ in heard)


LIGHT = """
import sys

from resweep.core import SolverSettings
from resweep.core.analysis.farm_task import FarmOptions, check_batch, unpack
parts = check_batch([(sys.argv[1], None)], FarmOptions(SolverSettings(), limit=0, threads=1))
light = "numba" not in sys.modules and "resweep.core.check.stream" not in sys.modules
print(type(parts[0]).__name__, parts[0].rows, light, unpack(parts[0]).report.entity_frames)
"""


def test_a_worker_leaves_opening_and_checking_to_its_isolated_child(tmp_path):
    """The worker process neither loads the solver (numba) nor unpickles the reports: its child
    opens and checks the trace and the result travels on as the child's bytes."""
    from farm_traces import soak_run
    a = soak_run(tmp_path / "a.h5", seed=3, frames=40)
    env = {k: v for k, v in os.environ.items() if k != "RESWEEP_ISOLATE"}
    r = subprocess.run([sys.executable, "-c", LIGHT, str(a)], capture_output=True, text=True, timeout=300, env=env)
    assert r.returncode == 0, r.stderr
    kind, rows, light, unpacked = r.stdout.split()
    assert kind == "PackedPart" and light == "True" and int(rows) == int(unpacked) > 0


def test_a_failure_of_our_own_in_the_child_names_the_trace_and_the_batch_goes_on(tmp_path):
    """A job the child cannot run (here: options without solver settings) comes back as that
    trace's one-line internal error; the next job of the batch is still checked."""
    from farm_traces import soak_run
    from resweep.core.analysis.farm_task import check_batch, unpack
    a = soak_run(tmp_path / "a.h5", seed=4, frames=30)
    broken = FarmOptions(None, limit=0, threads=1)
    parts = [unpack(p) for p in check_batch([(a, None)], broken) + check_batch([(a, None)],
                                                                                FarmOptions(SolverSettings(), threads=1))]
    assert parts[0].report is None and "internal error: AttributeError" in parts[0].error and "\n" not in parts[0].error
    assert parts[1].error is None and parts[1].report.entity_frames > 0


def test_jobs_written_ahead_to_a_child_that_dies_go_to_the_next_child(tmp_path, monkeypatch):
    """The worker writes the next job to its child before reading the answer to the current one
    (farm_task.AHEAD). A file that makes HDF5 loop until the child's CPU-time limit kills it sits
    in the middle of a batch: it comes back refused, and the jobs behind it, which the dead child
    never answered, are checked by the next child exactly as a check of each trace alone reports.
    Reference: ``check_trace`` of each good trace in this process."""
    import hostile_traces as H
    from farm_traces import soak_run
    from resweep.core import open_trace
    from resweep.core.analysis import farm_task
    from resweep.core.check.stream import check_trace
    monkeypatch.setenv("RESWEEP_VET_CPU", "2")
    monkeypatch.delenv("RESWEEP_ISOLATE", raising=False)
    good = [soak_run(tmp_path / f"run_{i}.h5", seed=20 + i, frames=30) for i in range(3)]
    hang = tmp_path / "hang.h5"
    H.heap_size_zero(H.one_row(tmp_path / "one_row.h5"), hang)
    jobs = [(good[0], None), (str(hang), None), (good[1], None), (good[2], None)]
    parts = [farm_task.unpack(p) for p in farm_task.check_batch(jobs, FarmOptions(SolverSettings(), limit=50,
                                                                                  threads=1))]
    assert [p.path for p in parts] == [j[0] for j in jobs]
    assert parts[1].report is None and "limit" in parts[1].error and parts[1].error.startswith(str(hang))
    for p in (parts[0], parts[2], parts[3]):
        with open_trace(p.path) as tr:
            assert p.error is None and p.report.as_json() == check_trace(tr, SolverSettings(), limit=50).as_json()
    farm_task._close_child()
