"""Recorder memory over long runs: peak RSS after 1 and after 10 minutes of 100-entity frames at 60 Hz.

    python tests/benchmarks/bench_recorder.py [--minutes 10] [--entities 100]

Runs faster than real time (frame times are synthetic). Each mode runs in its own child process
so peaks do not mix: ``file`` is ``Recorder`` (SWMR file, flush every 60 frames), ``ring`` is
``RingRecorder`` keeping 30 s. Entities churn: every second one entity leaves and a new id
arrives, so the entity table grows as in a game with spawns. Target: peak RSS after 10 minutes
within a few MiB of the peak after 1 minute (memory flat over hours).
"""
from __future__ import annotations

import json
import subprocess
import sys
import tempfile

from _bench import PYTHON, Row, print_table

CHILD = r"""
import json, os, resource, sys, time
import numpy as np
from resweep.core.format.recorder import Recorder
from resweep.core.format.ring import RingRecorder
mode, minutes, n, path = sys.argv[1], float(sys.argv[2]), int(sys.argv[3]), sys.argv[4]
S = 16
origin = np.zeros((1, 3), np.int64)
blocks = np.zeros((1, S, S, S), np.uint8)
blocks[:, :, 0, :] = 1
world = dict(chunk_size=S, chunk_origin=origin, chunk_blocks=blocks)
rec = Recorder(path, flush_every=60, **world) if mode == "file" else RingRecorder(30.0, **world)
rng = np.random.default_rng(1)
start = rng.uniform(1, 15, (n, 3)); motion = rng.normal(0, 0.05, (n, 3)); half = np.full((n, 3), 0.4)
ids = np.arange(n, dtype=np.int64)
marks = {int(60 * 60 * m): m for m in (1, minutes)}
out = {}
t0 = time.process_time()
for f in range(int(60 * 60 * minutes)):
    if f % 60 == 0:
        ids[f // 60 % n] = n + f // 60   # one entity leaves, a new id arrives
    rec.frame(f / 60.0, ids, start, motion, start + motion, half_extents=half)
    if f % 600 == 300:
        rec.edit(f % 16, 1, 3, f % 2)
    if f + 1 in marks:
        out[str(marks[f + 1])] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
out["cpu_s"] = time.process_time() - t0
if mode == "file":
    rec.close()
    out["file_mib"] = os.path.getsize(path) / 2**20
else:
    rec.dump(path)
print(json.dumps(out))
"""


def main():
    import argparse
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--minutes", type=float, default=10.0)
    ap.add_argument("--entities", type=int, default=100)
    args = ap.parse_args()
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        for mode in ("file", "ring"):
            cmd = [PYTHON, "-c", CHILD, mode, str(args.minutes), str(args.entities), f"{tmp}/{mode}.h5"]
            res = json.loads(subprocess.run(cmd, check=True, capture_output=True, text=True).stdout)
            m1, m10 = res["1"], res[str(args.minutes)]
            frames = int(60 * 60 * args.minutes)
            rows += [Row(f"{mode}: peak RSS after 1 min", f"{m1:.1f} MiB"),
                     Row(f"{mode}: peak RSS after {args.minutes:g} min", f"{m10:.1f} MiB", "within a few MiB of 1 min"),
                     Row(f"{mode}: growth", f"{m10 - m1:+.1f} MiB ({m10 / m1:.3f}x)"),
                     Row(f"{mode}: CPU per frame", f"{1e6 * res['cpu_s'] / frames:.0f} us "
                         f"({frames / res['cpu_s']:.0f} frames/s)")]
            if "file_mib" in res:
                rows.append(Row(f"{mode}: file size", f"{res['file_mib']:.1f} MiB"))
    print_table(f"recorder memory, {args.entities} entities at 60 Hz (python {sys.version.split()[0]})", rows)


if __name__ == "__main__":
    main()
