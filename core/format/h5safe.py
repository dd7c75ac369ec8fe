"""Defensive access to untrusted HDF5 files: links, storage, filters and declared sizes.

Trace files arrive attached to bug reports, so every object is checked before it is read:
no external links, no soft links that dangle or leave the file, no external raw storage, no
virtual datasets, only the filters that ship with h5py, and no dataset that declares more data
than a file of its size could plausibly hold.

One owner per file per process: HDF5 fails a SWMR refresh of a dataset that is open twice in one
process ("can't insert duplicate key"), whether through two file handles or two handles of the
same file. So every :class:`SafeFile` of the same file (device and inode) shares one h5py file and
one h5py dataset per dataset (:class:`_Shared`), and refreshes go through that owner.
"""
from __future__ import annotations

import os
import threading

import h5py
import numpy as np

from resweep.core.errors import TraceFormatError, printable
from resweep.core.format.declared import (ALLOWED_FILTERS, H5_FAILURES, NO_PLUGINS_ENV, check_declared,
                                          checked_index, digest_chunks, unit_box)


def _clear_plugin_path() -> None:
    """Empty HDF5's plugin search path (see ``declared.NO_PLUGINS_ENV``)."""
    h5pl = h5py.h5pl
    for _ in range(h5pl.size()):
        h5pl.remove(0)


if os.environ.get(NO_PLUGINS_ENV) == "1":
    _clear_plugin_path()

_MAX_LINK_HOPS = 16


class _Shared:
    """The one open h5py file of a file in this process, with one h5py dataset per dataset.

    Attributes:
        file: h5py.File; swmr: bool, opened in SWMR read mode; users: int, open SafeFiles.
        by_path: dict str -> h5py.Dataset, datasets by the name they were asked for;
        by_addr: dict int -> h5py.Dataset, in SWMR mode the same objects by file address (two
            names that reach one dataset through a link share its handle, which refreshes).
        lock: held while datasets are opened or refreshed, so no second handle of a dataset
            exists during a refresh.
    """

    def __init__(self, file: h5py.File, swmr: bool):
        self.file, self.swmr, self.users = file, swmr, 1
        self.by_path: dict[str, h5py.Dataset] = {}
        self.by_addr: dict[int, h5py.Dataset] = {}
        self.lock = threading.RLock()


_SHARED: dict[tuple[int, int], _Shared] = {}
_SHARED_LOCK = threading.Lock()


