"""The trace reader's file access without h5py, for files in the HDF5 subset ``h5lite`` reads.

:class:`LiteFile` answers the same calls as :class:`~resweep.core.format.h5safe.SafeFile`
(groups, datasets after the same storage checks, attributes, reads, flag reads, strings, chunk
indexes, stored digests), from structures parsed by :mod:`resweep.core.format.h5lite` and data
read with ``os.pread`` and decoded with ``zlib`` and NumPy. It exists for speed: a small trace
opens in a fraction of h5py's time (a farm opens thousands).

The reader opens a file this way first (:func:`open_file`); when the file uses anything the
subset does not cover, a call raises :class:`~resweep.core.format.h5lite.Unsupported` and the
reader starts again with SafeFile, which reads or refuses the file as before. Stored data that
does not decode (a corrupt deflate stream, a chunk of the wrong size) is refused here, with the
words SafeFile uses for a failed read. ``RESWEEP_H5LITE=0`` turns this path off.
"""
from __future__ import annotations

import hashlib
import math
import os
import struct
import zlib

import numpy as np

from resweep.core.errors import TraceFormatError, printable
from resweep.core.format import h5lite
from resweep.core.format.chunk_read import MAX_STORED_GROWTH, chunk_offsets, overlap
from resweep.core.format.h5lite import Unsupported
from resweep.core.format.declared import check_declared, checked_index, digest_chunks, unit_box

#: What a parse of a damaged or unexpected structure can raise besides Unsupported.
_PARSE_FAILURES = (struct.error, IndexError, ValueError, KeyError, TypeError, OverflowError, UnicodeError,
                   MemoryError, OSError)
ENV = "RESWEEP_H5LITE"
#: Files with more objects, or deeper groups, are read through h5py (a trace has about fifteen).
MAX_OBJECTS = 512
MAX_DEPTH = 8


def enabled() -> bool:
    """Whether the reader tries :class:`LiteFile` first (``RESWEEP_H5LITE=0`` turns it off)."""
    return os.environ.get(ENV, "1").strip() not in ("0", "off", "no", "false")


def open_file(path, swmr: bool = False):
    """A :class:`LiteFile` of ``path`` when it parses, else a :class:`SafeFile` (also for SWMR
    reads, whose datasets grow while a recorder writes)."""
    if not swmr and enabled():
        try:
            return LiteFile(path)
        except Unsupported:
            pass
    return safe_file(path, swmr)


def safe_file(path, swmr: bool = False):
    """``SafeFile(path, swmr)``: h5py is imported only here, when a file needs it (a process that
    reads only files of the subset never loads it)."""
    from resweep.core.format.h5safe import SafeFile
    return SafeFile(path, swmr=swmr)


def _parsing(fn):
    """Run ``fn`` turning every parse failure into Unsupported (the caller falls back to h5py)."""
    try:
        return fn()
    except (Unsupported, TraceFormatError):
        raise
    except _PARSE_FAILURES as exc:
        raise Unsupported(f"{type(exc).__name__}: {exc}") from None


