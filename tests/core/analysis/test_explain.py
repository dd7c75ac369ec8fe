"""``explain`` picks the model that generated a trace.

Sources: the toy engines of core/demo/toy_models.py are written in plain Python from the issue's
rules (per-axis clipping with the up axis first and a 0.6 step; 0.5-voxel substepped push-out),
independently of the solver kernels, each with a deliberate bug that only touches a few rows. A
trace whose boxes never come near a solid cannot tell any model apart (every model ends at
start + motion), so explain must say it cannot decide.
"""
from __future__ import annotations

import numpy as np
import pytest

from resweep.core import open_trace, write_trace
from resweep.core.analysis.explain import explain_trace, family
from resweep.core.demo.terrace import simulate


@pytest.fixture(scope="module")
def traces(tmp_path_factory):
    d = tmp_path_factory.mktemp("explain")
    out = {}
    for engine in ("axis", "pushout"):
        write_trace(d / f"{engine}.h5", **simulate(engine))
        out[engine] = d / f"{engine}.h5"
    return out


def test_family_is_the_documented_one():
    fam = family(0.001)
    assert len(fam) == 4 * 4 + 6 * 4 + 2
    assert {(s.model, s.axis_order) for s in fam if s.model == "axis"} == {
        ("axis", o) for o in ("xyz", "xzy", "yxz", "yzx", "zxy", "zyx")}
    assert {s.substep for s in fam if s.model == "pushout"} == {0.0, 0.5}


def test_explain_picks_the_per_axis_stepper(traces):
    with open_trace(traces["axis"]) as tr:
        ex = explain_trace(tr)
    best = ex.best
    assert ex.decided
    assert (best.model, best.axis_order, best.step_height) == ("axis", "yxz", 0.6)
    assert ex.skin_estimate == pytest.approx(0.001, abs=1e-5) and ex.skin_rows > 20
    # the missing ceiling check shows up as the best model's disagreements
    kinds = {d["kind"] for d in ex.disagreements}
    assert "step_mismatch" in kinds
    assert ex.models[0].agree > ex.models[1].agree or ex.models[1].tie == 0


def test_explain_picks_the_substep_pusher(traces):
    with open_trace(traces["pushout"]) as tr:
        ex = explain_trace(tr)
    assert ex.decided
    assert (ex.best.model, ex.best.substep) == ("pushout", 0.5)
    assert {d["kind"] for d in ex.disagreements} >= {"grounded_mismatch"}  # the lagging flag


def test_explain_cannot_decide_without_contacts(tmp_path):
    F, N = 20, 3
    blocks = np.zeros((1, 8, 8, 8), np.uint8)
    blocks[0, 0, 0, 0] = 1  # one block far from the boxes
    start = np.tile(np.array([[4.0, 5.0, 4.0]]), (F, N, 1)) + np.arange(F)[:, None, None] * 0.01
    motion = np.full((F, N, 3), 0.01)
    path = tmp_path / "air.h5"
    write_trace(path, chunk_size=8, chunk_origin=np.zeros((1, 3)), chunk_blocks=blocks, entity_ids=np.arange(N),
                half_extents=np.full((N, 3), 0.3), time=np.arange(F) / 60, start=start, motion=motion,
                end=start + motion)
    with open_trace(path) as tr:
        ex = explain_trace(tr)
    assert not ex.decided
    assert ex.skin_estimate is None and ex.rows_undecided == ex.rows_used == F * N
    assert all(m.agree == 1.0 for m in ex.models)


def test_json_shape(traces):
    with open_trace(traces["pushout"]) as tr:
        doc = explain_trace(tr, frames=(0, 60), entities=[301]).as_json()
    assert set(doc) >= {"path", "skin_estimate", "rows_used", "rows_undecided", "models", "disagreements"}
    assert doc["rows_used"] <= 60
    for m in doc["models"]:
        assert set(m) >= {"model", "passes", "axis_order", "substep", "step_height", "agree", "rows"}
        assert 0 <= m["agree"] <= 1
        if m["model"] == "pushout":
            assert m["passes"] is None and m["axis_order"] is None and m["step_height"] is None
    agrees = [m["agree"] for m in doc["models"]]
    assert agrees == sorted(agrees, reverse=True)


def test_screening_on_a_sample_keeps_the_pick(traces):
    # With fewer screened rows than contact rows, the leaders are solved on every row.
    with open_trace(traces["pushout"]) as tr:
        full = explain_trace(tr)
        ex = explain_trace(tr, sample=150, leaders=2)
    assert ex.screened and not full.screened
    assert ex.best == full.best and ex.models[0].agree == full.models[0].agree
    assert ex.models[0].rows == full.models[0].rows == full.rows_used
