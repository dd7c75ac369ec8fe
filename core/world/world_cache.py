"""Decoded worlds kept between traces of one process, keyed by a digest of their stored data.

Soak farms check thousands of short traces that usually share one world: decoding the world
(tens of milliseconds of decompression for a 200 x 50 x 200-voxel world) and building its hash
table and kernel arrays cost ten times the solve of a 1,000 entity-frame trace. A farm worker
keeps them here; the reader asks for a world by the digest of the bytes the file stores (see
``format.reader``), so two traces share an entry only when their worlds are stored identically.

A cache is used by one thread at a time (farm workers hold one per thread): the shared
:class:`VoxelWorld` is rewound to its recorded chunks each time it is handed out, and a check
moves it forward with ``advance_to`` as before.
"""
from __future__ import annotations

from collections import OrderedDict

#: Bytes of decoded worlds kept per cache (least recently used dropped first); a world over it
#: is not kept.
MAX_BYTES = 512 << 20


class WorldCache:
    """Least-recently-used store of decoded chunk blocks and built worlds.

    Keys are digests (bytes or str) made by the caller; values are any object with a byte size
    given on :meth:`put`.
    """

    def __init__(self, max_bytes: int = MAX_BYTES):
        self.max_bytes = int(max_bytes)
        self._items: OrderedDict = OrderedDict()  # key -> (value, nbytes)
        self.bytes = 0
        self.hits = 0
        self.misses = 0

    def get(self, key):
        """The value stored under ``key`` (now most recently used), or None."""
        got = self._items.get(key)
        if got is None:
            self.misses += 1
            return None
        self._items.move_to_end(key)
        self.hits += 1
        return got[0]

    def put(self, key, value, nbytes: int) -> None:
        """Keep ``value`` (about ``nbytes`` bytes) under ``key``, dropping the oldest entries to fit."""
        nbytes = int(nbytes)
        if nbytes > self.max_bytes:
            return
        old = self._items.pop(key, None)
        if old is not None:
            self.bytes -= old[1]
        while self._items and self.bytes + nbytes > self.max_bytes:
            _, (_, n) = self._items.popitem(last=False)
            self.bytes -= n
        self._items[key] = (value, nbytes)
        self.bytes += nbytes

    def world(self, key, build):
        """The :class:`VoxelWorld` under ``key``, rewound to its recorded chunks; ``build()`` makes
        it when it is not kept yet."""
        w = self.get(("world", key))
        if w is None:
            w = build()
            self.put(("world", key), w, w.nbytes)
        else:
            w.rewind()
        return w

    def __len__(self) -> int:
        return len(self._items)
