"""A check's results do not depend on thread count, entity order, chunk order or block size.

Each entity-frame is solved on its own and written to its own output slots, and ties between
faces are broken by voxel order, not visiting order; so the report and every per-row result must
be bit-identical under all of these changes. Compared by sha256 digests of the JSON report and of
the per-row result arrays (sorted by frame and entity id where the entity order changes).
"""
from __future__ import annotations

import hashlib
import json
import os
import subprocess
import sys

import numpy as np
import pytest

from resweep.core import SolverSettings, check_trace, open_trace, write_trace
from resweep.core.demo.quarry import SHAPES, quarry_grid
from resweep.core.world.voxel_world import chunks_from_dense

FIELDS = ("ref_end", "npass", "state", "toi", "normal", "voxel", "block", "candidates", "points", "flags", "error")


def _trace_arrays(seed=5, frames=90, n=40):
    """The quarry world with edits and random rows: walks, falls, 16- and 48-voxel dashes."""
    rng = np.random.default_rng(seed)
    origin, blocks = chunks_from_dense(quarry_grid(), (0, 0, 0), 16)
    start = rng.uniform([1, 3, 1], [63, 12, 47], (frames, n, 3))
    length = rng.choice([0.1, 0.5, 16.0, 48.0], (frames, n), p=[0.5, 0.3, 0.1, 0.1])
    d = rng.normal(size=(frames, n, 3))
    motion = d / np.linalg.norm(d, axis=-1, keepdims=True) * length[..., None]
    end = start + motion * rng.choice([0.0, 0.6, 1.0], (frames, n, 1))
    start[1:] = np.where(rng.random((frames - 1, n, 1)) < 0.9, end[:-1], start[1:])  # mostly continuous
    return dict(chunk_size=16, chunk_origin=origin, chunk_blocks=blocks, shapes=SHAPES,
                edits=np.array([[20, 20, 4, 12, 0], [20, 20, 5, 12, 0], [45, 9, 4, 22, 5], [60, 6, 4, 30, 0]]),
                entity_ids=np.arange(100, 100 + n), half_extents=np.tile([0.3, 0.9, 0.3], (n, 1)),
                time=np.arange(frames) / 60.0, start=start, motion=motion, end=end,
                active=rng.random((frames, n)) < 0.9,
                frame_half_extents=rng.choice([0.2, 0.3, 0.45], (frames, n, 3)))


def _write(path, kw):
    write_trace(path, title="determinism", producer="tests", **kw)
    return str(path)


def _run(path, precision="float64", rows_per_block=1 << 17, settings=None, fields=FIELDS):
    """(report JSON text, per-row arrays keyed by frame and entity id, in (frame, id) order);
    ``settings`` replace the defaults of ``precision``."""
    got = {k: [] for k in fields + ("frame", "id")}
    with open_trace(path) as tr:
        def keep(b):
            got["frame"].append(b.frame)
            got["id"].append(tr.ids[b.column])
            for k in fields:
                got[k].append(getattr(b.rows, k))
        report = check_trace(tr, settings or SolverSettings(precision=precision), limit=100000, on_block=keep,
                             rows_per_block=rows_per_block)
    rows = {k: np.concatenate(v) for k, v in got.items()}
    order = np.lexsort((rows["id"], rows["frame"]))
    doc = report.as_json()
    doc["path"] = None  # the only field that names the file
    return json.dumps(doc, sort_keys=True), {k: v[order] for k, v in rows.items()}


def _digest(rows, fields=FIELDS + ("frame", "id")) -> str:
    h = hashlib.sha256()
    for k in fields:
        h.update(k.encode())
        h.update(np.ascontiguousarray(rows[k]).tobytes())
    return h.hexdigest()


def _sorted_divergences(report_json: str) -> list:
    rep = json.loads(report_json)
    return sorted(json.dumps(d, sort_keys=True) for d in rep["divergences"])


@pytest.fixture(scope="module")
def base(tmp_path_factory):
    kw = _trace_arrays()
    path = _write(tmp_path_factory.mktemp("det") / "base.h5", kw)
    return kw, path


_CHILD = """
import hashlib, json, sys
import numpy as np
from resweep.core import SolverSettings, check_trace, open_trace
digest = hashlib.sha256()
with open_trace(sys.argv[1]) as tr:
    def keep(b):
        for k in {fields!r}:
            digest.update(np.ascontiguousarray(getattr(b.rows, k)).tobytes())
    rep = check_trace(tr, SolverSettings(precision=sys.argv[2]), limit=100000, on_block=keep, rows_per_block=2000)
import numba
print(numba.get_num_threads(), digest.hexdigest(), hashlib.sha256(json.dumps(rep.as_json()).encode()).hexdigest())
"""


@pytest.mark.parametrize("precision", ["float64", "float32"])
def test_same_digest_for_one_two_and_three_threads(base, precision):
    _, path = base
    out = []
    for threads in (1, 2, 3):
        env = dict(os.environ, NUMBA_NUM_THREADS=str(threads))
        res = subprocess.run([sys.executable, "-c", _CHILD.format(fields=FIELDS), path, precision],
                             env=env, capture_output=True, text=True, timeout=600)
        assert res.returncode == 0, res.stderr
        n, rows_digest, json_digest = res.stdout.split()
        assert int(n) == threads
        out.append((rows_digest, json_digest))
    assert out[0] == out[1] == out[2]


def test_same_results_in_process_after_set_num_threads(base):
    import numba
    _, path = base
    before = numba.get_num_threads()
    try:
        numba.set_num_threads(1)
        one = _run(path, rows_per_block=1000)
        numba.set_num_threads(min(2, numba.config.NUMBA_NUM_THREADS))
        two = _run(path, rows_per_block=1000)
    finally:
        numba.set_num_threads(before)
    assert one[0] == two[0] and _digest(one[1]) == _digest(two[1])


