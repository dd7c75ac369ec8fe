"""The voxel world as the solver sees it: chunks in a hash table, plus edits over time.

Voxel (i, j, k) occupies ``[i, i+1) x [j, j+1) x [k, k+1)`` times ``voxel_size``. Voxels outside
every chunk are air. Edits that land outside the recorded chunks get an all-air chunk made for
them up front, so applying an edit never reallocates the world (the reader bounds how many such
chunks a trace may ask for, see ``core/format/limits.py``). Only the chunks that edits touch keep
a recorded copy for rewinding, so memory is about one copy of the world.
"""
from __future__ import annotations

import numpy as np

from resweep.core.world.chunk_hash import build_hash, lookup
from resweep.core.world.shapes import BlockShapes

class VoxelWorld:
    """Chunks, block shapes and edits of one trace, positioned at some frame.

    Attributes:
        chunk_size: S, voxels per chunk edge.
        chunk_origin: int64 (C, 3) voxel coordinate of each chunk's min corner.
        blocks: uint16 (C, S, S, S) block types, index [chunk, x, y, z]; edited in place.
        shapes: the block type table.
        voxel_size: world units per voxel edge.
        edits: int64 (E, 5) rows ``[frame, x, y, z, type]`` in file order.
        frame: edits with ``edit frame <= self.frame`` have been applied.
    """

    def __init__(self, chunk_size: int, chunk_origin: np.ndarray, chunk_blocks: np.ndarray,
                 shapes: BlockShapes, voxel_size: float = 1.0, edits: np.ndarray | None = None):
        S = int(chunk_size)
        origin = np.asarray(chunk_origin, dtype=np.int64).reshape(-1, 3)
        edits = np.zeros((0, 5), np.int64) if edits is None else np.asarray(edits, np.int64).reshape(-1, 5)
        extra = np.zeros((0, 3), np.int64)
        if len(edits):
            have = np.unique(origin // S, axis=0)
            touched = np.unique(edits[:, 1:4] // S, axis=0)
            both, first = np.unique(np.concatenate([have, touched]), axis=0, return_index=True)
            extra = both[first >= len(have)]  # first seen among the touched: not recorded
            origin = np.concatenate([origin, extra * S])
        blocks = np.zeros((len(origin), S, S, S), np.uint16)
        blocks[: len(origin) - len(extra)] = np.asarray(chunk_blocks).reshape(-1, S, S, S)
        self.chunk_size = S
        self.chunk_origin = origin
        self.shapes = shapes
        self.voxel_size = float(voxel_size)
        self.edits = edits
        self.blocks = blocks
        self.keys, self.slot = build_hash(origin // S)
        self._edit_chunk, self._edit_local = self._locate_edits()
        # Recorded copy of the edited chunks only: rewinding restores these.
        self._touched = np.unique(self._edit_chunk)
        self._pristine = blocks[self._touched].copy()
        self._applied = 0  # edits[:_applied] are in self.blocks
        self.frame = -(2**62)
        if len(origin):
            self.lo = origin.min(axis=0)
            self.hi = origin.max(axis=0) + S
        else:
            self.lo = np.zeros(3, np.int64)
            self.hi = np.zeros(3, np.int64)
        # Edits are sorted by frame for incremental application; file order breaks ties.
        self._edit_order = np.argsort(edits[:, 0], kind="stable") if len(edits) else np.zeros(0, np.int64)
        self._edit_frames = edits[self._edit_order, 0]
        self.version = 0  # bumps whenever self.blocks changes (viewers cache meshes by it)

    def _locate_edits(self):
        S = self.chunk_size
        if not len(self.edits):
            return np.zeros(0, np.int64), np.zeros((0, 3), np.int64)
        coords = self.edits[:, 1:4]
        uniq, inv = np.unique(coords // S, axis=0, return_inverse=True)
        cidx = np.array([self.chunk_index(*c) for c in uniq.tolist()], dtype=np.int64)[inv.reshape(-1)]
        return cidx, coords - (coords // S) * S

    def chunk_index(self, cx: int, cy: int, cz: int) -> int:
        """Index of the chunk at chunk coordinate (cx, cy, cz), or -1."""
        return lookup(self.keys, self.slot, cx, cy, cz)

    def block_at(self, x: int, y: int, z: int) -> int:
        """Block type at voxel (x, y, z) as the world stands now (0 outside every chunk)."""
        S = self.chunk_size
        c = self.chunk_index(x // S, y // S, z // S)
        if c < 0:
            return 0
        return int(self.blocks[c, x - (x // S) * S, y - (y // S) * S, z - (z // S) * S])

    def edit_frames(self) -> np.ndarray:
        """Sorted distinct frames at which edits apply, int64."""
        return np.unique(self.edits[:, 0]) if len(self.edits) else np.zeros(0, np.int64)

    @property
    def nbytes(self) -> int:
        """Bytes of block data this world holds (its blocks and the recorded copy of edited chunks)."""
        return int(self.blocks.nbytes + self._pristine.nbytes)

    def rewind(self) -> None:
        """Back to the recorded chunks with no edit applied, as a freshly built world."""
        if self._applied:
            self.blocks[self._touched] = self._pristine
            self._applied = 0
            self.version += 1
        self.frame = -(2**62)

    def edits_before(self, frame: int) -> int:
        """How many edits :meth:`advance_to` ``(frame)`` would write (0: the blocks stay as they are)."""
        frame = int(frame)
        stop = int(np.searchsorted(self._edit_frames, frame, side="right"))
        if frame < self.frame and self._applied:
            return stop + 1  # back: the recorded chunks come back first, then the edits up to frame
        return max(0, stop - self._applied)

    def advance_to(self, frame: int) -> bool:
        """Apply every edit with ``edit frame <= frame`` (world as it stands when ``frame`` is solved).

        Moving forward applies only the new edits; moving backward restarts from the recorded
        chunks. Returns True when the blocks changed.
        """
        frame = int(frame)
        restored = frame < self.frame and self._applied > 0
        if restored:
            self.blocks[self._touched] = self._pristine
            self._applied = 0
            self.version += 1
        order = self._edit_order
        n = self._applied
        stop = int(np.searchsorted(self._edit_frames, frame, side="right"))
        changed = stop > n
        if changed:
            # Apply in order: where several edits hit one voxel the last one wins, so keep only it.
            e = order[n:stop][::-1]
            c, loc = self._edit_chunk[e], self._edit_local[e]
            _, keep = np.unique(np.column_stack([c, loc]), axis=0, return_index=True)
            e, c, loc = e[keep], c[keep], loc[keep]
            self.blocks[c, loc[:, 0], loc[:, 1], loc[:, 2]] = self.edits[e, 4]
            n = stop
        self._applied = n
        self.frame = frame
        if changed:
            self.version += 1
        return changed or restored


def chunks_from_dense(grid: np.ndarray, origin=(0, 0, 0), chunk_size: int = 16):
    """Cut a dense block grid into chunks, dropping all-air ones.

    Args:
        grid: integer (nx, ny, nz) block types, index [x, y, z].
        origin: voxel coordinate of ``grid[0, 0, 0]``; each component a multiple of ``chunk_size``.
    Returns:
        chunk_origin int64 (C, 3) and chunk_blocks uint16 (C, S, S, S).
    """
    S = int(chunk_size)
    origin = np.asarray(origin, np.int64)
    if (origin % S).any():
        raise ValueError("origin must be a multiple of chunk_size")
    n = np.asarray(grid.shape)
    c = -(-n // S)
    padded = np.zeros(tuple(c * S), np.uint16)
    padded[: n[0], : n[1], : n[2]] = grid
    blk = padded.reshape(c[0], S, c[1], S, c[2], S).transpose(0, 2, 4, 1, 3, 5).reshape(-1, S, S, S)
    idx = np.stack(np.meshgrid(*[np.arange(k) for k in c], indexing="ij"), -1).reshape(-1, 3)
    keep = blk.reshape(len(blk), -1).any(axis=1)
    return (idx[keep] * S + origin).astype(np.int64), blk[keep]
