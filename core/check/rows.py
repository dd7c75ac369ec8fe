"""Row API: re-solve and classify entity-frames given as plain arrays (:func:`solve_rows`).

The solve and the classification run in one parallel kernel (``nb_rows``), so a row is read
once; :class:`RowResults` holds both the reference solve and the divergence flags.
"""
from __future__ import annotations

from dataclasses import dataclass, fields

import numpy as np

from resweep.core.check import nb_rows
from resweep.core.check.kinds import KIND_COUNT
from resweep.core.solve import nb_models
from resweep.core.solve.settings import AXES, BROAD_PHASES, MODELS, SolverSettings
from resweep.core.world.kernel import kernel_world
from resweep.core.world.voxel_world import VoxelWorld


@dataclass
class RowResults:
    """Per-row output of a re-solve (M rows, P = settings.passes).

    Attributes:
        ref_end: float (M, 3) reference end centre, world units (NaN for invalid rows).
        npass: int8 (M,) passes run; state: int8 (M,) CLEAR / HIT / STARTED_INSIDE.
        toi: float (M, P) time of impact per pass, fraction of that pass's motion (1 = clear).
        normal: int8 (M, P, 3) hit normal (axis unit vectors; several set when faces tied).
        voxel: int64 (M, P, 3) hit voxel; block: int32 (M, P) hit block type, -1 if clear.
        candidates: int32 (M, P) solid boxes the narrow phase tested per pass. This depends on the
            broad phase (``solve_rows(broad=...)``): the swept-box scan tests every box in the
            swept bounding box, the walk of long motions only boxes it could not rule out first
            (a subset; it depends on the geometry and the world's extent, not on chunk order or
            size); every other field is identical for all broad phases.
        points: float (M, P+1, 3) centre at the start of each pass, then the end (the slide path;
            entries after the last pass run repeat the end). Axes blocked in an earlier pass are
            shown at their backed-off place; the pass itself starts from the exact contact (the skin
            is applied once, at the end: see solve.nb_slide).
        flags: int32 (M,) bit k set when divergence kind k applies (see kinds.KINDS).
        error: float (M, KIND_COUNT) error value per kind, world units, NaN where it does not apply.
        raised: bool (M,) step-up kept the raised try (``settings.step_height`` > 0).
        climb: float (M,) height the kept raised try climbed, world units (0 otherwise).

    Models without passes (axis, pushout) report one pass: t = 1 when nothing stopped them, else
    the fraction of the motion travelled (axis) ; the normals of the clipped (axis) or pushed
    (pushout, push direction) axes; the voxel that clipped the last clipped axis (axis) or was
    pushed out of first (pushout); ``candidates`` = boxes tested (axis) or pushes made (pushout).
    """

    ref_end: np.ndarray
    npass: np.ndarray
    state: np.ndarray
    toi: np.ndarray
    normal: np.ndarray
    voxel: np.ndarray
    block: np.ndarray
    candidates: np.ndarray
    points: np.ndarray
    flags: np.ndarray
    error: np.ndarray
    raised: np.ndarray
    climb: np.ndarray

    @classmethod
    def alloc(cls, m: int, passes: int, dtype) -> "RowResults":
        """Uninitialised arrays for ``m`` rows (the kernels write every slot)."""
        return cls(np.empty((m, 3), dtype), np.empty(m, np.int8), np.empty(m, np.int8), np.empty((m, passes), dtype),
                   np.empty((m, passes, 3), np.int8), np.empty((m, passes, 3), np.int64),
                   np.empty((m, passes), np.int32), np.empty((m, passes), np.int32),
                   np.empty((m, passes + 1, 3), dtype), np.empty(m, np.int32), np.empty((m, KIND_COUNT), dtype),
                   np.empty(m, bool), np.empty(m, dtype))

    def head(self, m: int) -> "RowResults":
        """Views of the first ``m`` rows."""
        return RowResults(*(getattr(self, f.name)[:m] for f in fields(self)))

    @classmethod
    def empty(cls, m: int, passes: int, dtype) -> "RowResults":
        return cls(np.zeros((m, 3), dtype), np.zeros(m, np.int8), np.zeros(m, np.int8),
                   np.ones((m, passes), dtype), np.zeros((m, passes, 3), np.int8),
                   np.zeros((m, passes, 3), np.int64), np.full((m, passes), -1, np.int32),
                   np.zeros((m, passes), np.int32), np.zeros((m, passes + 1, 3), dtype),
                   np.zeros(m, np.int32), np.zeros((m, KIND_COUNT), dtype), np.zeros(m, bool), np.zeros(m, dtype))


def _rows(a, dtype) -> np.ndarray:
    out = np.ascontiguousarray(np.asarray(a).reshape(-1, 3), dtype=dtype)
    # numba types a read-only array (np.broadcast_to, a read-only memory map) apart from a writable
    # one: passing it would compile and cache a second copy of every kernel (~45 s).
    return out if out.flags.writeable else out.copy()


def model_params(settings: SolverSettings, up: str, voxel_size: float, dtype) -> nb_models.ModelParams:
    """The model settings as the kernels take them (world units in ``dtype``); ``up`` "x", "y" or "z"."""
    ft = np.dtype(dtype).type
    order = [AXES.index(a) for a in settings.order_for(up)]
    return nb_models.ModelParams(np.int64(MODELS[settings.model]), np.int64(AXES.index(up)), *map(np.int64, order),
                                 ft(settings.substep * voxel_size), np.int64(settings.iterations),
                                 ft(settings.step_height * voxel_size))


