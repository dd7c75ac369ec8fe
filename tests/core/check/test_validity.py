"""The row-validity rule: the numpy statement (core/check/validity.py) and the solver kernel agree,
and an invalid row says which field, component and value make it invalid.

The rule under test, as the README states it: a row is invalid when a component of its start,
motion or recorded end is not finite, or a half extent is not finite or not > 0, in the float type
the solve runs in.
"""
from __future__ import annotations

import numpy as np
import pytest

from resweep.core import SolverSettings, check_trace, open_trace
from resweep.core.analysis.describe import describe
from resweep.core.check import nb_rows
from resweep.core.check.kinds import INVALID
from resweep.core.check.rows import solve_rows
from resweep.core.check.validity import reason, row_problems, valid_rows
from resweep.core.world.shapes import unit_cube_shapes
from resweep.core.world.voxel_world import VoxelWorld

from trace_factory import write_rows

# Values that sit at the rule's edges: non-finite, zero and negative sizes, float32 overflow and
# underflow (3e38 is finite in float32, 4e38 is not; 1e-50 is > 0 in float64 and 0 in float32).
SPECIAL = np.array([np.nan, np.inf, -np.inf, 0.0, -0.0, -0.25, 1e-50, 1e-300, 3e38, 4e38, 1e300, 0.5, 2.0])


def random_rows(n: int, seed: int) -> np.ndarray:
    """float64 (4, n, 3): start, motion, end, half; about one component in six replaced by a SPECIAL."""
    rng = np.random.default_rng(seed)
    rows = rng.uniform(-3.0, 3.0, (4, n, 3))
    rows[3] = np.abs(rows[3]) + 0.05
    swap = rng.random(rows.shape) < 1 / 6
    rows[swap] = rng.choice(SPECIAL, swap.sum())
    return rows


def by_hand(row, dtype) -> bool:
    """The rule above, one component at a time in plain Python."""
    with np.errstate(over="ignore"):
        vals = [[float(np.asarray(x, dtype)) for x in field] for field in row]
    finite = all(np.isfinite(v) for field in vals for v in field)
    return finite and all(v > 0 for v in vals[3])


@pytest.mark.parametrize("precision", ["float64", "float32"])
def test_numpy_rule_kernel_and_solve_agree_on_random_rows(precision):
    rows = random_rows(4000, seed=11 if precision == "float64" else 12)
    dt = np.dtype(precision)
    want = np.array([by_hand(rows[:, i], dt) for i in range(rows.shape[1])])
    assert 0.2 < want.mean() < 0.8  # both outcomes well represented
    got = valid_rows(*rows, dtype=dt)
    assert np.array_equal(got, want)
    with np.errstate(over="ignore"):  # float32 overflow to inf is part of what is tested
        conv = rows.astype(dt)
    kernel = np.array([nb_rows.row_valid(*(tuple(conv[k, i]) for k in range(4))) for i in range(rows.shape[1])])
    assert np.array_equal(kernel, want)
    # And the whole solve path: the invalid flag is set exactly on the rows the rule rejects.
    world = VoxelWorld(1, np.zeros((1, 3), np.int64), np.ones((1, 1, 1, 1), np.uint16), unit_cube_shapes(2))
    with np.errstate(over="ignore"):
        res = solve_rows(world, *rows, SolverSettings(precision=precision))
    assert np.array_equal((res.flags & (1 << INVALID)) == 0, want)
    for i in range(rows.shape[1]):  # the reason is empty exactly for valid rows
        assert (reason(*rows[:, i], dtype=dt) == "") == want[i]


@pytest.mark.parametrize("row, dtype, problems", [
    (((1, 2, 3), (np.nan, 0, 0), (1, 2, 3), (0.5, 0.5, 0.5)), None, ["motion.x is NaN"]),
    (((1, np.inf, 3), (0, 0, 0), (1, 2, -np.inf), (0.5, 0.5, 0.5)), None, ["start.y is inf", "end.z is -inf"]),
    (((1, 2, 3), (0, 0, 0), (1, 2, 3), (0.5, -0.25, 0)), None,
     ["half_extents.y is -0.25 (must be > 0)", "half_extents.z is 0 (must be > 0)"]),
    (((1, 2, 3), (1e300, 0, 0), (1, 2, 3), (0.5, 0.5, 0.5)), "float32", ["motion.x is 1e+300, not finite in float32"]),
    (((1, 2, 3), (1e300, 0, 0), (1, 2, 3), (0.5, 0.5, 0.5)), "float64", []),
    (((1, 2, 3), (0, 0, 0), (1, 2, 3), (0.5, 1e-50, 0.5)), "float32",
     ["half_extents.y is 1e-50 (0 in float32) (must be > 0)"]),
])
def test_reason_names_field_component_and_value(row, dtype, problems):
    assert row_problems(*row, dtype=dtype) == problems
    assert reason(*row, dtype=dtype) == "; ".join(problems)


@pytest.fixture(scope="module")
def invalid_trace(tmp_path_factory):
    # Frame 0: entity 10 valid, entity 20 with motion.x NaN; frame 1: entity 20 with end.z inf.
    Y = 1.501
    start = [[[2.5, Y, 2.5], [4.5, Y, 2.5]], [[2.5, Y, 2.5], [4.5, Y, 2.5]]]
    motion = [[[0, 0, 0], [np.nan, 0, 0]], [[0, 0, 0], [0, 0, 0]]]
    end = [[[2.5, Y, 2.5], [4.5, Y, 2.5]], [[2.5, Y, 2.5], [4.5, Y, np.inf]]]
    return write_rows(tmp_path_factory.mktemp("valid") / "invalid.h5", start, motion, end)


def test_check_and_info_say_what_is_invalid(invalid_trace):
    with open_trace(invalid_trace) as tr:
        rep = check_trace(tr, SolverSettings())
        info = describe(tr)
    inv = [d for d in rep.divergences if d.kind == "invalid"]
    assert [(d.frame, d.entity, d.reason) for d in inv] == [(0, 20, "motion.x is NaN"), (1, 20, "end.z is inf")]
    assert all(d.reason is None for d in rep.divergences if d.kind != "invalid")
    assert info["invalid_entity_frames"] == 2
    assert "frame 0, entity 20: motion.x is NaN (reported as invalid)" in info["problems"]
    assert "frame 1, entity 20: end.z is inf (reported as invalid)" in info["problems"]