class SafeFile:
    """A read-only h5py file whose objects are fetched through link and storage checks."""

    def __init__(self, path, swmr: bool = False):
        """``swmr``: open for reading while a recorder may still append (HDF5 SWMR read mode).
        A file this process already has open is shared, in the mode it was opened in."""
        self.path = str(path)
        try:
            st = os.stat(self.path)
        except OSError as exc:
            raise TraceFormatError(path, None, f"cannot open: {exc.strerror or exc}") from None
        size = st.st_size
        if os.path.isdir(self.path):
            raise TraceFormatError(path, None, "is a directory, not a trace file")
        self.size = size
        if size == 0:
            raise TraceFormatError(path, None, "empty file (0 bytes), not an HDF5 trace")
        try:
            is_h5 = h5py.is_hdf5(self.path)
        except H5_FAILURES as exc:
            raise TraceFormatError(path, None, f"cannot open: {exc}") from None
        if not is_h5:
            raise TraceFormatError(path, None, "not an HDF5 file (no HDF5 signature)")
        key = (st.st_dev, st.st_ino)
        with _SHARED_LOCK:
            shared = _SHARED.get(key)
            if shared is not None and shared.file.id.valid:
                shared.users += 1
            else:
                shared = _SHARED[key] = _Shared(*self._open(bool(swmr)))
        self._key, self._shared = key, shared
        self.file, self.swmr = shared.file, shared.swmr
        self._groups: dict = {}  # path -> group reached through hard links, for later lookups under it
        self._tables: dict = {}  # path -> that group's {link name: link type}, None when it has too many

    def _open(self, swmr: bool) -> tuple[h5py.File, bool]:
        """(h5py file, opened in SWMR mode) of a file this process does not have open yet."""
        try:
            f = h5py.File(self.path, "r", locking=False, swmr=swmr)
        except H5_FAILURES as exc:
            if swmr:
                raise TraceFormatError(self.path, None, f"cannot open as HDF5 (truncated or corrupt?): {exc}") from None
            # A recorder holds the file in SWMR mode or was killed holding it ("already open for
            # write"), or this process has it open in SWMR mode outside SafeFile ("different
            # flags"): read as SWMR.
            try:
                return h5py.File(self.path, "r", locking=False, swmr=True), True
            except H5_FAILURES:  # the first error says what is wrong
                raise TraceFormatError(self.path, None, f"cannot open as HDF5 (truncated or corrupt?): {exc}") from None
        # HDF5 itself shares one open file per process: a file this process writes in SWMR mode
        # (a recorder here) opens in that mode again.
        return f, swmr or bool(getattr(f, "swmr_mode", False))

    def close(self):
        """Leave the shared file; the last SafeFile of it closes it (a second close does nothing)."""
        shared, self._shared = self._shared, None
        if shared is None:
            return
        with _SHARED_LOCK:
            shared.users -= 1
            if shared.users > 0:
                return
            if _SHARED.get(self._key) is shared:
                del _SHARED[self._key]
        try:
            shared.file.close()
        except Exception:  # closing a broken file must never mask the first error
            pass

    def refresh(self, ds=None):
        """Re-read the on-disk state of ``ds`` (an h5py dataset from :meth:`dataset`), or of every
        dataset opened so far (SWMR readers: a recorder appended). Shapes grow for every
        SafeFile of the file; readers keep to the rows they validated."""
        if not self.swmr:
            return
        shared = self._shared
        with shared.lock:
            for d in ([ds] if ds is not None else list(shared.by_addr.values())):
                try:
                    d.refresh()
                except H5_FAILURES as exc:
                    raise self.fail(d.name, f"cannot refresh (truncated or corrupt?): {exc}") from None

    def fail(self, name, reason):
        return TraceFormatError(self.path, name, reason)

    def _resolve(self, name: str, hops: int = 0):
        """Follow ``name`` component by component, refusing links that leave the file."""
        if hops > _MAX_LINK_HOPS:
            raise self.fail(name, "soft links loop or nest too deeply")
        node = self.file
        parts = [p for p in name.split("/") if p]
        walked = ""
        first = 0
        head = self._groups.get("/" + "/".join(parts[:-1])) if len(parts) > 1 else None
        if head is not None:  # the parent group was walked already: every link on its path is checked
            node, first, walked = head, len(parts) - 1, "/" + "/".join(parts[:-1])
        for i, part in enumerate(parts[first:], first):
            walked += "/" + part
            try:
                link = self._link(node, walked.rsplit("/", 1)[0] or "/", part)
            except H5_FAILURES as exc:
                raise self.fail(walked, f"cannot read link: {exc}") from None
            if link is None:
                return None
            if isinstance(link, h5py.ExternalLink):
                raise self.fail(walked, f"is an external link to {link.filename}:{link.path}; "
                                        "external links are refused (they would read another file)")
            if isinstance(link, h5py.SoftLink):
                target = link.path if link.path.startswith("/") else walked.rsplit("/", 1)[0] + "/" + link.path
                rest = "/".join(parts[i + 1:])
                resolved = self._resolve(target + ("/" + rest if rest else ""), hops + 1)
                if resolved is None:
                    raise self.fail(walked, f"is a soft link to {link.path}, which does not exist in the file")
                return resolved
            try:
                node = _open_hard(node, part)
            except H5_FAILURES as exc:
                raise self.fail(walked, f"cannot open object (truncated or corrupt?): {exc}") from None
        if isinstance(node, h5py.Group):
            self._groups[walked] = node  # reached through hard links only (soft ones returned above)
        return node

    def _link(self, group, path: str, part: str):
        """:func:`_link` of ``part`` in ``group`` (at hard path ``path``), answered from the
        group's link table when it has one: a group's links are listed once, in one HDF5 call,
        instead of two calls per name looked up."""
        table = self._tables.get(path, False)
        if table is False:
            table = self._tables[path] = _link_table(group)
        if table is None:
            return _link(group, part)
        kind = table.get(_name(part))
        if kind is None:
            return None
        return _HARD_LINK if kind == _HARD else _link(group, part)  # soft and external: checked one by one

    def group(self, name: str, required: bool = True):
        node = self._resolve(name)
        if node is None:
            if required:
                raise self.fail(name, "required group is missing")
            return None
        if not isinstance(node, h5py.Group):
            raise self.fail(name, "must be a group, found a dataset")
        return node

    def dataset(self, name: str, required: bool = True, whole: bool = True):
        """The dataset at ``name`` after storage checks; None if absent and not required.

        ``whole`` marks datasets read in one go, which get the absolute size cap too. Every call
        for the same dataset returns the same h5py object (the file's owner keeps it).
        """
        node = self._shared_dataset(name)
        if node is None:
            if required:
                raise self.fail(name, "required dataset is missing")
            return None
        if not isinstance(node, h5py.Dataset):
            raise self.fail(name, "must be a dataset, found a group")
        try:  # low-level reads of the creation properties: h5py's properties each fetch them again
            dsid = node.id
            plist = dsid.get_create_plist()
            if plist.get_layout() == h5py.h5d.VIRTUAL:
                raise self.fail(name, "is a virtual dataset; refused (it would read other files)")
            if plist.get_external_count():
                raise self.fail(name, "uses external raw storage; refused (it would read other files)")
            for k in range(plist.get_nfilters()):
                fid = plist.get_filter(k)[0]
                if fid not in ALLOWED_FILTERS:
                    raise self.fail(name, f"uses HDF5 filter {fid}, which is not one of gzip, lzf, shuffle, "
                                          "fletcher32 (the filters that ship with h5py)")
            shape = node.shape
            itemsize = node.dtype.itemsize
        except TraceFormatError:
            raise
        except H5_FAILURES as exc:
            raise self.fail(name, f"cannot read dataset header (truncated or corrupt?): {exc}") from None
        if shape is None:
            raise self.fail(name, "has no data (null dataspace)")
        check_declared(self, name, shape, itemsize, whole)
        return node

    def _shared_dataset(self, name: str):
        """The owner's h5py object for ``name`` (opened and kept on first use), or what
        :meth:`_resolve` finds when that is not a dataset (None or a group)."""
        shared = self._shared
        with shared.lock:
            node = shared.by_path.get(name)
            if node is not None:
                return node
            node = self._resolve(name)
            if not isinstance(node, h5py.Dataset):
                return node
            if shared.swmr:  # a second handle of a dataset would fail its refresh; outside SWMR it is harmless
                try:
                    addr = h5py.h5o.get_info(node.id).addr
                except H5_FAILURES as exc:
                    raise self.fail(name, f"cannot read object header (truncated or corrupt?): {exc}") from None
                node = shared.by_addr.setdefault(addr, node)
            shared.by_path[name] = node
            return node

    def read(self, ds, sel=()):
        """``ds[sel]`` with read failures turned into one-line errors.

        Integer and float data selected by unit-step slices is read with one low-level HDF5 call
        (:func:`_read_box`, the same read h5py makes): h5py's first read of a dataset sets up a
        reader object per dataset, about 0.2 ms, and a small trace reads each dataset once.
        Everything else goes through h5py's own indexing."""
        try:
            dtype = ds.dtype
            if dtype.kind in "iuf" and dtype.names is None and h5py.check_enum_dtype(dtype) is None:
                got = _read_box(ds, sel, dtype, None)
                if got is not None:
                    return got
            return ds[sel]
        except H5_FAILURES as exc:
            raise self.fail(ds.name, f"cannot read data (truncated or corrupt?): {exc}") from None

    def read_flags(self, ds, sel=()) -> np.ndarray:
        """``ds[sel] != 0`` as a bool array, for a dataset of one-byte flags (h5py's bool, an
        enum of one byte, or a one-byte integer) and ``sel`` a tuple of unit-step slices.

        Read as the file stores it, byte for byte: HDF5 converts nothing between a type and
        itself, where h5py's bool goes through a conversion of its own per read (five times the
        cost of the read on a small trace)."""
        try:
            ftype = ds.id.get_type()
            raw = _read_box(ds, sel, np.dtype(np.uint8), ftype) if ftype.get_size() == 1 else None
        except H5_FAILURES as exc:
            raise self.fail(ds.name, f"cannot read data (truncated or corrupt?): {exc}") from None
        if raw is None:  # not one-byte, no axes, or not unit-step slices: h5py's own read
            return self.read(ds, sel) != 0
        return raw != 0

    def stored_digest(self, ds) -> bytes | None:
        """Digest of ``ds`` as the file stores it: shape, dtype, layout, filter pipeline and the
        raw (still compressed) bytes of every chunk, read without decoding them. Two datasets
        with the same digest decode to the same array, so a decoded copy can be reused (a farm's
        world cache). None for an unchunked dataset (nothing to save: it is stored uncompressed).

        The chunks' places come from HDF5's chunk index; their bytes are read from the file
        directly (a chunk-by-chunk read through HDF5 costs more than the rest of a small trace's
        open): hashed in one pass when they lie back to back in index order, as a writer leaves
        them, else read in one ``pread`` when they lie close together, else one by one. A chunk
        that reaches past the end of the file is refused, as HDF5's own read would (places and
        sizes are each checked against the file size first, so their sum cannot overflow).
        """
        import hashlib
        h = hashlib.blake2b(digest_size=20)
        try:
            plist = ds.id.get_create_plist()
            pipeline = [plist.get_filter(k)[:3] for k in range(plist.get_nfilters())]
            chunks = ds.chunks
            h.update(repr((ds.shape, ds.dtype.str, chunks, pipeline, ds.fillvalue)).encode())
        except H5_FAILURES as exc:
            raise self.fail(ds.name, f"cannot read stored chunks (truncated or corrupt?): {exc}") from None
        if chunks is None:
            return None
        return digest_chunks(self, h, self.chunk_index(ds), len(chunks), ds.name)

    def chunk_index(self, ds) -> np.ndarray:
        """HDF5's index of the stored chunks of chunked dataset ``ds``, checked against the file.

        Returns:
            int64 (K, rank + 3), one row per stored chunk: its offset in the dataset (rank
            columns, elements), its filter mask, its stored size and its place in the file (bytes).
        Raises TraceFormatError when the index cannot be read, holds impossible offsets, or
        places a chunk (partly) outside the file (sizes and places are each checked against the
        file size first, so their sum cannot overflow).
        """
        spots = []
        try:
            rank = len(ds.chunks)
            ds.id.chunk_iter(spots.append)
        except H5_FAILURES as exc:
            raise self.fail(ds.name, f"cannot read stored chunks (truncated or corrupt?): {exc}") from None
        try:
            index = np.array([(*c.chunk_offset, c.filter_mask, c.size,
                               -1 if c.byte_offset is None else c.byte_offset) for c in spots],
                             dtype=np.int64).reshape(len(spots), rank + 3)
        except (OverflowError, ValueError, TypeError):
            raise self.fail(ds.name, "cannot read stored chunks (truncated or corrupt?): its chunk index holds "
                                     "impossible offsets") from None
        return checked_index(self, ds.name, index, rank)

    def filter_ids(self, ds) -> list:
        """HDF5 filter ids of ``ds``'s pipeline, in order (raises H5_FAILURES)."""
        plist = ds.id.get_create_plist()
        return [plist.get_filter(k)[0] for k in range(plist.get_nfilters())]

    def read_strings(self, ds) -> tuple[str, ...]:
        """The strings of ``ds``, each escaped and cut by :func:`printable` (they reach reports)."""
        try:
            if h5py.check_string_dtype(ds.dtype) is None:
                raise self.fail(ds.name, f"must hold strings, found dtype {ds.dtype}")
            vals = ds.asstr(errors="replace")[()]
        except TraceFormatError:
            raise
        except H5_FAILURES as exc:
            raise self.fail(ds.name, f"cannot read strings: {exc}") from None
        return tuple(printable(v) for v in np.atleast_1d(vals))

    def attr(self, obj, key, default=None):
        """Attribute ``key`` of h5py object ``obj`` as h5py's ``obj.attrs[key]`` gives it, or
        ``default`` when it has none."""
        try:
            b = _name(key)
            if not h5py.h5a.exists(obj.id, b):
                return default
            return _attr_value(h5py.h5a.open(obj.id, b))
        except H5_FAILURES as exc:
            raise self.fail(f"{obj.name}@{key}", f"cannot read attribute: {exc}") from None


