"""First-pass time of impact of the reference solver against python-fcl continuous collision.

Reference: python-fcl 0.7 (bindings of FCL, the Flexible Collision Library), ``fcl.continuousCollide``
with translational motion (``CCDM_TRANS``) and conservative advancement
(``CCDC_CONSERVATIVE_ADVANCEMENT``), plus ``fcl.collide`` (discrete box-box test) to bracket the
contact time tightly. What the test relies on, found by experiment with python-fcl 0.7.0 and by
reading FCL's shape conservative-advancement loop:

- fcl counts closed contact: boxes whose faces just touch collide (``fcl.collide`` at gap 0 is a
  collision, at gap 1e-12 it is not, at penetration 1e-9 it is).
- The shape-shape conservative advancement stops once an advancement step is <= 1e-4 of the motion
  (``t_err`` is fixed at 1e-4 in FCL's ShapeConservativeAdvancementTraversalNode; the request's
  ``toc_err`` does not reach it: 1e-4, 1e-6 and 1e-8 gave identical answers). Advancement never
  steps past the contact, so fcl's time is early by up to ~1e-4 and never late (measured on 4000
  random pairs: fcl - exact in [-9.9e-5, +8e-15]).
- For the same reason fcl also reports a contact for a box that passes within about 1e-4 of the
  motion length of a block without touching it.
- GJK solver ``GST_INDEP`` is needed: with ``GST_LIBCCD`` (the default) box pairs gave wrong times
  (0.458 for an exact 0.375) or missed contacts.
- The moving box goes second (o2), the static block first (o1): with the moving box as o1, fcl
  missed 215 of 222 contacts whose motion was negative on all three axes; static-first missed none.

Our own definition differs in one documented way: only overlap of open interiors is contact. The
two definitions therefore disagree only for near-touching motions, which are skipped by a tight rule
(see ``_near_touching``) and counted.
"""
from __future__ import annotations

import fcl
import numpy as np

from solver_helpers import one_block_world, solve

N_PAIRS = 400
FCL_T_ERR = 1e-4  # FCL's fixed advancement stop (see module docstring)
EARLY_TOL = 2 * FCL_T_ERR  # fcl may be early by up to ~t_err; twice that leaves room for rounding
LATE_TOL = 1e-9  # fcl is never late beyond float rounding
BRACKET_DT = 1e-6  # time offset for the discrete fcl.collide bracket around our contact time


def _fcl_box(lo, hi):
    return fcl.CollisionObject(fcl.Box(*(hi - lo)), fcl.Transform((lo + hi) / 2))


def _fcl_toi(p0, m, h, blo, bhi):
    """(is_collide, time_of_contact) of the box (centre p0, half h) translating by m against the
    static box [blo, bhi], all world units."""
    static = _fcl_box(blo, bhi)
    moving = fcl.CollisionObject(fcl.Box(*(2 * h)), fcl.Transform(p0))
    req = fcl.ContinuousCollisionRequest(ccd_motion_type=fcl.CCDMotionType.CCDM_TRANS,
                                         gjk_solver_type=fcl.GJKSolverType.GST_INDEP,
                                         ccd_solver_type=fcl.CCDSolverType.CCDC_CONSERVATIVE_ADVANCEMENT)
    res = fcl.ContinuousCollisionResult()
    fcl.continuousCollide(static, fcl.Transform((blo + bhi) / 2), moving, fcl.Transform(p0 + m), req, res)
    return bool(res.is_collide), float(res.time_of_contact)


def _fcl_overlaps(c, h, blo, bhi):
    """fcl's discrete box-box test (closed contact)."""
    res = fcl.CollisionResult()
    fcl.collide(fcl.CollisionObject(fcl.Box(*(2 * h)), fcl.Transform(c)), _fcl_box(blo, bhi),
                fcl.CollisionRequest(), res)
    return bool(res.is_collision)


def _closed_hit(p, m, lo, hi):
    """Closed slab test of the ray p + t m, t in [0, 1], against the box [lo, hi] (float64)."""
    te, tx = 0.0, 1.0
    for a in range(3):
        if m[a] == 0:
            if not (lo[a] <= p[a] <= hi[a]):
                return False
            continue
        t1, t2 = sorted(((lo[a] - p[a]) / m[a], (hi[a] - p[a]) / m[a]))
        te, tx = max(te, t1), min(tx, t2)
    return te <= tx


