"""The trace reader's HDF5 access without h5py (``h5lite`` + ``LiteFile``) against h5py itself.

Reference: h5py's own reads of the same files (``ds.shape``, ``ds.dtype``, ``ds.chunks``,
``ds[sel]``, ``obj.attrs[key]``, ``ds.id.chunk_iter``), and the trace reader run with the
h5py path (``RESWEEP_H5LITE=0``). Files are written by h5py in every form its default file
format takes for the subset (numbers of both byte orders, bools, strings, compact / contiguous /
chunked storage, deflate and shuffle, partial edge chunks, chunks never written with default and
user fill values, chunk and group B-trees with internal levels, object header continuations);
forms outside the subset must be left to h5py (``Unsupported``), and damaged files must end in
``Unsupported`` or a one-line TraceFormatError, never another exception.
"""
from __future__ import annotations

import random
import subprocess
import sys

import h5py
import numpy as np
import pytest

from resweep.core import open_trace, write_trace
from resweep.core.errors import TraceFormatError
from resweep.core.format.h5lite import Unsupported
from resweep.core.format.h5safe import SafeFile
from resweep.core.format.lite_file import LiteFile, open_file

from h5_forms import write_plain_attributes
from paths import SAMPLES
from trace_factory import write_rows

NUMBER_TYPES = ["<i1", "<u1", "<i2", ">u2", "<i4", ">i4", "<u4", "<i8", ">i8", "<u8", "<f4", ">f4", "<f8", ">f8"]
SELECTIONS = [(), (slice(None),), (slice(1, 3),), (slice(2, 9), slice(1, None)), (slice(0, 0),),
              (slice(5, 2),), (slice(7, 99), slice(None, 2)), (slice(None, None, 2),), np.s_[3], np.s_[[0, 2]]]


def _compact_dcpl():
    p = h5py.h5p.create(h5py.h5p.DATASET_CREATE)
    p.set_layout(h5py.h5d.COMPACT)
    return p


def _subset_file(path):
    """A file of every dataset and attribute form the subset covers; returns the dataset names."""
    rng = np.random.default_rng(7)
    names = []
    with h5py.File(path, "w") as f:
        g = f.create_group("many")
        for k in range(300):  # many symbol-table nodes and an internal group B-tree level
            g.create_dataset(f"d{k:03d}", data=np.arange(k, k + 3, dtype="<i4"))
            names.append(f"/many/d{k:03d}")
        for dt in NUMBER_TYPES + ["bool"]:
            data = (rng.integers(0, 2, (11, 4)) if dt == "bool" else
                    (rng.standard_normal((11, 4)) * 50).astype(dt))
            for label, kw in (("contig", {}), ("compact", {"dcpl": _compact_dcpl()}),
                              ("gzshuf", {"chunks": (4, 3), "compression": "gzip", "shuffle": True}),
                              ("gz", {"chunks": (11, 4), "compression": "gzip", "compression_opts": 9}),
                              ("shuf", {"chunks": (3, 4), "shuffle": True}), ("plain", {"chunks": (5, 2)})):
                name = f"/{dt.replace('<', 'le').replace('>', 'be')}/{label}"
                f.create_dataset(name, data=np.asarray(data, dt), **kw)
                names.append(name)
        part = f.create_dataset("holes", shape=(40, 6), dtype="<f8", chunks=(8, 3), compression="gzip")
        part[3:9, :2] = 1.5  # most chunks never written: the fill value
        filled = f.create_dataset("holes_fill", shape=(20, 5), dtype="<i2", chunks=(6, 5), fillvalue=-7)
        filled[13:20] = 4
        unwritten = f.create_dataset("never", shape=(9, 2), dtype="<u2", fillvalue=3)
        deep = f.create_dataset("deep", data=rng.standard_normal((3000, 2)), chunks=(1, 2), compression="gzip")
        names += ["/holes", "/holes_fill", "/never", "/deep"]
        f.create_dataset("scalar", data=np.float64(2.5))
        f.create_dataset("empty", shape=(0, 3), dtype="<f4", chunks=(4, 3), maxshape=(None, 3))
        f.create_dataset("fixed", data=np.array([b"ab", b"cde", b""], dtype="S4"))
        f.create_dataset("vlen", data=["x", "h\u00e9llo", ""], dtype=h5py.string_dtype())
        names += ["/scalar", "/empty"]
        for obj in (f, g, deep, unwritten):
            write_plain_attributes(obj)
        for k in range(40):  # attributes added after the datasets: header continuation blocks
            f.attrs[f"late{k}"] = np.float32(k)
    return names


