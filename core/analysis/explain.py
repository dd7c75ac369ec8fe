"""Fit which solver model a recording follows (``resweep explain`` and the viewer's fit dialog).

Steps (rows = active, valid entity-frames with non-zero motion, optionally filtered):
1. Estimate the engine's skin: on rows where the reference (sweep and slide, skin 0, one pass)
   stops against one face, the gap the recorded end keeps to that face; the median over gaps in
   [0, 0.25] voxel (how many rows it came from is reported).
2. Rows whose swept bounding box (start and end boxes of the straight motion, grown by twice the
   skin) overlaps no solid end at start + motion under every model: they are counted once, not
   solved per model.
3. Screen the model family (:func:`family`, all with the estimated skin) on up to ``sample`` of
   the other rows (every k-th, so the choice is deterministic), then solve the ``leaders`` best on
   all of them (with fewer rows than ``sample`` every model is solved on every row).
4. Rank by ``agree``: the fraction of rows whose recorded end lies within the tolerance of the
   model's end. Models with identical ends on every row they were solved on tie. Rows on which
   every solved model agrees or every one disagrees tell nothing apart (``rows_undecided``); when
   the best-scoring models cannot be told apart by any row the trace cannot decide.
5. The best model's divergence kinds on its rows are the likely real bugs.
"""
from __future__ import annotations

import hashlib
from dataclasses import dataclass, field, replace

import numpy as np

from resweep.core.check.kinds import kinds_of
from resweep.core.check.rows import overlap_depths, solve_rows
from resweep.core.format.reader import Trace
from resweep.core.solve.settings import SolverSettings

#: Step heights (voxels) the family tries with the models that step.
STEP_HEIGHTS = (0.0, 0.5, 0.6, 1.0)
#: Largest gap (voxels) read as an engine's skin.
MAX_SKIN = 0.25
DEFAULT_SKIN = 0.001


def family(skin: float, tolerance: float = 0.01, precision: str = "float64") -> list[SolverSettings]:
    """The documented family: slide 1..4 passes and axis in all six orders, each with step heights
    0, 0.5, 0.6, 1.0; pushout without substeps and with 0.5-voxel substeps."""
    base = SolverSettings(tolerance=tolerance, skin=skin, precision=precision)
    out = [replace(base, passes=p, step_height=hh) for hh in STEP_HEIGHTS for p in (1, 2, 3, 4)]
    out += [replace(base, model="axis", axis_order=o, step_height=hh) for hh in STEP_HEIGHTS
            for o in ("xyz", "xzy", "yxz", "yzx", "zxy", "zyx")]
    out += [replace(base, model="pushout", substep=sub) for sub in (0.0, 0.5)]
    return out


@dataclass
class ModelFit:
    """One model's score: ``agree`` agreeing rows of ``rows`` solved; ``tie`` the index of the first
    ranked model with identical ends on every row both were solved on (its own rank when none)."""

    settings: SolverSettings
    agree: float
    rows: int
    tie: int = -1

    def as_json(self) -> dict:
        s = self.settings
        return {"model": s.model, "passes": s.passes if s.model == "slide" else None,
                "axis_order": s.axis_order if s.model == "axis" else None,
                "substep": s.substep if s.model == "pushout" else None,
                "step_height": s.step_height if s.model != "pushout" else None,
                "agree": self.agree, "rows": self.rows, "tie": self.tie}


@dataclass
class Explanation:
    """Result of :func:`explain_trace` for one trace (``models`` sorted best first)."""

    path: str
    skin_estimate: float | None
    skin_rows: int
    rows_used: int
    rows_undecided: int
    models: list
    decided: bool
    disagreements: list = field(default_factory=list)
    screened: bool = False

    @property
    def best(self) -> SolverSettings:
        return self.models[0].settings

    def as_json(self) -> dict:
        return {"path": self.path, "skin_estimate": self.skin_estimate, "skin_rows": self.skin_rows,
                "rows_used": self.rows_used, "rows_undecided": self.rows_undecided, "decided": self.decided,
                "models": [m.as_json() for m in self.models], "disagreements": self.disagreements}


