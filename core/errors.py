"""Typed errors raised by the core and caught at the CLI/GUI boundary.

Every error carries the data needed to print one line that names the file and the
problem; nothing in the core prints or exits.
"""
from __future__ import annotations

#: Longest text taken from a file that a message shows (longer text is cut, marked with "...").
MAX_SHOWN = 200


def printable(text, limit: int = MAX_SHOWN) -> str:
    """``text`` safe for a one-line message, a dialog or a report.

    Strings read from an untrusted file (link targets, attribute values, names, HDF5's own error
    text quoting them) may hold newlines, terminal escapes or megabytes. Control characters
    (C0, DEL, C1, and the Unicode line/paragraph separators) become backslash escapes and the
    result is cut to about ``limit`` characters.
    """
    s = str(text)
    cut = len(s) > limit
    s = s[:limit]
    out = []
    for ch in s:
        o = ord(ch)
        if o < 0x20 or 0x7F <= o < 0xA0 or o in (0x2028, 0x2029, 0x85):
            out.append({"\n": "\\n", "\r": "\\r", "\t": "\\t"}.get(ch, f"\\x{o:02x}" if o < 0x100 else f"\\u{o:04x}"))
        else:
            out.append(ch)
    return "".join(out) + ("..." if cut else "")


class ResweepError(Exception):
    """Base class for every error the core raises on purpose."""


class TraceFormatError(ResweepError):
    """A trace file is unreadable or breaks the trace format.

    Attributes:
        path: the file as the user named it.
        dataset: the HDF5 object at fault (e.g. ``"/frames/start"``), or None for the file itself.
        reason: what is wrong, in plain words, without the path.
    """

    def __init__(self, path, dataset: str | None, reason: str):
        self.path = str(path)
        self.dataset = dataset
        self.reason = reason
        super().__init__(self.one_line())

    def one_line(self) -> str:
        """``path: dataset: reason`` on one line; the parts from the file are escaped and cut."""
        where = printable(self.path, 4 * MAX_SHOWN)
        if self.dataset:
            where += ": " + printable(self.dataset)
        return f"{where}: {printable(self.reason, 3 * MAX_SHOWN)}"


class SettingsError(ResweepError):
    """A solver or check setting is out of range.

    Attributes:
        name: the setting (e.g. ``"tolerance"``).
        value: the rejected value.
        reason: why it is rejected.
    """

    def __init__(self, name: str, value, reason: str):
        self.name = name
        self.value = value
        self.reason = reason
        super().__init__(f"{name}={value!r}: {reason}")


class FileProblem(ResweepError):
    """Something is wrong with one file (the base of the file errors below).

    Attributes:
        path: the file as the user named it.
        reason: what is wrong, in plain words, without the path.
    """

    def __init__(self, path, reason: str):
        self.path = str(path)
        self.reason = reason
        super().__init__(f"{self.path}: {reason}")


class ReportFileError(FileProblem):
    """A saved JSON report (e.g. a farm baseline) is unreadable or not a resweep report."""


class ClusterError(ResweepError):
    """The farm's engine cannot start or cannot reach its cluster.

    Attributes:
        address: the scheduler address, or "local" for the local pool.
        reason: what went wrong, in plain words.
    """

    def __init__(self, address: str, reason: str):
        self.address = str(address)
        self.reason = reason
        super().__init__(f"{self.address}: {reason}")


class RecordingError(FileProblem):
    """A recorder or importer was handed data that cannot become a valid trace (``path``: the
    trace being written)."""
