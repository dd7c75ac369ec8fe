"""The datasets of trace format v1: one table that the reader, the writer and the reference read.

Shapes use the format's symbols: F frames, N entities, C chunks, S chunk size, E edits,
T block types, B boxes; integers are fixed sizes. ``dtypes`` lists what a reader accepts;
``write_dtype`` is what the writer stores.
"""
from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class DatasetSpec:
    """One dataset of the format.

    Attributes:
        path: HDF5 path, e.g. ``"/frames/start"``.
        dtypes: accepted dtype names, or a kind phrase: ``"integer"``, ``"float"``, ``"string"``.
        shape: tuple of symbols (str) and fixed sizes (int).
        required: whether a file without it is refused.
        write_dtype: dtype the writer stores (``None`` for strings).
        meaning: one line for the format reference.
    """

    path: str
    dtypes: tuple[str, ...]
    shape: tuple
    required: bool
    write_dtype: str | None
    meaning: str

    @property
    def name(self) -> str:
        """Last path component (``"start"`` for ``/frames/start``)."""
        return self.path.rsplit("/", 1)[-1]

    def shape_text(self) -> str:
        """The shape as the format reference writes it, e.g. ``"(F, N, 3)"``."""
        parts = [str(s) for s in self.shape]
        return "(" + ", ".join(parts) + ("," if len(parts) == 1 else "") + ")"

    def resolve(self, dims: dict) -> tuple:
        """The expected shape with symbols replaced from ``dims`` (missing symbols stay None = any)."""
        return tuple(s if isinstance(s, int) else dims.get(s) for s in self.shape)


FLOAT = ("float32", "float64")
TABLE: tuple[DatasetSpec, ...] = (
    DatasetSpec("/blocks/box_start", ("integer",), ("T+1",), False, "int64", "CSR offsets of each type's boxes"),
    DatasetSpec("/blocks/boxes", ("float",), ("B", 6), False, "float64", "min xyz, max xyz, voxel-local units"),
    DatasetSpec("/blocks/names", ("string",), ("T",), False, None, "block type names"),
    DatasetSpec("/world/chunk_origin", ("integer",), ("C", 3), True, "int64", "voxel coordinate of each chunk's min corner"),
    DatasetSpec("/world/chunk_blocks", ("uint8", "uint16"), ("C", "S", "S", "S"), True, "uint8|uint16",
                "block types, index [chunk, x, y, z]"),
    DatasetSpec("/world/edits", ("integer",), ("E", 5), False, "int64", "rows [frame, x, y, z, type]"),
    DatasetSpec("/entities/id", ("integer",), ("N",), True, "int64", "unique engine ids"),
    DatasetSpec("/entities/half_extents", ("float",), ("N", 3), True, "float64", "collider half extents, world units"),
    DatasetSpec("/entities/name", ("string",), ("N",), False, None, "entity names"),
    DatasetSpec("/frames/time", ("float64",), ("F",), True, "float64", "seconds, non-decreasing"),
    DatasetSpec("/frames/start", FLOAT, ("F", "N", 3), True, "float32|float64", "collider centre at frame start"),
    DatasetSpec("/frames/motion", FLOAT, ("F", "N", 3), True, "float32|float64", "wanted displacement this frame"),
    DatasetSpec("/frames/end", FLOAT, ("F", "N", 3), True, "float32|float64", "centre the engine produced"),
    DatasetSpec("/frames/active", ("bool",), ("F", "N"), False, "bool", "row recorded (default all true)"),
    DatasetSpec("/frames/half_extents", ("float",), ("F", "N", 3), False, "float32|float64",
                "per-frame half extents (crouching)"),
    DatasetSpec("/frames/grounded", ("bool",), ("F", "N"), False, "bool",
                "the engine's on-ground flag after the frame"),
)
BY_PATH: dict[str, DatasetSpec] = {d.path: d for d in TABLE}
#: The per-frame datasets holding positions, in the order readers hand them out.
FRAME_VECTORS = ("start", "motion", "end")


def spec(path: str) -> DatasetSpec:
    """The table row of ``path`` (KeyError for a path that is not part of the format)."""
    return BY_PATH[path]
