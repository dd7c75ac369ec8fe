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
