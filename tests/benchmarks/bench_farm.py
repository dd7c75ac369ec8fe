"""Farms: many small traces on the local pool, and one big trace split across workers (on demand).

    python tests/benchmarks/bench_farm.py [--small 1000] [--workers 2] [--repeat 3]

1. ``--small`` traces of 1,000 entity-frames each (10 entities x 100 frames, cut from one yardstick
   trace with our writer) checked as a folder on a local pool of ``--workers`` processes, against
   the uncut trace checked by ``resweep check`` (target: the farm reaches >= 70% of its
   entity-frames per second). Whole processes, wall clock, cluster start included; the farm's own
   time (its JSON ``farm.seconds``, from the first task to the last result) is shown beside it.
2. One yardstick trace of 200 entities x 30000 frames (6 M entity-frames) split into frame ranges
   on 2 local workers (1 solver thread each) against 1 worker with 1 thread (target >= 1.6x); the
   plain 2-thread ``resweep check`` is shown too, and the split counts are checked against it.
3. ``--only warm``: both of the above on an already started cluster (the steady state of a
   long-lived one). 4. ``--only pertrace``: where one small trace's time goes, in one process, and one worker's
   batch of them through its isolated child.
"""
from __future__ import annotations

import json
import os
import sys
import tempfile
import time
from pathlib import Path

import statistics

from _bench import Row, common_args, cpu_timed, make_trace, median_timed, print_table, rate, resweep_cmd


def small_traces(args, whole: Path, count: int, frames: int = 100) -> Path:
    """``count`` traces of ``frames`` frames each, cut from ``whole`` (same world), made once."""
    folder = args.workdir / f"farm_small_{count}"
    if len(list(folder.glob("*.h5"))) == count:
        return folder
    from resweep.core import open_trace, write_trace
    from resweep.core.world.shapes import IMPLICIT_TYPES
    folder.mkdir(parents=True, exist_ok=True)
    with open_trace(whole) as tr:
        for i in range(count):
            b = tr.frames(i * frames, (i + 1) * frames)
            write_trace(folder / f"run_{i:05d}.h5", chunk_size=tr.chunk_size, chunk_origin=tr.chunk_origin,
                        chunk_blocks=tr.chunk_blocks,
                        shapes=None if tr.type_count == IMPLICIT_TYPES else tr.shapes, edits=tr.edits, entity_ids=tr.ids,
                        half_extents=tr.half_extents, time=tr.time[b.f0:b.f1], start=b.start, motion=b.motion,
                        end=b.end, active=b.active, voxel_size=tr.voxel_size, up_axis=tr.up_axis,
                        frame_dtype=tr.frame_dtype)
    return folder


def measure(cmd, repeat, fresh_vet: bool = False):
    """Median wall and median CPU seconds (the process tree) of ``cmd`` over ``repeat`` runs.

    ``fresh_vet``: every run starts with an empty verdict cache of the isolated validator, so
    every run validates every trace, as a farm over a new night's soak folder does."""
    runs = []
    with tempfile.TemporaryDirectory() as tmp:
        for i in range(repeat):
            env = {**os.environ, "RESWEEP_VET_CACHE": str(Path(tmp) / f"vetted-{i}.json")} if fresh_vet else None
            runs.append(cpu_timed(cmd, env))
    return statistics.median(r[0] for r in runs), statistics.median(r[1] for r in runs)


def farm_run(cmd, repeat):
    """Median wall and CPU seconds of ``cmd`` (a farm writing JSON to a temp file, every trace
    validated afresh), its farm section."""
    with tempfile.TemporaryDirectory() as tmp:
        out = Path(tmp) / "farm.json"
        wall, cpu = measure(cmd + ["--json", str(out)], repeat, fresh_vet=True)
        return wall, cpu, json.loads(out.read_text())["farm"]


