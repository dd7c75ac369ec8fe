"""What the solver's own rules cost the kernel, against the tight C loop (run on demand).

    python tests/benchmarks/bench_rule_cost.py [--frames 5000] [--repeat 5]

``bench_kernel.py`` compares the check kernel with the yardstick's tight C loop, which solves
the same rows with less work: no capped back-off, no start-overlap depth, no touch margin or entry
axes, no classification of the recorded end. This benchmark measures what those rules cost by
timing copies of the kernel with them taken out one after another (cumulatively):

1. today's kernel (the installed one);
2. without the back-off cap (the back-off's search for solid behind the box is skipped);
3. also without classifying the recorded end (no penetration, tunneling, snag or model tests);
4. also without the start-overlap depth (neither folded into the first scan nor queried);
5. also without the touch rules (no shrunk-box test, entry axes from the slab test alone).

The copies are made in ``--workdir``/rule_cost by text replacements of the kernel sources (each
must match, so the benchmark stops when the code it patches changes) and compiled once into their
own kernel caches (a few minutes the first time). Their results differ from the solver's (that is
the point): they only measure time. Every run is one child process per kernel, alternating with
the C loop; CPU seconds of one numba thread, medians of ``--repeat``. The ratio to the C loop's
entity-frames per CPU second is what ``bench_kernel.py`` reports for the first line.
"""
from __future__ import annotations

import os
import statistics
import subprocess
from pathlib import Path

from _bench import PYTHON, REPO, Row, print_table, yardstick_trace
from bench_kernel import parser, tight_c

#: (name, what is taken out, [(file under core/, text, replacement), ...]); each step keeps the
#: replacements of the steps before it.
STEPS = (
    ("today's kernel", "", []),
    ("without the back-off cap", "its search for solid behind the box", [
        ("solve/nb_slide.py", "    tb = search(p, b, h, world, broad, FIRST_HIT, stack).tmin\n",
         "    return back\n")]),
    ("and without classification", "the recorded end's tests: penetration, tunneling, snag, mismatch, models", [
        ("check/nb_rows.py",
         "    f |= classify_end(o, s, m, e, h, hit, run, contact, d0, world, tol, broad, stack, ref_end, n_out, err)\n"
         "    if ground[i] >= 0 or mp.step > 0:", "    if False:")]),
    ("and without the start overlap", "the depth of the box at the start", [
        ("solve/nb_slide.py", "stack, k == 0)", "stack, False)"),
        ("check/nb_rows.py", "        d0 = overlap_depth(s, h, world)", "        d0 = fl(vs, 0)")]),
    ("and without the touch rules", "the shrunk-box test, entry axes within the margin", [
        ("solve/nb_narrow.py",
         "    ts, txs, _ = box_interval(p, r, (h[0] - d[0], h[1] - d[1], h[2] - d[2]), v, v, bb, vs)\n",
         "    ts, txs = te, tx\n"),
        ("solve/nb_narrow.py", "        eax = entry_axes(p, r, h, v, bb, vs, te, d)\n", "        pass\n")]),
)

#: One child: bench_kernel's own rows and timing, with the kernel its ``PYTHONPATH`` gives.
CHILD = """
import statistics, sys
sys.path.insert(0, %r)
import numba, numpy as np
from resweep.core import SolverSettings
from resweep.core.check.rows import warm_up
from bench_kernel import kernel_cpu, trace_rows
warm_up("float64")
world, rows = trace_rows(sys.argv[1])
flags = np.zeros(len(rows[0]), np.int32)
numba.set_num_threads(1)
kernel_cpu(world, rows, flags, SolverSettings())
times = [kernel_cpu(world, rows, flags, SolverSettings()) for _ in range(int(sys.argv[2]))]
print(len(rows[0]), statistics.median(times))
""" % str(Path(__file__).resolve().parent)


def variant(workdir: Path, k: int) -> dict | None:
    """Environment of a child running step ``k``'s kernel (None: today's, the installed one).
    Files are written only when their text changes, so the copy's kernel cache stays valid."""
    if k == 0:
        return None
    root = workdir / "rule_cost" / f"step{k}"
    src = REPO / "core"
    texts = {p.relative_to(src).as_posix(): p.read_text() for p in src.rglob("*.py")}
    for _, _, subs in STEPS[1:k + 1]:
        for rel, old, new in subs:
            if old not in texts[rel]:
                raise SystemExit(f"bench_rule_cost: core/{rel} no longer holds the text step {k} replaces")
            texts[rel] = texts[rel].replace(old, new, 1)
    for rel, text in texts.items():
        dst = root / "src" / "resweep" / "core" / rel
        if not dst.exists() or dst.read_text() != text:
            dst.parent.mkdir(parents=True, exist_ok=True)
            dst.write_text(text)
    return {**os.environ, "PYTHONPATH": str(root / "src"), "RESWEEP_CACHE_DIR": str(root / "cache")}


def kernel_run(trace: Path, env, repeat: int) -> tuple[int, float]:
    """(rows, median CPU seconds of one flags-only solve) of the kernel a child with ``env`` loads."""
    out = subprocess.run([PYTHON, "-c", CHILD, str(trace), str(repeat)], env=env, check=True, capture_output=True,
                         text=True).stdout.split()
    return int(out[0]), float(out[1])


def run(args) -> list[Row]:
    trace = yardstick_trace(args, args.frames)
    envs = [variant(args.workdir, k) for k in range(len(STEPS))]
    for env in envs:  # compile (or load) every copy once, outside the timing
        kernel_run(trace, env, 1)
    c_times, k_times = [], [[] for _ in STEPS]
    for _ in range(args.repeat):
        c, n_c = tight_c(args, trace)
        c_times.append(c)
        for k, env in enumerate(envs):
            n, t = kernel_run(trace, env, 3)
            k_times[k].append(t)
    c_rate = n_c / statistics.median(c_times)
    rows = [Row("tight C loop, 1 thread", f"{c_rate / 1e6:.2f} M entity-frames per CPU-s; "
                f"{1e9 / c_rate:.0f} ns per row", "", f"{PYTHON} {args.yardstick / 'yardstick.py'} solve --tight {trace}")]
    for (name, what, _), times in zip(STEPS, k_times):
        rate = n / statistics.median(times)
        rows.append(Row(name + (f" ({what})" if what else ""),
                        f"{rate / 1e6:.2f} M/CPU-s, {1e9 / rate:.0f} ns per row; ratio to C {rate / c_rate:.2f}",
                        ">= 0.8" if not what else ""))
    return rows


if __name__ == "__main__":
    ARGS = parser(__doc__.splitlines()[0]).parse_args()  # bench_kernel's options: same trace, same repeats
    print_table(f"what the solver's rules cost the kernel ({ARGS.entities} entities x {ARGS.frames} frames)", run(ARGS))
