"""Run alone by tests/test_conftest.py (not collected otherwise): in a fresh process, the session
fixture of tests/conftest.py has loaded the kernels before this first test body runs."""
from __future__ import annotations

import numpy as np

from resweep.core.check import nb_gather, nb_rows


def test_kernels_are_loaded_before_the_first_test_body(warm_kernels):
    # A numba dispatcher lists one signature per loaded specialisation; a kernel nobody has
    # called yet lists none. This test solves nothing itself, so whatever is loaded, the fixture loaded.
    floats = {str(sig[0].dtype) for sig in nb_rows.check_rows.signatures}
    assert floats == {"float64", "float32"}
    assert {str(sig[0].dtype) for sig in nb_rows.depth_rows.signatures} == {"float64", "float32"}
    frame_types = {str(sig[0].dtype) for sig in nb_gather.gather_rows.signatures}
    assert frame_types == {str(np.dtype(t)) for _, t in warm_kernels}