def run_small(args) -> list[Row]:
    n = args.small * 1000
    whole = make_trace(args, f"farm_concat_10x{args.small * 100}.h5", entities=10, frames=args.small * 100)
    folder = small_traces(args, whole, args.small)
    one = resweep_cmd(whole, "--quiet")
    many = resweep_cmd(folder, "--workers", args.workers, "--summary-only", "--quiet")
    alone = resweep_cmd(folder, "--workers", 1, "--summary-only", "--quiet")
    median_timed(one, 1)
    t_one, c_one = measure(one, args.repeat)
    t_many, c_many, farm = farm_run(many, args.repeat)
    t_in, c_in, farm_in = farm_run(alone, args.repeat)
    assert farm["checked"] == farm_in["checked"] == args.small and farm["entity_frames"] == n, farm
    return [
        Row("one trace, 1 M entity-frames", f"{t_one:.2f} s ({rate(n, t_one)}); CPU {c_one:.2f} s", "",
            " ".join(map(str, one))),
        Row(f"{args.small} traces of 1,000 on {args.workers} workers", f"{t_many:.2f} s ({rate(n, t_many)}); "
            f"CPU {c_many:.2f} s; farm alone {farm['seconds']:.2f} s", "", " ".join(map(str, many))),
        Row("farm rate / one-trace rate", f"wall {t_one / t_many:.2f}, CPU {c_one / c_many:.2f} "
            f"(farm alone {t_one / farm['seconds']:.2f})", ">= 0.70"),
        Row(f"{args.small} traces of 1,000 in one process (--workers 1)", f"{t_in:.2f} s; CPU {c_in:.2f} s; "
            f"CPU ratio {c_one / c_in:.2f}; per trace {(c_in - c_one) / args.small * 1e3:.1f} ms CPU more than "
            f"its share of the one-trace run", "", " ".join(map(str, alone))),
    ]


def run_split(args) -> list[Row]:
    trace = make_trace(args, "resolve_200x30000.h5", entities=200, frames=30000)
    n = 200 * 30000
    two = resweep_cmd(trace, "--workers", 2, "--threads", 1, "--summary-only", "--quiet")
    one = resweep_cmd(trace, "--workers", 1, "--threads", 1, "--summary-only", "--quiet")
    plain = resweep_cmd(trace, "--quiet", "--json", "-", "--limit", "0")
    median_timed(plain, 1)
    t_plain, _, out = median_timed(plain, args.repeat)
    t_one, c_one, farm1 = farm_run(one, args.repeat)
    t_two, c_two, farm2 = farm_run(two, args.repeat)
    counts = json.loads(out)["traces"][0]["counts"]
    assert farm1["counts"] == farm2["counts"] == counts, (farm1["counts"], farm2["counts"], counts)
    return [
        Row("6 M split, 1 worker x 1 thread", f"{t_one:.2f} s ({rate(n, t_one)}); CPU {c_one:.2f} s; "
            f"farm alone {farm1['seconds']:.2f} s", "", " ".join(map(str, one))),
        Row("6 M split, 2 workers x 1 thread", f"{t_two:.2f} s ({rate(n, t_two)}); CPU {c_two:.2f} s; "
            f"farm alone {farm2['seconds']:.2f} s", "", " ".join(map(str, two))),
        Row("speed-up 2 workers / 1", f"{t_one / t_two:.2f}x (farm alone {farm1['seconds'] / farm2['seconds']:.2f}x)",
            ">= 1.6x"),
        Row("plain resweep check (2 threads, one process)", f"{t_plain:.2f} s ({rate(n, t_plain)})", "",
            " ".join(map(str, plain))),
        Row("counts: split == whole", "identical"),
    ]


