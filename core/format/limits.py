"""Size limits that bound what a trace may make resweep allocate or compute: one place.

A small hostile file can declare a huge world (big chunks, no stored data, edits far away),
millions of frames or rows whose boxes span the whole world. Real traces stay far below the
defaults here; a file beyond one is refused with one line naming the limit and how to raise it
(``resweep ... --max NAME=N``, or the environment variable ``RESWEEP_MAX="NAME=N,..."`` that the
viewer and the isolated validator read too).
"""
from __future__ import annotations

import os
from dataclasses import dataclass, fields, replace

#: Environment variable holding raised limits, e.g. ``RESWEEP_MAX="voxels=500000000,edits=1e7"``.
ENV = "RESWEEP_MAX"


@dataclass(frozen=True)
class Limits:
    """What one trace may hold (defaults; each can be raised).

    Attributes:
        chunk_size: largest chunk edge S in voxels (16 and 32 are usual; S^3 voxels per chunk).
        chunks: most chunks in the world (recorded ones plus those made for edits).
        voxels: most voxels held in memory for the world: (recorded chunks + chunks made for
            edits outside them) x S^3; 2 bytes each, plus the recorded copy of edited chunks.
        edits: most rows of ``/world/edits``.
        entities: most entities.
        frames: most frames.
        rows: most entity-frames (frames x entities).
        extent: largest half extent of a collider, in voxels.
        motion: largest wanted motion of one entity-frame along one axis, in voxels.
    """

    chunk_size: int = 256
    chunks: int = 1 << 18
    voxels: int = 1 << 27
    edits: int = 1 << 22
    entities: int = 1 << 20
    frames: int = 1 << 24
    rows: int = 1 << 30
    extent: float = float(1 << 16)
    motion: float = float(1 << 24)

    def hint(self, name: str) -> str:
        """``"limit NAME=V (raise it with --max NAME=N)"`` for messages."""
        v = getattr(self, name)
        shown = f"{v:,}" if isinstance(v, int) else f"{v:g}"
        return f"over the limit {name}={shown}{' voxels' if name in ('extent', 'motion') else ''} (raise it with --max {name}=N or {ENV}=\"{name}=N\")"

    def with_text(self, text: str) -> "Limits":
        """These limits with ``"NAME=N,NAME=N"`` applied; ValueError naming a bad item."""
        out = self
        for item in filter(None, (t.strip() for t in text.split(","))):
            name, sep, value = item.partition("=")
            name = name.strip()
            known = {f.name: f.type for f in fields(self)}
            if not sep or name not in known:
                raise ValueError(f"unknown limit {item!r}; limits are {', '.join(known)} (NAME=N)")
            try:
                num = float(value)
            except ValueError:
                raise ValueError(f"limit {name} needs a number, got {value.strip()!r}") from None
            if not num > 0 or num != num or num == float("inf"):
                raise ValueError(f"limit {name} must be a finite number > 0, got {value.strip()!r}")
            out = replace(out, **{name: int(num) if isinstance(getattr(self, name), int) else num})
        return out


def current() -> Limits:
    """The defaults with ``RESWEEP_MAX`` applied (a malformed variable is a usage error: ValueError)."""
    return Limits().with_text(os.environ.get(ENV, ""))


def raise_limits(text: str) -> None:
    """Apply ``"NAME=N,..."`` on top of the current limits for this process and its children."""
    merged = current().with_text(text)  # validates first
    base = Limits()
    os.environ[ENV] = ",".join(f"{f.name}={getattr(merged, f.name)}" for f in fields(merged)
                               if getattr(merged, f.name) != getattr(base, f.name))