def solve_rows(world: VoxelWorld, start, motion, recorded_end, half, settings: SolverSettings,
               broad: str = "auto", out: RowResults | None = None, up: str = "y", grounded=None) -> RowResults:
    """Re-solve and classify M entity-frames against the world as it stands now.

    Args:
        start, motion, recorded_end, half: float (M, 3) world units (any float dtype; converted
            to the settings' precision). ``recorded_end`` may be ``start + motion`` when only the
            reference is wanted.
        broad: "auto" (default: scan short motions' swept boxes, walk long ones), "scan" (always
            the whole swept bounding box) or "walk" (always the walk); see ``BROAD_PHASES``.
        out: results of at least M rows, of this precision and pass count, to write into (a
            streaming check reuses one across blocks); the first M rows are returned.
        up: the trace's up axis ("x", "y" or "z"): step-up, the grounded rule, push-out ties and
            the default axis order use it.
        grounded: int8 (M,) recorded on-ground flag after the frame (1, 0; -1 = not recorded) or
            None when the trace has none.
    """
    dt = settings.dtype
    rows = [_rows(a, dt) for a in (start, motion, recorded_end, half)]
    M = len(rows[0])
    if out is None:
        out = RowResults.alloc(M, settings.passes, dt)
    elif out.toi.dtype != dt or out.toi.shape[1] != settings.passes or len(out.toi) < M:
        raise ValueError(f"out holds {len(out.toi)} rows of {out.toi.shape[1]} {out.toi.dtype} passes; "
                         f"{M} rows of {settings.passes} {dt} passes needed")
    else:
        out = out.head(M)
    if M:
        _run(world, rows, settings, broad, out, out.flags, False, up, grounded)
    return out


def flag_rows(world: VoxelWorld, start, motion, recorded_end, half, settings: SolverSettings,
              flags: np.ndarray, broad: str = "auto", up: str = "y", grounded=None) -> np.ndarray:
    """The divergence flags of :func:`solve_rows` alone, written into ``flags`` (int32, at least M
    rows; its first M returned). Nothing else is kept, so nothing else is written: a check calls
    :func:`solve_rows` again for the few rows whose flags are set (same results, the rows being
    independent)."""
    dt = settings.dtype
    rows = [_rows(a, dt) for a in (start, motion, recorded_end, half)]
    M = len(rows[0])
    if flags.dtype != np.int32 or len(flags) < M:
        raise ValueError(f"flags holds {len(flags)} {flags.dtype.name} rows; {M} int32 rows needed")
    if M:
        _run(world, rows, settings, broad, RowResults.alloc(0, settings.passes, dt), flags[:M], True, up, grounded)
    return flags[:M]


def _run(world, rows, settings, broad, out: RowResults, flags, flags_only: bool, up, grounded):
    """One call of the row kernel on prepared rows (float (M, 3) of the settings' precision)."""
    dt = settings.dtype
    ft = dt.type
    M = len(rows[0])
    vs = world.voxel_size
    g = np.full(M, -1, np.int8) if grounded is None else np.ascontiguousarray(grounded, np.int8).reshape(-1)
    if len(g) != M:
        raise ValueError(f"grounded holds {len(g)} rows, {M} needed")
    nb_rows.check_rows(*rows, kernel_world(world, dt), ft(settings.skin * vs), np.int64(settings.passes),
                       ft(settings.tolerance * vs), np.int64(BROAD_PHASES[broad]), model_params(settings, up, vs, dt),
                       g, out.ref_end, out.npass, out.state, out.toi, out.normal, out.voxel, out.block,
                       out.candidates, out.points, out.raised, out.climb, flags, out.error, flags_only)


def overlap_depths(world: VoxelWorld, centre, half, precision: str = "float64") -> np.ndarray:
    """Deepest interior overlap with solid of each box: centre, half float (M, 3) -> (M,) world units."""
    dt = np.dtype(precision)
    c, h = _rows(centre, dt), _rows(half, dt)
    out = np.zeros(len(c), dt)
    if len(c):
        nb_rows.depth_rows(c, h, kernel_world(world, dt), out)
    return out


def warm_up(precision: str = "float64", frame_dtype=None, depths: bool = False) -> None:
    """Compile (or load from the on-disk cache) the kernels a check needs in one precision.

    Args:
        frame_dtype: also the row gather of frame blocks stored in this dtype (float32/float64).
        depths: also :func:`overlap_depths` (not used by a check).
    Only what is asked for is loaded: each cached kernel costs start-up time.
    """
    from resweep.core.check import nb_gather
    from resweep.core.jit.nb_jit import compile_lock
    from resweep.core.world.shapes import unit_cube_shapes
    w = VoxelWorld(1, np.zeros((1, 3), np.int64), np.ones((1, 1, 1, 1), np.uint16), unit_cube_shapes(2))
    row = np.array([[0.5, 2.0, 0.5]])
    with compile_lock():  # one process compiles, the others then load its cache entries
        solve_rows(w, row, np.array([[0.0, -2.0, 0.0]]), row, np.full((1, 3), 0.25),
                   SolverSettings(precision=precision))
        if depths:
            overlap_depths(w, row, np.full((1, 3), 0.25), precision)
        if frame_dtype is not None:
            from resweep.core.codec.nb_decode import warm_up as warm_decode
            warm_decode()
            dt, ft = np.dtype(precision), np.dtype(frame_dtype)
            one = np.zeros((1, 1, 3), ft)
            nb_gather.gather_rows(one, one, one, np.ones((1, 1), bool), np.zeros((1, 3)), np.zeros(1, bool), False,
                                  np.zeros(1, np.int64), np.zeros(1, np.int64), 0.01, np.zeros((1, 3), dt),
                                  np.zeros((1, 3), dt), np.zeros((1, 3), dt), np.zeros(1), np.zeros(1, bool))