def warm_farm(paths, workers: int, repeat: int, warm_with=()):
    """Median wall seconds of a farm over ``paths`` on an already started and warmed local cluster
    of ``workers`` processes (1 solver thread each): the steady state of a long-lived cluster,
    without process start-up and kernel loading.

    Before the timed runs, one untimed farm over ``warm_with`` (traces that make tasks for every
    worker) and one over ``paths``: every worker's isolated child, which does the checking, is then
    started with its kernels loaded and the traces' worlds decoded. (Warming the worker processes
    alone is not enough: a farm of one task lands on either worker, and a child that starts inside
    a timed run adds its start-up, about half a second, to that run.)"""
    from resweep.core import SolverSettings
    from resweep.core.analysis.farm_engines import DaskEngine
    from resweep.core.analysis.farm_inputs import find_traces
    from resweep.core.analysis.farm_run import run_farm
    from resweep.core.analysis.farm_task import FarmOptions
    traces, _ = find_traces([str(p) for p in paths])
    opts = FarmOptions(SolverSettings(), limit=0, threads=1)
    engine = DaskEngine(workers=workers)
    try:
        engine.client.run(_warm_worker)
        if warm_with:
            run_farm(find_traces([str(p) for p in warm_with])[0], opts, engine)
        run_farm(traces, opts, engine)
        times = []
        for _ in range(repeat):
            t0 = time.perf_counter()
            res = run_farm(traces, opts, engine)
            times.append(time.perf_counter() - t0)
        return statistics.median(times), res
    finally:
        engine.close()


def _warm_worker():
    from resweep.core.check.rows import warm_up
    warm_up("float64", "float32")
    warm_up("float64", "float64")


def run_warm(args) -> list[Row]:
    big = make_trace(args, "resolve_200x30000.h5", entities=200, frames=30000)
    whole = make_trace(args, f"farm_concat_10x{args.small * 100}.h5", entities=10, frames=args.small * 100)
    small = small_traces(args, whole, args.small)  # made here too: a fresh workdir has none
    t1, r1 = warm_farm([big], 1, args.repeat)
    t2, r2 = warm_farm([big], 2, args.repeat)
    assert r1.reports[str(big)].counts == r2.reports[str(big)].counts
    s2, rs = warm_farm([small], 2, args.repeat)
    w1, rw = warm_farm([whole], 2, args.repeat, warm_with=[small])
    # Both sides checked every entity-frame (a missing folder would time an empty farm).
    assert len(rs.reports) == args.small and rs.entity_frames() == rw.entity_frames() == args.small * 1000, \
        (len(rs.reports), rs.entity_frames(), rw.entity_frames())
    return [
        Row("warm cluster: 6 M split, 1 worker / 2 workers", f"{t1:.2f} s / {t2:.2f} s = {t1 / t2:.2f}x", ">= 1.6x",
            "bench_farm.py --only warm"),
        Row(f"warm cluster, 2 workers: {args.small} small traces / one 1 M trace",
            f"{s2:.2f} s / {w1:.2f} s: rate ratio {w1 / s2:.2f}", ">= 0.70", "bench_farm.py --only warm"),
    ]


