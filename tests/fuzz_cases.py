"""Mutated traces for the fuzz harness: case ``k`` of seed ``s`` is always the same file.

Families (chosen round robin so every run of a few hundred cases covers all of them):
- ``flip``: random bit flips within 96 bytes after an HDF5 metadata signature (superblock,
  object headers, B-trees, local and global heaps, symbol-table nodes);
- ``overwrite``: 1-8 bytes there set to 0x00, 0xFF or random bytes;
- ``truncate``: the file cut at a random length;
- ``structure``: one edit with h5py (dataset deleted, wrong shape or dtype, attribute changed,
  NaN or huge values written, a group replaced by a dataset);
- ``declared``: a dataset declared huge with no stored data (chunk_blocks, edits, frames);
- ``link``: soft links that dangle, loop or carry control characters; external links;
- ``named``: the reported hostile cases of ``hostile_traces`` (symbol-node signature, heap
  object size, far chunks, chunk size with far edits).
HDF5 signature names are from the HDF5 file format specification (quoted from memory).
"""
from __future__ import annotations

import random
import shutil

import h5py
import numpy as np

import hostile_traces as H

SIGNATURES = (b"\x89HDF\r\n\x1a\n", b"TREE", b"HEAP", b"SNOD", b"GCOL", b"OHDR", b"OCHK", b"BTHD", b"BTLF",
              b"FRHP", b"FHDB", b"FSHD")
FAMILIES = ("flip", "overwrite", "truncate", "structure", "declared", "link", "named")


def _meta_offsets(data: bytes) -> list[int]:
    out = []
    for sig in SIGNATURES:
        at = data.find(sig)
        while at >= 0:
            out.append(at)
            at = data.find(sig, at + 1)
    return out or [0]


def _bytes_case(base, dst, rng: random.Random, family: str):
    data = bytearray(open(base, "rb").read())
    if family == "truncate":
        cut = rng.choice([rng.randrange(len(data)), rng.randrange(min(len(data), 4096))])
        del data[cut:]
    else:
        starts = _meta_offsets(bytes(data))
        anywhere = rng.random() < 0.4  # raw data too: some files stay valid and reach the solver
        for _ in range(rng.randint(1, 4)):
            at = rng.randrange(len(data)) if anywhere else min(len(data) - 1, rng.choice(starts) + rng.randrange(96))
            if family == "flip":
                data[at] ^= 1 << rng.randrange(8)
            else:
                n = rng.randint(1, 8)
                fill = rng.choice([b"\0" * n, b"\xff" * n, bytes(rng.randrange(256) for _ in range(n))])
                data[at:at + n] = fill[: max(0, len(data) - at)]
    open(dst, "wb").write(bytes(data))


def _structure_case(base, dst, rng: random.Random):
    shutil.copy(base, dst)
    with h5py.File(dst, "r+") as f:
        names = []
        f.visit(names.append)
        ds = [n for n in names if isinstance(f[n], h5py.Dataset)]
        name = rng.choice(ds)
        op = rng.randrange(9)
        if op == 0:
            del f[name]
        elif op == 1:
            del f[name]
            f[name] = np.zeros((rng.randint(0, 3),) * rng.randint(1, 4), rng.choice(["f8", "i8", "u1", "f4"]))
        elif op == 2:
            arr = f[name][()]
            del f[name]
            f[name] = np.asarray(arr).astype("S8") if np.asarray(arr).dtype.kind != "S" else np.zeros(3)
        elif op == 3:
            key = rng.choice(["format", "version", "voxel_size", "up_axis", "title"])
            f.attrs[key] = rng.choice([np.float64(np.nan), np.int64(-1), "x\n" * 3, np.zeros(3), np.int64(2 ** 62)])
        elif op == 4:
            f["world"].attrs["chunk_size"] = rng.choice([0, -8, 3, 7, 1 << 20, 2 ** 62])
        elif op == 5:
            d = f[name]
            if d.dtype.kind == "f" and d.size:
                v = d[()]
                v.reshape(-1)[rng.randrange(v.size)] = rng.choice([np.nan, np.inf, -1e300, 1e12, -0.0])
                d[()] = v
        elif op == 6:
            d = f[name]
            if d.dtype.kind in "iu" and d.size:
                v = d[()]
                v.reshape(-1)[rng.randrange(v.size)] = rng.choice([-1, 2 ** 40, -(2 ** 62), 65535, 255])
                d[()] = v
        elif op == 7:
            grp = rng.choice(["world", "frames", "entities", "blocks"])
            if grp in f:
                del f[grp]
                f[grp] = np.zeros(3)
        else:
            w = f["world"]
            w["edits"] = np.array([[rng.randrange(-5, 300), rng.randrange(-(2 ** 40), 2 ** 40), 0,
                                    rng.randrange(-64, 64), rng.randrange(0, 3)] for _ in range(rng.randint(1, 4))],
                                  np.int64) if "edits" not in w else np.zeros((2, 5), np.int64)


