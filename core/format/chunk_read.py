"""Reads boxes of compressed frame datasets by decoding their stored chunks on every solver thread.

h5py reads and decompresses chunks one at a time under its global lock, so a check that reads
on a second thread still decodes on one core. Here a read is split in two steps:

1. :meth:`ChunkReader.fetch` looks the needed chunks up in HDF5's chunk index (kept per dataset
   after the first read) and reads their stored bytes with ``os.pread`` (I/O only, no decoding;
   a prefetch thread can do it while the solver works);
2. :meth:`Fetched.arrays` undoes the filters: deflate with ``zlib`` on a pool of threads (zlib
   releases the GIL), lzf and shuffle in the parallel kernel ``codec.nb_decode.decode_chunks``;
   then each box is cut out of its decoded chunks.

Only what HDF5 would return is returned (the tests compare every decoded box with h5py's read
of the same file). Datasets this path does not cover are read by h5py as before: contiguous
storage, files opened in SWMR mode (their chunk index grows while a recorder writes), filter
pipelines other than [shuffle] + one of deflate / lzf, and boxes that touch a chunk never
written (HDF5 fills those with the fill value). A chunk that does not decode to exactly its size,
lies outside the file or is larger than any encoder could make it is refused with one line
naming the dataset, like a failed h5py read.
"""
from __future__ import annotations

import itertools
import math
import os
import threading
import zlib
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numpy as np

from resweep.core.format.declared import H5_FAILURES

#: HDF5 filter ids (the filters h5py ships): deflate, shuffle, lzf.
DEFLATE, SHUFFLE, LZF = 1, 2, 32000
#: A stored chunk larger than this multiple of its decoded size (plus a little) is refused:
#: deflate's worst case is a few bytes per 16 KiB block, lzf's about 1/32 (common practice).
MAX_STORED_GROWTH = 1.1
#: Decoded chunks start at multiples of this (whole items are then stored aligned).
ALIGN = 8
#: Reads of fewer bytes (all boxes of one fetch, decoded) go through h5py: looking chunks up and
#: calling a kernel cost more than decoding a small trace's frames (measured: 0.4 ms more per
#: 1,000 entity-frame trace, about 15% of its check).
MIN_KERNEL_BYTES = 1 << 20


@dataclass(frozen=True)
class Layout:
    """How one dataset is stored, when this path can read it.

    Attributes:
        chunks: int tuple, chunk shape; dtype: the dataset's numpy dtype.
        bits: dict filter id -> bit of that filter in a chunk's filter mask (its pipeline place).
        index: dict chunk offset (int tuple, in elements) -> (file offset, stored bytes, mask).
    """

    chunks: tuple
    dtype: np.dtype
    bits: dict
    index: dict

    @property
    def chunk_bytes(self) -> int:
        return math.prod(self.chunks) * self.dtype.itemsize


def layout_of(ds, file) -> Layout | None:
    """The :class:`Layout` of dataset ``ds`` of ``file`` (a SafeFile, or a LiteFile), or None when h5py should read
    it (see the module docstring). Raises H5_FAILURES from HDF5, or TraceFormatError for a chunk
    index that is damaged (``SafeFile.chunk_index``) or holds a chunk larger than any encoder makes."""
    if file.swmr or ds.chunks is None or ds.dtype.hasobject or ds.dtype.itemsize == 0:
        return None
    ids = file.filter_ids(ds)
    if ids not in ([], [SHUFFLE], [DEFLATE], [LZF], [SHUFFLE, DEFLATE], [SHUFFLE, LZF]):
        return None  # fletcher32, another order, or something new: h5py decodes it
    rows = file.chunk_index(ds)
    rank = len(ds.chunks)
    lay = Layout(tuple(ds.chunks), ds.dtype, {fid: k for k, fid in enumerate(ids)},
                 {tuple(r[:rank]): (r[rank + 2], r[rank + 1], r[rank]) for r in rows.tolist()})
    if len(rows) and rows[:, rank + 1].max() > int(lay.chunk_bytes * MAX_STORED_GROWTH) + 4096:
        raise file.fail(ds.name, "cannot read stored chunks (truncated or corrupt?): its chunk index holds a "
                                 "chunk larger than any encoder makes")
    return lay


@dataclass
class _Chunk:
    """One stored chunk a fetch needs: which request, where its elements start, and its filters."""

    request: int
    offset: tuple
    start: int
    end: int
    deflate: bool
    lzf: bool
    shuffle: bool


