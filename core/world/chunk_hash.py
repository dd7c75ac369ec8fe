"""The spatial hash of chunk coordinates: one definition for Python (here) and kernels (nb_world).

Chunks live in an open-addressing table (linear probing) keyed by chunk coordinate, so a lookup
costs the same however far apart the chunks are. The three primes are the classic spatial-hash
multipliers (common practice, quoted from memory).
"""
from __future__ import annotations

import numpy as np

#: Multipliers of the x, y, z chunk coordinates (nb_world.chunk_lookup reads these too).
H1, H2, H3 = 73856093, 19349663, 83492791


def hash_chunk(cx, cy, cz, mask):
    """Slot of chunk coordinate (cx, cy, cz) in a table of ``mask + 1`` slots (ints or int64 arrays)."""
    return ((np.int64(cx) * H1) ^ (np.int64(cy) * H2) ^ (np.int64(cz) * H3)) & mask


def build_hash(chunk_coords: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Open-addressing table over chunk coordinates.

    Args:
        chunk_coords: int64 (C, 3) distinct chunk coordinates (chunk origin // chunk size).
    Returns:
        keys int64 (H, 3) and slot int32 (H,) (chunk index or -1), H a power of two >= 2C.
    """
    n = len(chunk_coords)
    cap = 8
    while cap < 2 * n:
        cap *= 2
    keys = np.zeros((cap, 3), dtype=np.int64)
    slot = np.full(cap, -1, dtype=np.int32)
    mask = cap - 1
    with np.errstate(over="ignore"):
        for idx in range(n):
            c = chunk_coords[idx]
            h = int(hash_chunk(c[0], c[1], c[2], mask))
            while slot[h] != -1:
                h = (h + 1) & mask
            keys[h] = c
            slot[h] = idx
    return keys, slot


def lookup(keys: np.ndarray, slot: np.ndarray, cx: int, cy: int, cz: int) -> int:
    """Index of the chunk at chunk coordinate (cx, cy, cz) in a table from :func:`build_hash`, or -1."""
    mask = len(slot) - 1
    with np.errstate(over="ignore"):
        h = int(hash_chunk(cx, cy, cz, mask))
    while slot[h] != -1:
        if keys[h, 0] == cx and keys[h, 1] == cy and keys[h, 2] == cz:
            return int(slot[h])
        h = (h + 1) & mask
    return -1
