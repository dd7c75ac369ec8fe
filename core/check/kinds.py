"""The divergence kinds: the one table that names them, ranks them and gives each its flag bit.

Every other module (kernels, reports, CLI, viewer) reads this table; nothing restates a bit, a
name or the number of kinds. A kind's flag bit is its position in :data:`KINDS`.
"""
from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Kind:
    """One divergence kind.

    Attributes:
        name: identifier used in JSON, options and tables (e.g. ``"tunneling"``).
        severity: ``"error"``, ``"warning"`` or ``"info"``.
        bit: flag bit in the per-row int32 flags.
        label: a few words for panels, legends and captions.
        meaning: one sentence for help texts and reports.
        short: column heading of at most four letters.
    """

    name: str
    severity: str
    bit: int
    label: str
    meaning: str
    short: str


TABLE: tuple[Kind, ...] = (
    Kind("invalid", "error", 0, "invalid row",
         "non-finite start, motion or end, or non-positive half extents; the rest is still checked", "inv"),
    Kind("start_overlap", "warning", 1, "starts inside solid",
         "the box at frame start overlaps solid deeper than the tolerance (error = depth)", "ovl"),
    Kind("penetration", "error", 2, "ends inside solid",
         "the recorded end overlaps solid deeper than the tolerance (error = depth)", "pen"),
    Kind("tunneling", "error", 3, "went through solid",
         "the recorded straight path goes through solid the reference stopped at, and the recorded end "
         "lies beyond it", "tun"),
    Kind("snag", "warning", 4, "stopped short",
         "the recorded end falls short of the reference along its direction of travel (lost slide, caught "
         "on a seam or edge; error = shortfall)", "snag"),
    Kind("mismatch", "warning", 5, "ends elsewhere",
         "recorded and reference ends differ by more than the tolerance in any other way", "mis"),
    Kind("discontinuity", "info", 6, "jumped between frames",
         "the start of frame f+1 differs from the recorded end of frame f (teleport, correction between "
         "frames)", "gap"),
)

#: Kind names in bit order.
KINDS: tuple[str, ...] = tuple(k.name for k in TABLE)
BY_NAME: dict[str, Kind] = {k.name: k for k in TABLE}
SEVERITY: dict[str, str] = {k.name: k.severity for k in TABLE}
SEVERITY_RANK = {"info": 1, "warning": 2, "error": 3}
SEVERITIES = tuple(SEVERITY_RANK)
#: Kinds that fail a check by default: every error-severity kind.
DEFAULT_FAIL_ON = tuple(k.name for k in TABLE if k.severity == "error")
KIND_COUNT = len(TABLE)
ALL_BITS = (1 << KIND_COUNT) - 1

# Bit positions as plain ints, for the kernels (numba compiles module-level ints in as constants).
INVALID, START_OVERLAP, PENETRATION, TUNNELING, SNAG, MISMATCH, DISCONTINUITY = (BY_NAME[n].bit for n in (
    "invalid", "start_overlap", "penetration", "tunneling", "snag", "mismatch", "discontinuity"))
assert all(k.bit == i for i, k in enumerate(TABLE)), "a kind's bit is its position in TABLE"


def kinds_of(flags: int) -> list[str]:
    """Kind names whose bit is set in one flags value, in bit order."""
    f = int(flags)
    return [k.name for k in TABLE if f & (1 << k.bit)]


def kind_mask(kind: str | None) -> int:
    """Flag bits that count for ``kind`` (None = every kind)."""
    return ALL_BITS if kind is None else 1 << BY_NAME[kind].bit


def short(kind: str) -> str:
    """Column heading of ``kind``."""
    return BY_NAME[kind].short


def severity_mask(rank: int) -> int:
    """Flag bits of the kinds of severity rank ``rank`` (1 info, 2 warning, 3 error)."""
    out = 0
    for k in TABLE:
        if SEVERITY_RANK[k.severity] == rank:
            out |= 1 << k.bit
    return out


def worst_rank(flags: int) -> int:
    """Worst severity rank among the kinds set in ``flags`` (0 when none)."""
    return max((SEVERITY_RANK[k.severity] for k in TABLE if int(flags) & (1 << k.bit)), default=0)
