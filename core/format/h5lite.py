"""A reader of the HDF5 structures that h5py writes by default, in plain Python.

Opening a file through h5py costs about 3 ms before the first byte of data (HDF5 sets up a
metadata cache and free lists per file; h5py builds an object per group, dataset and attribute),
more than checking a trace of 1,000 entity-frames. This module reads the file's own structures
directly, for the subset h5py and HDF5 write with their default file format:

- superblock version 0 or 1, 8-byte addresses and lengths, no user block;
- version 1 object headers (with continuation blocks), no shared messages;
- groups stored as symbol tables (version 1 B-tree of group nodes plus a local heap), hard links;
- datasets with a simple or scalar dataspace; fixed-point, IEEE float, fixed-length string,
  variable-length string and h5py's bool (an enum FALSE=0, TRUE=1 of one signed byte);
  compact, contiguous or chunked layout (layout message version 3, version 1 B-tree chunk index);
  the deflate and shuffle filters;
- attributes stored in the object header, variable-length strings in global heap collections.

Anything else (newer superblocks and object headers, soft or external links, other filters,
external storage, enums, compound types, a structure that does not parse, an end-of-file address
past the file's end) raises :class:`Unsupported`, and the caller opens the file with h5py, which
reads it or refuses it with its own reasons. This module never decides that a file is bad.

Hostile input: every address and length is checked against the file size before it is read,
every walk (B-tree levels, nodes, messages, continuation blocks, heap objects) has a bound, and
nothing is allocated from a size the file declares without that check. Structures follow the
HDF5 File Format Specification, version 3.0 (The HDF Group), sections II-IV, as quoted from
memory; ``tests/core/format/test_lite_file.py`` holds every form against h5py's own reads.
"""
from __future__ import annotations

import math
import os
import struct

import numpy as np

SIGNATURE = b"\x89HDF\r\n\x1a\n"
UNDEFINED = 0xFFFFFFFFFFFFFFFF
#: Files up to this size are read into memory whole at open (one read instead of one per structure).
WHOLE_FILE_BYTES = 4 << 20
#: Bounds of every walk through the file's structures (a trace has a few of each).
MAX_MESSAGES = 4096
MAX_BLOCKS = 64
MAX_TREE_NODES = 1 << 16
MAX_TREE_DEPTH = 16
MAX_LINKS = 4096
MAX_HEAP_OBJECTS = 1 << 16
#: Largest structure read (a header block, a heap, a B-tree node); larger ones are left to h5py,
#: so a hostile size never makes this reader hold more than this.
MAX_STRUCTURE_BYTES = 16 << 20
#: Largest chunk (decoded bytes) this reader decodes; HDF5 allows up to 4 GiB, h5py reads larger.
MAX_CHUNK_BYTES = 64 << 20

_U16 = struct.Struct("<H")
_U32 = struct.Struct("<I")
_U64 = struct.Struct("<Q")

# object header message types (specification IV.A.2)
_NIL, _DATASPACE, _DATATYPE, _FILL_OLD, _FILL, _LAYOUT, _FILTERS, _ATTRIBUTE = 0, 1, 3, 4, 5, 8, 11, 12
_COMMENT, _MTIME_OLD, _CONTINUATION, _SYMBOL_TABLE, _MTIME, _BTREE_K = 13, 14, 16, 17, 18, 19
_IGNORED = {_NIL, _FILL_OLD, _COMMENT, _MTIME_OLD, _MTIME, _BTREE_K}


class Unsupported(Exception):
    """The file uses a structure this reader does not cover (or does not parse): open it with h5py."""


