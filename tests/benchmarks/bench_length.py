"""Trace-length scaling: time and peak memory of ``resweep check`` at 1x, 2x and 4x the frames.

    python tests/benchmarks/bench_length.py [--entities 200] [--frames 10000] [--repeat 3]

Frames stream in bounded blocks and only counts and the first divergences are kept, so peak RSS
must not grow with the trace (target: 4x the frames uses at most 10% more; the default traces
hold 2, 4 and 8 M entity-frames) and time must grow linearly (throughput about constant). Traces
of the same world and entities are generated once into ``--workdir``.
"""
from __future__ import annotations

import sys

from _bench import Row, common_args, median_runs, print_table, rate, resweep_cmd, yardstick_trace


def run(args) -> list[Row]:
    rows, base = [], None
    for k in (1, 2, 4):
        frames = args.frames * k
        trace = yardstick_trace(args, frames)
        cmd = resweep_cmd(trace, "--quiet")
        if base is None:
            median_runs(cmd, 1)  # kernels compiled or loaded once, outside the timing
        r = median_runs(cmd, args.repeat)
        base = base or r
        n = args.entities * frames
        rows.append(Row(f"{k}x frames ({n / 1e6:g} M entity-frames), whole process",
                        f"{r.wall:.2f} s wall, {r.cpu:.2f} CPU-s ({rate(n, r.wall)}), peak RSS {r.rss / 2**20:.0f} MiB",
                        "", " ".join(map(str, cmd))))
        if k > 1:
            rows.append(Row(f"{k}x / 1x: CPU-s, peak RSS", f"{r.cpu / base.cpu:.2f}, {r.rss / base.rss:.3f}",
                            "RSS <= 1.10" if k == 4 else ""))
    return rows


def main(argv=None) -> int:
    ap = common_args(__doc__.splitlines()[0])
    ap.add_argument("--entities", type=int, default=200)
    ap.add_argument("--frames", type=int, default=10000)
    args = ap.parse_args(argv)
    print_table(f"trace-length scaling ({args.entities} entities)", run(args))
    return 0


if __name__ == "__main__":
    sys.exit(main())