def _declared_case(base, dst, rng: random.Random):
    shutil.copy(base, dst)
    with h5py.File(dst, "r+") as f:
        pick = rng.randrange(4)
        if pick == 0:
            S = rng.choice([64, 128, 256, 1024])
            C = rng.choice([1, 4, 64, 1 << 20])
            w = f["world"]
            del w["chunk_blocks"], w["chunk_origin"]
            w.attrs["chunk_size"] = np.int64(S)
            w.create_dataset("chunk_origin", shape=(C, 3), dtype=np.int64, chunks=(min(C, 4096), 3))
            w.create_dataset("chunk_blocks", shape=(C, S, S, S), dtype=np.uint8, chunks=(1, 16, 16, 16))
        elif pick == 1:
            if "edits" in f["world"]:
                del f["world/edits"]
            f["world"].create_dataset("edits", shape=(rng.choice([10 ** 6, 25 * 10 ** 6, 2 ** 40]), 5),
                                      dtype=np.int64, chunks=(4096, 5))
        elif pick == 2:
            F = rng.choice([10 ** 6, 4 * 10 ** 7, 2 ** 40])
            N = f["entities/id"].shape[0]
            fr = f["frames"]
            for k in list(fr):
                del fr[k]
            fr.create_dataset("time", shape=(F,), dtype=np.float64, chunks=(65536,))
            for k in ("start", "motion", "end"):
                fr.create_dataset(k, shape=(F, N, 3), dtype=np.float32, chunks=(4096, N, 3))
        else:
            e = f["entities"]
            del e["id"]
            e.create_dataset("id", shape=(rng.choice([10 ** 7, 2 ** 40]),), dtype=np.int64, chunks=(65536,))
        if rng.random() < 0.5:
            f["padding"] = np.zeros(1 << 20, np.uint8)  # raises the declared-size allowance


def _link_case(base, dst, rng: random.Random):
    shutil.copy(base, dst)
    with h5py.File(dst, "r+") as f:
        name = rng.choice(["frames/start", "world/chunk_blocks", "entities/id", "world", "frames/time"])
        del f[name]
        op = rng.randrange(5)
        if op == 0:
            f[name] = h5py.SoftLink("/nowhere\n" + "z" * rng.choice([1, 5000]))
        elif op == 1:
            f[name] = h5py.SoftLink("/" + name)  # itself
        elif op == 2:
            f["loop_a"] = h5py.SoftLink("/loop_b")
            f["loop_b"] = h5py.SoftLink("/loop_a")
            f[name] = h5py.SoftLink("/loop_a")
        elif op == 3:
            f[name] = h5py.ExternalLink(rng.choice(["/etc/passwd", "other\r\n.h5", base]), "/" + name)
        else:
            f[name] = h5py.SoftLink("/entities/half_extents")  # a real object of the wrong kind


def _named_case(base, dst, k: int):
    builders = [lambda: H.broken_symbol_node(base, dst), lambda: H.heap_size_zero(base, dst),
                lambda: H.far_chunks_motion(dst), lambda: H.far_chunks_huge_box(dst),
                lambda: H.big_chunk_one_edit(dst), lambda: H.newline_soft_link(base, dst),
                lambda: H.newline_external_link(base, dst), lambda: H.long_strings(base, dst)]
    builders[k % len(builders)]()


def make_case(bases, k: int, seed: int, dst) -> str:
    """Write case ``k`` to ``dst``; returns its family. ``bases``: paths of valid traces."""
    rng = random.Random(seed * 1_000_003 + k)
    family = FAMILIES[k % len(FAMILIES)]
    base = str(bases[rng.randrange(len(bases))])
    dst = str(dst)
    if family in ("flip", "overwrite", "truncate"):
        _bytes_case(base, dst, rng, family)
    elif family == "structure":
        _structure_case(base, dst, rng)
    elif family == "declared":
        _declared_case(base, dst, rng)
    elif family == "link":
        _link_case(base, dst, rng)
    else:
        _named_case(base, dst, k // len(FAMILIES))
    return family
