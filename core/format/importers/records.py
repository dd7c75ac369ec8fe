"""Records of the resweep lines log (``log_format.md``): one parsed, checked record per line.

Every problem is a :class:`LogLineError` naming the line, the field and a reason kind, so
``--skip-bad`` can count bad lines by kind. Parsing is pure: no state beyond the record.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

from resweep.core.errors import ResweepError

#: Record types of the log; entity-frame records may leave ``type`` out.
TYPES = ("frame", "header", "chunk", "voxel", "edit")
MAX_TYPE = 65535
MAX_COORD = 1 << 40


class LogLineError(ResweepError):
    """A line of an imported log that cannot be used.

    Attributes:
        path: the log file. line: 1-based line number. field: the field at fault, or None.
        kind: reason category (e.g. ``"count"``, ``"order"``) used to count skipped lines.
        reason: the message without the path.
    """

    def __init__(self, path, line: int, kind: str, reason: str, field: str | None = None):
        self.path, self.line, self.kind, self.reason, self.field = str(path), int(line), kind, reason, field
        super().__init__(f"{self.path}: line {self.line}: {reason}")


@dataclass(frozen=True)
class EntityFrame:
    """One entity in one frame: frame index and/or time, id, vectors (tuples of 3 floats)."""

    line: int
    frame: int | None
    time: float | None
    id: int
    name: str | None
    half: tuple | None
    start: tuple
    motion: tuple
    end: tuple
    active: bool
    grounded: bool


class Fields:
    """Checked access to one record's fields; errors name the line and the field."""

    def __init__(self, path, line: int, rec: dict):
        self.path, self.line, self.rec = path, line, rec

    def fail(self, kind, reason, field=None):
        return LogLineError(self.path, self.line, kind, reason, field)

    def has(self, key) -> bool:
        return self.rec.get(key) is not None

    def vec(self, key, n: int = 3, integer: bool = False, required: bool = True):
        v = self.rec.get(key)
        if v is None:
            if required:
                raise self.fail("missing", f"`{key}` is missing", key)
            return None
        if not isinstance(v, (list, tuple)):
            raise self.fail("count", f"`{key}` needs {n} numbers, got {_what(v)}", key)
        if len(v) != n:
            raise self.fail("count", f"`{key}` needs {n} numbers, got {len(v)}", key)
        return tuple(self._num(key, x, integer) for x in v)

    def _num(self, key, x, integer: bool):
        if isinstance(x, bool) or not isinstance(x, (int, float)):
            raise self.fail("number", f"`{key}` holds {_what(x)}, not a number", key)
        if integer:
            if isinstance(x, float) and not x.is_integer():
                raise self.fail("integer", f"`{key}` must hold integers, got {x!r}", key)
            if abs(x) > MAX_COORD:
                raise self.fail("range", f"`{key}` value {int(x)} is beyond +-{MAX_COORD}", key)
            return int(x)
        return float(x)

    def int(self, key, required: bool = True, lo: int | None = None, hi: int | None = None):
        v = self.rec.get(key)
        if v is None:
            if required:
                raise self.fail("missing", f"`{key}` is missing", key)
            return None
        if isinstance(v, bool) or not isinstance(v, (int, float)) or (isinstance(v, float) and not v.is_integer()):
            raise self.fail("integer", f"`{key}` must be an integer, got {v!r}", key)
        v = int(v)
        if (lo is not None and v < lo) or (hi is not None and v > hi):
            raise self.fail("range", f"`{key}` {v} is not in {lo}..{hi if hi is not None else ''}", key)
        return v

    def float(self, key, required: bool = True):
        v = self.rec.get(key)
        if v is None:
            if required:
                raise self.fail("missing", f"`{key}` is missing", key)
            return None
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
            raise self.fail("number", f"`{key}` must be a finite number, got {v!r}", key)
        return float(v)

    def bool(self, key, default: bool) -> bool:
        v = self.rec.get(key)
        if v is None:
            return default
        if not isinstance(v, bool):
            raise self.fail("bool", f"`{key}` must be true or false, got {v!r}", key)
        return v

    def str(self, key):
        v = self.rec.get(key)
        if v is None:
            return None
        if not isinstance(v, str):
            raise self.fail("string", f"`{key}` must be a string, got {_what(v)}", key)
        return v


def record_type(path, line: int, rec) -> str:
    """The record's type (``"frame"`` when absent)."""
    if not isinstance(rec, dict):
        raise LogLineError(path, line, "object", f"expected a JSON object, got {_what(rec)}")
    t = rec.get("type", "frame")
    if t not in TYPES:
        raise LogLineError(path, line, "type", f"unknown record `type` {t!r} (expected one of {', '.join(TYPES)})",
                           "type")
    return t


def entity_frame(path, line: int, rec: dict) -> EntityFrame:
    """An entity-frame record, checked."""
    f = Fields(path, line, rec)
    frame = f.int("frame", required=False, lo=0)
    time = f.float("time", required=False)
    if frame is None and time is None:
        raise f.fail("missing", "needs `frame` or `time`", "frame")
    return EntityFrame(line, frame, time, f.int("id"), f.str("name"), f.vec("half_extents", required=False),
                       f.vec("start"), f.vec("motion"), f.vec("end"), f.bool("active", True), f.bool("grounded", False))


def _what(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if v is None:
        return "null"
    if isinstance(v, (list, tuple)):
        return f"a list of {len(v)}"
    if isinstance(v, dict):
        return "an object"
    if isinstance(v, str):
        return f"the string {v[:20]!r}"
    return repr(v)
