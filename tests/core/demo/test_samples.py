"""The bundled demo traces are up to date with their generator and show what they are for."""
from __future__ import annotations


import h5py
import numpy as np

from resweep.core import SolverSettings, check_trace, open_trace
from resweep.core.demo.quarry import DEMO_FILES, write_demo_traces

from paths import SAMPLES as ROOT


def _contents(path):
    out = {}
    with h5py.File(path, "r") as f:
        def visit(name, obj):
            out[name + "@attrs"] = {k: np.asarray(v).tolist() for k, v in obj.attrs.items()}
            if isinstance(obj, h5py.Dataset):
                out[name] = obj[()]
        f.visititems(visit)
        out["@root"] = {k: np.asarray(v).tolist() for k, v in f.attrs.items()}
    return out


def test_sample_traces_up_to_date(tmp_path):
    write_demo_traces(tmp_path)
    for name in DEMO_FILES:
        fresh, shipped = _contents(tmp_path / name), _contents(ROOT / name)
        assert fresh.keys() == shipped.keys(), name
        for k in fresh:
            a, b = fresh[k], shipped[k]
            if isinstance(a, np.ndarray):
                assert a.dtype == b.dtype and a.shape == b.shape, (name, k)
                assert np.array_equal(a, b, equal_nan=a.dtype.kind == "f"), (name, k)
            else:
                assert a == b, (name, k)


def test_demo_shows_several_kinds_and_the_dash_tunnels():
    with open_trace(ROOT / "quarry.h5") as tr:
        report = check_trace(tr, SolverSettings())
    kinds = {k for k, n in report.counts.items() if n}
    assert {"tunneling", "penetration", "snag", "invalid", "discontinuity"} <= kinds
    dash = [d for d in report.divergences if d.entity == 102 and d.frame == 40]
    assert [d.kind for d in dash] == ["tunneling"]
    # The dasher stops at the wall's face x = 20 minus half width 0.3 minus the skin 0.001.
    assert abs(dash[0].reference_end[0] - 19.699) < 1e-9


def test_far_trace_is_float32_and_differs_by_precision():
    with open_trace(ROOT / "quarry_far_f32.h5") as tr:
        assert tr.frame_dtype == np.float32
        r64 = check_trace(tr, SolverSettings(precision="float64"))
        r32 = check_trace(tr, SolverSettings(precision="float32"))
    assert r64.counts != r32.counts  # precision far from the origin changes the verdicts