def _read_box(ds, sel, dtype: np.dtype, mtype):
    """``ds[sel]`` read with one low-level HDF5 call into a fresh ``dtype`` array, or None when
    ``sel`` is not a tuple of unit-step slices (or one such slice) over a dataset with axes.

    ``mtype``: the HDF5 memory type, None for the one h5py derives from ``dtype`` (what its own
    read of integer and float data uses). A box with no elements reads nothing."""
    shape = ds.shape
    box = unit_box(sel, shape) if shape else None  # no box of a null or scalar dataspace
    if box is None:
        return None
    count = tuple(b - a for a, b in box)
    out = np.empty(count, dtype)
    if out.size:
        fspace = ds.id.get_space()
        fspace.select_hyperslab(tuple(a for a, _ in box), count)
        ds.id.read(h5py.h5s.create_simple(count), fspace, out, mtype=mtype)
    return out


# h5py's Group.get(name, getlink=True) and Group[name] for the hard links of a read-only file,
# without the high-level layer's per-call costs (a File object made per lookup to learn the
# mode; a trace's open does a few dozen lookups, a farm thousands of opens). Same low-level calls,
# same results; soft and external links go through h5py's own objects.
_HARD = h5py.h5l.TYPE_HARD


def _name(part: str) -> bytes:
    try:
        return part.encode("ascii")
    except UnicodeEncodeError:
        return part.encode("utf8")


