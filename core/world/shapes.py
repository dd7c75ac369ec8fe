"""Collision shapes of block types (the ``/blocks`` group of the trace format).

A block type owns zero or more axis-aligned boxes in voxel-local units: ``[0, 1]^3`` is the
full cell, and a shape may reach one voxel past its cell on any side (coordinates within
``[-1, 2]``), e.g. a 1.5-tall fence post.
"""
from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np

#: Block types any trace can use when ``/blocks`` is absent (type 0 air, every other a cube).
IMPLICIT_TYPES = 65536


@dataclass(frozen=True)
class BlockShapes:
    """CSR table of collision boxes per block type.

    Attributes:
        box_start: int64 (T+1,), boxes of type t are ``boxes[box_start[t]:box_start[t+1]]``.
        boxes: float64 (B, 6), min xyz then max xyz, voxel-local units.
        names: tuple of T strings (may be generated: ``"type 3"``).
    """

    box_start: np.ndarray
    boxes: np.ndarray
    names: tuple[str, ...]

    @property
    def count(self) -> int:
        """Number of block types T."""
        return len(self.box_start) - 1

    @property
    def reach(self) -> int:
        """1 if some shape reaches past its own cell (the broad phase must widen by a voxel)."""
        if len(self.boxes) == 0:
            return 0
        return int(bool((self.boxes[:, :3] < 0).any() or (self.boxes[:, 3:] > 1).any()))

    def name(self, block_type: int) -> str:
        if 0 <= block_type < len(self.names):
            return self.names[block_type]
        return f"type {block_type}"

    def boxes_of(self, block_type: int) -> np.ndarray:
        """float64 (k, 6) boxes of one type, voxel-local units."""
        return self.boxes[self.box_start[block_type]:self.box_start[block_type + 1]]


def unit_cube_shapes(count: int = IMPLICIT_TYPES, names=None) -> BlockShapes:
    """Shapes used when a trace has no ``/blocks``: type 0 air, every other type the unit cube.

    The default table (65,536 types, 3 MB) is made once per process and shared: callers never
    write into a BlockShapes.
    """
    if count == IMPLICIT_TYPES and names is None:
        return _implicit_shapes()
    return _unit_cubes(count, names)


@functools.lru_cache(maxsize=1)
def _implicit_shapes() -> BlockShapes:
    return _unit_cubes(IMPLICIT_TYPES, None)


def _unit_cubes(count: int, names) -> BlockShapes:
    box_start = np.concatenate([[0], np.arange(count, dtype=np.int64)]).astype(np.int64)
    boxes = np.tile(np.array([[0.0, 0.0, 0.0, 1.0, 1.0, 1.0]]), (count - 1, 1))
    if names is None:
        names = ("air",) + tuple(f"block {t}" for t in range(1, min(count, 256)))
    return BlockShapes(box_start, boxes, tuple(names))


def shapes_from_lists(shapes: list[list[tuple[float, ...]]], names=None) -> BlockShapes:
    """Build a table from one list of ``(x0, y0, z0, x1, y1, z1)`` boxes per type; ``shapes[0]`` must be empty."""
    counts = [len(s) for s in shapes]
    box_start = np.concatenate([[0], np.cumsum(counts)]).astype(np.int64)
    rows = [b for s in shapes for b in s]
    boxes = np.asarray(rows, dtype=np.float64).reshape(-1, 6)
    if names is None:
        names = tuple(f"type {t}" for t in range(len(shapes)))
    return BlockShapes(box_start, boxes, tuple(names))
