"""Parallel chunk decoding (format/chunk_read.py, codec/nb_decode.py) against HDF5's own read.

The oracle is h5py: every box this path decodes must equal ``ds[box]`` read through HDF5's
filter pipeline from the same file, byte for byte. Corrupt chunks are made with h5py's
``write_direct_chunk`` (stored bytes written as given, no filter run).
"""
from __future__ import annotations

import subprocess
from contextlib import closing
import sys
import zlib

import h5py
import numba
import numpy as np
import pytest

from resweep.core import TraceFormatError, check_trace, open_trace
from resweep.core.format.chunk_read import ChunkReader, layout_of
from resweep.core.format.h5safe import SafeFile
from trace_factory import write_rows

PIPELINES = {
    "lzf+shuffle": dict(compression="lzf", shuffle=True),
    "lzf": dict(compression="lzf"),
    "gzip+shuffle": dict(compression="gzip", shuffle=True),
    "gzip": dict(compression="gzip"),
    "shuffle": dict(shuffle=True),
    "none": dict(),
}
DTYPES = [np.float32, np.float64, np.int16, np.uint8, np.bool_]


def _data(shape, dtype, rng):
    """Smooth values with a random part: compressible, so lzf and deflate actually run."""
    if dtype == np.bool_:
        return rng.random(shape) < 0.3
    base = np.cumsum(rng.integers(-2, 3, size=shape), axis=0)
    return (base + (rng.random(shape) < 0.1)).astype(dtype)


def _boxes(shape):
    """Whole, partial, across chunk edges, at the dataset's edge, and empty."""
    F, N = shape[:2]
    rest = tuple((0, n) for n in shape[2:])
    return [((0, F), (0, N)) + rest, ((3, F - 5), (1, N - 1)) + rest, ((17, 18), (0, N)) + rest,
            ((F - 1, F), (N - 1, N)) + rest, ((5, 5), (0, N)) + rest, ((0, F), (2, 3)) + rest]


def _compare(path, names):
    with closing(SafeFile(path)) as sf, h5py.File(path, "r", locking=False) as ref:
        reader = ChunkReader(sf, kernels=True, min_bytes=0)
        for name in names:
            ds = sf.dataset(name)
            boxes = _boxes(ds.shape)
            got = reader.read([(ds, b) for b in boxes])
            for box, arr in zip(boxes, got):
                want = ref[name][tuple(slice(a, b) for a, b in box)]
                assert arr.shape == want.shape and arr.dtype == want.dtype, (name, box)
                assert arr.tobytes() == want.tobytes(), (name, box)


@pytest.mark.parametrize("pipeline", sorted(PIPELINES))
def test_every_box_equals_hdf5s_read(tmp_path, pipeline):
    rng = np.random.default_rng(7)
    path = tmp_path / "d.h5"
    names = []
    with h5py.File(path, "w") as f:
        for dt in DTYPES:
            for shape, chunks in (((61, 7, 3), (16, 4, 3)), ((40, 9), (13, 9))):
                name = f"{np.dtype(dt).name}_{len(shape)}"
                f.create_dataset(name, data=_data(shape, dt, rng), chunks=chunks, **PIPELINES[pipeline])
                names.append(name)
    with closing(SafeFile(path)) as sf:  # the path under test really is the chunk path here
        assert all(layout_of(sf.dataset(n), sf) is not None for n in names)
    _compare(path, names)


def test_chunks_stored_with_a_filter_skipped(tmp_path):
    """HDF5 stores a chunk unfiltered when an optional filter fails (lzf on random bytes) and marks
    it in the chunk's filter mask; a chunk written directly may skip only the shuffle."""
    rng = np.random.default_rng(3)
    path = tmp_path / "m.h5"
    with h5py.File(path, "w") as f:
        noise = rng.integers(0, 1 << 32, size=(64, 8, 3), dtype=np.uint32).view(np.float32)  # random bits
        f.create_dataset("noise", data=noise, chunks=(16, 8, 3), compression="lzf", shuffle=True)
        ds = f.create_dataset("mixed", shape=(32, 4), dtype=np.float64, chunks=(16, 4), compression="gzip",
                              shuffle=True)
        ds[:16] = np.arange(64.0).reshape(16, 4)
        raw = (np.arange(64.0) * 3).reshape(16, 4)
        ds.id.write_direct_chunk((16, 0), zlib.compress(raw.tobytes()), filter_mask=0b01)  # shuffle skipped
    with h5py.File(path, "r", locking=False) as f:
        masks = []
        f["noise"].id.chunk_iter(lambda c: masks.append(c.filter_mask))
        assert any(masks), "random floats should make lzf give up on some chunk"
        assert np.array_equal(f["mixed"][16:], (np.arange(64.0) * 3).reshape(16, 4))
    _compare(path, ["noise", "mixed"])


def test_unwritten_chunks_fall_back_to_hdf5_fill(tmp_path):
    path = tmp_path / "u.h5"
    with h5py.File(path, "w") as f:
        ds = f.create_dataset("part", shape=(64, 5), dtype=np.float32, chunks=(16, 5), compression="lzf",
                              fillvalue=-7.0)
        ds[20:30] = 1.5
    _compare(path, ["part"])


def test_unsupported_pipelines_and_swmr_read_through_h5py(tmp_path):
    path = tmp_path / "f.h5"
    with h5py.File(path, "w", libver="latest") as f:
        f.create_dataset("sum", data=np.arange(60.0).reshape(20, 3), chunks=(8, 3), fletcher32=True,
                         compression="gzip")
        f.create_dataset("flat", data=np.arange(60.0).reshape(20, 3))
    with closing(SafeFile(path)) as sf:
        assert layout_of(sf.dataset("sum"), sf) is None
        assert layout_of(sf.dataset("flat"), sf) is None
    _compare(path, ["sum", "flat"])