def _link(group, part: str):
    """``group.get(part, getlink=True)``: None when absent (or dangling), else the link."""
    b = _name(part)
    if not h5py.h5g._path_valid(group.id, b, None):
        return None
    if group.id.links.get_info(b).type == _HARD:
        return _HARD_LINK
    return group.get(part, getlink=True)


def _attr_value(attr):
    """``AttributeManager.__getitem__`` of h5py 3 for an open attribute (same steps, without a
    manager object per lookup): an empty dataspace gives ``h5py.Empty``, variable-length strings
    come back as str, a scalar as a NumPy scalar."""
    shape = attr.shape
    if shape is None:
        return h5py.Empty(attr.dtype)
    dtype = attr.dtype
    htype = h5py.h5t.py_create(dtype)
    if dtype.subdtype is not None:  # a top-level array type: NumPy holds it as extra axes
        dtype, sub = dtype.subdtype
        shape = shape + sub
    arr = np.zeros(shape, dtype=dtype, order="C")
    attr.read(arr, mtype=htype)
    info = h5py.h5t.check_string_dtype(dtype)
    if info and info.length is None:
        arr = np.array([b.decode("utf-8", "surrogateescape") for b in arr.flat], dtype=dtype).reshape(arr.shape)
    return arr[()] if arr.ndim == 0 else arr