def _same(a, b) -> bool:
    if type(a) is not type(b):
        return False
    if isinstance(a, np.ndarray):
        return a.dtype == b.dtype and a.shape == b.shape and np.array_equal(a, b)
    return a == b


def test_every_form_of_the_subset_reads_as_h5py_reads_it(tmp_path):
    path = tmp_path / "subset.h5"
    names = _subset_file(path)
    lf, sf = LiteFile(path), SafeFile(path)
    try:
        with h5py.File(path, "r", locking=False) as h:
            for name in names:
                ds, ref = lf.dataset(name), h[name]
                assert (ds.shape, ds.dtype, ds.chunks) == (ref.shape, ref.dtype, ref.chunks), name
                for sel in ([s for s in SELECTIONS if not isinstance(s, tuple) or len(s) <= ref.ndim]
                            if ref.shape else [()]):
                    try:
                        want = ref[sel]
                    except (IndexError, ValueError):  # h5py refuses the selection: so must the subset
                        with pytest.raises((IndexError, ValueError)):
                            lf.read(ds, sel)
                        continue
                    assert _same(lf.read(ds, sel), want), (name, sel)
                    if ref.dtype.itemsize == 1 and ref.shape:
                        assert _same(lf.read_flags(ds, sel), np.asarray(ref[sel]) != 0), (name, sel)
                if ref.chunks is not None:
                    assert np.array_equal(lf.chunk_index(ds), sf.chunk_index(sf.dataset(name))), name
                    assert lf.stored_digest(ds) == sf.stored_digest(sf.dataset(name)), name
                assert lf.filter_ids(ds) == sf.filter_ids(sf.dataset(name)), name
            assert lf.read_strings(lf.dataset("/fixed")) == sf.read_strings(sf.dataset("/fixed"))
            assert lf.read_strings(lf.dataset("/vlen")) == sf.read_strings(sf.dataset("/vlen"))
            for obj_name in ("/", "/many", "/deep", "/never"):
                obj = lf.file if obj_name == "/" else lf._get(obj_name)
                keys = list(h[obj_name].attrs)
                assert sorted(obj.attrs) == sorted(keys), obj_name
                for k in keys:
                    assert _same(lf.attr(obj, k), h[obj_name].attrs[k]), (obj_name, k)
            assert lf.attr(lf.file, "missing", 7) == 7
            assert lf.group("/nothing", required=False) is None
            with pytest.raises(TraceFormatError, match="must be a group"):
                lf.group("/deep")
            with pytest.raises(TraceFormatError, match="must be a dataset"):
                lf.dataset("/many")
    finally:
        lf.close()
        sf.close()


def _outside(path, form):
    """A small file using one HDF5 form the subset leaves to h5py."""
    kw = {"libver": "latest"} if form == "latest" else {}
    with h5py.File(path, "w", **kw) as f:
        f.attrs["format"] = "x"
        data = np.arange(12.0).reshape(4, 3)
        if form == "lzf":
            f.create_dataset("d", data=data, chunks=(2, 3), compression="lzf")
        elif form == "fletcher32":
            f.create_dataset("d", data=data, chunks=(2, 3), fletcher32=True)
        elif form == "soft":
            f.create_dataset("t", data=data)
            f["d"] = h5py.SoftLink("/t")
        elif form == "external":
            f["d"] = h5py.ExternalLink("other.h5", "/x")
        elif form == "compound":
            f.create_dataset("d", data=np.zeros(3, [("a", "<f4"), ("b", "<i2")]))
        elif form == "enum":
            f.create_dataset("d", data=np.arange(3, dtype="u1"), dtype=h5py.enum_dtype({"A": 0, "B": 1, "C": 2}, "u1"))
        elif form == "half":
            f.create_dataset("d", data=data.astype("f2"))
        elif form == "empty_attr":
            f.create_dataset("d", data=data).attrs["e"] = h5py.Empty("f8")
        elif form == "order":
            f.create_group("g", track_order=True).create_dataset("d", data=data)
        elif form == "external_raw":
            f.create_dataset("d", shape=(4, 3), dtype="<f8", external=[("raw.bin", 0, 96)])
        else:
            f.create_dataset("d", data=data)


@pytest.mark.parametrize("form", ["latest", "lzf", "fletcher32", "soft", "external", "compound", "enum", "half",
                                  "empty_attr", "order", "external_raw"])
