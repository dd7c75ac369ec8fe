"""Cutting a big trace into frame ranges that farm workers check independently.

Ranges are consecutive, cover every frame once and start on a multiple of the trace's streamed
block (``Trace.block_frames``), so each range reads whole storage chunks and its blocks line up
with those of a whole-trace check. ``check_trace(frames=...)`` makes the ranges' counts add up
exactly (see its docstring); :mod:`farm_report` joins their results.
"""
from __future__ import annotations

#: Entity-frames per range (about half a second of solving on one core of the development machine;
#: small enough that a 6 M entity-frame trace keeps 2 workers busy, big enough that reopening the
#: trace and rebuilding its world per range stays a few per cent).
RANGE_ROWS = 1 << 20
#: Small traces go to workers in batches of up to this many bytes of trace files and
#: :data:`BATCH_COUNT` traces: one task per trace would make a farm of 100,000 small traces pay the
#: scheduler's per-task cost (messages, bookkeeping) 100,000 times.
BATCH_BYTES = 16 << 20
BATCH_COUNT = 64


def plan_ranges(frame_count: int, entity_count: int, block_frames: int,
                range_rows: int = RANGE_ROWS) -> list[tuple[int, int]]:
    """Frame ranges ``[(f0, f1), ...]`` of about ``range_rows`` entity-frames each.

    A trace of at most 1.5 ``range_rows`` entity-frames stays whole (one range). Ranges have
    (nearly) equal sizes so that workers finish together, and whole blocks of ``block_frames``
    when they are at least one block long.
    """
    F, N = int(frame_count), max(1, int(entity_count))
    rows = F * N
    if F <= 1 or rows <= 1.5 * range_rows:
        return [(0, F)]
    n = min(-(-rows // int(range_rows)), F)
    per = -(-F // n)                  # frames per range
    step = max(1, int(block_frames))
    if per >= step:
        per = -(-per // step) * step  # whole blocks
    bounds = list(range(0, F, per)) + [F]
    return list(zip(bounds[:-1], bounds[1:]))


def plan_batches(sizes, workers: int, max_bytes: int = BATCH_BYTES, max_count: int = BATCH_COUNT) -> list[range]:
    """Group consecutive traces (``sizes``: file bytes of each, in farm order) into batches.

    A batch ends before it would pass ``max_bytes`` or ``max_count`` traces, and holds at most
    1/4 of the traces per worker, so every worker gets several batches and a slow one cannot
    leave the others idle at the end. A trace bigger than ``max_bytes`` is a batch of its own.
    Returns index ranges covering ``range(len(sizes))`` in order.
    """
    n = len(sizes)
    cap = max(1, min(int(max_count), -(-n // max(1, 4 * int(workers)))))
    out, first, total = [], 0, 0
    for i, size in enumerate(sizes):
        if i > first and (i - first >= cap or total + size > max_bytes):
            out.append(range(first, i))
            first, total = i, 0
        total += size
    if n:
        out.append(range(first, n))
    return out
