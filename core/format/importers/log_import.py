"""Import a lines log (JSON Lines or CSV, ``log_format.md``) into a trace, streaming.

Memory holds the world, one frame of records, the entity sizes seen and the edits announced for
later frames; frames go to a :class:`Recorder` in atomic mode, so the trace appears at its path
only when the whole log was read (the temporary file is removed on any failure or Ctrl-C).
"""
from __future__ import annotations

import os
from collections import Counter
from dataclasses import dataclass, field

import numpy as np

from resweep.core.format.importers.records import EntityFrame, Fields, LogLineError, entity_frame, record_type
from resweep.core.format.importers.sources import open_source
from resweep.core.format.importers.world_records import WorldBuilder
from resweep.core.format.recorder import Recorder

#: Longest run of frame numbers without records that is filled with empty frames.
MAX_GAP = 100_000
#: Example lines kept per bad-line kind for the report.
EXAMPLES = 3


@dataclass
class ImportReport:
    """What an import read and wrote.

    Attributes:
        lines: lines read; frames, entities, edits: written to the trace.
        skipped: bad lines skipped (``--skip-bad``) per reason kind; examples: first messages per kind.
        notes: things accepted but worth knowing (entities changing size, empty frames filled).
    """

    lines: int = 0
    frames: int = 0
    entities: int = 0
    edits: int = 0
    skipped: Counter = field(default_factory=Counter)
    examples: dict = field(default_factory=dict)
    notes: list = field(default_factory=list)


class _Frames:
    """Groups entity-frame records into frames and hands them to the recorder in order."""

    def __init__(self, rec: Recorder, world: WorldBuilder, report: ImportReport):
        self.rec, self.world, self.report = rec, world, report
        self.path = ""            # the log being read (for messages)
        self.by_index = None      # True: records number frames; False: records carry times only
        self.first = None         # first frame number (frame mode)
        self.cur = None           # current frame number or time
        self.cur_time = None
        self.time_line = 0
        self.rows: list[EntityFrame] = []
        self.ids: dict[int, int] = {}     # id -> line, current frame
        self.sizes: dict[int, tuple] = {}
        self.active_sizes: dict[int, tuple] = {}
        self.resized: dict[int, str] = {}
        self.edits: list[tuple] = []      # (trace frame, x, y, z, type, line), announced ahead
        self.last_time = -np.inf
        self.index = 0            # trace index of the current frame

    def add(self, r: EntityFrame):
        fresh = self.by_index is None
        try:
            self._add(r)
        except LogLineError:
            if fresh:  # a refused first record must not set the numbering
                self.by_index = self.first = None
            raise

    def _add(self, r: EntityFrame):
        self._check_mode(r)
        key = r.frame if self.by_index else r.time
        if self.cur is not None and key < self.cur:
            what = "frame" if self.by_index else "time"
            raise LogLineError(self.path, r.line, "order",
                               f"`{what}` {key} comes after {what} {self.cur}; records must be in frame order", what)
        if self.cur is not None and key == self.cur:
            self._same_frame(r)
        else:
            self._new_frame(r, key)
        self.rows.append(r)
        self.ids[r.id] = r.line
        if r.half is not None:
            self.sizes[r.id] = r.half
            if r.active:
                self.active_sizes[r.id] = r.half

    def _check_mode(self, r: EntityFrame):
        mode = r.frame is not None
        if self.by_index is None:
            self.by_index = mode
            self.first = r.frame
        elif mode != self.by_index:
            need = "`frame` is missing (earlier records number their frames)" if self.by_index else \
                "`frame` given, but earlier records carry only `time`"
            raise LogLineError(self.path, r.line, "missing", need, "frame")

    def _same_frame(self, r: EntityFrame):
        if r.id in self.ids:
            raise LogLineError(self.path, r.line, "duplicate", f"entity {r.id} already has a record in this frame "
                                                                   f"(line {self.ids[r.id]})", "id")
        if self.by_index and r.time is not None and self.cur_time is not None and r.time != self.cur_time:
            raise LogLineError(self.path, r.line, "time", f"`time` {r.time} differs from {self.cur_time} given for "
                                                              f"frame {self.cur} on line {self.time_line}", "time")
        self._size(r)
        if self.cur_time is None and r.time is not None:
            self.cur_time, self.time_line = r.time, r.line

    def _new_frame(self, r: EntityFrame, key):
        t = r.time if r.time is not None else (key - self.first) / self.world.frame_rate
        if t < self.last_time:
            raise LogLineError(self.path, r.line, "order", f"`time` {t} is earlier than the previous frame's "
                                                              f"{self.last_time}", "time")
        gap = (key - self.cur - 1) if (self.by_index and self.cur is not None) else 0
        if gap > MAX_GAP:
            raise LogLineError(self.path, r.line, "order", f"`frame` jumps from {self.cur} to {key}, more than "
                                                               f"{MAX_GAP} frames without records", "frame")
        self._size(r)
        self.emit()
        for g in range(gap):  # frame numbers without records: empty frames keep edit numbering exact
            num = self.cur + 1 + g
            self._record([], self.last_time if r.time is not None else (num - self.first) / self.world.frame_rate)
        if gap:
            self.report.notes.append(f"frames {self.cur + 1}..{key - 1} have no records; written as empty frames")
        self.cur, self.cur_time, self.time_line = key, r.time, r.line
        self.last_time = max(self.last_time, t) if r.time is None else t

    def _size(self, r: EntityFrame):
        known = self.sizes.get(r.id)
        if known is None and r.half is None:
            raise LogLineError(self.path, r.line, "size", f"entity {r.id} appears for the first time without "
                                                              "`half_extents`", "half_extents")
        was = self.active_sizes.get(r.id)  # inactive rows may hold placeholder sizes: not a change
        if r.active and was is not None and r.half is not None and r.half != was and r.id not in self.resized:
            self.resized[r.id] = f"entity {r.id} changes size on line {r.line}: {list(was)} -> {list(r.half)}"

    def edit(self, f: Fields):
        frame = f.int("frame", lo=0)
        at = f.vec("at", integer=True)
        t = f.int("block", lo=0, hi=self.world.type_count - 1)
        if self.cur is not None and self._trace_index(frame) < self.index:
            raise f.fail("order", f"edit for frame {frame} comes after frame {self.cur} was read", "frame")
        self.edits.append((frame, *at, t))  # log numbering: the first frame may not be known yet

    def _trace_index(self, frame: int) -> int:
        """Trace index of log frame number ``frame`` (frames count from the first record's)."""
        return frame - self.first if self.by_index else frame

    def emit(self):
        """Send the current frame (if any) to the recorder."""
        if not self.rows:
            return
        t = self.cur_time if self.cur_time is not None else (self.cur - self.first) / self.world.frame_rate
        self._record(self.rows, t)
        self.rows, self.ids = [], {}

    def _record(self, rows, t: float):
        due = [e for e in self.edits if self._trace_index(e[0]) <= self.index]
        if due:
            self.edits = [e for e in self.edits if self._trace_index(e[0]) > self.index]
            for e in due:
                self.rec.edit(*e[1:])
            self.report.edits += len(due)
        ids = [r.id for r in rows]
        sizes = [r.half if r.half is not None else self.sizes[r.id] for r in rows]
        self.rec.frame(t, ids, [r.start for r in rows], [r.motion for r in rows], [r.end for r in rows],
                       half_extents=np.asarray(sizes, np.float64).reshape(-1, 3), active=[r.active for r in rows],
                       grounded=[r.grounded for r in rows], names=[r.name or f"entity {r.id}" for r in rows])
        self.index += 1


