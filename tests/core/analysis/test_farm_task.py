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
    from resweep.core.analysis.farm_task import check_batch
    a = soak_run(tmp_path / "a.h5", seed=1, frames=40)
    b = soak_run(tmp_path / "b.h5", seed=2, frames=40)
    heard = []
    parts = check_batch([(a, None), (b, None)], FarmOptions(SolverSettings(), limit=0, threads=1),
                        report=lambda traces, rows: heard.append((traces, rows)))
    rows = [p.report.entity_frames for p in parts]
    assert (1, rows[0]) in heard and heard[-1] == (2, sum(rows))
    assert any(t == 0 and r > 0 for t, r in heard)  # the first trace's block, before it finished
    assert [t for t, _ in heard] == sorted(t for t, _ in heard)