class Fetched:
    """Stored bytes of the chunks of some boxes (:meth:`ChunkReader.fetch`); :meth:`arrays`
    decodes them. Requests h5py had to read hold their array already."""

    def __init__(self, reader, requests, done, chunks, raw):
        self._reader, self._requests, self._done, self._chunks, self._raw = reader, requests, done, chunks, raw

    def arrays(self) -> list:
        """The boxes, in request order: numpy arrays of each dataset's dtype and the box's shape."""
        out = list(self._done)
        if not self._chunks:
            return out
        f = self._reader.file
        chunks, raw = self._chunks, self._raw
        lays = [self._reader.layout(self._requests[c.request][0]) for c in chunks]
        src = self._inflate(chunks, raw, lays)
        sizes = np.array([lay.chunk_bytes for lay in lays], np.int64)
        padded = -(-sizes // ALIGN) * ALIGN
        out_at = np.zeros(len(chunks) + 1, np.int64)
        np.cumsum(padded, out=out_at[1:])
        starts = np.array([c.start for c in chunks], np.int64)
        ends = np.array([c.end for c in chunks], np.int64)
        from resweep.core.codec.nb_decode import decode_chunks
        both = any(c.lzf and c.shuffle for c in chunks)
        decoded, scratch = self._reader.buffers(int(out_at[-1]), both)
        status = np.empty(len(chunks), np.int64)
        decode_chunks(src, starts, ends, np.array([c.lzf for c in chunks]), np.array([c.shuffle for c in chunks]),
                      np.array([lay.dtype.itemsize for lay in lays], np.int64), sizes, out_at[:-1], decoded, scratch,
                      status)
        bad = np.flatnonzero(status != sizes)
        if len(bad):
            c = chunks[bad[0]]
            raise f.fail(self._requests[c.request][0].name, _corrupt(c, int(status[bad[0]]), int(sizes[bad[0]])))
        for k, c in enumerate(chunks):
            ds, box = self._requests[c.request]
            lay = lays[k]
            if out[c.request] is None:
                out[c.request] = np.empty(tuple(b - a for a, b in box), lay.dtype)
            block = decoded[out_at[k]:out_at[k] + sizes[k]].view(lay.dtype).reshape(lay.chunks)
            src_sel, dst_sel = overlap(box, c.offset, lay.chunks)
            out[c.request][dst_sel] = block[src_sel]
        return out

    def _inflate(self, chunks, raw, lays) -> np.ndarray:
        """``raw`` with every deflated chunk replaced by its inflated bytes (zlib on a pool of
        threads when there are several); chunk bounds are updated in place."""
        todo = [k for k, c in enumerate(chunks) if c.deflate]
        if not todo:
            return raw
        f = self._reader.file

        def inflate(k):
            c = chunks[k]
            d = zlib.decompressobj()
            try:
                data = d.decompress(raw[c.start:c.end], lays[k].chunk_bytes + 1)
            except zlib.error as exc:
                raise f.fail(self._requests[c.request][0].name, _corrupt(c, -1, lays[k].chunk_bytes, str(exc))) from None
            if len(data) != lays[k].chunk_bytes or not d.eof:
                raise f.fail(self._requests[c.request][0].name, _corrupt(c, len(data), lays[k].chunk_bytes))
            return data

        import numba
        threads = min(len(todo), numba.get_num_threads())
        if threads > 1:
            with ThreadPoolExecutor(threads, thread_name_prefix="resweep-inflate") as pool:
                inflated = list(pool.map(inflate, todo))
        else:
            inflated = [inflate(k) for k in todo]
        parts, at = [], 0
        by_k = dict(zip(todo, inflated))
        for k, c in enumerate(chunks):
            data = by_k.get(k)
            piece = raw[c.start:c.end] if data is None else np.frombuffer(data, np.uint8)
            c.start, c.end = at, at + len(piece)
            at += len(piece)
            parts.append(piece)
        return np.concatenate(parts) if parts else raw


def _corrupt(c: _Chunk, got: int, want: int, why: str = "") -> str:
    what = "deflate" if c.deflate else "lzf" if c.lzf else "stored"
    if got < 0:
        detail = f"its {what} stream is corrupt" + (f" ({why})" if why else "")
    else:
        detail = f"it decodes to {got:,} bytes, not {want:,}"
    return f"cannot read data (truncated or corrupt?): stored chunk at {tuple(int(x) for x in c.offset)}: {detail}"


class ChunkReader:
    """Parallel decoding reads of the datasets of one :class:`~resweep.core.format.h5safe.SafeFile`."""

    def __init__(self, file, kernels: bool = False, min_bytes: int = MIN_KERNEL_BYTES):
        """``kernels``: decode with the parallel kernels; False reads everything through h5py
        (the kernels load numba, which readers that do not solve need not pay for).
        ``min_bytes``: fetches of fewer decoded bytes go through h5py (see MIN_KERNEL_BYTES)."""
        self.file = file
        self.kernels = kernels
        self.min_bytes = min_bytes
        self._layouts: dict = {}
        self._local = threading.local()

    def buffers(self, size: int, scratch: bool) -> tuple:
        """(decoded, scratch) uint8 buffers of at least ``size`` bytes, kept per thread and reused
        from read to read: fresh ones cost a page fault per 4 KiB, about as much as decoding lzf.
        ``scratch`` False gives an empty scratch buffer."""
        loc = self._local
        have = getattr(loc, "decoded", None)
        if have is None or len(have) < size:
            loc.decoded = np.empty(size, np.uint8)  # np.empty is at least 16-byte aligned: ALIGN holds
            loc.scratch = None
        if scratch and (loc.scratch is None or len(loc.scratch) < size):
            loc.scratch = np.empty(len(loc.decoded), np.uint8)
        return loc.decoded, (loc.scratch if scratch else np.empty(0, np.uint8))

    def layout(self, ds) -> Layout | None:
        """Layout of ``ds`` (looked up once per dataset), None when h5py reads it."""
        key = ds.name
        if key not in self._layouts:
            try:
                self._layouts[key] = layout_of(ds, self.file)
            except H5_FAILURES as exc:
                raise self.file.fail(ds.name, f"cannot read stored chunks (truncated or corrupt?): {exc}") from None
        return self._layouts[key]

    def fetch(self, requests, flags=None) -> Fetched:
        """Read the stored bytes behind boxes of datasets.

        Args:
            requests: list of (h5py dataset, box): box a tuple of (start, stop) per axis, every
                axis given, 0 <= start <= stop <= that axis's length.
            flags: list of bool per request, or None: a flag dataset of one-byte items, which h5py
                reads byte for byte when this path cannot (``SafeFile.read_flags``); the caller
                takes ``!= 0`` of what it gets either way.
        """
        done, chunks, spots, at = [], [], [], 0
        kernels = self.kernels and sum(math.prod(b - a for a, b in box) * ds.dtype.itemsize
                                       for ds, box in requests) >= self.min_bytes
        for r, (ds, box) in enumerate(requests):
            lay = self.layout(ds) if kernels else None
            wanted = None if lay is None else _chunks_of(lay, box)
            if wanted is None:  # h5py reads it (and fills chunks never written)
                read = self.file.read_flags if flags and flags[r] else self.file.read
                done.append(read(ds, tuple(slice(a, b) for a, b in box)))
                continue
            done.append(None if wanted else np.empty(tuple(b - a for a, b in box), lay.dtype))
            for off in wanted:
                place, size, mask = lay.index[off]
                on = {fid: not (mask >> bit) & 1 for fid, bit in lay.bits.items()}
                chunks.append(_Chunk(r, off, at, at + size, on.get(DEFLATE, False), on.get(LZF, False),
                                     on.get(SHUFFLE, False) and lay.dtype.itemsize > 1))
                spots.append((ds, place, size))
                at += size
        raw = np.empty(at, np.uint8)  # writable: numba would compile another kernel for read-only input
        if spots:
            try:
                fd = os.open(self.file.path, os.O_RDONLY)
                try:
                    for (ds, place, size), c in zip(spots, chunks):
                        if os.preadv(fd, [raw[c.start:c.end]], place) != size:
                            raise self.file.fail(ds.name, "cannot read data (truncated or corrupt?): a stored "
                                                          "chunk ends past the end of the file")
                finally:
                    os.close(fd)
            except OSError as exc:
                raise self.file.fail(ds.name, f"cannot read data: {exc.strerror or exc}") from None
        return Fetched(self, requests, done, chunks, raw)

    def read(self, requests, flags=None) -> list:
        """:meth:`fetch` then decode: the boxes as arrays, in request order."""
        return self.fetch(requests, flags).arrays()


def overlap(box, offset, chunks) -> tuple:
    """(selection in the chunk, selection in the box's array) of the part of box ``box`` ((start,
    stop) per axis) that the chunk of shape ``chunks`` at element offset ``offset`` holds."""
    src_sel, dst_sel = [], []
    for (a, b), o, n in zip(box, offset, chunks):
        lo, hi = max(a, o), min(b, o + n)
        src_sel.append(slice(lo - o, hi - o))
        dst_sel.append(slice(lo - a, hi - a))
    return tuple(src_sel), tuple(dst_sel)


def chunk_offsets(box, chunks) -> list:
    """Element offsets of every chunk (shape ``chunks``) that box ``box`` touches, in index order."""
    return list(itertools.product(*(range((a // n) * n, b, n) for (a, b), n in zip(box, chunks))))


def _chunks_of(lay: Layout, box) -> list | None:
    """Offsets of the stored chunks that box covers (in index order), None if one was never written."""
    if any(b <= a for a, b in box):
        return []
    out = []
    for off in chunk_offsets(box, lay.chunks):
        if off not in lay.index:
            return None
        out.append(off)
    return out

