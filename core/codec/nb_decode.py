"""Numba kernels that undo HDF5's lzf and shuffle filters on many stored chunks at once.

The frame datasets of a trace are stored in compressed chunks. HDF5 (through h5py) decodes them
on one thread under h5py's lock; these kernels decode the chunks of a whole block in parallel,
one chunk per task, on the solver's threads (``format/chunk_read.py`` fetches the bytes and
checks what comes out).

Formats, as the filters that ship with h5py and HDF5 write them (recalled from their published
sources, liblzf's ``lzf_d.c`` and HDF5's ``H5Zshuffle.c``; the tests hold every decoded chunk
equal to h5py's own read of the same file):

- LZF: a stream of runs. A control byte c < 32 is followed by c + 1 literal bytes. Otherwise
  the run is a back reference: length field c >> 5 (7 means: add the next byte), offset
  ((c & 31) << 8) + the following byte + 1 back from the current end of the output; it copies
  length + 2 bytes from there, byte by byte, so a copy may read what it has just written.
- shuffle: the chunk's n elements of ``itemsize`` bytes are stored as byte 0 of every element,
  then byte 1 of every element, and so on; the n * itemsize bytes after that (a remainder when
  the chunk size is not a multiple of the item size) are stored as they are.

Every read and write is checked against the chunk's own bounds, so a hostile stream can only
fail (status -1), never reach outside its chunk.
"""
from __future__ import annotations

import numpy as np
from numba import prange

from resweep.core.jit.nb_jit import kernel

#: Status of a chunk whose stream is corrupt (runs past its input or its output).
CORRUPT = -1


@kernel(nogil=True)
def lzf_decode(src, a, b, dst, o0, o1):
    """Decode the LZF stream ``src[a:b]`` into ``dst[o0:o1]`` (uint8 arrays; int64 bounds).

    Returns the number of bytes written, or :data:`CORRUPT` when a run would read past ``b``,
    write past ``o1`` or refer back before ``o0``."""
    ip = a
    op = o0
    while ip < b:
        ctrl = np.int64(src[ip])
        ip += 1
        if ctrl < 32:
            n = ctrl + 1
            if ip + n > b or op + n > o1:
                return CORRUPT
            dst[op:op + n] = src[ip:ip + n]
            ip += n
            op += n
        else:
            n = ctrl >> 5
            if n == 7:
                if ip >= b:
                    return CORRUPT
                n += np.int64(src[ip])
                ip += 1
            if ip >= b:
                return CORRUPT
            ref = op - ((ctrl & 31) << 8) - np.int64(src[ip]) - 1
            ip += 1
            n += 2
            if ref < o0 or op + n > o1:
                return CORRUPT
            for k in range(n):  # may overlap what it writes: byte by byte, in order
                dst[op + k] = dst[ref + k]
            op += n
    return op - o0


@kernel(nogil=True)
def unshuffle(src, s0, n, itemsize, dst, d0):
    """Undo HDF5's shuffle of the ``n`` bytes ``src[s0:s0 + n]`` into ``dst[d0:d0 + n]``.

    Items of 4 and 8 bytes are assembled in integer registers and stored whole (``d0`` must then
    be a multiple of 8 in an 8-byte aligned ``dst``); other sizes go byte by byte."""
    m = n // itemsize
    if itemsize == 4 and d0 % 8 == 0:
        b0, b1, b2, b3 = src[s0:s0 + m], src[s0 + m:s0 + 2 * m], src[s0 + 2 * m:s0 + 3 * m], src[s0 + 3 * m:s0 + 4 * m]
        out4 = dst[d0:d0 + 4 * m].view(np.uint32)
        for i in range(m):  # slices: no per-index wraparound, so the loop vectorises
            out4[i] = (np.uint32(b0[i]) | (np.uint32(b1[i]) << np.uint32(8)) | (np.uint32(b2[i]) << np.uint32(16))
                       | (np.uint32(b3[i]) << np.uint32(24)))
    elif itemsize == 8 and d0 % 8 == 0:
        planes = src[s0:s0 + 8 * m].reshape((8, m))
        out8 = dst[d0:d0 + 8 * m].view(np.uint64)
        for i in range(m):
            v = np.uint64(0)
            for j in range(8):
                v |= np.uint64(planes[j, i]) << np.uint64(8 * j)
            out8[i] = v
    else:
        planes = src[s0:s0 + itemsize * m].reshape((itemsize, m))
        items = dst[d0:d0 + itemsize * m].reshape((m, itemsize))
        for i in range(m):
            for j in range(itemsize):
                items[i, j] = planes[j, i]
    for k in range(m * itemsize, n):
        dst[d0 + k] = src[s0 + k]


@kernel(parallel=True, nogil=True)
def decode_chunks(src, starts, ends, lzf, shuffle, itemsize, size, out_at, out, scratch, status):
    """Decode K stored chunks into their places in ``out``, in parallel (one chunk per task).

    Args:
        src: uint8 (B,) the chunks' stored bytes, back to back.
        starts, ends: int64 (K,) chunk k's stored bytes are ``src[starts[k]:ends[k]]``.
        lzf, shuffle: bool (K,) whether chunk k went through the lzf / shuffle filter (a chunk
            HDF5 stored with a filter skipped has that flag off).
        itemsize: int64 (K,) bytes per element of chunk k's dataset.
        size: int64 (K,) bytes chunk k must decode to.
        out_at: int64 (K,) chunk k decodes to ``out[out_at[k]:out_at[k] + size[k]]``, each a
            multiple of 8 (whole items are then stored aligned), the places apart.
        out: uint8 (T,) 8-byte aligned; scratch: uint8 (T,) for chunks that need both filters.
    Outputs:
        status int64 (K,): bytes chunk k decoded to (``size[k]`` when it decoded), or
        :data:`CORRUPT`; chunks that did not decode leave their place in ``out`` undefined.
    """
    for k in prange(starts.shape[0]):
        o0 = out_at[k]
        n = size[k]
        a, b = starts[k], ends[k]
        if lzf[k]:
            got = lzf_decode(src, a, b, scratch if shuffle[k] else out, o0, o0 + n)
            status[k] = got
            if shuffle[k] and got == n:
                unshuffle(scratch, o0, n, itemsize[k], out, o0)
        else:
            status[k] = b - a
            if b - a == n:
                if shuffle[k]:
                    unshuffle(src, a, n, itemsize[k], out, o0)
                else:
                    out[o0:o0 + n] = src[a:b]


def warm_up() -> None:
    """Compile (or load) :func:`decode_chunks` by decoding one tiny chunk of each kind."""
    src = np.array([3, 1, 2, 3, 4, 1, 2, 3, 4], np.uint8)  # lzf: 4 literals; then 4 stored bytes
    out = np.empty(16, np.uint8)
    status = np.empty(2, np.int64)
    decode_chunks(src, np.array([0, 5], np.int64), np.array([5, 9], np.int64), np.array([True, False]),
                  np.array([True, True]), np.array([4, 2], np.int64), np.array([4, 4], np.int64),
                  np.array([0, 8], np.int64), out, np.empty_like(out), status)