class LiteFile:
    """A trace file read through :mod:`h5lite` (see the module docstring)."""

    swmr = False

    def __init__(self, path):
        self.path = str(path)
        try:
            self._src = h5lite.Source(self.path)
        except OSError:
            raise Unsupported("cannot open") from None  # SafeFile says why
        try:
            self.size = self._src.size
            self._parser = _parsing(lambda: h5lite.Parser(self._src))
            self._objects: dict = {}
            self._indexes: dict = {}  # dataset name -> chunk index rows; ("places", name) -> by offset
            self.file = _parsing(lambda: self._parser.object(self._parser.root_addr, "/"))
            if not isinstance(self.file, h5lite.Group):
                raise Unsupported("the root object is not a group")
            self._objects["/"] = self.file
            self._parse_all()
        except BaseException:
            self._src.close()
            raise

    def _parse_all(self):
        """Parse every object of the file now (breadth first, at most :data:`MAX_OBJECTS`, paths at
        most :data:`MAX_DEPTH` deep), so a file outside the subset is known at open, before the
        reader decodes anything it would have to decode again through h5py."""
        todo, count = [("", self.file)], 1
        while todo:
            path, group = todo.pop(0)
            if path.count("/") >= MAX_DEPTH:
                raise Unsupported("groups nest too deeply")
            for name, addr in group.links.items():
                count += 1
                if count > MAX_OBJECTS:
                    raise Unsupported("too many objects")
                full = f"{path}/{name}"
                node = self._objects[full] = _parsing(lambda: self._parser.object(addr, full))
                if isinstance(node, h5lite.Group):
                    todo.append((full, node))

    def close(self):
        self._src.close()

    def refresh(self, ds=None):
        """Nothing to do: LiteFile never reads a file a recorder is writing."""

    def fail(self, name, reason):
        return TraceFormatError(self.path, name, reason)

    # -- objects -----------------------------------------------------------------------------
    def _get(self, name: str):
        """The object at ``name`` (None when there is none); every object was parsed at open."""
        got = self._objects.get(name)
        if got is None:
            parts = [p for p in name.split("/") if p]
            got = self._objects.get("/" + "/".join(parts))
            if got is None and any(isinstance(self._objects.get("/" + "/".join(parts[:k])), h5lite.Dataset)
                                   for k in range(1, len(parts))):
                raise Unsupported(f"{name}: a path through a dataset")  # h5py says what is wrong
        return got

    def group(self, name: str, required: bool = True):
        node = self._get(name)
        if node is None:
            if required:
                raise self.fail(name, "required group is missing")
            return None
        if not isinstance(node, h5lite.Group):
            raise self.fail(name, "must be a group, found a dataset")
        return node

    def dataset(self, name: str, required: bool = True, whole: bool = True):
        """The dataset at ``name`` after SafeFile's size checks; None if absent and not required."""
        node = self._get(name)
        if node is None:
            if required:
                raise self.fail(name, "required dataset is missing")
            return None
        if not isinstance(node, h5lite.Dataset):
            raise self.fail(name, "must be a dataset, found a group")
        check_declared(self, name, node.shape, node.file_dtype.itemsize, whole)
        if node.chunks is not None:
            self._index(node)  # parsed now, while a structure it cannot read still means "use h5py"
        return node

    def attr(self, obj, key, default=None):
        return obj.attrs.get(key, default)

    def filter_ids(self, ds) -> list:
        return [fid for fid, _, _ in ds.filters]

    # -- data --------------------------------------------------------------------------------
    def read(self, ds, sel=()):
        """``ds[sel]`` as h5py returns it (bool for h5py's bool; not for strings)."""
        if ds.vlen:
            raise self.fail(ds.name, "holds variable-length strings, not numbers")
        raw = self._read_raw(ds, sel)
        return raw != 0 if ds.dtype == np.bool_ else raw

    def read_flags(self, ds, sel=()) -> np.ndarray:
        """``ds[sel] != 0`` for a dataset of one-byte flags, from the bytes as stored."""
        return self._read_raw(ds, sel) != 0

    def read_strings(self, ds) -> tuple[str, ...]:
        """The strings of ``ds``, each escaped and cut by :func:`printable`."""
        if ds.vlen:
            raw = self._read_raw(ds, ())
            n = raw.size
            vals = _parsing(lambda: self._parser.vlen_strings(raw.tobytes(), n, "replace"))
        elif ds.dtype.kind == "S":
            vals = [bytes(v).decode("utf-8", "replace") for v in np.atleast_1d(self._read_raw(ds, ()))]
        else:
            raise self.fail(ds.name, f"must hold strings, found dtype {ds.dtype}")
        return tuple(printable(v) for v in vals)

    def _read_raw(self, ds, sel) -> np.ndarray:
        """``ds[sel]`` in the stored dtype (h5py's bool as one byte per element)."""
        shape = ds.shape
        box = unit_box(sel, shape)
        if box is None:  # not unit-step slices: the whole dataset, then NumPy's indexing
            return self._read_raw(ds, ())[sel]
        dt = ds.file_dtype
        count = tuple(b - a for a, b in box)
        if ds.compact is not None or ds.contiguous is not None:
            return self._read_flat(ds, box, count)
        out = np.empty(count, dt)
        if not out.size:
            return out
        index = self._places(ds)
        chunk_bytes = math.prod(ds.chunks) * dt.itemsize
        for off in chunk_offsets(box, ds.chunks):
            block = self._chunk(ds, index.get(off), chunk_bytes).reshape(ds.chunks)
            src_sel, dst_sel = overlap(box, off, ds.chunks)
            out[dst_sel] = block[src_sel]
        return out

    def _read_flat(self, ds, box, count) -> np.ndarray:
        """A box of a compact or contiguous dataset: the rows of the first axis it spans are read."""
        dt = ds.file_dtype
        shape = ds.shape
        row = math.prod(shape[1:]) * dt.itemsize if shape else dt.itemsize
        total = math.prod(shape) * dt.itemsize
        lo, hi = (box[0] if shape else (0, 1))
        if ds.compact is not None:
            if len(ds.compact) < total:
                raise self.fail(ds.name, "cannot read data (truncated or corrupt?): compact data is short")
            data = ds.compact[lo * row:hi * row]
        elif ds.contiguous[0] == h5lite.UNDEFINED:
            data = (ds.fill or bytes(dt.itemsize)) * ((hi - lo) * row // dt.itemsize)
        else:
            addr, size = ds.contiguous
            if size < total:
                raise self.fail(ds.name, "cannot read data (truncated or corrupt?): contiguous storage is short")
            try:
                data = self._src.read(addr + lo * row, (hi - lo) * row)
            except Unsupported:
                raise self.fail(ds.name, "cannot read data (truncated or corrupt?): its data lies past the end "
                                         "of the file") from None
        rows = np.frombuffer(data, dt).reshape((hi - lo,) + tuple(shape[1:]) if shape else ())
        if not shape:  # h5py gives a scalar dataset as a NumPy scalar
            return rows[()]
        return rows[(slice(None),) + tuple(slice(a, b) for a, b in box[1:])].copy()

    def _index(self, ds) -> np.ndarray:
        """int64 rows of :meth:`chunk_index` of chunked dataset ``ds``, parsed and checked once."""
        got = self._indexes.get(ds.name)
        if got is None:
            rows = _parsing(lambda: self._parser.chunk_index(ds))
            got = self._indexes[ds.name] = checked_index(self, ds.name, rows, len(ds.shape), self.size)
        return got

    def _places(self, ds) -> dict:
        """{chunk offset: (place, stored size, filter mask)} of chunked dataset ``ds``."""
        key = ("places", ds.name)
        got = self._indexes.get(key)
        if got is None:
            rank = len(ds.shape)
            got = self._indexes[key] = {tuple(r[:rank]): (r[rank + 2], r[rank + 1], r[rank])
                                        for r in self._index(ds).tolist()}
        return got

    def _chunk(self, ds, spot, chunk_bytes: int) -> np.ndarray:
        """One decoded chunk as a flat array of the stored dtype; the fill value when never written."""
        dt = ds.file_dtype
        if spot is None:
            return np.frombuffer((ds.fill or bytes(dt.itemsize)) * (chunk_bytes // dt.itemsize), dt)
        place, size, mask = spot
        if size > int(chunk_bytes * MAX_STORED_GROWTH) + 4096:
            raise self.fail(ds.name, "cannot read stored chunks (truncated or corrupt?): its chunk index holds a "
                                     "chunk larger than any encoder makes")
        try:
            data = self._src.read(place, size)
        except Unsupported:
            raise self.fail(ds.name, "cannot read data (truncated or corrupt?): a stored chunk ends past the "
                                     "end of the file") from None
        for bit in reversed(range(len(ds.filters))):
            if (mask >> bit) & 1:
                continue  # the writer skipped this filter for this chunk
            fid, _, vals = ds.filters[bit]
            if fid == 1:
                d = zlib.decompressobj()
                try:
                    data = d.decompress(data, chunk_bytes + 1)
                except zlib.error as exc:
                    raise self.fail(ds.name, f"cannot read data (truncated or corrupt?): a stored chunk's deflate "
                                             f"stream is corrupt ({exc})") from None
                if not d.eof:
                    raise self.fail(ds.name, "cannot read data (truncated or corrupt?): a stored chunk's deflate "
                                             "stream is cut short or too long")
            elif fid == 2 and dt.itemsize > 1 and len(data) == chunk_bytes:
                n = chunk_bytes // dt.itemsize
                data = np.frombuffer(data, np.uint8).reshape(dt.itemsize, n).T.tobytes()
        if len(data) != chunk_bytes:
            raise self.fail(ds.name, f"cannot read data (truncated or corrupt?): a stored chunk decodes to "
                                     f"{len(data):,} bytes, not {chunk_bytes:,}")
        return np.frombuffer(data, dt)

    def chunk_index(self, ds) -> np.ndarray:
        """As ``SafeFile.chunk_index``: int64 (K, rank + 3) rows [offset..., mask, size, place]."""
        return self._index(ds)

    def stored_digest(self, ds) -> bytes | None:
        """As ``SafeFile.stored_digest`` (the same digest for the same dataset)."""
        if ds.chunks is None:
            return None
        h = hashlib.blake2b(digest_size=20)
        pipeline = [(fid, flags, tuple(vals)) for fid, flags, vals in ds.filters]
        h.update(repr((ds.shape, ds.dtype.str, ds.chunks, pipeline, ds.fillvalue)).encode())
        return digest_chunks(self, h, self.chunk_index(ds), len(ds.chunks), ds.name)