class Source:
    """Bounds-checked reads of one file: the whole file in memory when it is small, else ``pread``."""

    def __init__(self, path: str):
        self.path = path
        self._fd = os.open(path, os.O_RDONLY)
        try:
            self.size = os.fstat(self._fd).st_size
            self._whole = os.pread(self._fd, self.size, 0) if self.size <= WHOLE_FILE_BYTES else None
        except BaseException:
            os.close(self._fd)
            raise
        if self._whole is not None:
            if len(self._whole) != self.size:
                self.close()
                raise Unsupported("the file changed size while it was read")
            os.close(self._fd)
            self._fd = -1

    def read(self, addr: int, n: int) -> bytes:
        """``n`` bytes at ``addr``; Unsupported when they are not all inside the file."""
        if addr < 0 or n < 0 or addr > self.size or n > self.size - addr:
            raise Unsupported(f"{n} bytes at {addr} lie outside the file")
        if self._whole is not None:
            return self._whole[addr:addr + n]
        got = os.pread(self._fd, n, addr)
        if len(got) != n:
            raise Unsupported("the file is shorter than it was at open")
        return got

    def close(self):
        if self._fd >= 0:
            os.close(self._fd)
            self._fd = -1
        self._whole = None


class Dataset:
    """One dataset's header, as parsed.

    Attributes:
        name: str, path in the file; shape: int tuple (() for a scalar); dtype: numpy dtype
            (h5py's bool as np.bool_, variable-length strings as object); chunks: int tuple or
            None; filters: tuple of (filter id, flags, client values tuple); fill: bytes of one
            element, or None (zeros); compact: bytes or None; contiguous: (address, size) or
            None (address UNDEFINED: never written); tree: address of the chunk B-tree or None;
            attrs: dict str -> value (h5py's values: numpy scalars and arrays, str for
            variable-length strings); vlen: True for variable-length strings (read from the
            global heap); file_dtype: the stored numpy dtype (one byte for h5py's bool).
    """

    __slots__ = ("name", "shape", "dtype", "chunks", "filters", "fill", "compact", "contiguous", "tree",
                 "attrs", "vlen", "file_dtype", "fillvalue")


class Group:
    """A group: ``name``, ``links`` {str: object header address} and ``attrs``."""

    __slots__ = ("name", "links", "attrs")


