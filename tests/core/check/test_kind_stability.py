"""A divergence kind does not depend on the last bit of a coordinate.

Every divergent row of the bundled sample traces is re-solved (in float64, the default precision)
with each input component (start, motion, recorded end, half extents; x, y, z) moved by one float64
ulp, up and down, and must keep exactly its kinds (the discontinuity kind compares two frames and
is left out). A float32 ulp is not used: at 65536 voxels it is 0.008 voxel, nearly the tolerance.
"""
from __future__ import annotations

import numpy as np
import pytest

from resweep.core import SolverSettings, check_trace, open_trace, solve_rows
from resweep.core.analysis.frames import TraceSession
from resweep.core.check.kinds import BY_NAME, kinds_of

from paths import SAMPLES

ROW_KINDS = ~(1 << BY_NAME["discontinuity"].bit)


@pytest.mark.parametrize("name", ["quarry.h5", "quarry_far_f32.h5"])
def test_kinds_survive_one_ulp_of_any_input(name):
    settings = SolverSettings()
    with open_trace(SAMPLES / name) as tr:
        report = check_trace(tr, settings)
    rows = sorted({(d.frame, d.entity) for d in report.divergences if d.kind not in ("discontinuity", "invalid")})
    assert len(rows) >= 50  # the sample has many divergent rows of several kinds
    seen, checked = set(), 0
    with TraceSession(SAMPLES / name, settings) as session:
        for frame in sorted({f for f, _ in rows}):
            state = session.frame_state(frame)
            cols = [session.column_of(e) for f, e in rows if f == frame]
            base = {k: np.asarray(getattr(state, src)[cols], np.float64)
                    for k, src in (("start", "start"), ("motion", "motion"), ("end", "recorded_end"), ("half", "half"))}
            variants = [base]
            for field in base:
                for a in range(3):
                    for toward in (np.inf, -np.inf):
                        v = {k: x.copy() for k, x in base.items()}
                        v[field][:, a] = np.nextafter(v[field][:, a], toward)
                        variants.append(v)
            got = [solve_rows(session.world, v["start"], v["motion"], v["end"], v["half"], settings).flags & ROW_KINDS
                   for v in variants]
            for j, col in enumerate(cols):
                want = kinds_of(got[0][j])
                seen.update(want)
                for k, flags in enumerate(got[1:]):
                    assert kinds_of(flags[j]) == want, (name, frame, int(session.trace.ids[col]), k, want)
                checked += 1
    assert checked == len(rows)
    assert {"penetration", "tunneling", "snag", "mismatch"} <= seen