def run_pertrace(args) -> list[Row]:
    """Where one small trace's time goes, in this process with one solver thread (no profiler):
    opening and validating it (``open_trace`` with a world cache, as a farm child opens it), checking
    it (limit 0, as ``--summary-only``), closing it, through the HDF5 subset reader and through
    h5py (``RESWEEP_H5LITE=0``) trace by trace in turn; and the floor of plain h5py on the same files
    (open, read every dataset but the world's blocks, close, no checks of ours). Medians over ``--small`` traces after 20
    untimed ones."""
    import glob
    import h5py
    import numba
    from resweep.core import SolverSettings, open_trace
    from resweep.core.check.rows import warm_up
    from resweep.core.check.stream import check_trace
    from resweep.core.world.world_cache import WorldCache
    make_trace(args, f"farm_concat_10x{args.small * 100}.h5", entities=10, frames=args.small * 100)
    files = sorted(glob.glob(str(small_traces(args, args.workdir / f"farm_concat_10x{args.small * 100}.h5",
                                              args.small) / "*.h5")))
    warm_up("float64", "float32")
    numba.set_num_threads(1)
    worlds, settings = WorldCache(), SolverSettings()
    parts = {"open": [], "check": [], "close": [], "h5py": []}
    via_h5py = {"open": [], "check": [], "close": []}  # the reader with RESWEEP_H5LITE=0, in turn

    def plain(path):  # every dataset but the world's blocks, which a farm child decodes once per world
        read = []

        def visit(name, obj):  # returns None: a value would end h5py's visit at the first dataset
            if isinstance(obj, h5py.Dataset) and name != "world/chunk_blocks":
                read.append(obj[()])
        with h5py.File(path, "r") as f:
            f.visititems(visit)
        assert len(read) >= 7, (path, len(read))  # ids, half extents, time, start, motion, end, origins
    def one(path, lite: bool):
        os.environ["RESWEEP_H5LITE"] = "1" if lite else "0"
        t0 = time.perf_counter()
        tr = open_trace(path, worlds=worlds)
        t1 = time.perf_counter()
        check_trace(tr, settings, limit=0)
        t2 = time.perf_counter()
        tr.close()
        return t1 - t0, t2 - t1, time.perf_counter() - t2
    before = os.environ.get("RESWEEP_H5LITE")
    try:
        for i, path in enumerate(files):
            first = i % 2 == 0  # which path goes first alternates: neither always finds the file cached
            got = {lite: one(path, lite) for lite in ((True, False) if first else (False, True))}
            t3 = time.perf_counter()
            plain(path)
            t4 = time.perf_counter()
            if i >= 20:
                for k, v in zip(parts, (*got[True], t4 - t3)):
                    parts[k].append(v * 1e3)
                for k, v in zip(via_h5py, got[False]):
                    via_h5py[k].append(v * 1e3)
    finally:
        os.environ.pop("RESWEEP_H5LITE", None) if before is None else os.environ.__setitem__("RESWEEP_H5LITE", before)
    med = {k: statistics.median(v) for k, v in parts.items()}
    old = {k: statistics.median(v) for k, v in via_h5py.items()}
    # The same traces as a worker runs them: one batch through its isolated child (start-up and
    # the child's first trace outside the timing), wall ms per trace, and the worker's own CPU.
    from resweep.core.analysis.farm_task import FarmOptions, _close_child, check_batch
    opts = FarmOptions(settings, limit=0, threads=1)
    check_batch([(p, None) for p in files[:20]], opts)
    t0, c0 = time.perf_counter(), time.process_time()
    check_batch([(p, None) for p in files[20:]], opts)
    n = max(1, len(files) - 20)
    batch_ms, worker_cpu = (time.perf_counter() - t0) / n * 1e3, (time.process_time() - c0) / n * 1e3
    _close_child()
    return [
        Row("one small trace in a worker's batch, through its isolated child (mean wall ms; the worker's CPU ms)",
            f"{batch_ms:.2f} ({worker_cpu:.2f})", "", "bench_farm.py --only pertrace"),
        Row("one small trace in one process: open+validate / check / close (median, ms)",
            f"{med['open']:.2f} / {med['check']:.2f} / {med['close']:.2f}", "", "bench_farm.py --only pertrace"),
        Row("  the same through h5py (RESWEEP_H5LITE=0, trace by trace in turn with the line above)",
            f"{old['open']:.2f} / {old['check']:.2f} / {old['close']:.2f}; total "
            f"{sum(med[k] for k in old) / sum(old.values()):.2f} of it"),
        Row("  plain h5py on the same files: open, read every dataset but the world's blocks, close (median, ms)",
            f"{med['h5py']:.2f}"),
        Row("  open+validate+close over plain h5py (same run; the frames are read by the check)",
            f"{(med['open'] + med['close']) / med['h5py']:.2f}"),
    ]


def main(argv=None) -> int:
    ap = common_args(__doc__.splitlines()[0])
    ap.add_argument("--small", type=int, default=1000, help="small traces (1,000 entity-frames each)")
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--only", choices=("small", "split", "warm", "pertrace"), default=None)
    args = ap.parse_args(argv)
    rows = []
    if args.only in (None, "small"):
        rows += run_small(args)
    if args.only in (None, "split"):
        rows += run_split(args)
    if args.only in (None, "warm"):
        rows += run_warm(args)
    if args.only in (None, "pertrace"):
        rows += run_pertrace(args)
    print_table("farms", rows)
    return 0


if __name__ == "__main__":
    sys.exit(main())
