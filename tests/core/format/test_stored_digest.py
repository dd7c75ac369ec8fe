"""``SafeFile.stored_digest``: the key under which a farm shares one decoded world between traces.

Reference: the arrays themselves. Two datasets get one digest exactly when they would decode to
the same array from the same stored bytes, wherever the chunks lie in their files; h5py's own
decode (``ds[()]``) is the outside check of what the datasets hold.
"""
from __future__ import annotations

import h5py
import numpy as np
import pytest

from resweep.core.errors import TraceFormatError
from resweep.core.format.h5safe import SafeFile

CHUNKS = (2, 4, 4, 4)


def _blocks(seed: int = 0) -> np.ndarray:
    rng = np.random.default_rng(seed)
    return rng.integers(0, 3, size=(6, 8, 8, 8), dtype=np.uint16)


def _write(path, data, interleave: bool = False, pad: int = 0):
    """``data`` as chunked, gzip'd dataset ``/d``. ``interleave``: written chunk row by chunk row
    with a second dataset's chunks between them, so ``/d``'s chunks are not back to back in the
    file; ``pad``: bytes of another dataset written first, so the chunks start elsewhere."""
    with h5py.File(path, "w", libver="latest") as f:
        if pad:
            f.create_dataset("pad", data=np.arange(pad, dtype=np.uint8))
        d = f.create_dataset("d", shape=data.shape, dtype=data.dtype, chunks=CHUNKS, compression="gzip",
                             shuffle=True)
        other = f.create_dataset("other", shape=data.shape, dtype=data.dtype, chunks=CHUNKS, compression="gzip")
        if not interleave:
            d[...] = data
            return
        for c in range(0, data.shape[0], CHUNKS[0]):
            for x in range(0, data.shape[1], CHUNKS[1]):
                d[c:c + CHUNKS[0], x:x + CHUNKS[1]] = data[c:c + CHUNKS[0], x:x + CHUNKS[1]]
                f.flush()
                other[c:c + CHUNKS[0], x:x + CHUNKS[1]] = (data[c:c + CHUNKS[0], x:x + CHUNKS[1]] + 1) * 7
                f.flush()


def _digest(path):
    f = SafeFile(path)
    try:
        ds = f.dataset("/d", whole=False)
        return f.stored_digest(ds), f.read(ds)
    finally:
        f.close()


def _places(path):
    with h5py.File(path, "r") as f:
        spots = []
        f["d"].id.chunk_iter(spots.append)
    return [(s.byte_offset, s.size) for s in spots]


def test_same_stored_world_same_digest_wherever_the_chunks_lie(tmp_path):
    data = _blocks()
    _write(tmp_path / "a.h5", data)
    _write(tmp_path / "b.h5", data, pad=5000)
    _write(tmp_path / "c.h5", data, interleave=True)
    places = {n: _places(tmp_path / n) for n in ("a.h5", "b.h5", "c.h5")}
    assert places["a.h5"] != places["b.h5"]  # other places in the file
    back_to_back = [all(p + s == q for (p, s), (q, _) in zip(v, v[1:])) for v in places.values()]
    assert back_to_back == [True, True, False]  # both hashing paths are taken
    got = {n: _digest(tmp_path / n) for n in places}
    for n, (digest, arr) in got.items():
        assert np.array_equal(arr, data), n  # h5py decodes what was written
    # a and b store identical chunks; c's chunks were written piecewise (same data, compressed
    # by the same filters), so their stored bytes, and the digest, match too
    assert got["a.h5"][0] == got["b.h5"][0] == got["c.h5"][0]


def test_one_voxel_or_the_filters_change_the_digest(tmp_path):
    data = _blocks()
    other = data.copy()
    other[5, 7, 7, 7] += 1
    _write(tmp_path / "a.h5", data)
    _write(tmp_path / "b.h5", other)
    with h5py.File(tmp_path / "c.h5", "w") as f:  # same values, no shuffle
        f.create_dataset("d", data=data, chunks=CHUNKS, compression="gzip")
    digests = [_digest(tmp_path / n)[0] for n in ("a.h5", "b.h5", "c.h5")]
    assert len(set(digests)) == 3


def test_a_chunk_past_the_end_of_the_file_is_refused(tmp_path):
    path = tmp_path / "a.h5"
    _write(path, _blocks())
    last = max(p + s for p, s in _places(path))
    f = SafeFile(path)
    try:
        ds = f.dataset("/d", whole=False)
        with open(path, "r+b") as fh:  # cut the file inside the last chunk, after HDF5 read its index
            fh.truncate(last - 10)
        with pytest.raises(TraceFormatError) as err:
            f.stored_digest(ds)
        assert "past the end" in err.value.reason or "shorter" in err.value.reason
    finally:
        f.close()
