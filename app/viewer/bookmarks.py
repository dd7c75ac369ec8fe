"""Bookmarks of a bug hunt: a note on a frame and entity, kept beside the trace (no Qt).

The sidecar file is ``<trace file name>.bookmarks.json`` in the trace's folder: a small JSON
object ``{"format": "resweep bookmarks", "version": 1, "bookmarks": [{"frame", "entity", "note"}]}``.
It is written atomically (a temporary file in the same folder, then renamed over the old one),
so a crash never leaves half a file; the trace file itself is only ever read.
"""
from __future__ import annotations

import json
import os
import tempfile
from dataclasses import asdict, dataclass
from pathlib import Path

FORMAT = "resweep bookmarks"
VERSION = 1
MAX_BYTES = 4 * 1024 * 1024  # a sidecar larger than this is not ours: refuse to read it
MAX_NOTE = 2000  # characters kept per note


@dataclass(frozen=True)
class Bookmark:
    """A note on one entity at one frame. ``entity``: engine id, or None for the whole frame."""

    frame: int
    entity: int | None
    note: str = ""


class BookmarkError(Exception):
    """The sidecar cannot be read or written (one line naming the file and the problem)."""


def sidecar_path(trace_path) -> Path:
    p = Path(trace_path)
    return p.with_name(p.name + ".bookmarks.json")


def _parse(data) -> list[Bookmark]:
    if not isinstance(data, dict) or data.get("format") != FORMAT or not isinstance(data.get("bookmarks"), list):
        raise ValueError("not a resweep bookmarks file")
    out = []
    for b in data["bookmarks"]:
        if not isinstance(b, dict) or not isinstance(b.get("frame"), int) or b["frame"] < 0:
            raise ValueError("a bookmark without a valid frame")
        ent = b.get("entity")
        if ent is not None and not isinstance(ent, int):
            raise ValueError("a bookmark with a non-integer entity id")
        out.append(Bookmark(b["frame"], ent, str(b.get("note", ""))[:MAX_NOTE]))
    return out


class Bookmarks:
    """The bookmarks of one trace, sorted by (frame, entity); every change is saved at once.

    Attributes:
        path: the sidecar file; items: list of Bookmark.
    """

    def __init__(self, trace_path):
        self.path = sidecar_path(trace_path)
        self.items: list[Bookmark] = []

    def load(self) -> None:
        """Read the sidecar (none yet: no bookmarks). BookmarkError when it is unreadable or not ours."""
        self.items = []
        try:
            if not self.path.exists():
                return
            if self.path.stat().st_size > MAX_BYTES:
                raise BookmarkError(f"{self.path}: too large for a bookmarks file")
            with open(self.path, "rb") as fh:
                data = json.loads(fh.read().decode("utf-8"))
            self.items = sorted(_parse(data), key=_key)
        except BookmarkError:
            raise
        except (OSError, UnicodeDecodeError, ValueError) as exc:
            raise BookmarkError(f"{self.path}: cannot read bookmarks ({exc})") from None

    def save(self) -> None:
        """Write the sidecar atomically (temporary file beside it, then rename)."""
        data = {"format": FORMAT, "version": VERSION, "bookmarks": [asdict(b) for b in self.items]}
        text = json.dumps(data, indent=1, ensure_ascii=False)
        try:
            fd, tmp = tempfile.mkstemp(prefix=self.path.name + ".", suffix=".tmp", dir=self.path.parent)
            try:
                with os.fdopen(fd, "w", encoding="utf-8") as fh:
                    fh.write(text)
                    fh.flush()
                    os.fsync(fh.fileno())
                os.replace(tmp, self.path)
            except BaseException:
                if os.path.exists(tmp):
                    os.unlink(tmp)
                raise
        except OSError as exc:
            raise BookmarkError(f"{self.path}: cannot write bookmarks ({exc.strerror or exc})") from None

    def set(self, frame: int, entity: int | None, note: str) -> Bookmark:
        """Add or replace the bookmark of (frame, entity) and save."""
        b = Bookmark(int(frame), None if entity is None else int(entity), str(note)[:MAX_NOTE])
        self.items = sorted([x for x in self.items if (x.frame, x.entity) != (b.frame, b.entity)] + [b], key=_key)
        self.save()
        return b

    def remove(self, frame: int, entity: int | None) -> None:
        self.items = [x for x in self.items if (x.frame, x.entity) != (int(frame), entity)]
        self.save()


def _key(b: Bookmark):
    return (b.frame, -1 if b.entity is None else b.entity)


def bookmarks_markdown(items, time=None) -> str:
    """Markdown section listing ``items`` (Bookmark); ``time``: float (F,) seconds per frame."""
    if not items:
        return ""
    lines = ["", "#### Bookmarks", "", "| frame | time (s) | entity | note |", "|---:|---:|---:|---|"]
    for b in items:
        t = f"{float(time[b.frame]):.6f}" if time is not None and b.frame < len(time) else ""
        note = b.note.replace("|", "\\|").replace("\n", " ")
        lines.append(f"| {b.frame} | {t} | {'' if b.entity is None else b.entity} | {note} |")
    return "\n".join(lines) + "\n"


def parse_goto(text: str, time, frame_count: int) -> int:
    """Frame for a go-to field: ``"120"`` is frame 120, ``"2.5s"`` or ``"t=2.5"`` the last frame at
    or before 2.5 seconds (the first frame before the trace starts). ValueError with a short reason."""
    t = text.strip().lower().replace(" ", "")
    if not t:
        raise ValueError("type a frame number or a time like 2.5s")
    if t.startswith("t="):
        t = t[2:] + "s"
    if t.endswith("s"):
        try:
            sec = float(t[:-1])
        except ValueError:
            raise ValueError(f"{text!r} is not a time in seconds") from None
        if not len(time):
            raise ValueError("the trace has no frames")
        import numpy as np
        i = int(np.searchsorted(np.asarray(time, np.float64), sec + 1e-9, side="right")) - 1
        return max(0, min(i, frame_count - 1))
    try:
        f = int(t)
    except ValueError:
        raise ValueError(f"{text!r} is not a frame number or a time like 2.5s") from None
    if not 0 <= f < frame_count:
        raise ValueError(f"frame {f} is out of range (0..{frame_count - 1})")
    return f
