"""Trace description for ``resweep info``: header facts plus a streamed scan for bad rows."""
from __future__ import annotations

import numpy as np

from resweep.core.check.validity import reason, valid_rows
from resweep.core.format.reader import Trace


def block_counts(blocks: np.ndarray, step: int = 1 << 20) -> np.ndarray:
    """Voxels per block type of ``blocks`` (uint8/uint16, any shape): int64 (max type + 1,).

    Counted in slices of ``step`` voxels, so the temporary index array stays small however big
    the world is (np.bincount converts its whole input to intp first).
    """
    flat = blocks.reshape(-1)
    counts = np.zeros(1, np.int64)
    for a in range(0, flat.size, step):
        part = np.bincount(flat[a:a + step])
        if len(part) > len(counts):
            counts = np.concatenate([counts, np.zeros(len(part) - len(counts), np.int64)])
        counts[:len(part)] += part
    return counts


def describe(trace: Trace, max_problems: int = 20) -> dict:
    """JSON-ready facts about ``trace``; scans every frame block for invalid active rows (judged
    in the file's float type; ``check --precision float32`` may find more, e.g. 1e300)."""
    bounds = trace.world_bounds()
    counts = block_counts(trace.chunk_blocks)
    used = [int(t) for t in np.flatnonzero(counts)]
    shown_types = sorted(set(used) | set(range(min(trace.shapes.count, 64))))
    types = [{"type": t, "name": trace.shapes.name(t), "boxes": int(len(trace.shapes.boxes_of(t)))
              if t < trace.shapes.count else 0, "voxels": int(counts[t]) if t < len(counts) else 0}
             for t in shown_types]
    problems = list(trace.problems)
    active_rows = invalid_rows = 0
    for blk in trace.iter_frames():
        act = blk.active
        active_rows += int(act.sum())
        bad = act & ~valid_rows(blk.start, blk.motion, blk.end, blk.half)
        invalid_rows += int(bad.sum())
        for f, c in zip(*np.nonzero(bad)):
            if len(problems) >= max_problems:
                break
            why = reason(blk.start[f, c], blk.motion[f, c], blk.end[f, c], blk.half[f, c])
            problems.append(f"frame {blk.f0 + f}, entity {trace.ids[c]}: {why} (reported as invalid)")
    if invalid_rows > max_problems:
        problems.append(f"... {invalid_rows} invalid rows in all")
    t = trace.time
    return {
        "path": trace.path, "version": 1, "title": trace.title, "producer": trace.producer,
        "voxel_size": trace.voxel_size, "up_axis": trace.up_axis,
        "frames": trace.frame_count, "entities": trace.entity_count,
        "entity_ids": [int(i) for i in trace.ids[:50]], "entity_names": list(trace.names[:50]),
        "time_span": [float(t[0]), float(t[-1])] if len(t) else None,
        "frame_dtype": str(trace.frame_dtype),
        "chunk_size": trace.chunk_size, "chunks": int(len(trace.chunk_origin)),
        "world_bounds": [[int(x) for x in bounds[0]], [int(x) for x in bounds[1]]] if bounds else None,
        "edits": int(len(trace.edits)), "block_types": types, "block_type_count": int(trace.shapes.count)
        if trace.type_count < 65536 else None,
        "active_entity_frames": active_rows, "invalid_entity_frames": invalid_rows, "problems": problems,
        "ended_early": trace.ended_early_info(),
    }


def ended_early_text(e: dict) -> str:
    """The words for an ``ended_early`` record (:meth:`Trace.ended_early_info`)."""
    t = "no frame flushed" if e["last_flushed_time"] is None else f"last flushed at {e['last_flushed_time']:.3f} s"
    return f"trace ended early (the recorder did not close it): {e['frames_read']} frames read, {t}"


def ended_early_line(trace: Trace) -> str | None:
    """One line saying a trace ended early (frames read, last flushed time), or None."""
    e = trace.ended_early_info()
    return None if e is None else ended_early_text(e)
