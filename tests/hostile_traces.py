"""Hostile and broken traces made from small valid ones: the cases reported against the reader,
the solver and the viewer (byte patches of HDF5 metadata, link tricks, size bombs, far chunks).

Each builder writes one file and returns its path. HDF5 structure names (``SNOD`` symbol-table
nodes, ``GCOL`` global heap collections and their object header layout) are from the HDF5 file
format specification, version 2/3 superblock family (quoted from memory; the builders look the
signatures up in the file and fail loudly if they are not there).
"""
from __future__ import annotations

import shutil

import h5py
import numpy as np

from resweep.core import write_trace

FAR = (1 << 40) - 16  # a chunk origin inside the documented coordinate range


def one_row(path, *, chunk_size=8, origin=((0, 0, 0),), blocks=None, half=0.5, start=(2.5, 1.501, 2.5),
            motion=(0.0, 0.0, 0.0), edits=None, **kw):
    """A one-frame, one-entity trace (solid floor chunk by default)."""
    S = chunk_size
    origin = np.asarray(origin, np.int64).reshape(-1, 3)
    if blocks is None:
        blocks = np.zeros((len(origin), S, S, S), np.uint8)
        if len(origin):
            blocks[0, :, 0, :] = 1
    s = np.asarray(start, float).reshape(1, 1, 3)
    m = np.asarray(motion, float).reshape(1, 1, 3)
    write_trace(path, chunk_size=S, chunk_origin=origin, chunk_blocks=blocks, entity_ids=[7],
                half_extents=np.full((1, 3), half), time=[0.0], start=s, motion=m, end=s + m, edits=edits,
                **kw)
    return path


def patched(src, dst, find: bytes, replace: bytes, nth: int = 0):
    """Copy ``src`` to ``dst`` with the ``nth`` occurrence of ``find`` overwritten by ``replace``."""
    data = bytearray(open(src, "rb").read())
    at = -1
    for _ in range(nth + 1):
        at = data.index(find, at + 1)
    data[at:at + len(replace)] = replace
    open(dst, "wb").write(bytes(data))
    return dst


def broken_symbol_node(good, dst):
    """The first ``SNOD`` signature changed to ``XNOD``: h5py raises RuntimeError on link lookups."""
    return patched(good, dst, b"SNOD", b"XNOD")


def heap_size_zero(good, dst):
    """Size field of the global-heap object after the ``format`` attribute's string set to 0."""
    data = bytearray(open(good, "rb").read())
    text = data.index(b"resweep-trace", data.index(b"GCOL"))
    nxt = text + ((len(b"resweep-trace") + 7) // 8) * 8  # objects are padded to 8 bytes
    data[nxt + 8:nxt + 10] = b"\0\0"  # object layout: index u16, refcount u16, reserved u32, size u64
    open(dst, "wb").write(bytes(data))
    return dst


def with_link(good, dst, name, link):
    """``good`` with dataset ``name`` replaced by ``link`` (an h5py SoftLink or ExternalLink)."""
    shutil.copy(good, dst)
    with h5py.File(dst, "r+") as f:
        del f[name]
        f[name] = link
    return dst


def newline_soft_link(good, dst):
    return with_link(good, dst, "frames/start", h5py.SoftLink("/frames/no\nsuch\x1b[2J"))


def newline_external_link(good, dst):
    return with_link(good, dst, "frames/start", h5py.ExternalLink("evil\nfile.h5", "/x\ny"))


def far_chunks_motion(dst):
    """Two all-air chunks at x = 0 and x = 2^40 - 16, one row moving 1e12 along x."""
    blocks = np.zeros((2, 16, 16, 16), np.uint8)
    return one_row(dst, chunk_size=16, origin=((0, 0, 0), (FAR, 0, 0)), blocks=blocks, start=(8, 8, 8),
                   motion=(1e12, 0, 0))


def far_chunks_huge_box(dst):
    """The same world, one row with half extents 1e12 and no motion."""
    blocks = np.zeros((2, 16, 16, 16), np.uint8)
    return one_row(dst, chunk_size=16, origin=((0, 0, 0), (FAR, 0, 0)), blocks=blocks, start=(8, 8, 8),
                   half=1e12)


def big_chunk_one_edit(dst, edits=1):
    """Chunk size 1024, no chunks, ``edits`` edits outside them (the world would make 2 GiB chunks)."""
    e = np.array([[0, 5 + 2048 * k, 5, 5, 1] for k in range(edits)], np.int64)
    return one_row(dst, chunk_size=1024, origin=np.zeros((0, 3)), blocks=np.zeros((0, 1024, 1024, 1024), np.uint8),
                   edits=e)


def declared_blocks_no_storage(dst, S=1024, pad=1 << 20):
    """chunk_blocks declared (1, S, S, S) uint8 with no stored chunk, plus ``pad`` bytes of padding."""
    one_row(dst, chunk_size=8)
    with h5py.File(dst, "r+") as f:
        w = f["world"]
        del w["chunk_blocks"], w["chunk_origin"]
        w.attrs["chunk_size"] = np.int64(S)
        w["chunk_origin"] = np.zeros((1, 3), np.int64)
        w.create_dataset("chunk_blocks", shape=(1, S, S, S), dtype=np.uint8, chunks=(1, 64, 64, 64),
                         compression="gzip")
        f["padding"] = np.zeros(pad, np.uint8)
    return dst


def declared_rows_no_storage(dst, name="world/edits", rows=25_000_000):
    """``name`` declared with ``rows`` rows and no stored data (edits (E, 5) or frame time (F,))."""
    one_row(dst)
    with h5py.File(dst, "r+") as f:
        if name == "world/edits":
            f.create_dataset(name, shape=(rows, 5), dtype=np.int64, chunks=(4096, 5), compression="gzip")
        else:
            grp = f["frames"]
            for k in list(grp):
                del grp[k]
            grp.create_dataset("time", shape=(rows,), dtype=np.float64, chunks=(65536,), compression="gzip")
            for k in ("start", "motion", "end"):
                grp.create_dataset(k, shape=(rows, 1, 3), dtype=np.float32, chunks=(65536, 1, 3), compression="gzip")
        f["padding"] = np.zeros(1 << 20, np.uint8)
    return dst


def long_strings(good, dst):
    """Title, producer and an entity name holding newlines, terminal escapes and 100 kB."""
    shutil.copy(good, dst)
    with h5py.File(dst, "r+") as f:
        f.attrs["title"] = "line one\nline two\x1b[31m" + "x" * 100_000
        f.attrs["producer"] = "p\r\nq"
        f.attrs["up_axis"] = "sideways\nand down"
    return dst