#: Groups with more links than this are looked up name by name (a trace's groups hold a few).
_TABLE_LINKS = 64


def _link_table(group) -> dict | None:
    """``{name (bytes): link type}`` of every link in ``group``, or None when it holds more than
    :data:`_TABLE_LINKS` (the listing stops there: a hostile group may hold millions)."""
    table: dict = {}

    def take(name, info):
        table[name] = info.type
        return True if len(table) > _TABLE_LINKS else None  # h5py stops at a value that is not None
    group.id.links.iterate(take, info=True)
    return table if len(table) <= _TABLE_LINKS else None


def _open_hard(group, part: str):
    """``group[part]`` of a file opened read-only."""
    oid = h5py.h5o.open(group.id, _name(part))
    kind = h5py.h5i.get_type(oid)
    if kind == h5py.h5i.GROUP:
        return h5py.Group(oid)
    if kind == h5py.h5i.DATASET:
        return _ReadDataset(oid, readonly=True)
    if kind == h5py.h5i.DATATYPE:
        return h5py.Datatype(oid)
    raise TypeError("Unknown object type")


class _ReadDataset(h5py.Dataset):
    """h5py's Dataset of a file opened read-only, keeping its NumPy dtype: h5py builds a new one
    from the HDF5 type at every ``.dtype``, and a trace's open asks about thirty times. Kept
    with h5py's other per-dataset values, which ``refresh()`` clears."""

    @property
    def dtype(self):
        got = self._cache_props.get("dtype")
        if got is None:
            got = self._cache_props["dtype"] = self.id.dtype
        return got


_HARD_LINK = h5py.HardLink()