class Parser:
    """Parses the objects of one file on demand (each object header once)."""

    def __init__(self, src: Source):
        self.src = src
        sb = src.read(0, min(src.size, 128)) if src.size >= 8 else b""
        if sb[:8] != SIGNATURE:
            raise Unsupported("no HDF5 signature at offset 0")
        if len(sb) < 56 or sb[8] not in (0, 1):
            raise Unsupported("superblock version is not 0 or 1")
        if sb[13] != 8 or sb[14] != 8:
            raise Unsupported("addresses or lengths are not 8 bytes")
        at = 24 + (4 if sb[8] == 1 else 0)
        if len(sb) < at + 32 + 40:
            raise Unsupported("superblock is truncated")
        base, _free, eof, driver = struct.unpack_from("<4Q", sb, at)
        if base != 0 or driver != UNDEFINED or _U32.unpack_from(sb, 20)[0] != 0:
            raise Unsupported("base address, driver block or consistency flags set")
        if eof > src.size:  # HDF5 refuses a truncated file; h5py says so
            raise Unsupported("end-of-file address past the end of the file")
        self.root_addr = _U64.unpack_from(sb, at + 32 + 8)[0]
        self._heaps: dict = {}

    def _read(self, addr: int, n: int) -> bytes:
        """A structure of ``n`` bytes at ``addr`` (Unsupported past the file or over MAX_STRUCTURE_BYTES)."""
        if n > MAX_STRUCTURE_BYTES:
            raise Unsupported(f"a structure of {n} bytes")
        return self.src.read(addr, n)

    # -- object headers ------------------------------------------------------------------------
    def messages(self, addr: int) -> list:
        """[(type, body bytes)] of the version 1 object header at ``addr``, continuations followed."""
        head = self._read(addr, 16)
        if head[0] != 1:
            raise Unsupported("object header is not version 1")
        count, _refs, size = struct.unpack_from("<HII", head, 2)
        blocks, out, seen = [(addr + 16, size)], [], 0
        while blocks:
            if seen >= MAX_BLOCKS:
                raise Unsupported("too many object header blocks")
            seen += 1
            start, length = blocks.pop(0)
            data = self._read(start, length)
            at = 0
            while at + 8 <= length:
                kind, n, flags = struct.unpack_from("<HHB", data, at)
                body = data[at + 8:at + 8 + n]
                if len(body) != n:
                    raise Unsupported("object header message runs past its block")
                if flags & 0x02:
                    raise Unsupported("shared object header message")
                if kind == _CONTINUATION:
                    if n < 16:
                        raise Unsupported("short continuation message")
                    blocks.append(struct.unpack_from("<QQ", body))
                elif kind not in _IGNORED:
                    out.append((kind, body))
                if len(out) > MAX_MESSAGES:
                    raise Unsupported("too many object header messages")
                at += 8 + n
        if len(out) > count:
            raise Unsupported("more messages than the header declares")
        return out

    def object(self, addr: int, name: str):
        """The :class:`Group` or :class:`Dataset` whose header is at ``addr``."""
        msgs = self.messages(addr)
        kinds = {k for k, _ in msgs}
        attrs = {}
        for k, body in msgs:
            if k == _ATTRIBUTE:
                key, value = self._attribute(body)
                attrs[key] = value
        if _SYMBOL_TABLE in kinds:
            g = Group()
            g.name, g.attrs = name, attrs
            g.links = self._links(next(b for k, b in msgs if k == _SYMBOL_TABLE))
            return g
        if not {_DATASPACE, _DATATYPE, _LAYOUT} <= kinds:
            raise Unsupported(f"object {name} is neither a symbol-table group nor a dataset")
        known = {_SYMBOL_TABLE, _DATASPACE, _DATATYPE, _LAYOUT, _FILTERS, _ATTRIBUTE, _FILL}
        if kinds - known:
            raise Unsupported(f"object {name} has header messages {sorted(kinds - known)}")
        return self._dataset(name, attrs, {k: b for k, b in msgs if k != _ATTRIBUTE})

    def _dataset(self, name: str, attrs: dict, msg: dict) -> Dataset:
        d = Dataset()
        d.name, d.attrs = name, attrs
        shape = _dataspace(msg[_DATASPACE])
        if shape is None:
            raise Unsupported("null dataspace")
        d.shape = shape
        d.dtype, d.file_dtype, d.vlen = _datatype(msg[_DATATYPE])
        d.filters = _filters(msg[_FILTERS]) if _FILTERS in msg else ()
        if any(fid not in (1, 2) for fid, _, _ in d.filters):
            raise Unsupported("a filter other than deflate and shuffle")
        d.fill = _fill(msg.get(_FILL), d.file_dtype.itemsize)
        d.fillvalue = (np.frombuffer(d.fill, d.file_dtype)[0] if d.fill is not None
                       else np.zeros((), d.file_dtype)[()])
        if d.vlen:
            d.fillvalue = None
        elif d.dtype == np.bool_:
            d.fillvalue = np.bool_(d.fillvalue != 0)
        d.chunks = d.compact = d.contiguous = d.tree = None
        body = msg[_LAYOUT]
        if len(body) < 2 or body[0] != 3:
            raise Unsupported("layout message is not version 3")
        cls = body[1]
        if cls == 0:
            n = _U16.unpack_from(body, 2)[0]
            d.compact = body[4:4 + n]
            if len(d.compact) != n:
                raise Unsupported("short compact data")
        elif cls == 1:
            d.contiguous = struct.unpack_from("<QQ", body, 2)
        elif cls == 2:
            rank = body[2]
            if rank != len(shape) + 1 or len(body) < 11 + 4 * rank:
                raise Unsupported("chunk dimensions do not match the dataspace")
            d.tree = _U64.unpack_from(body, 3)[0]
            dims = struct.unpack_from(f"<{rank}I", body, 11)
            if dims[-1] != d.file_dtype.itemsize or 0 in dims:
                raise Unsupported("chunk element size does not match the datatype")
            d.chunks = tuple(dims[:-1])
            if math.prod(dims) > MAX_CHUNK_BYTES:
                raise Unsupported("chunks larger than this reader decodes")
        else:
            raise Unsupported("virtual or unknown layout")
        if d.filters and d.chunks is None:
            raise Unsupported("filters on a dataset that is not chunked")
        return d

    # -- groups ------------------------------------------------------------------------------
    def _links(self, body: bytes) -> dict:
        """{name: object header address} of a symbol-table group (hard links only)."""
        tree, heap = struct.unpack_from("<QQ", body)
        data = self._local_heap(heap)
        links: dict = {}
        for node in self._tree_leaves(tree, 0):
            head = self._read(node, 8)
            if head[:4] != b"SNOD" or head[4] != 1:
                raise Unsupported("bad symbol table node")
            n = _U16.unpack_from(head, 6)[0]
            raw = self._read(node + 8, 40 * n)
            for k in range(n):
                off, obj, cache = struct.unpack_from("<QQI", raw, 40 * k)
                if cache == 2:
                    raise Unsupported("a soft link")
                end = data.find(b"\0", off)
                if off >= len(data) or end < 0:
                    raise Unsupported("link name outside the local heap")
                links[data[off:end].decode("utf-8")] = obj
                if len(links) > MAX_LINKS:
                    raise Unsupported("too many links")
        return links

    def _local_heap(self, addr: int) -> bytes:
        head = self._read(addr, 32)
        if head[:4] != b"HEAP" or head[4] != 0:
            raise Unsupported("bad local heap")
        size, _free, data = struct.unpack_from("<QQQ", head, 8)
        return self._read(data, size)

    def _tree_leaves(self, addr: int, node_type: int, rank: int = 0) -> list:
        """Children of the leaves of a version 1 B-tree, in key order: addresses of symbol table
        nodes (``node_type`` 0), or for a chunk tree (``node_type`` 1, dataset rank ``rank``)
        int64 arrays (K, rank + 3), one row per chunk: offset (rank columns), filter mask,
        stored size, address."""
        key = 8 if node_type == 0 else 8 + 8 * (rank + 1)
        entry = np.dtype([("key", f"V{key}"), ("child", "<u8")]) if node_type == 0 else \
            np.dtype([("size", "<u4"), ("mask", "<u4"), ("offs", "<u8", (rank + 1,)), ("child", "<u8")])
        out, todo, nodes = [], [(addr, None)], 0
        while todo:
            at, level_above = todo.pop()
            nodes += 1
            if nodes > MAX_TREE_NODES:
                raise Unsupported("B-tree has too many nodes")
            head = self._read(at, 24)
            if head[:4] != b"TREE" or head[4] != node_type:
                raise Unsupported("bad B-tree node")
            level, used = head[5], _U16.unpack_from(head, 6)[0]
            if level >= MAX_TREE_DEPTH or (level_above is not None and level != level_above - 1):
                raise Unsupported("B-tree levels are inconsistent")
            rows = np.frombuffer(self._read(at + 24, used * (key + 8)), entry, used)
            if level > 0:
                todo.extend((int(c), level) for c in rows["child"][::-1])
            elif node_type == 0:
                out.extend(int(c) for c in rows["child"])
            else:
                got = np.empty((used, rank + 3), np.int64)
                got[:, :rank] = rows["offs"][:, :rank]
                got[:, rank] = rows["mask"]
                got[:, rank + 1] = rows["size"]
                got[:, rank + 2] = rows["child"]
                if (rows["offs"][:, :rank] > 1 << 62).any() or (rows["child"] > 1 << 62).any():
                    raise Unsupported("chunk index holds impossible offsets")
                out.append(got)
        return out

    def chunk_index(self, d: Dataset) -> np.ndarray:
        """int64 (K, rank + 3) rows of the stored chunks of ``d`` (see :meth:`_tree_leaves`)."""
        rank = len(d.shape)
        if d.tree == UNDEFINED:
            return np.zeros((0, rank + 3), np.int64)
        parts = self._tree_leaves(d.tree, 1, rank)
        return np.concatenate(parts) if len(parts) != 1 else parts[0]

    # -- attributes and variable-length data --------------------------------------------------
    def _attribute(self, body: bytes):
        version = body[0]
        if version not in (1, 2, 3):
            raise Unsupported("attribute message version")
        if version > 1 and body[1]:
            raise Unsupported("shared datatype or dataspace in an attribute")
        nsize, tsize, ssize = struct.unpack_from("<HHH", body, 2)
        at = 8 if version < 3 else 9
        pad = (lambda n: -(-n // 8) * 8) if version == 1 else (lambda n: n)
        name = body[at:at + nsize].rstrip(b"\0").decode("utf-8")
        at += pad(nsize)
        dtype, file_dtype, vlen = _datatype(body[at:at + tsize])
        at += pad(tsize)
        shape = _dataspace(body[at:at + ssize])
        at += pad(ssize)
        if shape is None:
            raise Unsupported("an attribute with a null dataspace")
        n = int(np.prod(shape, dtype=np.int64)) if shape else 1
        raw = body[at:at + n * file_dtype.itemsize]
        if len(raw) != n * file_dtype.itemsize:
            raise Unsupported("short attribute data")
        if vlen:
            arr = np.array(self.vlen_strings(raw, n), dtype=object).reshape(shape)
        else:
            arr = np.frombuffer(raw, file_dtype).reshape(shape)
            if dtype == np.bool_:
                arr = arr != 0
            elif dtype.kind == "S":
                arr = arr.astype(dtype)
        return name, (arr[()] if arr.ndim == 0 else arr.copy())

    def vlen_strings(self, raw: bytes, n: int, errors: str = "surrogateescape") -> list:
        """``n`` variable-length strings from their 16-byte references in ``raw``, decoded as
        UTF-8 with ``errors`` (h5py's attributes: surrogate escapes)."""
        out = []
        for k in range(n):
            length, heap, index = struct.unpack_from("<IQI", raw, 16 * k)
            if heap == 0 and length == 0:
                out.append("")
                continue
            obj = self._heap_objects(heap).get(index)
            if obj is None or len(obj) < length:
                raise Unsupported("variable-length string outside its heap")
            out.append(obj[:length].decode("utf-8", errors))
        return out

    def _heap_objects(self, addr: int) -> dict:
        got = self._heaps.get(addr)
        if got is not None:
            return got
        head = self._read(addr, 16)
        if head[:4] != b"GCOL" or head[4] != 1:
            raise Unsupported("bad global heap collection")
        size = _U64.unpack_from(head, 8)[0]
        data = self._read(addr, size)
        objs, at = {}, 16
        while at + 16 <= size and len(objs) < MAX_HEAP_OBJECTS:
            index, _refs, n = struct.unpack_from("<HH4xQ", data, at)
            if index == 0:  # free space: the rest of the collection
                break
            if n > size - at - 16:
                raise Unsupported("global heap object runs past its collection")
            objs[index] = data[at + 16:at + 16 + n]
            at += 16 + -(-n // 8) * 8
        self._heaps[addr] = objs
        return objs


# -- message bodies ------------------------------------------------------------------------------
def _dataspace(body: bytes):
    """Shape (tuple of int, () for a scalar) of a dataspace message; None for a null dataspace."""
    if len(body) < 8:
        raise Unsupported("short dataspace message")
    version, rank, flags = body[0], body[1], body[2]
    if version == 1:
        if flags & 0x02:
            raise Unsupported("dataspace with a permutation")
        at = 8
    elif version == 2:
        if body[3] == 2:
            return None
        at = 4
    else:
        raise Unsupported("dataspace message version")
    if len(body) < at + 8 * rank:
        raise Unsupported("short dataspace message")
    return tuple(struct.unpack_from(f"<{rank}Q", body, at))


_FLOATS = {4: (0, 32, 23, 8, 0, 23, 127, 31), 8: (0, 64, 52, 11, 0, 52, 1023, 63)}


def _datatype(body: bytes):
    """(numpy dtype as h5py gives it, numpy dtype as stored, variable-length string) of a
    datatype message."""
    if len(body) < 8:
        raise Unsupported("short datatype message")
    cls, bits, size = body[0] & 0x0F, body[1] | body[2] << 8 | body[3] << 16, _U32.unpack_from(body, 4)[0]
    order = ">" if bits & 1 else "<"
    if cls == 0:  # fixed-point
        if size not in (1, 2, 4, 8) or bits & 0x06 or len(body) < 12 or struct.unpack_from("<HH", body, 8) != (0, 8 * size):
            raise Unsupported("integer type")
        dt = np.dtype(f"{order}{'i' if bits & 0x08 else 'u'}{size}")
        return dt, dt, False
    if cls == 1:  # IEEE floating point, standard layout only
        want = _FLOATS.get(size)
        if want is None or len(body) < 20 or bits & 0x4E or (bits >> 4) & 3 != 2:
            raise Unsupported("float type")
        got = struct.unpack_from("<HHBBBBI", body, 8) + ((bits >> 8) & 0xFF,)
        if got != want:
            raise Unsupported("float type with a non-standard layout")
        dt = np.dtype(f"{order}f{size}")
        return dt, dt, False
    if cls == 3:  # fixed-length string: h5py reads bytes
        if size == 0 or bits & 0x0F > 2 or (bits >> 4) & 0x0F > 1:
            raise Unsupported("string type")
        dt = np.dtype(f"S{size}")
        return dt, dt, False
    if cls == 9:  # variable-length: strings only
        if bits & 0x0F != 1 or (bits >> 8) & 0x0F > 1 or size != 16:
            raise Unsupported("variable-length type that is not a string")
        return np.dtype(object), np.dtype("V16"), True
    if cls == 8:  # enum: only h5py's bool
        if bits & 0xFFFF != 2:
            raise Unsupported("enum type")
        base = body[8:20]
        bdt, _, _ = _datatype(base)
        if bdt != np.dtype("i1") or size != 1:
            raise Unsupported("enum type")
        version = body[0] >> 4
        at, names = 20, []
        for _ in range(2):
            end = body.find(b"\0", at)
            if end < 0:
                raise Unsupported("enum type")
            names.append(body[at:end])
            at = end + 1
            if version < 3:
                at = 20 + -(-(at - 20) // 8) * 8
        values = body[at:at + 2]
        if names != [b"FALSE", b"TRUE"] or values != b"\x00\x01":
            raise Unsupported("enum type other than h5py's bool")
        return np.dtype(np.bool_), np.dtype("i1"), False
    raise Unsupported(f"datatype class {cls}")


def _filters(body: bytes) -> tuple:
    """((filter id, flags, client values), ...) of a filter pipeline message, in pipeline order."""
    version, count = body[0], body[1]
    if version not in (1, 2):
        raise Unsupported("filter pipeline version")
    at, out = 8 if version == 1 else 2, []
    for _ in range(count):
        fid = _U16.unpack_from(body, at)[0]
        if version == 1 or fid >= 256:
            nlen, flags, nvals = struct.unpack_from("<HHH", body, at + 2)
            at += 8
        else:
            nlen = 0
            flags, nvals = struct.unpack_from("<HH", body, at + 2)
            at += 6
        at += (-(-nlen // 8) * 8) if version == 1 else nlen
        vals = struct.unpack_from(f"<{nvals}I", body, at)
        at += 4 * nvals + (4 if version == 1 and nvals % 2 else 0)
        out.append((fid, flags, vals))
    return tuple(out)


def _fill(body, itemsize: int):
    """Bytes of one element of the fill value, or None for zeros (no value defined)."""
    if body is None:
        return None
    version = body[0]
    if version in (1, 2):
        defined, at = body[3], 4
        if not defined or (version == 2 and len(body) < 8):
            return None
    elif version == 3:
        flags, at = body[1], 2
        if not flags & 0x20:
            return None
    else:
        raise Unsupported("fill value message version")
    if len(body) < at + 4:
        return None
    n = _U32.unpack_from(body, at)[0]
    if n == 0:
        return None
    if n != itemsize:
        raise Unsupported("fill value size does not match the datatype")
    return body[at + 4:at + 4 + n]