@dataclass
class _Segment:
    """Rows solved against one world state: world frame, arrays (M, 3) world units, frame, column,
    recorded on-ground flag (int8, -1 when not recorded)."""

    frame: int
    s: np.ndarray
    m: np.ndarray
    e: np.ndarray
    h: np.ndarray
    fr: np.ndarray
    col: np.ndarray
    ground: np.ndarray


def _rows_of_block(blk, a, b, cols_wanted):
    """Rows of frames [a, b) of block ``blk`` that are active, wanted, valid and moving."""
    i0, i1 = a - blk.f0, b - blk.f0
    act = np.asarray(blk.active[i0:i1], bool).copy()
    if cols_wanted is not None:
        act[:, ~cols_wanted] = False
    fr, col = np.nonzero(act)
    fr = fr + i0
    s = np.asarray(blk.start[fr, col], np.float64)
    m = np.asarray(blk.motion[fr, col], np.float64)
    e = np.asarray(blk.end[fr, col], np.float64)
    h = np.asarray(blk.half[fr, col], np.float64)
    ok = (np.isfinite(s).all(1) & np.isfinite(m).all(1) & np.isfinite(e).all(1) & np.isfinite(h).all(1)
          & (h > 0).all(1) & (m != 0).any(1))
    g = blk.grounded[fr, col] if blk.grounded is not None else np.full(len(fr), -1, np.int8)
    return s[ok], m[ok], e[ok], h[ok], fr[ok] + blk.f0, col[ok], np.asarray(g[ok], np.int8)


def collect_rows(trace: Trace, entities=None, frames=None) -> list[_Segment]:
    """The rows explain fits on, split where world edits apply (one world state per segment).

    Args:
        entities: engine ids to keep (None = all); frames: (a, b) half-open frame range or None.
    """
    cols = None
    if entities:
        cols = np.isin(trace.ids, np.asarray(list(entities), np.int64))
    f0, f1 = (0, trace.frame_count) if frames is None else (max(0, frames[0]), min(trace.frame_count, frames[1]))
    edit_frames = trace.world().edit_frames()
    out = []
    for blk in trace.iter_frames(1 << 17, f0, f1):
        cuts = edit_frames[(edit_frames > blk.f0) & (edit_frames < blk.f1)]
        bounds = [blk.f0, *cuts.tolist(), blk.f1]
        for a, b in zip(bounds[:-1], bounds[1:]):
            got = _rows_of_block(blk, a, b, cols)
            if len(got[0]):
                out.append(_Segment(a, *got))
    return out


def estimate_skin(world, segs, up: str, tolerance: float, vs: float):
    """(skin estimate in voxels or None, rows it came from): see the module docstring, step 1."""
    ref = SolverSettings(tolerance=tolerance, skin=0.0, passes=1)
    gaps = []
    for sg in segs:
        world.advance_to(sg.frame)
        r = solve_rows(world, sg.s, sg.m, sg.e, sg.h, ref, up=up)
        n = r.normal[:, 0].astype(np.int64)
        one = (r.block[:, 0] >= 0) & ((n != 0).sum(1) == 1)
        axis = np.argmax(n != 0, axis=1)
        idx = np.flatnonzero(one)
        gap = (sg.e[idx, axis[idx]] - r.points[idx, 1, axis[idx]]) * n[idx, axis[idx]]
        gaps.append(gap[(gap >= 0) & (gap <= MAX_SKIN * vs)])
    gaps = np.concatenate(gaps) if gaps else np.zeros(0)
    if not len(gaps):
        return None, 0
    return round(float(np.median(gaps)) / vs, 6), len(gaps)


def _free_rows(world, sg, margin: float) -> np.ndarray:
    """bool (M,): the swept bounding box of the straight motion, grown by ``margin`` (world units:
    more than the skin, so a face the box would end touching still counts), overlaps no solid."""
    lo = np.minimum(sg.s, sg.s + sg.m) - sg.h - margin
    hi = np.maximum(sg.s, sg.s + sg.m) + sg.h + margin
    return overlap_depths(world, (lo + hi) / 2, (hi - lo) / 2) <= 0


