"""Export a trace as a lines log (``log_format.md``): the inverse of the importer.

Writes a header, the chunks run-length encoded, then per frame its edits and one entity-frame
record per entity column (inactive rows too, flagged ``"active": false``, so a round trip keeps
every array). Floats are written with ``repr`` precision, which reads back to the same double.
"""
from __future__ import annotations

import json

import numpy as np

from resweep.core.format.reader import Trace
from resweep.core.world.shapes import IMPLICIT_TYPES


def header_record(trace: Trace) -> dict:
    rec = {"type": "header", "format": "resweep-lines", "version": 1, "chunk_size": trace.chunk_size,
           "voxel_size": trace.voxel_size, "up_axis": trace.up_axis, "precision": str(trace.frame_dtype)}
    if trace.title:
        rec["title"] = trace.title
    if trace.producer:
        rec["producer"] = trace.producer
    if trace.type_count < IMPLICIT_TYPES:
        sh = trace.shapes
        rec["blocks"] = [{"name": sh.name(t), "boxes": sh.boxes_of(t).tolist()} for t in range(1, sh.count)]
    return rec


def chunk_record(origin, blocks: np.ndarray) -> dict:
    """A chunk as ``{"type": "chunk", "origin", "rle"}`` ([x][y][z] order)."""
    flat = blocks.reshape(-1).astype(np.int64)
    cut = np.flatnonzero(np.diff(flat)) + 1
    starts = np.concatenate([[0], cut])
    counts = np.diff(np.concatenate([starts, [len(flat)]]))
    return {"type": "chunk", "origin": [int(v) for v in origin],
            "rle": [[int(c), int(flat[s])] for s, c in zip(starts, counts)]}


def export_lines(trace: Trace, out) -> int:
    """Write ``trace`` to the text stream ``out`` as JSON Lines; returns the lines written."""
    dump = json.dumps
    n = 0

    def put(rec):
        nonlocal n
        out.write(dump(rec, separators=(",", ":")) + "\n")
        n += 1

    put(header_record(trace))
    for o, b in zip(trace.chunk_origin, trace.chunk_blocks):
        put(chunk_record(o, b))
    edits = trace.edits[np.argsort(trace.edits[:, 0], kind="stable")] if len(trace.edits) else trace.edits
    e = 0
    named = set()
    for blk in trace.iter_frames():
        for j in range(blk.f1 - blk.f0):
            f = blk.f0 + j
            while e < len(edits) and edits[e, 0] <= f:
                put({"type": "edit", "frame": max(0, int(edits[e, 0])), "at": edits[e, 1:4].tolist(),
                     "block": int(edits[e, 4])})
                e += 1
            for c, eid in enumerate(trace.ids.tolist()):
                put(_row(trace, blk, j, f, c, eid, named))
    for row in edits[e:]:
        put({"type": "edit", "frame": int(row[0]), "at": row[1:4].tolist(), "block": int(row[4])})
    return n


def _row(trace: Trace, blk, j: int, f: int, c: int, eid: int, named: set) -> dict:
    rec = {"frame": f, "time": float(trace.time[f]), "id": eid}
    if eid not in named:
        named.add(eid)
        rec["name"] = trace.names[c]
    rec["half_extents"] = [float(v) for v in blk.half[j, c]]
    for key, arr in (("start", blk.start), ("motion", blk.motion), ("end", blk.end)):
        rec[key] = [float(v) for v in arr[j, c]]
    if not blk.active[j, c]:
        rec["active"] = False
    if blk.grounded is not None and blk.grounded[j, c]:
        rec["grounded"] = True
    return rec