def import_log(log_path, out_path, *, world_path=None, fmt: str = "auto", skip_bad: bool = False,
               flush_every: int = 256, progress=None) -> ImportReport:
    """Import ``log_path`` (and the world log ``world_path``) into a new trace at ``out_path``.

    ``progress(bytes_read, total_bytes)`` is called now and then. Raises :class:`LogLineError`
    for the first bad line unless ``skip_bad``; the output then does not exist.
    """
    job = _Import(out_path, skip_bad, flush_every)
    paths = ([(world_path, "jsonl")] if world_path else []) + [(log_path, fmt)]
    total = sum(os.path.getsize(p) for p, _ in paths)
    done = 0
    try:
        for path, kind in paths:
            fh, src = open_source(path, kind)
            with fh:
                for n, (line, rec) in enumerate(src):
                    job.report.lines = max(job.report.lines, line)
                    if progress is not None and n % 1024 == 0:
                        progress(done + src.bytes_read, total)
                    job.line(path, line, rec)
            done += os.path.getsize(path)
        job.finish()
    except BaseException:
        job.abort()
        raise
    if progress is not None:
        progress(total, total)
    return job.report


class _Import:
    """One import: the world until the first frame record, then frames into the recorder."""

    def __init__(self, out_path, skip_bad: bool, flush_every: int):
        self.out_path, self.skip_bad, self.flush_every = out_path, skip_bad, flush_every
        self.report = ImportReport()
        self.world = WorldBuilder()
        self.rec: Recorder | None = None
        self.frames: _Frames | None = None

    def line(self, path, line: int, rec):
        """Use one record (or count it as bad with ``skip_bad``)."""
        try:
            if isinstance(rec, LogLineError):
                raise rec
            kind = record_type(path, line, rec)
            f = Fields(path, line, rec)
            if kind in ("header", "chunk", "voxel"):
                if self.rec is not None:
                    raise f.fail("order", f"{kind} records must come before the first entity-frame (the world "
                                          "is written up front)", "type")
                getattr(self.world, kind)(f)
                return
            self._start()
            self.frames.path = str(path)
            if kind == "edit":
                self.frames.edit(f)
            else:
                self.frames.add(entity_frame(path, line, rec))
        except LogLineError as exc:
            if not self.skip_bad:
                raise
            self.report.skipped[exc.kind] += 1
            shown = self.report.examples.setdefault(exc.kind, [])
            if len(shown) < EXAMPLES:
                shown.append(str(exc))

    def _start(self):
        if self.rec is not None:
            return
        w = self.world
        origin, blocks = w.arrays()
        self.rec = Recorder(self.out_path, chunk_size=w.chunk_size, chunk_origin=origin, chunk_blocks=blocks,
                            shapes=w.shapes, frame_dtype=w.frame_dtype, flush_every=self.flush_every, atomic=True,
                            **w.meta)
        self.frames = _Frames(self.rec, w, self.report)

    def finish(self):
        self._start()
        frames, report = self.frames, self.report
        frames.emit()
        if frames.edits:
            report.notes.append(f"{len(frames.edits)} edits are for frames after the last one; not written")
        report.notes.extend(frames.resized.values())
        if len(frames.resized) > 1:
            report.notes.append(f"{len(frames.resized)} entities change size; sizes are stored per frame")
        report.frames = self.rec.frame_count
        report.entities = self.rec.entity_count
        self.rec.close()

    def abort(self):
        if self.rec is not None:
            self.rec.abort()
