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
        test: the precise geometric test, as the row kernel (``check.nb_rows``) applies it. Terms:
            s, m, e, h: recorded start, wanted motion, recorded end, half extents; r: reference
            end; tol: the tolerance (world units); depth(c): deepest interior overlap of the box
            at c with solid (max over solid boxes of the least per-axis overlap); "differs":
            |e - r| > tol. Penetration, tunneling, snag and mismatch exclude each other and are
            tried in that order (penetration of the end first, then tunneling, then a dip).
    """

    name: str
    severity: str
    bit: int
    label: str
    meaning: str
    short: str
    test: str


TABLE: tuple[Kind, ...] = (
    Kind("invalid", "error", 0, "invalid row",
         "non-finite start, motion or end, or non-positive half extents; the rest is still checked", "inv",
         "some component of s, m, e or h is not finite, or some h <= 0 (the row is not solved)"),
    Kind("start_overlap", "warning", 1, "starts inside solid",
         "the box at frame start overlaps solid deeper than the tolerance (error = depth)", "ovl",
         "depth(s) > tol (error = depth(s))"),
    Kind("penetration", "error", 2, "ends inside solid",
         "the recorded end overlaps solid deeper than the tolerance, or the recorded path sinks into a "
         "surface the reference stopped at and ends free (error = depth)", "pen",
         "depth(e) > tol (error = depth(e)); or the row differs, the reference hit something, the box "
         "shrunk by tol on the straight path s -> e enters solid, e is not wholly past a hit face (see "
         "tunneling) and the recorded box's leading face went more than tol past some hit face: "
         "n . (c - e) > tol for a hit normal n of some pass, c the exact contact centre (error = the "
         "largest n . (c - e))"),
    Kind("tunneling", "error", 3, "went through solid",
         "the recorded straight path goes through solid the reference stopped at, and the recorded end "
         "lies wholly beyond it", "tun",
         "depth(e) <= tol, the row differs, the reference hit something, the box shrunk by tol on the "
         "straight path s -> e enters solid, and the recorded box lies wholly past some hit face: "
         "n_a (c_a - e_a) >= 2 h_a for a hit normal n of some pass on axis a (error = |e - r|)"),
    Kind("snag", "warning", 4, "stopped short",
         "the recorded end falls short of the reference along its direction of travel, with no "
         "penetration and no motion against it (lost slide, caught on a seam or edge; error = "
         "shortfall)", "snag",
         "not penetration or tunneling; the row differs; shortfall (r - e) . (r - s) / |r - s| > tol "
         "(0 when r = s); and on no axis does e - s go against r - s or against m by more than tol "
         "(error = shortfall)"),
    Kind("mismatch", "warning", 5, "ends elsewhere",
         "recorded and reference ends differ by more than the tolerance in any other way", "mis",
         "the row differs and is none of penetration, tunneling and snag (error = |e - r|)"),
    Kind("discontinuity", "info", 6, "jumped between frames",
         "the start of frame f+1 differs from the recorded end of frame f (teleport, correction between "
         "frames)", "gap",
         "the entity is active on frames f and f+1 and |start(f+1) - end(f)| > tol (NaN never counts; "
         "error = that distance)"),
    Kind("grounded_mismatch", "warning", 7, "wrong on-ground flag",
         "the recorded on-ground flag says grounded while no solid supports the box at the recorded end, or "
         "airborne while it rests on solid (the grounded rule; a grounded claim gets the tolerance on top; error "
         "= gap to the floor below, when within a voxel)", "gnd",
         "the trace records /frames/grounded g for the row; supported(c) = some solid box's top face lies "
         "within 2 skin below the box's bottom face at c with open footprints overlapping; g and not "
         "supported within 2 skin + tol, or not g and supported(e)"),
    Kind("step_mismatch", "warning", 8, "stepped differently",
         "with a step height set: the recorded end rose more than the step height plus the wanted upward "
         "motion, or exactly one of the reference and the recording stepped up (error = rise over the "
         "reference's plain solve)", "step",
         "step height H > 0; up component: e_up - s_up > H + max(m_up, 0) + tol, or exactly one of "
         "(the reference kept its raised try) and (the box was grounded at s and e_up exceeds the "
         "reference's plain solve by more than tol)"),
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
GROUNDED_MISMATCH, STEP_MISMATCH = (BY_NAME[n].bit for n in ("grounded_mismatch", "step_mismatch"))
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
