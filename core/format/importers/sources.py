"""Line sources of an imported log: JSON Lines or CSV, one record per line, read streaming.

Each source yields ``(line, record)`` with ``record`` a dict, or ``(line, LogLineError)`` for a
line that cannot be parsed at all, so the caller decides between stopping and skipping.
``bytes_read`` tracks progress through the file. Lines are read with a length cap, so one
endless line cannot exhaust memory.
"""
from __future__ import annotations

import csv
import io
import json

from resweep.core.format.importers.records import LogLineError

#: Longest line read (a 64-cube chunk as a flat list is about 0.5 MiB of JSON).
MAX_LINE = 16 << 20
#: CSV columns of an entity-frame (vectors as ``name_x``, ``name_y``, ``name_z``).
CSV_SCALARS = ("frame", "time", "id", "name", "active", "grounded")
CSV_VECTORS = ("half_extents", "start", "motion", "end")
CSV_COLUMNS = ("frame", "time", "id", "name") + tuple(f"{v}_{a}" for v in CSV_VECTORS for a in "xyz") + \
    ("active", "grounded")


class _Lines:
    """Binary file read line by line with a length cap; counts bytes and lines."""

    def __init__(self, fh):
        self.fh = fh
        self.bytes_read = 0
        self.line = 0

    def __iter__(self):
        while True:
            raw = self.fh.readline(MAX_LINE + 1)
            if not raw:
                return
            self.line += 1
            self.bytes_read += len(raw)
            if len(raw) > MAX_LINE and not raw.endswith(b"\n"):
                while raw and not raw.endswith(b"\n"):  # skip the rest of the overlong line
                    raw = self.fh.readline(MAX_LINE + 1)
                    self.bytes_read += len(raw)
                yield self.line, LogLineError(self.fh.name, self.line, "long", f"longer than {MAX_LINE >> 20} MiB")
                continue
            try:
                yield self.line, raw.decode("utf-8")
            except UnicodeDecodeError as exc:
                yield self.line, LogLineError(self.fh.name, self.line, "encoding", f"not UTF-8 text ({exc.reason} at "
                                                                                   f"byte {exc.start})")


class _Source:
    """A log read line by line: ``texts()`` yields (line, text) for non-blank lines, or errors."""

    def __init__(self, fh):
        self._lines = _Lines(fh)
        self.path = fh.name

    @property
    def bytes_read(self) -> int:
        return self._lines.bytes_read

    def texts(self):
        for line, text in self._lines:
            if isinstance(text, LogLineError) or text.strip():
                yield line, text


class JsonLinesSource(_Source):
    """Records of a JSON Lines file; blank lines are skipped."""

    def __iter__(self):
        for line, text in self.texts():
            if isinstance(text, LogLineError):
                yield line, text
                continue
            try:
                yield line, json.loads(text)
            except ValueError as exc:
                msg = getattr(exc, "msg", str(exc))
                col = getattr(exc, "colno", None)
                yield line, LogLineError(self.path, line, "json", f"not valid JSON ({msg}"
                                         + (f" at column {col})" if col else ")"))


class CsvSource(_Source):
    """Entity-frame records of a CSV file with a header row (columns: :data:`CSV_COLUMNS`)."""

    def __iter__(self):
        header = None
        for line, text in self.texts():
            if isinstance(text, LogLineError):
                yield line, text
                continue
            try:
                cells = next(csv.reader(io.StringIO(text)))
            except (csv.Error, StopIteration) as exc:
                yield line, LogLineError(self.path, line, "csv", f"not a CSV row ({exc})")
                continue
            if header is None:
                header = [c.strip() for c in cells]
                unknown = [c for c in header if c not in CSV_COLUMNS]
                if unknown:
                    raise LogLineError(self.path, line, "csv", f"unknown column `{unknown[0]}` in the header row "
                                                               f"(columns are {', '.join(CSV_COLUMNS)})")
                continue
            if len(cells) != len(header):
                yield line, LogLineError(self.path, line, "csv", f"has {len(cells)} cells, the header has "
                                                                 f"{len(header)}")
                continue
            yield line, _csv_record(self.path, line, dict(zip(header, cells)))


def _csv_record(path, line: int, row: dict):
    """A CSV row as the dict a JSON line would give (empty cells are absent fields)."""
    rec = {}
    for key in CSV_SCALARS:
        v = row.get(key, "").strip()
        if v == "":
            continue
        if key == "name":
            rec[key] = v
        elif key in ("active", "grounded"):
            low = v.lower()
            rec[key] = True if low in ("true", "1") else False if low in ("false", "0") else v
        else:
            rec[key] = _number(v)
    for key in CSV_VECTORS:
        cells = [row.get(f"{key}_{a}", "").strip() for a in "xyz"]
        given = [c for c in cells if c != ""]
        if given:
            rec[key] = [_number(c) for c in given]
    return rec


def _number(text: str):
    """int, float, or the text itself (the record checks then name the field and the value)."""
    try:
        return int(text)
    except ValueError:
        pass
    try:
        return float(text)
    except ValueError:
        return text


def open_source(path, fmt: str = "auto"):
    """(binary file, source) for ``path``; ``fmt`` "jsonl", "csv" or "auto" (by extension, then content)."""
    fh = open(path, "rb")
    if fmt == "auto":
        name = str(path).lower()
        if name.endswith(".csv"):
            fmt = "csv"
        elif name.endswith((".jsonl", ".ndjson", ".json")):
            fmt = "jsonl"
        else:
            head = fh.read(64).lstrip()
            fh.seek(0)
            fmt = "jsonl" if head.startswith(b"{") or not head else "csv"
    return fh, (CsvSource(fh) if fmt == "csv" else JsonLinesSource(fh))