def _near_touching(p, m, h, blo, bhi, eps):
    """True when growing or shrinking the Minkowski-expanded block by ``eps`` (world units) changes
    whether the motion reaches it: the motion only grazes an edge or face, or ends (nearly)
    touching. Here a closed and an open-interior contact definition legitimately differ, and so do
    we and fcl's tolerance band (module docstring)."""
    lo, hi = blo - h, bhi + h
    return _closed_hit(p, m, lo - eps, hi + eps) != _closed_hit(p, m, lo + eps, hi - eps)


def _random_pair(rng):
    """One static box (inside voxel v, shape within [0, 1]^3) and a moving box that starts at
    least 0.01 voxel away from it, aimed near it; some motions have zero components."""
    vs = float(rng.choice([1.0, 0.5]))
    v = rng.integers(-6, 6, 3)
    blo = rng.uniform(0.0, 0.7, 3)
    bhi = blo + rng.uniform(0.1, 1.0 - blo)
    wlo, whi = (v + blo) * vs, (v + bhi) * vs
    h = rng.uniform(0.05, 0.8, 3) * vs
    while True:
        p0 = (wlo + whi) / 2 + rng.uniform(-3.5, 3.5, 3) * vs
        if not np.all((wlo - h - 0.01 * vs < p0) & (p0 < whi + h + 0.01 * vs)):
            break
    target = rng.uniform(wlo - h, whi + h)
    m = (target - p0) * rng.uniform(0.3, 2.0) + rng.normal(0.0, 0.4, 3) * vs
    if rng.random() < 0.25:  # exercise the parallel-slab branch of the slab test
        a = rng.integers(0, 3)
        m[a] = 0.0
    return vs, v, (blo, bhi), (wlo, whi), h, p0, m


def test_first_pass_toi_matches_fcl_ccd():
    rng = np.random.default_rng(20250107)
    compared = hits = skipped = 0
    worst_early = 0.0
    for _ in range(N_PAIRS):
        vs, v, local_box, (wlo, whi), h, p0, m = _random_pair(rng)
        eps = FCL_T_ERR * np.linalg.norm(m) * 2 + 1e-9 * vs
        if _near_touching(p0, m, h, wlo, whi, eps):
            skipped += 1
            continue
        world = one_block_world(np.concatenate(local_box), v, voxel_size=vs)
        res = solve(world, p0, m, h, skin=0.0, passes=1)
        assert res.state[0] != 2, "generator places every start outside the block"
        ours_hit = bool(res.block[0, 0] >= 0)
        fcl_hit, fcl_t = _fcl_toi(p0, m, h, wlo, whi)
        case = f"p0={p0.tolist()} m={m.tolist()} h={h.tolist()} box=[{wlo.tolist()}, {whi.tolist()}]"
        assert ours_hit == fcl_hit, case
        compared += 1
        if not ours_hit:
            assert res.toi[0, 0] == 1.0
            continue
        hits += 1
        t = float(res.toi[0, 0])
        assert t - EARLY_TOL <= fcl_t <= t + LATE_TOL, f"{case}: ours {t}, fcl {fcl_t}"
        worst_early = max(worst_early, t - fcl_t)
        # Tight check with fcl's discrete test: apart just before our time, overlapping just after.
        if t - BRACKET_DT > 0:
            assert not _fcl_overlaps(p0 + (t - BRACKET_DT) * m, h, wlo, whi), case
        assert _fcl_overlaps(p0 + (t + BRACKET_DT) * m, h, wlo, whi), case
    # The skip rule must stay a small minority, and both outcomes must be well represented.
    assert compared >= 0.95 * N_PAIRS, (compared, skipped)
    assert hits >= 0.3 * compared and compared - hits >= 0.2 * compared, (hits, compared)
    assert worst_early <= FCL_T_ERR * 1.01  # fcl's early bias stays within its documented step


def test_fcl_and_resweep_agree_on_book_case():
    # Ericson (2005) sec. 5.5-style case, arithmetic ours: box half 0.5 at x = 0 moving +4 toward the
    # unit block x in [2, 3]: expanded slab [1.5, 3.5], t = 1.5 / 4 = 0.375. fcl hits it exactly
    # because the separating direction is a face normal (one advancement step).
    p0, m, h = np.array([0.0, 0.5, 0.5]), np.array([4.0, 0.0, 0.0]), np.full(3, 0.5)
    res = solve(one_block_world((0, 0, 0, 1, 1, 1), (2, 0, 0)), p0, m, h)
    fcl_hit, fcl_t = _fcl_toi(p0, m, h, np.array([2.0, 0, 0]), np.array([3.0, 1, 1]))
    assert fcl_hit and res.block[0, 0] == 1
    assert res.toi[0, 0] == 0.375 and abs(fcl_t - 0.375) < 1e-12
