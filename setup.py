"""Build hook: compile the solver kernels while the package is built, so the first run after
``pip install .`` loads them instead of compiling (see resweep/core/jit/nb_jit.py).

Everything else is declared in pyproject.toml. The kernels are compiled by a child Python that
imports the freshly built package from the build folder; if that fails (or RESWEEP_NO_PREBUILD is
set), the package installs without them and the first run compiles as before.
"""
import os
import shutil
import subprocess
import sys
from pathlib import Path

from setuptools import setup
from setuptools.command.build_py import build_py

WARM = """
import numpy as np
from resweep.core.check.rows import warm_up
from resweep.core.jit import nb_jit
for precision in ("float64", "float32"):
    for frame_dtype in ("float64", "float32"):
        warm_up(precision, np.dtype(frame_dtype))
print(nb_jit.CACHE_DIR)
"""


class BuildWithKernels(build_py):
    """``build_py`` that also compiles the kernels into ``resweep/core/jit/prebuilt/<digest>``."""

    def run(self):
        super().run()
        if os.environ.get("RESWEEP_NO_PREBUILD") or self.editable_mode:
            return
        lib = Path(self.build_lib).resolve()
        out = lib / "resweep" / "core" / "jit" / "prebuilt"
        shutil.rmtree(out, ignore_errors=True)  # an in-tree build folder may hold an older build's kernels
        # The child sees the built package first, then everything this build process sees (pip's
        # isolated build environment, where numpy and numba were installed for the build).
        path = os.pathsep.join([str(lib), *[p for p in sys.path if p]])
        env = dict(os.environ, RESWEEP_CACHE_DIR=str(out), PYTHONPATH=path)
        try:
            r = subprocess.run([sys.executable, "-c", WARM], env=env, capture_output=True, text=True, timeout=1800)
        except (OSError, subprocess.TimeoutExpired) as exc:
            print(f"resweep: kernels not prebuilt ({exc}); the first run will compile them", file=sys.stderr)
            return
        if r.returncode != 0:
            tail = (r.stderr.strip().splitlines() or ["?"])[-1]
            print(f"resweep: kernels not prebuilt ({tail}); the first run will compile them", file=sys.stderr)
            return
        for junk in out.rglob("*"):
            if junk.is_file() and junk.suffix not in (".nbi", ".nbc"):
                junk.unlink()  # the lock file and probes are not package data


setup(cmdclass={"build_py": BuildWithKernels})