@pytest.mark.parametrize("damage", ["lzf", "gzip", "short"])
def test_corrupt_chunk_is_one_error_naming_the_dataset(tmp_path, damage):
    path = tmp_path / "c.h5"
    comp = "gzip" if damage == "gzip" else "lzf"
    with h5py.File(path, "w") as f:
        ds = f.create_dataset("v", data=np.ones((32, 4), np.float32), chunks=(16, 4), compression=comp, shuffle=True)
        if damage == "lzf":  # a back reference before the start of the output
            bad = bytes([0xE0, 0x10, 0xFF])
        elif damage == "gzip":
            bad = b"not a deflate stream at all"
        else:  # a valid lzf stream of 8 literal bytes: too short for a 256-byte chunk
            bad = bytes([7]) + bytes(8)
        ds.id.write_direct_chunk((16, 0), bad, filter_mask=0)
    if damage != "short":
        with h5py.File(path, "r", locking=False) as f:  # HDF5 refuses the chunk too
            with pytest.raises(OSError):
                f["v"][16:]
    # (h5py's lzf filter accepts the short stream and leaves the rest of the chunk undefined; a chunk
    # that does not decode to its size is refused here)
    with closing(SafeFile(path)) as sf:
        reader = ChunkReader(sf, kernels=True, min_bytes=0)
        ds = sf.dataset("v")
        assert reader.read([(ds, ((0, 16), (0, 4)))])[0].tolist() == np.ones((16, 4)).tolist()
        with pytest.raises(TraceFormatError) as err:
            reader.read([(ds, ((0, 32), (0, 4)))])
    msg = str(err.value)
    assert "/v" in msg and str(path) in msg and "\n" not in msg and "(16, 0)" in msg


def test_decoding_is_the_same_on_one_and_two_threads(tmp_path):
    rng = np.random.default_rng(11)
    path = tmp_path / "t.h5"
    with h5py.File(path, "w") as f:
        f.create_dataset("a", data=_data((300, 20, 3), np.float32, rng), chunks=(32, 20, 3), compression="lzf",
                         shuffle=True)
    before = numba.get_num_threads()
    outs = []
    try:
        for n in (1, min(2, numba.config.NUMBA_NUM_THREADS)):
            numba.set_num_threads(n)
            with closing(SafeFile(path)) as sf:
                reader = ChunkReader(sf, kernels=True, min_bytes=0)
                outs.append(reader.read([(sf.dataset("a"), ((0, 300), (0, 20), (0, 3)))])[0].tobytes())
    finally:
        numba.set_num_threads(before)
    assert outs[0] == outs[1]


def test_trace_frames_equal_hdf5_for_both_writers_compressions(tmp_path):
    """Through open_trace: every frame dataset of a gzip and an lzf trace, read in blocks, equals h5py."""
    rng = np.random.default_rng(5)
    F, N = 50, 6
    start = rng.random((F, N, 3)) * 8 + [0, 1.5, 0]
    motion = (rng.random((F, N, 3)) - 0.5) * 0.2
    active = rng.random((F, N)) < 0.8
    for comp in ("gzip", "lzf"):
        path = write_rows(tmp_path / f"{comp}.h5", start, motion, start + motion, active=active, compression=comp)
        with open_trace(path) as tr, h5py.File(path, "r", locking=False) as ref:
            tr.decode_with_kernels(min_bytes=0)
            for f0, f1 in ((0, F), (7, 33), (49, 50)):
                blk = tr.frames(f0, f1)
                for name, arr in (("start", blk.start), ("motion", blk.motion), ("end", blk.end)):
                    assert arr.tobytes() == ref[f"frames/{name}"][f0:f1].tobytes()
                assert np.array_equal(blk.active, ref["frames/active"][f0:f1] != 0)
            layouts = tr._chunks._layouts  # the blocks above came through the chunk path
            assert layouts and all(lay is not None for lay in layouts.values())
        with open_trace(path) as tr:  # a read this small goes through h5py by default
            tr.decode_with_kernels()
            tr.frames(0, F)
            assert not tr._chunks._layouts


def test_check_of_a_trace_with_a_corrupt_chunk_exits_2(tmp_path):
    """A trace big enough (about 2 MB of frames a dataset) for the check to decode it with the kernels."""
    rng = np.random.default_rng(2)
    F, N = 4000, 20
    start = rng.random((F, N, 3)) * 8 + [0, 1.5, 0]
    path = write_rows(tmp_path / "bad.h5", start, np.zeros((F, N, 3)), start, compression="lzf")
    with h5py.File(path, "r+") as f:
        ds = f["frames/motion"]
        offsets = []
        ds.id.chunk_iter(lambda c: offsets.append(c.chunk_offset))
        ds.id.write_direct_chunk(offsets[0], bytes([0xE0, 0x10, 0xFF]), filter_mask=0)
    r = subprocess.run([sys.executable, "-m", "resweep.app.cli", "check", str(path)], capture_output=True,
                       text=True, timeout=300)
    assert r.returncode == 2, r.stderr
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and "bad.h5" in lines[0] and "/frames/motion" in lines[0], r.stderr
    # (the command's first-open vetting reads every frame through h5py and refuses the file first;
    # the check itself, which decodes with the kernels, refuses it the same way)
    with open_trace(path) as tr, pytest.raises(TraceFormatError) as err:
        check_trace(tr)
    assert "/frames/motion" in str(err.value) and "stored chunk at" in str(err.value)
    assert "Traceback" not in r.stderr
