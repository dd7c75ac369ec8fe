"""Checks of what an HDF5 file declares, shared by both trace readers: the h5py one (``h5safe``)
and the one without h5py (``lite_file``). Importing this module loads neither h5py nor numba, so a
process that reads only files of h5lite's subset never pays for loading h5py (about 30 ms).

Here: the filters allowed, the limit on the data a dataset may declare for the size of its file,
the check that every stored chunk lies inside the file, the digest of a dataset's stored chunks,
unit-step selections as boxes, the exceptions h5py raises on a damaged file, and the switch that
turns HDF5's plugins off in the isolated children that open unvetted files.
"""
from __future__ import annotations

import math
import os

import numpy as np

from resweep.core.errors import TraceFormatError

#: Filters that ship with h5py (HDF5 filter ids): deflate/gzip, shuffle, fletcher32, lzf.
ALLOWED_FILTERS = {1: "gzip", 2: "shuffle", 3: "fletcher32", 32000: "lzf"}
#: deflate tops out near 1032:1 on constant data (common practice); allow a little more.
MAX_EXPANSION = 1100
SLACK_BYTES = 1 << 20
#: Hard cap for a dataset read whole (world, entity tables), whatever the file size.
MAX_WHOLE_READ = 8 << 30
#: What h5py raises on a corrupt or hostile file: HDF5's error stack maps to OSError, KeyError,
#: ValueError or RuntimeError (e.g. a damaged symbol-table node in a link or attribute lookup),
#: and a damaged header can surface as TypeError, IndexError or a decoding error. Every h5py call
#: on an untrusted file goes through one of these handlers, so each becomes one line naming the file.
H5_FAILURES = (OSError, KeyError, ValueError, TypeError, RuntimeError, IndexError, AttributeError,
               OverflowError, SystemError, UnicodeError)
#: Environment switch of the isolated children that open unvetted files (set by ``vet.IsolatedChild``):
#: when it is "1", ``h5safe`` clears HDF5's plugin search path as it loads h5py, before any file is
#: opened there. The children also get ``HDF5_PLUGIN_PRELOAD=::``, HDF5's own switch that turns
#: plugin loading off; this is the second lock. (A child that reads only files of the h5py-free
#: subset never loads h5py at all.)
NO_PLUGINS_ENV = "RESWEEP_NO_HDF5_PLUGINS"


def check_declared(file, name: str, shape: tuple, itemsize: int, whole: bool) -> None:
    """Refuse a dataset of ``file`` (SafeFile or LiteFile) that declares more data than a file of
    its size could hold, or, read whole (``whole``), more than :data:`MAX_WHOLE_READ`."""
    declared = math.prod(shape) * int(itemsize)  # Python ints: no overflow
    limit = file.size * MAX_EXPANSION + SLACK_BYTES
    if declared > limit:
        raise file.fail(name, f"declares {declared:,} bytes of data, more than a {file.size:,}-byte file "
                              "can plausibly hold; refused")
    if whole and declared > MAX_WHOLE_READ:
        raise file.fail(name, f"declares {declared:,} bytes, over the {MAX_WHOLE_READ:,}-byte limit for "
                              "data read whole")


def checked_index(file, name: str, index: np.ndarray, rank: int, size: int | None = None) -> np.ndarray:
    """``index`` (int64 (K, rank + 3), see ``SafeFile.chunk_index``) after checking that every chunk
    lies inside ``file`` of ``size`` bytes (None: its size now; sizes and places are each checked
    against the file size first, so their sum cannot overflow)."""
    sizes, places = index[:, rank + 1], index[:, rank + 2]
    try:
        size = os.stat(file.path).st_size if size is None else size
    except OSError as exc:
        raise file.fail(name, f"cannot read stored chunks: {exc.strerror or exc}") from None
    bad = (places < 0) | (sizes < 0) | (places > size) | (sizes > size)
    if bad.any() or (places + sizes > size).any():
        raise file.fail(name, "cannot read stored chunks (truncated or corrupt?): a chunk lies past "
                              "the end of the file")
    return index


def digest_chunks(file, h, index: np.ndarray, rank: int, name: str) -> bytes:
    """``h`` (a hashlib object holding the dataset's header) fed the index and the stored bytes of
    every chunk (``SafeFile.stored_digest``); its digest."""
    if not len(index):
        return h.digest()
    # the place is not hashed, so a world stored identically in two files has one digest
    sizes, places = index[:, rank + 1], index[:, rank + 2]
    try:
        fd = os.open(file.path, os.O_RDONLY)
        try:
            h.update(index[:, :rank + 2].tobytes())
            lo, hi, total = int(places.min()), int((places + sizes).max()), int(sizes.sum())
            if (places[1:] == places[:-1] + sizes[:-1]).all():  # stored back to back in index order
                _hash_range(file, h, fd, lo, hi - lo, name)
            else:
                whole = os.pread(fd, hi - lo, lo) if hi - lo <= 2 * total + (64 << 10) else None
                for place, n in zip(places.tolist(), sizes.tolist()):
                    if whole is not None:
                        data = memoryview(whole)[place - lo:place - lo + n]
                    else:
                        data = os.pread(fd, n, place)
                    if len(data) != n:
                        raise _short(file, name)
                    h.update(data)
        finally:
            os.close(fd)
    except OSError as exc:
        raise file.fail(name, f"cannot read stored chunks: {exc.strerror or exc}") from None
    return h.digest()


def _hash_range(file, h, fd: int, start: int, length: int, name: str) -> None:
    """Feed ``length`` bytes of the file from ``start`` to ``h``, in pieces of at most 4 MiB."""
    step = 4 << 20
    for at in range(start, start + length, step):
        n = min(step, start + length - at)
        data = os.pread(fd, n, at)
        if len(data) != n:
            raise _short(file, name)
        h.update(data)


def _short(file, name: str) -> TraceFormatError:
    return file.fail(name, "cannot read stored chunks: the file is shorter than its chunk index says (truncated?)")


def unit_box(sel, shape: tuple) -> list | None:
    """[(start, stop) per axis] that selection ``sel`` picks from an array of ``shape``, stop >=
    start, when ``sel`` is unit-step slices (or one such slice, or ``()``); else None."""
    sel = sel if isinstance(sel, tuple) else (sel,)
    if len(sel) > len(shape) or any(not isinstance(s, slice) or s.step not in (None, 1) for s in sel):
        return None
    box = []
    for s, n in zip(sel + (slice(None),) * (len(shape) - len(sel)), shape):
        a, b, _ = s.indices(n)
        box.append((a, max(a, b)))
    return box
