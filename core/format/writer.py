"""Writer of trace format v1, for tests, the demo generator and engines written in Python."""
from __future__ import annotations

import h5py
import numpy as np

from resweep.core.world.shapes import BlockShapes
from resweep.core.format.datasets import FRAME_VECTORS
from resweep.core.format.reader import FORMAT_NAME, FORMAT_VERSION


def write_trace(path, *, chunk_size: int, chunk_origin, chunk_blocks, entity_ids, half_extents,
                time, start, motion, end, active=None, frame_half_extents=None, grounded=None, shapes: BlockShapes | None = None,
                edits=None, entity_names=None, voxel_size: float = 1.0, up_axis: str = "y",
                title: str = "", producer: str = "resweep", frame_dtype=None, compression: str | None = "gzip"):
    """Write a trace file in format v1.

    Args:
        chunk_origin: int (C, 3) voxel coordinates, multiples of ``chunk_size``.
        chunk_blocks: uint8/uint16 (C, S, S, S) block types, index [chunk, x, y, z].
        entity_ids: int (N,); half_extents: float (N, 3) world units.
        time: float (F,) seconds; start, motion, end: float (F, N, 3) world units.
        active: bool (F, N) or None; frame_half_extents: float (F, N, 3) or None.
        grounded: bool (F, N) the engine's on-ground flag after each frame, or None.
        shapes: block shape table or None for the implicit unit cubes.
        edits: int (E, 5) rows [frame, x, y, z, type] or None.
        frame_dtype: dtype of the frame datasets (default: float64 unless ``start`` is float32).
    """
    start = np.asarray(start)
    if frame_dtype is None:
        frame_dtype = np.float32 if start.dtype == np.float32 else np.float64
    kw = {"compression": compression, "shuffle": True} if compression else {}
    F, N = start.shape[:2]
    blocks = np.asarray(chunk_blocks)
    if blocks.dtype not in (np.uint8, np.uint16):
        blocks = blocks.astype(np.uint8 if blocks.size == 0 or blocks.max() < 256 else np.uint16)
    with h5py.File(path, "w") as f:
        f.attrs["format"] = FORMAT_NAME
        f.attrs["version"] = np.int64(FORMAT_VERSION)
        f.attrs["voxel_size"] = float(voxel_size)
        f.attrs["up_axis"] = up_axis
        if title:
            f.attrs["title"] = title
        if producer:
            f.attrs["producer"] = producer
        if shapes is not None:
            g = f.create_group("blocks")
            g["box_start"] = np.asarray(shapes.box_start, np.int64)
            g["boxes"] = np.asarray(shapes.boxes, np.float64).reshape(-1, 6)
            g["names"] = np.array(shapes.names, dtype=h5py.string_dtype())
        w = f.create_group("world")
        w.attrs["chunk_size"] = np.int64(chunk_size)
        w["chunk_origin"] = np.asarray(chunk_origin, np.int64).reshape(-1, 3)
        w.create_dataset("chunk_blocks", data=blocks, **(kw if blocks.size else {}))
        if edits is not None and len(edits):
            w["edits"] = np.asarray(edits, np.int64).reshape(-1, 5)
        e = f.create_group("entities")
        e["id"] = np.asarray(entity_ids, np.int64)
        e["half_extents"] = np.asarray(half_extents, np.float64).reshape(N, 3)
        if entity_names is not None:
            e["name"] = np.array(list(entity_names), dtype=h5py.string_dtype())
        fr = f.create_group("frames")
        fr["time"] = np.asarray(time, np.float64)
        chunks = (max(1, min(F, max(1, 65536 // max(1, N)))), max(1, N), 3) if F and N else None
        for name, arr in zip(FRAME_VECTORS, (start, motion, end)):
            fr.create_dataset(name, data=np.asarray(arr, frame_dtype), chunks=chunks, **(kw if chunks else {}))
        if active is not None:
            fr.create_dataset("active", data=np.asarray(active, bool), **(kw if F and N else {}))
        if grounded is not None:
            fr.create_dataset("grounded", data=np.asarray(grounded, bool), **(kw if F and N else {}))
        if frame_half_extents is not None:
            fr.create_dataset("half_extents", data=np.asarray(frame_half_extents, frame_dtype),
                              chunks=chunks, **(kw if chunks else {}))
