"""A deterministic recording scenario with entities that come and go, crouch and edit the world.

Frame ``f`` is a pure function of ``f`` (seeded generator), so a test can rebuild exactly what a
recorder was given before it was killed, and write the same data in one go with ``write_trace``.
"""
from __future__ import annotations

import os
import signal
import subprocess
import sys
from pathlib import Path

import numpy as np

from trace_factory import floor_world

FPS = 60.0
FLUSH = 16  # flush_every of the killed recorders
TESTS = Path(__file__).resolve().parent
BASE_IDS = (100, 101, 102, 103, 104)


def world():
    """(chunk_size, chunk_origin, chunk_blocks) of the floor world (chunk size 8)."""
    origin, blocks = floor_world()
    return 8, origin, blocks


def present(f: int) -> list[int]:
    """Entity ids present in frame ``f``: five that stay, one more every 20 frames living 35 frames."""
    spawned = [200 + m for m in range(max(0, (f - 35) // 20 + 1), f // 20 + 1) if 20 * m <= f < 20 * m + 35]
    return list(BASE_IDS) + spawned


def frame_args(f: int) -> dict:
    """Keyword arguments of ``Recorder.frame`` for frame ``f`` (float64 values, bit-reproducible)."""
    ids = present(f)
    rng = np.random.default_rng(f)
    n = len(ids)
    start = np.column_stack([rng.uniform(1, 15, n), rng.uniform(1.0, 3.0, n), rng.uniform(1, 15, n)])
    motion = rng.normal(0, 0.2, (n, 3))
    end = start + motion * rng.choice([1.0, 0.5], n)[:, None]
    half = np.array([[0.3, 0.5 if (f % 10 < 5 or i != 100) else 0.3, 0.3] for i in ids])
    return dict(time=f / FPS, ids=ids, start=start, motion=motion, end=end, half_extents=half,
                active=np.array([not (i == 101 and f % 7 == 3) for i in ids]),
                grounded=np.array([(f + i) % 3 == 0 for i in ids]), names=[f"crate {i}" for i in ids])


def edit_before(f: int):
    """The edit (x, y, z, type) made just before frame ``f`` is recorded, or None."""
    if f % 13 == 5:
        return (f % 16, 1 + f % 3, 3, f % 3)
    if f % 29 == 7:  # outside the recorded chunks: the format allows it
        return (40 + f % 5, 2, -9, 1)
    return None


def record(rec, frames, after_frame=None):
    """Feed frames ``[0, frames)`` with their edits to ``rec`` (Recorder or RingRecorder)."""
    for f in range(frames):
        e = edit_before(f)
        if e is not None:
            rec.edit(*e)
        rec.frame(**frame_args(f))
        if after_frame is not None:
            after_frame(f)


def dense(frames: int) -> dict:
    """The first ``frames`` frames as ``write_trace`` keyword arguments (entities by first appearance)."""
    order = []
    for f in range(frames):
        order += [i for i in present(f) if i not in order]
    col = {i: c for c, i in enumerate(order)}
    N = len(order)
    out = {k: np.zeros((frames, N, 3)) for k in ("start", "motion", "end", "frame_half_extents")}
    active, grounded = np.zeros((frames, N), bool), np.zeros((frames, N), bool)
    first_half, names = np.zeros((N, 3)), [f"crate {i}" for i in order]
    seen = set()
    for f in range(frames):
        a = frame_args(f)
        cs = [col[i] for i in a["ids"]]
        for key, src in (("start", "start"), ("motion", "motion"), ("end", "end"),
                         ("frame_half_extents", "half_extents")):
            out[key][f, cs] = a[src]
        active[f, cs], grounded[f, cs] = a["active"], a["grounded"]
        for j, i in enumerate(a["ids"]):
            if i not in seen:
                seen.add(i)
                first_half[col[i]] = a["half_extents"][j]
    edits = [(f, *edit_before(f)) for f in range(frames) if edit_before(f) is not None]
    S, origin, blocks = world()
    return dict(chunk_size=S, chunk_origin=origin, chunk_blocks=blocks, entity_ids=np.array(order, np.int64),
                half_extents=first_half, entity_names=names, time=np.arange(frames) / FPS, active=active,
                grounded=grounded, edits=np.array(edits, np.int64).reshape(-1, 5), **out)



# The child records the scenario and is killed (by itself, at a chosen point, or by the parent).
CHILD = r"""
import os, signal, sys, time
import h5py
import recording_helpers as rh
from resweep.core.format.recorder import Recorder
mode, n, path, flush = sys.argv[1], int(sys.argv[2]), sys.argv[3], int(sys.argv[4])
die = lambda: os.kill(os.getpid(), signal.SIGKILL)
calls = [0]
def counting(real):
    def wrapped(*a, **k):
        calls[0] += 1
        if calls[0] == n:
            die()
        return real(*a, **k)
    return wrapped
if mode == "before_commit":   # the n-th commit record is never written
    Recorder._commit = counting(Recorder._commit)
if mode == "mid_rows":        # killed between two dataset writes of a flush
    h5py.Dataset.__setitem__ = counting(h5py.Dataset.__setitem__)
S, origin, blocks = rh.world()
rec = Recorder(path, chunk_size=S, chunk_origin=origin, chunk_blocks=blocks, flush_every=flush)
def after(f):
    if mode == "after_frame" and f == n:
        die()
    if mode == "external":
        print(f, flush=True)
        time.sleep(0.002)
    if mode == "slow":
        time.sleep(0.01)
rh.record(rec, n if mode == "slow" else 3000, after)
rec.close()
"""


def record_and_kill(tmp_path, mode, n, parent_kill_at=None):
    """Record the scenario in a child process killed with SIGKILL; returns (path, last frame printed).

    ``mode``: ``after_frame`` (after frame n), ``before_commit`` (at the n-th commit),
    ``mid_rows`` (at the n-th dataset write), ``external`` (the parent kills it once frame
    ``parent_kill_at`` was recorded).
    """
    path = tmp_path / f"{mode}_{n}.h5"
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(TESTS), os.environ.get("PYTHONPATH", "")]))
    cmd = [sys.executable, "-c", CHILD, mode, str(n), str(path), str(FLUSH)]
    if parent_kill_at is None:
        proc = subprocess.run(cmd, env=env, capture_output=True, text=True, timeout=120)
        assert proc.returncode == -signal.SIGKILL, proc.stderr
        return path, None
    proc = subprocess.Popen(cmd, env=env, stdout=subprocess.PIPE, text=True)
    last = -1
    try:
        for line in proc.stdout:
            last = int(line)
            if last >= parent_kill_at:
                proc.send_signal(signal.SIGKILL)
                break
    finally:
        proc.wait(timeout=60)
        proc.stdout.close()
    assert proc.returncode == -signal.SIGKILL
    return path, last


