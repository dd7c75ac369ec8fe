"""One recorded frame's rows and the growing entity table, shared by the recorders.

Entities are columns in order of first appearance; an id seen for the first time needs half
extents, later frames may leave them out (the entity keeps its last size).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from resweep.core.errors import RecordingError
from resweep.core.format.reader import MAX_COORD


@dataclass(frozen=True)
class FrameRows:
    """The rows of one frame.

    Attributes:
        time: seconds. ids: int64 (n,). cols: int64 (n,) entity columns.
        start, motion, end, half: float64 (n, 3) world units. active, grounded: bool (n,).
    """

    time: float
    ids: np.ndarray
    cols: np.ndarray
    start: np.ndarray
    motion: np.ndarray
    end: np.ndarray
    half: np.ndarray
    active: np.ndarray
    grounded: np.ndarray


class EntityTable:
    """Entity columns in order of first appearance.

    Attributes:
        ids: list of int; first_half: list of float64 (3,) (size on the first active row, else
        at first appearance: the trace's entity table); names: list of str; current_half: float64 (cap, 3), last size.
    """

    def __init__(self, path):
        self.path = str(path)
        self.ids: list[int] = []
        self.first_half: list[np.ndarray] = []
        self.names: list[str] = []
        self.col: dict[int, int] = {}
        self.seen_active: list[bool] = []
        self.dirty: set[int] = set()  # columns whose table size changed after being stored
        self.current_half = np.zeros((16, 3), np.float64)

    def __len__(self) -> int:
        return len(self.ids)

    def columns(self, frame: int, ids: np.ndarray, half: np.ndarray | None, names) -> np.ndarray:
        """Columns of ``ids`` (new ids are appended; ``half`` (n, 3) or None)."""
        cols = np.array([self.col.get(eid, -1) for eid in ids.tolist()], np.int64)
        new = np.flatnonzero(cols < 0)
        if len(new) and half is None:  # refuse before adding anything: a refused frame changes nothing
            raise RecordingError(self.path, f"frame {frame}: entity {ids[new[0]]} appears for the first time "
                                            "without half extents")
        for j in new.tolist():
            cols[j] = self._add(int(ids[j]), half[j], names[j] if names is not None else f"entity {ids[j]}")
        if half is not None:
            self.current_half[cols] = half
        return cols

    def note_active(self, cols: np.ndarray, active: np.ndarray):
        """The table size of an entity is its size on its first active row (inactive rows may hold
        placeholders); columns whose table size changes are added to ``dirty``."""
        for c in cols[active].tolist():
            if not self.seen_active[c]:
                self.seen_active[c] = True
                if not np.array_equal(self.first_half[c], self.current_half[c]):
                    self.first_half[c] = self.current_half[c].copy()
                    self.dirty.add(c)

    def _add(self, eid: int, half: np.ndarray, name) -> int:
        c = len(self.ids)
        self.ids.append(eid)
        self.first_half.append(np.array(half, np.float64))
        self.names.append(str(name))
        self.seen_active.append(False)
        self.col[eid] = c
        if c >= len(self.current_half):
            self.current_half = np.concatenate([self.current_half, np.zeros_like(self.current_half)])
        return c


def frame_rows(path, frame: int, time: float, ids, start, motion, end, half, active, grounded, names,
               table: EntityTable) -> FrameRows:
    """Validate one frame's arguments (see ``Recorder.frame``) and map ids to columns."""
    ids = np.asarray(ids, np.int64).reshape(-1)
    n = len(ids)
    if len(np.unique(ids)) != n:
        raise RecordingError(path, f"frame {frame}: entity ids repeat within the frame")
    vec = [_rows3(path, frame, name, v, n) for name, v in (("start", start), ("motion", motion), ("end", end))]
    h = None if half is None else _rows3(path, frame, "half_extents", half, n)
    if names is not None and len(names) != n:
        raise RecordingError(path, f"frame {frame}: {len(names)} names for {n} entities")
    act = _flags(path, frame, "active", active, n, True)
    ground = _flags(path, frame, "grounded", grounded, n, False)
    cols = table.columns(frame, ids, h, names)
    table.note_active(cols, act)
    return FrameRows(float(time), ids, cols, *vec, table.current_half[cols].copy(), act, ground)


def check_edit(path, frame: int, x, y, z, block_type, type_count: int) -> tuple:
    """An edit row (frame, x, y, z, type) after range checks."""
    row = (int(frame), int(x), int(y), int(z), int(block_type))
    if max(abs(v) for v in row[1:4]) > MAX_COORD:
        raise RecordingError(path, f"edit before frame {frame}: voxel {row[1:4]} is beyond +-{MAX_COORD}")
    if not 0 <= row[4] < type_count:
        raise RecordingError(path, f"edit before frame {frame}: block type {row[4]} is not in 0..{type_count - 1}")
    return row


def _rows3(path, frame, name, v, n) -> np.ndarray:
    a = np.asarray(v, np.float64)
    if (a.shape == (3,) and n == 1) or (a.size == 0 and n == 0):
        a = a.reshape(n, 3)
    if a.shape != (n, 3):
        raise RecordingError(path, f"frame {frame}: {name} must have shape ({n}, 3), got {a.shape}")
    return a


def _flags(path, frame, name, v, n, default: bool) -> np.ndarray:
    if v is None:
        return np.full(n, default)
    a = np.asarray(v, bool).reshape(-1)
    if a.shape != (n,):
        raise RecordingError(path, f"frame {frame}: {name} must have {n} values, got {a.size}")
    return a