def test_one_solver_thread_reads_on_the_calling_thread(base):
    """With one solver thread the check starts no reader thread (``--threads 1`` and a farm worker
    with one thread use one core); prefetching or not, the results are the same bytes."""
    import threading
    import numba
    _, path = base
    before = numba.get_num_threads()
    seen = []

    def readers(_block):
        seen.append(sum(t.name.startswith("resweep-read") for t in threading.enumerate()))

    try:
        numba.set_num_threads(1)
        with open_trace(path) as tr:
            check_trace(tr, SolverSettings(), on_block=readers, rows_per_block=500)
        one, alone = seen[:], _run(path, rows_per_block=500)
        seen.clear()
        numba.set_num_threads(min(2, numba.config.NUMBA_NUM_THREADS))
        with open_trace(path) as tr:
            check_trace(tr, SolverSettings(), on_block=readers, rows_per_block=500, prefetch=True)
        ahead = _run(path, rows_per_block=500)
    finally:
        numba.set_num_threads(before)
    assert len(one) > 3 and max(one) == 0  # many blocks, none read on another thread
    assert max(seen) == 1  # prefetch=True does read ahead on one thread
    assert alone[0] == ahead[0] and _digest(alone[1]) == _digest(ahead[1])


@pytest.mark.parametrize("limit", [0, 1, 7, 250])
def test_a_limited_report_is_the_head_of_the_full_one(base, limit):
    """A report with ``limit`` keeps exactly the first ``limit`` divergences of the unlimited
    report, with the same exact counts (the check details only as many diverging rows as the
    limit leaves room for, block after block)."""
    _, path = base
    with open_trace(path) as tr:
        full = check_trace(tr, SolverSettings(), limit=10 ** 9, rows_per_block=700).as_json()
        head = check_trace(tr, SolverSettings(), limit=limit, rows_per_block=700).as_json()
    assert len(full["divergences"]) > 250 * 2
    assert head["counts"] == full["counts"]
    assert head["divergences"] == full["divergences"][:limit]


def test_entity_order_does_not_matter(base, tmp_path):
    kw, path = base
    perm = np.random.default_rng(1).permutation(len(kw["entity_ids"]))
    pk = dict(kw)
    for name in ("start", "motion", "end", "active", "frame_half_extents"):
        pk[name] = kw[name][:, perm]
    pk["entity_ids"] = kw["entity_ids"][perm]
    pk["half_extents"] = kw["half_extents"][perm]
    a_json, a_rows = _run(path)
    b_json, b_rows = _run(_write(tmp_path / "perm.h5", pk))
    assert _digest(a_rows) == _digest(b_rows)
    a, b = json.loads(a_json), json.loads(b_json)
    assert a["counts"] == b["counts"] and sum(a["counts"].values()) > 100
    # Within a frame the report lists divergences in column order, which the permutation changes.
    assert _sorted_divergences(a_json) == _sorted_divergences(b_json)


def test_chunk_order_and_block_size_do_not_matter(base, tmp_path):
    kw, path = base
    pk = dict(kw)
    perm = np.random.default_rng(2).permutation(len(kw["chunk_origin"]))
    pk["chunk_origin"], pk["chunk_blocks"] = kw["chunk_origin"][perm], kw["chunk_blocks"][perm]
    a_json, a_rows = _run(path)
    b_json, b_rows = _run(_write(tmp_path / "chunks.h5", pk))
    c_json, c_rows = _run(path, rows_per_block=333)  # many blocks, edits landing inside blocks
    assert a_json == b_json == c_json
    assert _digest(a_rows) == _digest(b_rows) == _digest(c_rows)


def test_each_entity_frame_is_solved_once_and_edits_applied_forward(base, monkeypatch):
    # No repeated work: the classification reuses the reference solve (one flagging solve per
    # active entity-frame; only divergent rows are solved again, for their details), the world is
    # built once per check and edits are applied as the stream moves forward, never by restarting
    # from the recorded chunks.
    import resweep.core.check.stream as check_mod
    from resweep.core.world.voxel_world import VoxelWorld

    kw, path = base
    solved, flagged, frames, built = [], [], [], []
    real_solve, real_advance, real_init = check_mod.solve_rows, VoxelWorld.advance_to, VoxelWorld.__init__
    real_flag = check_mod.flag_rows

    def counting_solve(world, start, *a, **k):
        solved.append(len(start))
        return real_solve(world, start, *a, **k)

    def counting_flag(world, start, *a, **k):
        flagged.append(len(start))
        return real_flag(world, start, *a, **k)

    def recording_advance(self, frame):
        frames.append(frame)
        return real_advance(self, frame)

    def counting_init(self, *a, **k):
        built.append(1)
        real_init(self, *a, **k)

    monkeypatch.setattr(check_mod, "solve_rows", counting_solve)
    monkeypatch.setattr(check_mod, "flag_rows", counting_flag)
    monkeypatch.setattr(VoxelWorld, "advance_to", recording_advance)
    monkeypatch.setattr(VoxelWorld, "__init__", counting_init)
    with open_trace(path) as tr:
        report = check_trace(tr, SolverSettings(), rows_per_block=500)
    assert sum(flagged) == report.entity_frames == int(kw["active"].sum())
    assert 0 < sum(solved) <= sum(report.counts.values())  # each re-solved row has some kind
    assert len(built) == 1
    assert frames == sorted(frames) and len(frames) >= len(np.unique(kw["edits"][:, 0]))
