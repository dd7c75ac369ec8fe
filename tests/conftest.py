"""Session-wide fixtures: the solver kernels are loaded (or compiled) once, before the first test.

Without this the first test that solves anything pays for loading every kernel from the on-disk
cache (or compiling it after a kernel change), and ``pytest --durations`` blames that test. With
it the cost shows once, as the setup of the first test, and every test's own time is its own.
"""
from __future__ import annotations

import os

import numpy as np
import pytest

#: What the tests solve in: both precisions, frames stored as float32 or float64.
WARM = [(precision, frame_dtype) for precision in ("float64", "float32") for frame_dtype in (np.float64, np.float32)]


@pytest.fixture(scope="session", autouse=True)
def warm_kernels():
    """Load every kernel a check, a frame solve or a depth query uses, in both precisions."""
    from resweep.core.check.rows import warm_up
    for precision, frame_dtype in WARM:
        warm_up(precision, frame_dtype, depths=True)
    return WARM


@pytest.fixture(autouse=True)
def _restore_environment():
    """Put os.environ back after every test: code under test may export settings for its child
    processes (kernel cache folder, raised limits), and a later test's children must not inherit
    them."""
    saved = dict(os.environ)
    yield
    if os.environ != saved:
        os.environ.clear()
        os.environ.update(saved)
