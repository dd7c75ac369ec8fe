"""Per solver model, a check's results do not depend on the thread count, the entity order or the
chunk order (each entity-frame is solved on its own; the models' tie rules use voxel order, not
visiting order). Compared by sha256 digests of the per-row results, as test_determinism does for
the default model."""
from __future__ import annotations

import numpy as np
import pytest

from resweep.core import SolverSettings
from test_determinism import FIELDS, _digest, _run, _trace_arrays, _write

MODELS = {
    "axis": SolverSettings(model="axis", step_height=0.6),
    "axis_zxy": SolverSettings(model="axis", axis_order="zxy"),
    "pushout": SolverSettings(model="pushout", substep=0.5),
    "slide_step": SolverSettings(step_height=0.5),
}
ALL = FIELDS + ("raised", "climb")


def _run_model(path, st, rows_per_block=1 << 17):
    return _run(path, rows_per_block=rows_per_block, settings=st, fields=ALL)


@pytest.fixture(scope="module")
def small(tmp_path_factory):
    kw = _trace_arrays(seed=9, frames=30, n=24)
    rng = np.random.default_rng(3)
    kw["grounded"] = rng.random(kw["active"].shape) < 0.5
    return kw, _write(tmp_path_factory.mktemp("mdet") / "m.h5", kw)


@pytest.mark.parametrize("name", sorted(MODELS))
def test_model_digest_same_for_threads_entity_and_chunk_order(small, tmp_path, name):
    import numba
    kw, path = small
    st = MODELS[name]
    before = numba.get_num_threads()
    try:
        numba.set_num_threads(1)
        one_json, one = _run_model(path, st, rows_per_block=500)
        numba.set_num_threads(min(2, numba.config.NUMBA_NUM_THREADS))
        two_json, two = _run_model(path, st)
    finally:
        numba.set_num_threads(before)
    assert one_json == two_json and _digest(one, ALL + ("frame", "id")) == _digest(two, ALL + ("frame", "id"))
    perm = np.random.default_rng(1).permutation(len(kw["entity_ids"]))
    pk = dict(kw)
    for k in ("start", "motion", "end", "active", "frame_half_extents", "grounded"):
        pk[k] = kw[k][:, perm]
    pk["entity_ids"], pk["half_extents"] = kw["entity_ids"][perm], kw["half_extents"][perm]
    cperm = np.random.default_rng(2).permutation(len(kw["chunk_origin"]))
    pk["chunk_origin"], pk["chunk_blocks"] = kw["chunk_origin"][cperm], kw["chunk_blocks"][cperm]
    _, three = _run_model(_write(tmp_path / "perm.h5", pk), st)
    assert _digest(one, ALL + ("frame", "id")) == _digest(three, ALL + ("frame", "id"))
    assert int(one["flags"].astype(bool).sum()) > 10  # the trace exercises the model's contacts