def test_forms_outside_the_subset_are_left_to_h5py(tmp_path, form):
    path = tmp_path / f"{form}.h5"
    _outside(path, form)
    with pytest.raises(Unsupported):
        lf = LiteFile(path)
        try:
            lf.dataset("/g/d" if form == "order" else "/d")
        finally:
            lf.close()


def test_a_plain_file_is_read_by_the_subset_and_a_newer_one_by_h5py(tmp_path):
    plain, newer = tmp_path / "plain.h5", tmp_path / "latest.h5"
    _outside(plain, "plain")
    _outside(newer, "latest")
    for path, kind in ((plain, LiteFile), (newer, SafeFile)):
        f = open_file(path)
        try:
            assert type(f) is kind
        finally:
            f.close()


def _frames_of(path, kernels: bool):
    with open_trace(path) as tr:
        if kernels:
            tr.decode_with_kernels(True, min_bytes=0)
        blk = tr.frames(0, tr.frame_count)
        head = (tr.ids, tr.names, tr.half_extents, tr.time, tr.chunk_origin, tr.chunk_blocks, tr.edits,
                tr.shapes.box_start, tr.shapes.boxes, tr.shapes.names, tr.voxel_size, tr.up_axis, tr.title,
                tr.producer, tr.problems, tr.world_digest())
        return type(tr._f).__name__, head, (blk.start, blk.motion, blk.end, blk.active, blk.half, blk.grounded)


def _equal(a, b) -> bool:
    if isinstance(a, np.ndarray) or isinstance(b, np.ndarray):
        return a is None and b is None or np.array_equal(a, b, equal_nan=np.asarray(a).dtype.kind == "f")
    if isinstance(a, (tuple, list)) and not isinstance(a, str):
        return len(a) == len(b) and all(_equal(x, y) for x, y in zip(a, b))
    return a == b


def _odd_trace(path, compression):
    """A trace using the optional datasets: block shapes and names, edits, entity names,
    per-frame half extents, grounded flags, inactive rows and float32 frames."""
    from resweep.core.world.shapes import BlockShapes
    rng = np.random.default_rng(3)
    F, N = 37, 4
    start = rng.uniform(1, 6, (F, N, 3)).astype(np.float32)
    motion = rng.uniform(-0.3, 0.3, (F, N, 3)).astype(np.float32)
    shapes = BlockShapes(np.array([0, 0, 1, 3]), np.array([[0, 0, 0, 1, 1, 1], [0, 0, 0, 1, 0.5, 1],
                                                           [0, 0.5, 0, 0.5, 1, 1]], float), ("air", "stone", "step"))
    write_rows(path, start, motion, start + motion, active=rng.random((F, N)) > 0.2, shapes=shapes,
               edits=np.array([[3, 1, 1, 1, 2], [9, 2, 1, 2, 0]]), entity_names=["a", "b\u00e9", "c", "d"],
               frame_half_extents=np.full((F, N, 3), 0.4, np.float32), grounded=rng.random((F, N)) > 0.5,
               title="odd", compression=compression)
    return path


@pytest.mark.parametrize("which", ["quarry.h5", "terrace_axis.h5", "quarry_far_f32.h5", "odd-gzip", "odd-none",
                                   "odd-lzf"])
@pytest.mark.parametrize("kernels", [False, True])
def test_a_trace_reads_the_same_through_either_path(tmp_path, monkeypatch, which, kernels):
    if which.startswith("odd"):
        comp = which.split("-")[1]
        path = _odd_trace(tmp_path / "odd.h5", None if comp == "none" else comp)
    else:
        path = SAMPLES / which
    monkeypatch.setenv("RESWEEP_H5LITE", "0")
    kind_h5, *ref = _frames_of(path, kernels)
    monkeypatch.setenv("RESWEEP_H5LITE", "1")
    kind, *got = _frames_of(path, kernels)
    assert kind_h5 == "SafeFile"
    assert kind == ("SafeFile" if which == "odd-lzf" else "LiteFile")  # lzf: outside the subset
    assert _equal(got, ref)


