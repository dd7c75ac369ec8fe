"""Is tonight worse than yesterday? Compare a farm's per-trace counts with a saved report.

A baseline is the JSON a previous ``resweep check --json`` wrote: a farm report (its
``farm.index`` lists every trace by key) or a plain check report (its ``traces`` list; keyed by
file name). Traces are matched by key, so folders of different nights compare trace by trace.
A regression is a failing kind that appears in a trace (absent, or the trace new) or whose count
grows; kinds that shrink and traces that vanished are reported but are not regressions.
"""
from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import PurePath

from resweep.core.check.kinds import KINDS
from resweep.core.errors import ReportFileError

#: Baselines are small JSON files; refuse anything much bigger than 100,000 traces' counts.
MAX_BASELINE_BYTES = 1 << 30


@dataclass(frozen=True)
class Regression:
    """``kind`` went from ``before`` (None: the trace is not in the baseline) to ``after`` in ``key``."""

    key: str
    kind: str
    before: int | None
    after: int

    def one_line(self) -> str:
        if self.before is None:
            return f"{self.key}: {self.kind} {self.after} (new trace)"
        if self.before == 0:
            return f"{self.key}: {self.kind} appears ({self.after})"
        return f"{self.key}: {self.kind} grows {self.before} -> {self.after}"


def load_baseline(path) -> dict[str, dict]:
    """key -> counts per kind of every trace checked in the saved report at ``path``."""
    try:
        with open(path, "rb") as fh:
            raw = fh.read(MAX_BASELINE_BYTES + 1)
    except OSError as exc:
        raise ReportFileError(path, f"cannot read baseline: {exc.strerror or exc}") from None
    if len(raw) > MAX_BASELINE_BYTES:
        raise ReportFileError(path, f"baseline is larger than {MAX_BASELINE_BYTES >> 20} MiB")
    try:
        doc = json.loads(raw)
    except (ValueError, UnicodeDecodeError) as exc:
        raise ReportFileError(path, f"baseline is not JSON ({exc})") from None
    if not isinstance(doc, dict) or doc.get("version") != 1:
        raise ReportFileError(path, "not a resweep check report (no \"version\": 1)")
    try:
        if isinstance(doc.get("farm"), dict):
            rows = [(r["key"], r["counts"]) for r in doc["farm"]["index"] if r.get("status") == "checked"]
        else:
            rows = [(PurePath(str(t["path"])).name, t["counts"]) for t in doc["traces"]]
        return {str(k): {kind: _count(c, kind) for kind in KINDS} for k, c in rows}
    except (KeyError, TypeError, ValueError) as exc:
        raise ReportFileError(path, f"baseline lacks per-trace counts ({type(exc).__name__}: {exc})") from None


def _count(counts, kind: str) -> int:
    v = counts.get(kind, 0)
    if isinstance(v, bool) or not isinstance(v, int) or v < 0:
        raise ValueError(f"count of {kind} is {v!r}")
    return v


def compare(today: dict[str, dict], baseline: dict[str, dict], fail_on) -> list[Regression]:
    """Regressions of ``today`` (key -> counts) against ``baseline``, sorted by key then kind order."""
    out = []
    for key in sorted(today):
        before = baseline.get(key)
        for kind in KINDS:
            if kind not in fail_on:
                continue
            after = today[key][kind]
            was = None if before is None else before[kind]
            if after > (was or 0):
                out.append(Regression(key, kind, was, after))
    return out


def vanished(today: dict[str, dict], baseline: dict[str, dict]) -> list[str]:
    """Keys checked in the baseline but not today (removed, renamed or unreadable tonight)."""
    return sorted(set(baseline) - set(today))