def _solve(world, sg, idx, st, up, tol):
    """(agree bool (k,), ends float (k, 3), flags int32 (k,)) of rows ``idx`` of segment ``sg``."""
    g = sg.ground[idx]
    r = solve_rows(world, sg.s[idx], sg.m[idx], sg.e[idx], sg.h[idx], st, up=up, grounded=g)
    d = np.sqrt(((r.ref_end - sg.e[idx]) ** 2).sum(1))
    return d <= tol, r.ref_end.copy(), r.flags.copy()


class _Screen:
    """The rows every model is solved on: per segment the indices of the contact rows in the screen."""

    def __init__(self, segs, free, sample: int):
        contact = [np.flatnonzero(~f) for f in free]
        self.n_contact = sum(len(c) for c in contact)
        self.screened = self.n_contact > sample
        step = -(-self.n_contact // sample) if self.screened else 1
        self.idx, off = [], 0
        for c in contact:
            pos = np.arange(off, off + len(c))
            self.idx.append(c[pos % step == 0])
            off += len(c)
        self.size = sum(len(i) for i in self.idx)


def _screen_models(world, segs, screen, fam, up, tol, progress):
    """agree bool (models, screen rows) and one digest of the ends per model (ties)."""
    agree = np.zeros((len(fam), screen.size), bool)
    digests = [hashlib.sha256() for _ in fam]
    off = 0
    for k, (sg, idx) in enumerate(zip(segs, screen.idx)):
        if len(idx):
            world.advance_to(sg.frame)
            for j, st in enumerate(fam):
                a, ends, _ = _solve(world, sg, idx, st, up, tol)
                agree[j, off:off + len(idx)] = a
                digests[j].update(ends.tobytes())
        off += len(idx)
        if progress is not None:
            progress(k + 1, 2 * len(segs))
    return agree, [d.hexdigest() for d in digests]


def _full_models(world, segs, models, up, tol, progress):
    """For each settings in ``models``, on every row: (agree bool (R,), ends digest, flags int32 (R,))."""
    out = []
    for st in models:
        ag, fl, dg = [], [], hashlib.sha256()
        for sg in segs:
            world.advance_to(sg.frame)
            a, ends, f = _solve(world, sg, np.arange(len(sg.s)), st, up, tol)
            ag.append(a)
            fl.append(f)
            dg.update(ends.tobytes())
        out.append((np.concatenate(ag) if ag else np.zeros(0, bool), dg.hexdigest(),
                    np.concatenate(fl) if fl else np.zeros(0, np.int32)))
    if progress is not None:
        progress(2 * len(segs), 2 * len(segs))
    return out


def explain_trace(trace: Trace, tolerance: float = 0.01, entities=None, frames=None, precision: str = "float64",
                  sample: int = 8192, leaders: int = 2, limit: int = 1000, progress=None) -> Explanation:
    """Fit the model family to ``trace`` (see the module docstring).

    Args:
        tolerance: voxels; entities: engine ids or None; frames: (a, b) or None.
        sample: contact rows screened per model; leaders: models then solved on every row.
        limit: disagreements kept; progress(done, total) is called as segments finish.
    """
    world = trace.world()
    vs, up = trace.voxel_size, trace.up_axis
    tol = tolerance * vs
    segs = collect_rows(trace, entities, frames)
    skin, skin_rows = estimate_skin(world, segs, up, tolerance, vs)
    fam = family(DEFAULT_SKIN if skin is None else skin, tolerance, precision)
    free = []
    for sg in segs:
        world.advance_to(sg.frame)
        free.append(_free_rows(world, sg, 2 * fam[0].skin * vs + 1e-6 * vs))
    n_rows = sum(len(sg.s) for sg in segs)
    free_agree = sum(int((np.sqrt(((sg.s + sg.m - sg.e)[f] ** 2).sum(1)) <= tol).sum()) for sg, f in zip(segs, free))
    n_free = sum(int(f.sum()) for f in free)
    screen = _Screen(segs, free, sample)
    agree, digests = _screen_models(world, segs, screen, fam, up, tol, progress)
    on_screen = agree.sum(1)
    order = sorted(range(len(fam)), key=lambda j: -int(on_screen[j]))
    lead = order[:leaders] if screen.screened else order[:1]
    full = dict(zip(lead, _full_models(world, segs, [fam[j] for j in lead], up, tol, progress)))
    score = {}
    for j in range(len(fam)):
        if screen.screened and j in full:
            score[j] = (full[j][0].sum() / max(n_rows, 1), n_rows)
        elif screen.screened:  # estimate from the screened sample
            est = on_screen[j] / max(screen.size, 1) * screen.n_contact + free_agree
            score[j] = (est / max(n_rows, 1), screen.size + n_free)
        else:
            score[j] = ((on_screen[j] + free_agree) / max(n_rows, 1), n_rows)
    ranked = sorted(range(len(fam)), key=lambda j: (j not in full if screen.screened else False, -score[j][0]))
    fits = [ModelFit(fam[j], float(score[j][0]), int(score[j][1])) for j in ranked]
    for r, j in enumerate(ranked):
        fits[r].tie = next(q for q, k in enumerate(ranked) if digests[k] == digests[j]
                           and (k not in full or j not in full or full[k][1] == full[j][1]))
    best = ranked[0]
    top = [j for j in ranked if score[j][0] == score[best][0]]
    vec = (lambda j: full[j][0]) if screen.screened else (lambda j: agree[j])
    decided = len(top) == 1 or any(not np.array_equal(vec(top[0]), vec(j)) for j in top[1:] if not
                                   (screen.screened and j not in full))
    same = agree.all(0) | ~agree.any(0)
    undecided = n_free + int(same.sum())
    if screen.screened and len(lead) > 1:
        fl = np.stack([full[j][0] for j in lead])
        undecided = int((fl.all(0) | ~fl.any(0)).sum())  # screened: the leaders judge every row
    return Explanation(trace.path, skin, skin_rows, n_rows, undecided, fits, decided,
                       _disagreements(trace, segs, full[best][2], limit), screen.screened)


def _disagreements(trace: Trace, segs, flags: np.ndarray, limit: int) -> list:
    """[{frame, entity, kind}] of the rows the best model flags, in frame order, up to ``limit``."""
    if not len(flags):
        return []
    fr = np.concatenate([sg.fr for sg in segs])
    col = np.concatenate([sg.col for sg in segs])
    out = []
    for i in np.flatnonzero(flags)[np.argsort(fr[np.flatnonzero(flags)], kind="stable")]:
        for kind in kinds_of(flags[i]):
            if len(out) >= limit:
                return out
            out.append({"frame": int(fr[i]), "entity": int(trace.ids[col[i]]), "kind": kind})
    return out


def model_label(st: SolverSettings) -> str:
    """A model of the family in a few words (tables of ``resweep explain`` and the viewer)."""
    if st.model == "slide":
        text = f"slide, {st.passes} pass" + ("es" if st.passes > 1 else "")
    elif st.model == "axis":
        text = f"axis {st.axis_order or 'up first'}"
    else:
        text = "pushout" + (f", substep {st.substep:g}" if st.substep else "")
    return text + (f", step {st.step_height:g}" if st.step_height else "")


def check_command(path: str, st: SolverSettings) -> str:
    """The ``resweep check`` command line that uses settings ``st``."""
    parts = ["resweep", "check", path, "--model", st.model, "--skin", f"{st.skin:g}"]
    if st.model == "slide":
        parts += ["--passes", str(st.passes)]
    if st.model == "axis" and st.axis_order:
        parts += ["--axis-order", st.axis_order]
    if st.model == "pushout":
        parts += ["--substep", f"{st.substep:g}", "--iterations", str(st.iterations)]
    if st.step_height:
        parts += ["--step-height", f"{st.step_height:g}"]
    if st.tolerance != SolverSettings().tolerance:
        parts += ["--tolerance", f"{st.tolerance:g}"]
    return " ".join(parts)
