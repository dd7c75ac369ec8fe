"""``SafeFile``'s own reads: attributes without h5py's attribute manager, flags byte for byte.

Reference: h5py's own high-level reads of the same file. ``obj.attrs[key]`` (type and value) for
every kind of attribute h5py writes: strings (variable and fixed length), bytes, integers, floats,
booleans, arrays, string arrays, empty dataspaces and a top-level array type. ``ds[sel] != 0``
for flag datasets stored as h5py's bool, as one-byte integers (values beyond 1 included) and as
a one-byte enum, for whole, partial, chunk-crossing and empty selections.
"""
from __future__ import annotations

import h5py
import pytest
import numpy as np

from resweep.core.errors import TraceFormatError
from resweep.core.format.h5safe import SafeFile


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
            obj.attrs["s"] = "h\u00e9llo"
            obj.attrs["b"] = np.bytes_(b"raw")
            obj.attrs["i"] = np.int64(3)
            obj.attrs["u8"] = np.uint8(200)
            obj.attrs["f"] = 1.5
            obj.attrs["arr"] = np.arange(4)
            obj.attrs["e"] = h5py.Empty("f8")
            obj.attrs["sl"] = ["a", "bc"]
            obj.attrs["bool"] = True
            obj.attrs["fixed"] = np.array(b"abc", dtype="S5")
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
