"""Import speed and memory: a 2M-line JSON Lines log (100 entities x 20000 frames) vs a 200k-line one.

    python tests/benchmarks/bench_import.py [--lines 2000000] [--workdir ../bench]

Each import runs as ``resweep import LOG -o TRACE --quiet`` in a fresh child process; peak RSS is
the child's ``ru_maxrss``. Bounded memory means the 2M-line peak stays close to the 200k-line
peak. The logs are generated once into the work folder.
"""
from __future__ import annotations

import json
import os
import resource
import subprocess
import sys
import time

import numpy as np

from _bench import REPO, Row, print_table

ENTITIES = 100


def make_log(path, lines: int):
    if os.path.exists(path):
        return
    rng = np.random.default_rng(3)
    tmp = f"{path}.partial"
    with open(tmp, "w") as out:
        out.write(json.dumps({"type": "header", "chunk_size": 16}) + "\n")
        floor = [[16, 1], [240, 0]] * 16
        for cx in range(4):
            for cz in range(4):
                out.write(json.dumps({"type": "chunk", "origin": [16 * cx, 0, 16 * cz], "rle": floor}) + "\n")
        for f in range(lines // ENTITIES):
            pos = rng.uniform(1, 60, (ENTITIES, 3))
            mot = rng.normal(0, 0.1, (ENTITIES, 3))
            for i in range(ENTITIES):
                rec = {"frame": f, "id": i, "start": pos[i].tolist(), "motion": mot[i].tolist(),
                       "end": (pos[i] + mot[i]).tolist()}
                if f == 0:
                    rec["half_extents"] = [0.3, 0.9, 0.3]
                out.write(json.dumps(rec) + "\n")
    os.replace(tmp, path)


def run_import(log, trace):
    cmd = [sys.executable, "-m", "resweep.app.cli", "import", str(log), "-o", str(trace), "--quiet"]
    r0 = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    subprocess.run(cmd, check=True)
    wall = time.perf_counter() - t0
    r1 = resource.getrusage(resource.RUSAGE_CHILDREN)
    return wall, (r1.ru_utime + r1.ru_stime) - (r0.ru_utime + r0.ru_stime), r1.ru_maxrss / 1024


def main():
    import argparse
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--lines", type=int, default=2_000_000)
    ap.add_argument("--workdir", default=str(REPO.parent / "bench"))
    args = ap.parse_args()
    os.makedirs(args.workdir, exist_ok=True)
    rows = []
    # small first: ru_maxrss of children is the largest child so far
    for lines in (args.lines // 10, args.lines):
        log = os.path.join(args.workdir, f"import_{lines}.jsonl")
        make_log(log, lines)
        trace = os.path.join(args.workdir, f"import_{lines}.h5")
        wall, cpu, rss = run_import(log, trace)
        os.remove(trace)
        mib = os.path.getsize(log) / 2**20
        rows += [Row(f"{lines:,} lines ({mib:.0f} MiB): time", f"{wall:.1f} s wall, {cpu:.1f} s CPU"),
                 Row(f"{lines:,} lines: speed", f"{lines / wall:,.0f} lines/s"),
                 Row(f"{lines:,} lines: peak RSS", f"{rss:.1f} MiB", "bounded: close to the smaller log's")]
    print_table(f"resweep import, JSON Lines, {ENTITIES} entities per frame", rows)


if __name__ == "__main__":
    main()
