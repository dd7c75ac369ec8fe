"""Warm start: a second ``resweep check`` of a tiny trace against importing its libraries.

    python tests/benchmarks/bench_startup.py [--repeat 7]

Both are whole processes, medians of ``--repeat`` alternating runs in this one run: ``python -c
"import numpy, h5py, numba"`` (the floor any numba tool pays) and ``resweep check
sample_traces/quarry.h5 --quiet`` after one untimed run has compiled or loaded the kernels
(target: at most 2x). The first run after a kernel change (or install) compiles; that run is
timed too, and must announce itself on stderr when it takes more than a second.
"""
from __future__ import annotations

import os
import statistics
import subprocess
import sys
import time

from _bench import PYTHON, REPO, Row, common_args, print_table, resweep_cmd, timed


def run(args) -> list[Row]:
    tiny = REPO / "sample_traces" / "quarry.h5"
    check = resweep_cmd(tiny, "--quiet")
    imports = [PYTHON, "-c", "import numpy, h5py, numba"]
    rows = []
    if args.cold:
        # A private, empty kernel cache: this run compiles everything a check needs.
        env = dict(os.environ, NUMBA_CACHE_DIR=str(args.workdir / "cold-cache"))
        subprocess.run(["rm", "-rf", env["NUMBA_CACHE_DIR"]], check=True)
        t0 = time.perf_counter()
        res = subprocess.run(resweep_cmd(tiny), env=env, capture_output=True, text=True)
        said = "compiling" in res.stderr
        rows.append(Row("first run, empty kernel cache", f"{time.perf_counter() - t0:.1f} s, "
                        f"{'announces compiling' if said else 'NO compile notice'}", "notice if > 1 s",
                        "NUMBA_CACHE_DIR=<empty> " + " ".join(map(str, resweep_cmd(tiny)))))
    timed(check)  # compile or load the kernels once
    t_imp, t_chk = [], []
    for _ in range(args.repeat):
        t_imp.append(timed(imports)[0])
        t_chk.append(timed(check)[0])
    a, b = statistics.median(t_imp), statistics.median(t_chk)
    rows += [Row("import numpy, h5py, numba", f"{a:.3f} s", "", " ".join(imports[:2]) + ' "import numpy, h5py, numba"'),
             Row("resweep check tiny trace, warm", f"{b:.3f} s", "", " ".join(map(str, check))),
             Row("ratio warm check / imports", f"{b / a:.2f}", "<= 2")]
    return rows


def main(argv=None) -> int:
    ap = common_args(__doc__.splitlines()[0])
    ap.add_argument("--cold", action="store_true", help="also time a first run with an empty kernel cache")
    ap.set_defaults(repeat=7)
    args = ap.parse_args(argv)
    print_table("start-up", run(args))
    return 0


if __name__ == "__main__":
    sys.exit(main())
