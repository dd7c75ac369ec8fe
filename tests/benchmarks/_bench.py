"""Shared helpers of the re-solve benchmarks: traces, timed child processes, the result table.

Benchmarks run on demand (pytest does not collect this folder). The machine they were written on
is shared and has 2 cores: every figure is a median of repeated runs, and comparisons are ratios
measured in the same run.
"""
from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import time
from dataclasses import dataclass
from pathlib import Path

REPO = Path(__file__).resolve().parents[2]
PYTHON = sys.executable


def _compile_sources() -> None:
    """Write the package's bytecode (``__pycache__``, as ``pip install`` does for an installed copy)
    before anything is timed. A source tree run with ``PYTHONDONTWRITEBYTECODE`` set (as on the
    machine these were written on) would otherwise compile every module it imports in every timed
    process, about 55 ms of a 0.5 s start-up that no installed copy pays."""
    import compileall
    for sub in ("core", "app"):
        compileall.compile_dir(REPO / sub, quiet=1, workers=1)


_compile_sources()


@dataclass
class Row:
    """One line of the result table: what was measured, its value, and the target if any."""

    name: str
    value: str
    target: str = ""
    command: str = ""


def common_args(description: str) -> argparse.ArgumentParser:
    ap = argparse.ArgumentParser(description=description)
    ap.add_argument("--yardstick", type=Path, default=REPO.parent / "shared" / "yardstick",
                    help="folder of yardstick.py (default: ../shared/yardstick beside the repo)")
    ap.add_argument("--workdir", type=Path, default=REPO.parent / "bench",
                    help="where generated traces are kept between runs (default: ../bench beside the repo)")
    ap.add_argument("--repeat", type=int, default=3, help="runs per measurement; the median is reported")
    return ap


def make_trace(args, name: str, **opts) -> Path:
    """A yardstick trace ``name`` in the work folder, generated once (make-trace options as kwargs)."""
    args.workdir.mkdir(parents=True, exist_ok=True)
    path = args.workdir / name
    if not path.exists():
        cmd = [PYTHON, str(args.yardstick / "yardstick.py"), "make-trace", str(path)]
        for k, v in opts.items():
            cmd += [f"--{k}", str(v)]
        tmp = path.with_suffix(".partial.h5")
        cmd[3] = str(tmp)
        subprocess.run(cmd, check=True, stdout=subprocess.DEVNULL)
        tmp.rename(path)
    return path


def yardstick_trace(args, frames: int | None = None) -> Path:
    """The yardstick trace of ``args.entities`` entities (200) and ``frames`` frames (default
    ``args.trace_frames``, else 30000): the benchmarks share it."""
    entities = getattr(args, "entities", 200)
    frames = frames or getattr(args, "trace_frames", 30000)
    return make_trace(args, f"resolve_{entities}x{frames}.h5", entities=entities, frames=frames)


def _spawn(cmd: list[str], env=None):
    """Run ``cmd`` to completion: (wall seconds, resource usage of it and its reaped children, stdout)."""
    t0 = time.perf_counter()
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, env=env)
    out = proc.stdout.read()
    err = proc.stderr.read()
    _, status, usage = os.wait4(proc.pid, 0)
    wall = time.perf_counter() - t0
    proc.returncode = os.waitstatus_to_exitcode(status)
    if proc.returncode not in (0, 1):  # resweep check exits 1 when it finds failing divergences
        raise RuntimeError(f"{' '.join(cmd)} failed ({proc.returncode}): {err.decode(errors='replace')}")
    return wall, usage, out.decode(errors="replace")


def timed(cmd: list[str], env=None) -> tuple[float, int, str]:
    """Run ``cmd`` to completion: (wall seconds, peak RSS in bytes of that process, stdout)."""
    wall, usage, out = _spawn(cmd, env)
    return wall, usage.ru_maxrss * 1024, out


def cpu_timed(cmd: list[str], env=None) -> tuple[float, float]:
    """Run ``cmd``: (wall seconds, CPU seconds of the process and every descendant it reaped, such as
    the worker processes of a local Dask cluster). CPU seconds hold up better than wall time on
    a machine shared with other work."""
    wall, usage, _ = _spawn(cmd, env)
    return wall, usage.ru_utime + usage.ru_stime


@dataclass
class Runs:
    """Medians over repeated runs of one command: wall seconds, CPU seconds (the process and its
    reaped children), peak RSS in bytes; ``walls`` and ``cpus`` keep every run in order."""

    wall: float
    cpu: float
    rss: int
    walls: list
    cpus: list
    out: str


def median_runs(cmd: list[str], repeat: int, env=None) -> Runs:
    """Run ``cmd`` ``repeat`` times: medians of wall time, CPU time and peak RSS."""
    walls, cpus, rss, out = [], [], [], ""
    for _ in range(repeat):
        wall, usage, out = _spawn(cmd, env)
        walls.append(wall)
        cpus.append(usage.ru_utime + usage.ru_stime)
        rss.append(usage.ru_maxrss * 1024)
    return Runs(statistics.median(walls), statistics.median(cpus), int(statistics.median(rss)), walls, cpus, out)


def median_timed(cmd: list[str], repeat: int, env=None) -> tuple[float, int, str]:
    """Median wall time and median peak RSS over ``repeat`` runs, and the last run's stdout."""
    runs = [timed(cmd, env) for _ in range(repeat)]
    return statistics.median(r[0] for r in runs), int(statistics.median(r[1] for r in runs)), runs[-1][2]


def median_call(fn, repeat: int) -> float:
    """Median wall seconds of ``fn()`` over ``repeat`` calls."""
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def resweep_cmd(*args) -> list[str]:
    """``resweep check ARGS`` through the installed console script (as users run it)."""
    script = Path(PYTHON).parent / "resweep"
    head = [str(script)] if script.exists() else [PYTHON, "-m", "resweep.app.cli"]
    return head + ["check", *map(str, args)]


def rate(n: float, seconds: float) -> str:
    return f"{n / seconds / 1e6:.2f} M entity-frames/s"


def print_table(title: str, rows: list[Row], out=sys.stdout) -> None:
    w0 = max([len(r.name) for r in rows] + [11])
    w1 = max([len(r.value) for r in rows] + [5])
    out.write(f"\n{title}\n{'measurement':<{w0}}  {'value':<{w1}}  target\n{'-' * (w0 + w1 + 10)}\n")
    for r in rows:
        out.write(f"{r.name:<{w0}}  {r.value:<{w1}}  {r.target}\n")
    cmds = [r.command for r in rows if r.command]
    if cmds:
        out.write("commands:\n" + "".join(f"  {c}\n" for c in dict.fromkeys(cmds)))
    out.flush()
