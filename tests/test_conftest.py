"""The session fixture that warms the kernels (tests/conftest.py) does its job."""
from __future__ import annotations

import subprocess
import sys

from paths import ROOT


def test_kernels_are_loaded_before_the_first_test_of_a_fresh_session():
    # tests/warm_probe.py solves nothing and asserts the kernels are loaded; in a fresh process it
    # is the first and only test, so only the session fixture can have loaded them.
    r = subprocess.run([sys.executable, "-m", "pytest", "-q", "-p", "no:cacheprovider", "-p", "no:xvfb",
                        str(ROOT / "tests" / "warm_probe.py")], cwd=ROOT, capture_output=True, text=True,
                       timeout=600)
    assert r.returncode == 0, r.stdout + r.stderr
    assert "1 passed" in r.stdout
