"""``resweep snapshot`` warm: seconds per picture, one picture per process and ``--frames A:B``.

    python tests/benchmarks/bench_snapshot.py [--repeat 5] [--frames 20]

Whole processes on the bundled quarry trace after one untimed run (kernels loaded, trace vetted):
``resweep snapshot quarry.h5 --frame 100 -o X.png`` (target: at most 2 s per picture) and
``resweep snapshot quarry.h5 --frames 100:100+K-1 -o DIR`` (target: under 1 s per picture), each
the median of ``--repeat`` runs in this one run, wall and CPU seconds (CPU seconds hold up better
on a shared machine). Per frame of ``--frames``: the whole run divided by K, and the cost of each
picture after the first, (run of K - single run) / (K - 1).
"""
from __future__ import annotations

import statistics
import sys
import tempfile
from pathlib import Path

from _bench import PYTHON, REPO, Row, common_args, cpu_timed, print_table


def snapshot_cmd(*args) -> list[str]:
    script = Path(PYTHON).parent / "resweep"
    head = [str(script)] if script.exists() else [PYTHON, "-m", "resweep.app.cli"]
    return head + ["snapshot", *map(str, args)]


def run(args) -> list[Row]:
    trace = REPO / "sample_traces" / "quarry.h5"
    k = args.frames
    with tempfile.TemporaryDirectory() as tmp:
        one = snapshot_cmd(trace, "--frame", 100, "-o", Path(tmp) / "one.png")
        many = snapshot_cmd(trace, "--frames", f"100:{100 + k - 1}", "-o", tmp)
        cpu_timed(one)  # kernels loaded, trace vetted: the warm case
        singles, seqs = [], []
        for _ in range(args.repeat):  # alternating, so both see the same load
            singles.append(cpu_timed(one))
            seqs.append(cpu_timed(many))
    sw, sc = (statistics.median(r[i] for r in singles) for i in (0, 1))
    mw, mc = (statistics.median(r[i] for r in seqs) for i in (0, 1))
    return [
        Row("snapshot, one picture per process", f"{sw:.2f} s wall, {sc:.2f} CPU-s", "<= 2 s",
            " ".join(map(str, one))),
        Row(f"snapshot --frames, {k} pictures in one process", f"{mw:.2f} s wall, {mc:.2f} CPU-s", "",
            " ".join(map(str, many))),
        Row("  per picture (whole run / K)", f"{mw / k:.2f} s wall, {mc / k:.2f} CPU-s", "< 1 s"),
        Row("  each picture after the first", f"{(mw - sw) / (k - 1):.2f} s wall, {(mc - sc) / (k - 1):.2f} CPU-s"),
    ]


def main(argv=None) -> int:
    ap = common_args(__doc__.splitlines()[0])
    ap.set_defaults(repeat=5)
    ap.add_argument("--frames", type=int, default=20, help="pictures of the --frames run (default 20)")
    args = ap.parse_args(argv)
    print_table("resweep snapshot, warm", run(args))
    return 0


if __name__ == "__main__":
    sys.exit(main())
