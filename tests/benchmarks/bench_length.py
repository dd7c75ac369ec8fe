"""Trace-length scaling: time and peak memory of ``resweep check`` at 1x, 2x and 4x the frames.

    python tests/benchmarks/bench_length.py [--entities 200] [--frames 30000] [--repeat 3]

Frames stream in bounded blocks and only counts and the first divergences are kept, so peak RSS
must not grow with the trace (target: 4x the frames uses at most 10% more) and time must grow
linearly (throughput about constant). Traces of the same world and entities are generated once
into ``--workdir`` (the 4x trace of the default is 24 M entity-frames, ~630 MB).
"""
from __future__ import annotations

import sys

from _bench import Row, common_args, median_timed, print_table, rate, resweep_cmd, yardstick_trace


def run(args) -> list[Row]:
    rows, base = [], None
    for k in (1, 2, 4):
        frames = args.frames * k
        trace = yardstick_trace(args, frames)
        cmd = resweep_cmd(trace, "--quiet")
        if base is None:
            median_timed(cmd, 1)  # kernels compiled or loaded once, outside the timing
        t, rss, _ = median_timed(cmd, args.repeat)
        base = base or (t, rss)
        n = args.entities * frames
        rows.append(Row(f"{k}x frames ({frames}), whole process", f"{t:.2f} s  ({rate(n, t)}), peak RSS "
                        f"{rss / 2**20:.0f} MiB", "", " ".join(map(str, cmd))))
        if k > 1:
            rows.append(Row(f"{k}x / 1x: time, peak RSS", f"{t / base[0]:.2f}, {rss / base[1]:.3f}",
                            "RSS <= 1.10" if k == 4 else ""))
    return rows


def main(argv=None) -> int:
    ap = common_args(__doc__.splitlines()[0])
    ap.add_argument("--entities", type=int, default=200)
    ap.add_argument("--frames", type=int, default=30000)
    args = ap.parse_args(argv)
    print_table(f"trace-length scaling ({args.entities} entities)", run(args))
    return 0


if __name__ == "__main__":
    sys.exit(main())
