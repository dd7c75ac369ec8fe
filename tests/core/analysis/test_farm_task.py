"""The kernel cache folder is a setting farm workers receive (FarmOptions.cache_dir): a worker that
has not loaded the kernel module yet exports it before the module fixes its folder."""
from __future__ import annotations

import os
import subprocess
import sys

PROBE = """
import sys
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
