"""``SafeFile``'s own reads: attributes without h5py's attribute manager, flags byte for byte.

Reference: h5py's own high-level reads of the same file. ``obj.attrs[key]`` (type and value) for
every kind of attribute h5py writes: strings (variable and fixed length), bytes, integers, floats,
booleans, arrays, string arrays, empty dataspaces and a top-level array type. ``ds[sel]`` for
numbers (both byte orders, contiguous and compressed) and for what ``SafeFile.read`` leaves to h5py
(scalars, bools, enums, records, strings, steps and integer indices); ``ds[sel] != 0`` for flag datasets stored as h5py's bool, as one-byte integers (values beyond 1 included) and as
a one-byte enum, for whole, partial, chunk-crossing and empty selections.
"""
from __future__ import annotations

import h5py
import pytest
import numpy as np

from resweep.core.errors import TraceFormatError
from resweep.core.format.h5safe import SafeFile

from h5_forms import write_plain_attributes


def _same(a, b) -> bool:
    if type(a) is not type(b):
        return False
    if isinstance(a, h5py.Empty):
        return a.dtype == b.dtype
    if isinstance(a, np.ndarray):
        return a.dtype == b.dtype and np.array_equal(a, b)
    return a == b


def test_every_kind_of_attribute_reads_as_h5py_reads_it(tmp_path):
    path = tmp_path / "a.h5"
    with h5py.File(path, "w") as f:
        g = f.create_group("g")
        for obj in (f, g):
            write_plain_attributes(obj)
            obj.attrs["e"] = h5py.Empty("f8")
            obj.attrs.create("sub", data=np.ones((2, 3)), dtype=np.dtype(("f8", (3,))))
    sf = SafeFile(path)
    try:
        for obj in (sf.file, sf.group("/g")):
            keys = list(obj.attrs)
            assert len(keys) == 11
            for k in keys:
                assert _same(obj.attrs[k], sf.attr(obj, k)), k
            assert sf.attr(obj, "missing", 7) == 7
    finally:
        sf.close()


FLAG_SELECTIONS = [(), (slice(None),), (slice(3, 17), slice(None, 4)), (slice(0, 40), slice(2, 7)),
                   (slice(5, 5), slice(None)), (slice(38, 99),)]


def test_flags_read_byte_for_byte_match_h5py(tmp_path):
    rng = np.random.default_rng(4)
    values = rng.integers(0, 4, size=(40, 7)).astype(np.uint8)
    values[0, 0], values[1, 1] = 255, 128
    path = tmp_path / "f.h5"
    mood = h5py.enum_dtype({"calm": 0, "odd": 3}, basetype="i1")
    with h5py.File(path, "w") as f:
        f.create_dataset("bool", data=values % 2 == 1, chunks=(8, 7), compression="gzip")
        f.create_dataset("u1", data=values, chunks=(16, 4))
        f.create_dataset("i1", data=values.astype(np.int8))
        f.create_dataset("enum", data=(values % 2 * 3).astype(np.int8), dtype=mood)
    sf = SafeFile(path)
    try:
        for name in ("bool", "u1", "i1", "enum"):
            ds = sf.dataset("/" + name, whole=False)
            for sel in FLAG_SELECTIONS:
                want = np.asarray(ds[sel]) != 0
                got = sf.read_flags(ds, sel)
                assert got.dtype == np.bool_ and got.shape == want.shape, (name, sel)
                assert np.array_equal(got, want), (name, sel)
    finally:
        sf.close()