def test_a_corrupt_chunk_is_refused_in_one_line_as_h5py_refuses_it(tmp_path, monkeypatch):
    path = write_rows(tmp_path / "t.h5", np.ones((30, 3, 3)), np.zeros((30, 3, 3)), np.ones((30, 3, 3)))
    with h5py.File(path, "r") as h:
        spot = h["/frames/motion"].id.get_chunk_info(0)
    data = bytearray(path.read_bytes())
    data[spot.byte_offset:spot.byte_offset + spot.size] = bytes(range(7)) * (spot.size // 7) + bytes(spot.size % 7)
    path.write_bytes(bytes(data))
    for env in ("1", "0"):
        monkeypatch.setenv("RESWEEP_H5LITE", env)
        with pytest.raises(TraceFormatError, match=r"/frames/motion.*cannot read data"):
            with open_trace(path) as tr:
                tr.frames(0, tr.frame_count)


def test_damaged_structures_end_in_unsupported_or_one_line(tmp_path):
    """Seeded byte damage right after every HDF5 signature of a small trace: the subset reader
    either reads the whole trace, or gives up (Unsupported), or refuses in one line."""
    base = write_rows(tmp_path / "t.h5", np.ones((6, 2, 3)), np.zeros((6, 2, 3)), np.ones((6, 2, 3)),
                      entity_names=["a", "b"])
    data = base.read_bytes()
    sigs = [i for sig in (b"\x89HDF", b"TREE", b"HEAP", b"SNOD", b"GCOL") for i in range(len(data))
            if data.startswith(sig, i)]
    rng = random.Random(11)
    outcomes = {"read": 0, "unsupported": 0, "refused": 0}
    for case in range(300):
        bad = bytearray(data)
        at = rng.choice(sigs) + rng.randrange(96)
        for k in range(rng.randint(1, 3)):
            if at + k < len(bad):
                bad[at + k] = rng.choice([0, 0xFF, rng.randrange(256)])
        path = tmp_path / "bad.h5"
        path.write_bytes(bytes(bad))
        try:
            f = LiteFile(path)
            try:
                for name in ("/world/chunk_origin", "/world/chunk_blocks", "/entities/id", "/entities/name",
                             "/frames/time", "/frames/start", "/frames/active"):
                    ds = f.dataset(name, required=False)
                    if ds is not None:
                        f.read_strings(ds) if ds.dtype.kind in "OS" else f.read(ds)
                for obj in (f.file, f.group("/world", required=False)):
                    if obj is not None:
                        dict(obj.attrs)
            finally:
                f.close()
            outcomes["read"] += 1
        except Unsupported:
            outcomes["unsupported"] += 1
        except TraceFormatError as exc:
            assert "\n" not in str(exc)
            outcomes["refused"] += 1
    assert outcomes["unsupported"] > 0 and outcomes["read"] > 0, outcomes


def test_a_trace_written_by_the_writer_opens_through_the_subset(tmp_path):
    path = write_trace(tmp_path / "w.h5", chunk_size=4, chunk_origin=np.zeros((1, 3), np.int64),
                       chunk_blocks=np.ones((1, 4, 4, 4), np.uint16), entity_ids=np.array([5]),
                       half_extents=np.full((1, 3), 0.3), time=np.arange(3) / 60.0,
                       start=np.full((3, 1, 3), 2.0), motion=np.zeros((3, 1, 3)), end=np.full((3, 1, 3), 2.0)) \
        or tmp_path / "w.h5"
    with open_trace(path) as tr:
        assert type(tr._f) is LiteFile


H5PY_PROBE = """
import sys
from resweep.core import SolverSettings, check_trace, open_trace
with open_trace(sys.argv[1]) as tr:
    report = check_trace(tr, SolverSettings())
print(report.entity_frames, 'h5py' in sys.modules)
"""


def test_checking_a_file_of_the_subset_never_loads_h5py(tmp_path):
    """Loading h5py costs a process about 30 ms (measured); a check of a file the subset reads
    must not pay it, and a file outside the subset must still be read (through h5py)."""
    newer = tmp_path / "latest.h5"
    with h5py.File(SAMPLES / "quarry.h5") as src, h5py.File(newer, "w", libver="latest") as dst:
        for key, value in src.attrs.items():
            dst.attrs[key] = value
        for name in src:
            src.copy(src[name], dst, name=name)
    got = {}
    for path in (SAMPLES / "quarry.h5", newer):
        r = subprocess.run([sys.executable, "-c", H5PY_PROBE, str(path)], capture_output=True, text=True,
                           timeout=300)
        assert r.returncode == 0, r.stderr
        rows, loaded = r.stdout.split()
        got[path.name] = (int(rows), loaded)
    assert got["quarry.h5"][1] == "False" and got["latest.h5"][1] == "True"
    assert got["quarry.h5"][0] == got["latest.h5"][0] > 0
