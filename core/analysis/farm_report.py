"""Farm results: joining the ranges of a split trace, and the summary over all traces.

Everything here is plain data in, plain data out; the order of results never matters (parts are
keyed by their first frame, traces listed by path), so the report of a farm does not depend on
the number of workers or on which finished first.
"""
from __future__ import annotations

from dataclasses import dataclass, field

from resweep.core.check.kinds import KINDS


def merge_ranges(parts, limit: int):
    """One TraceReport from the reports of consecutive frame ranges of one trace.

    Args:
        parts: TraceReports of ranges that cover the trace, in frame order.
        limit: divergences kept, as for the whole-trace check.
    Counts and entity-frames add up; the divergence lists are joined in frame order (inside a range
    they are in (frame, entity column, kind) order, as a whole check lists them) and cut at
    ``limit``, so the result equals the whole-trace check's report.
    """
    from resweep.core.check.stream import TraceReport
    first = parts[0]
    out = TraceReport(first.path, first.frames, first.entities, 0, ended_early=first.ended_early)
    for p in parts:
        out.entity_frames += p.entity_frames
        for k in KINDS:
            out.counts[k] += p.counts[k]
        room = limit - len(out.divergences)
        if room > 0:
            out.divergences.extend(p.divergences[:room])
        out.cancelled = out.cancelled or p.cancelled
    return out


@dataclass
class FarmResults:
    """Where every trace of a farm stands.

    Attributes:
        traces: the TraceInputs, sorted by path.
        reports: path -> TraceReport of each trace checked to the end.
        unreadable: path -> one-line reason (missing inputs use their input text as path).
        keys: path -> baseline key (see ``farm_inputs.TraceInput``).
        interrupted: True when the farm was cancelled; traces with neither a report nor a reason
            were not checked.
        worker_seconds: task wall seconds summed over workers.
    """

    traces: list
    reports: dict = field(default_factory=dict)
    unreadable: dict = field(default_factory=dict)
    keys: dict = field(default_factory=dict)
    interrupted: bool = False
    worker_seconds: float = 0.0

    def not_checked(self) -> list[str]:
        return [t.path for t in self.traces if t.path not in self.reports and t.path not in self.unreadable]

    def entity_frames(self) -> int:
        return sum(r.entity_frames for r in self.reports.values())


def failing_count(counts: dict, fail_on) -> int:
    return sum(counts[k] for k in fail_on)


def summary(res: FarmResults, fail_on, worst: int | None = None) -> dict:
    """The farm summary as JSON-ready data.

    Keys: ``traces`` (found), ``checked``, ``failing`` (traces with a failing kind), ``unreadable``
    (list of {path, key, reason}), ``not_checked`` (paths, after an interruption),
    ``entity_frames``, ``counts`` (per kind, over all checked traces), ``worst`` (failing traces,
    most failing divergences first, then most divergences of any kind, then path; the first
    ``worst`` of them, all when None) and ``index`` (every trace by path: key, status, counts).
    """
    counts = {k: 0 for k in KINDS}
    for r in res.reports.values():
        for k in KINDS:
            counts[k] += r.counts[k]
    failing = [r for r in res.reports.values() if failing_count(r.counts, fail_on)]
    failing.sort(key=lambda r: (-failing_count(r.counts, fail_on), -sum(r.counts.values()), r.path))
    ranked = failing if worst is None else failing[:worst]
    return {
        "traces": len(res.traces), "checked": len(res.reports), "failing": len(failing),
        "unreadable": [{"path": p, "key": res.keys.get(p, p), "reason": why} for p, why in sorted(res.unreadable.items())],
        "not_checked": res.not_checked(), "interrupted": res.interrupted,
        "entity_frames": res.entity_frames(), "counts": counts,
        "worst": [{"path": r.path, "key": res.keys.get(r.path, r.path), "failing": failing_count(r.counts, fail_on),
                   "counts": dict(r.counts)} for r in ranked],
        "index": [_index_row(res, t) for t in res.traces],
    }


def _index_row(res: FarmResults, t) -> dict:
    if t.path in res.reports:
        return {"key": t.key, "path": t.path, "status": "checked", "counts": dict(res.reports[t.path].counts)}
    if t.path in res.unreadable:
        return {"key": t.key, "path": t.path, "status": "unreadable", "reason": res.unreadable[t.path]}
    return {"key": t.key, "path": t.path, "status": "not_checked"}