@pytest.mark.parametrize("extra", [0, 80])  # a group listed in one call, and one too big to list
def test_links_resolve_the_same_with_and_without_a_link_table(tmp_path, extra):
    """Reference: what h5py's ``get(name, getlink=True)`` says each link is."""
    path = tmp_path / "links.h5"
    with h5py.File(path, "w") as f:
        g = f.create_group("g")
        g["hard"] = np.arange(3)
        f["stash"] = np.arange(5)
        g["soft"] = h5py.SoftLink("/stash")
        g["rel"] = h5py.SoftLink("hard")
        g["dangling"] = h5py.SoftLink("/nowhere")
        g["ext"] = h5py.ExternalLink("other.h5", "/x")
        for k in range(extra):
            g[f"pad{k:03d}"] = np.zeros(1)
    sf = SafeFile(path)
    try:
        with h5py.File(path, "r", locking=False) as ref:
            assert isinstance(ref["g"].get("soft", getlink=True), h5py.SoftLink)
        assert np.array_equal(sf.read(sf.dataset("/g/hard")), np.arange(3))
        assert np.array_equal(sf.read(sf.dataset("/g/soft")), np.arange(5))
        assert np.array_equal(sf.read(sf.dataset("/g/rel")), np.arange(3))
        assert sf.dataset("/g/absent", required=False) is None
        with pytest.raises(TraceFormatError, match="which does not exist in the file"):
            sf.dataset("/g/dangling", required=False)
        with pytest.raises(TraceFormatError, match="external link"):
            sf.dataset("/g/ext")
        assert (sf._tables["/g"] is None) == (extra > 64)
    finally:
        sf.close()


READ_SELECTIONS = [(), (slice(None),), (slice(3, 17), slice(None, 4)), (slice(0, 40), slice(2, 7)),
                   (slice(5, 5), slice(None)), (slice(38, 99),), slice(2, 9), (slice(None), slice(1, 3), slice(None)),
                   (slice(None, None, 2),), 3, (slice(1, 4), 2)]


def test_reads_of_every_kind_of_dataset_match_h5py(tmp_path):
    """``SafeFile.read`` reads numbers selected by unit-step slices with one low-level call of
    its own; the rest goes to h5py. Both must give h5py's ``ds[sel]``: same dtype (byte order
    included), shape and values."""
    rng = np.random.default_rng(7)
    base = rng.normal(size=(40, 7, 3)) * 100
    mood = h5py.enum_dtype({"calm": 0, "odd": 3}, basetype="i1")
    path = tmp_path / "r.h5"
    with h5py.File(path, "w") as f:
        for dt in ("<f4", ">f4", "<f8", "<i8", ">i2", "<u2", "u1"):
            data = base.astype(dt) if dt[-2] == "f" else (base % 200).astype(dt)
            f.create_dataset(f"c{dt}", data=data)
            f.create_dataset(f"z{dt}", data=data, chunks=(16, 4, 3), compression="gzip", shuffle=True)
            f.create_dataset(f"l{dt}", data=data, chunks=(8, 7, 3), compression="lzf")
        f.create_dataset("scalar", data=np.float32(2.5))
        f.create_dataset("bool", data=base[..., 0] > 0)
        f.create_dataset("enum", data=(base[..., 0] > 0).astype(np.int8) * 3, dtype=mood)
        f.create_dataset("rec", data=np.zeros(40, dtype=[("a", "<f4"), ("b", "<i2")]))
        f.create_dataset("text", data=["a", "bc", "d"] * 13 + ["e"], dtype=h5py.string_dtype())
    sf = SafeFile(path)
    try:
        with h5py.File(path, "r", locking=False) as ref:
            for name in ref:
                ds = sf.dataset("/" + name, whole=False)
                for sel in ([()] if name == "scalar" else READ_SELECTIONS):
                    if isinstance(sel, tuple) and len(sel) > ref[name].ndim:
                        continue
                    want = ref[name][sel]
                    got = sf.read(ds, sel)
                    assert isinstance(got, type(want)), (name, sel)
                    if isinstance(want, np.ndarray):
                        assert got.dtype == want.dtype and got.shape == want.shape, (name, sel)
                        assert np.array_equal(got, want), (name, sel)
                    else:
                        assert got == want, (name, sel)
    finally:
        sf.close()