def start_slow_recorder(path, frames: int):
    """A child process recording ``frames`` frames of the scenario at about 100 per second, then
    closing the trace. Returns the Popen once the trace file exists (header and world on disk)."""
    import time
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(TESTS), os.environ.get("PYTHONPATH", "")]))
    proc = subprocess.Popen([sys.executable, "-c", CHILD, "slow", str(frames), str(path), str(FLUSH)], env=env)
    deadline = time.monotonic() + 60
    while not os.path.exists(path):
        assert proc.poll() is None and time.monotonic() < deadline, "recorder did not start"
        time.sleep(0.02)
    return proc


# -- a recording whose rounds the test chooses --------------------------------------------------
GLIDE_IDS = (7, 8, 9)
GLIDE_JUMP = {7: (48, np.array([0.0, 0.0, 1.25])), 8: (20, np.array([0.75, 0.0, 0.0]))}  # id: (frame, offset)
GLIDE_LATE = {9: 48}  # id: first frame


def glide_args(f: int) -> dict:
    """``Recorder.frame`` arguments of frame ``f`` of a free glide above the floor world: every
    recorded end equals the start plus the motion and the next frame starts there, except that
    entity 7 teleports by (0, 0, 1.25) at frame 48 and entity 8 by (0.75, 0, 0) at frame 20
    (discontinuities of 1.25 and 0.75); entity 9 appears at frame 48. No solid is near."""
    ids = [i for i in GLIDE_IDS if f >= GLIDE_LATE.get(i, 0)]
    base = {7: (2.0, 1.5, 1.0), 8: (3.5, 1.5, 1.0), 9: (5.0, 1.5, 2.0)}
    v = np.array([0.0, 0.0, 1.0 / 32])  # exact in binary: positions and ends are exact
    start = []
    for i in ids:
        p = np.array(base[i]) + (f - GLIDE_LATE.get(i, 0)) * v
        at, offset = GLIDE_JUMP.get(i, (None, None))
        if at is not None and f >= at:
            p = p + offset
        start.append(p)
    start = np.array(start)
    motion = np.tile(v, (len(ids), 1))
    return dict(time=f / FPS, ids=ids, start=start, motion=motion, end=start + motion,
                half_extents=np.full((len(ids), 3), 0.25))


STEPPED = r"""
import sys
import recording_helpers as rh
from resweep.core.format.recorder import Recorder
path, total = sys.argv[1], int(sys.argv[2])
S, origin, blocks = rh.world()
rec = Recorder(path, chunk_size=S, chunk_origin=origin, chunk_blocks=blocks, flush_every=1 << 30)
f = 0
print("open", flush=True)
for line in sys.stdin:
    n = min(int(line), total)
    while f < n:
        rec.frame(**rh.glide_args(f))
        f += 1
    if n == total:
        rec.close()
    else:
        rec.flush()
    print(n, flush=True)
    if n == total:
        break
"""


class SteppedRecorder:
    """A child process recording :func:`glide_args` frames; :meth:`commit_to` records up to a
    frame and commits there, so the caller decides where every flush (and follow round) ends.
    Committing ``total`` closes the trace."""

    def __init__(self, path, total: int):
        env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(TESTS), os.environ.get("PYTHONPATH", "")]))
        self.proc = subprocess.Popen([sys.executable, "-c", STEPPED, str(path), str(total)], env=env,
                                     stdin=subprocess.PIPE, stdout=subprocess.PIPE, text=True)
        assert self.proc.stdout.readline().strip() == "open"

    def commit_to(self, frame: int):
        self.proc.stdin.write(f"{frame}\n")
        self.proc.stdin.flush()
        assert int(self.proc.stdout.readline()) == frame

    def wait(self) -> int:
        self.proc.stdin.close()
        code = self.proc.wait(timeout=60)
        self.proc.stdout.close()
        return code
