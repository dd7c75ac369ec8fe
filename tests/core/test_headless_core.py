"""resweep.core never loads Qt, VTK or pyvista (also enforced by the import-linter contract)."""
from __future__ import annotations

import shutil
import subprocess
import sys
from pathlib import Path

from paths import ROOT

PROBE = """
import sys
import resweep.core as core
from resweep.core.analysis import describe
tr = core.open_trace(sys.argv[1])
core.check_trace(tr, core.SolverSettings())
describe.describe(tr)
bad = sorted(m for m in sys.modules if m.split('.')[0] in {'PyQt6', 'PyQt5', 'PySide6', 'vtk', 'vtkmodules',
                                                       'pyvista', 'pyvistaqt', 'qtpy'})
print(','.join(bad))
"""


def test_core_import_loads_no_gui_modules():
    r = subprocess.run([sys.executable, "-c", PROBE, str(ROOT / "sample_traces" / "quarry.h5")],
                       capture_output=True, text=True, timeout=300)
    assert r.returncode == 0, r.stderr
    assert r.stdout.strip() == ""


def test_cli_check_loads_no_gui_modules():
    code = ("import sys, runpy; sys.argv=['resweep','check','--quiet',sys.argv[1]];\n"
            "from resweep.app import cli\n"
            "try:\n    cli.main(sys.argv[1:])\nfinally:\n"
            "    print(','.join(sorted(m for m in sys.modules if m.split('.')[0] in {'PyQt6','vtk','vtkmodules','pyvista'})))")
    r = subprocess.run([sys.executable, "-c", code, str(ROOT / "sample_traces" / "quarry.h5")],
                       capture_output=True, text=True, timeout=300)
    assert r.stdout.strip().splitlines()[-1:] in ([], [""]), r.stdout


def test_import_linter_contract():
    exe = shutil.which("lint-imports") or str(Path(sys.executable).with_name("lint-imports"))
    r = subprocess.run([exe, str(ROOT / "pyproject.toml")], capture_output=True, text=True,
                       cwd=ROOT, timeout=300)
    assert r.returncode == 0, r.stdout + r.stderr
    assert "KEPT" in r.stdout and "BROKEN" not in r.stdout


INFO_PROBE = """
import sys
import resweep.core as core
from resweep.core.analysis.describe import describe
with core.open_trace(sys.argv[1]) as tr:
    describe(tr)
print(','.join(sorted(m for m in sys.modules if m.split('.')[0] == 'numba')) or 'none')
"""


def test_core_import_and_info_load_no_numba():
    """``resweep info``, importers and schedulers must not pay for the solver's compiler."""
    r = subprocess.run([sys.executable, "-c", "import sys, resweep.core; print('numba' in sys.modules, "
                        "'h5py' in sys.modules)"], capture_output=True, text=True, timeout=120)
    assert r.returncode == 0, r.stderr
    assert r.stdout.split() == ["False", "False"]
    r = subprocess.run([sys.executable, "-c", INFO_PROBE, str(ROOT / "sample_traces" / "quarry.h5")],
                       capture_output=True, text=True, timeout=120)
    assert r.returncode == 0, r.stderr
    assert r.stdout.strip() == "none"


CACHE_PROBE = """
import sys
from pathlib import Path
import resweep.core as core
from resweep.core.check import nb_rows
from resweep.core.jit import nb_jit
core.check_trace(core.open_trace(sys.argv[1]), core.SolverSettings())
cache = Path(nb_rows.check_rows._cache._cache_path)
print(nb_jit.CACHE_DIR)
print(cache)
print(Path(nb_rows.__file__).resolve().parents[2])
"""


def test_kernels_cache_in_the_named_folder_never_in_the_package(tmp_path):
    """RESWEEP_CACHE_DIR names the cache folder; compiled kernels never land beside the sources."""
    import os
    env = dict(os.environ, RESWEEP_CACHE_DIR=str(tmp_path / "kc"))
    src = ROOT / "core"
    before = {p for p in src.rglob("*") if p.suffix in (".nbi", ".nbc")}
    r = subprocess.run([sys.executable, "-c", CACHE_PROBE, str(ROOT / "sample_traces" / "quarry.h5")],
                       capture_output=True, text=True, timeout=600, env=env)
    assert r.returncode == 0, r.stderr
    folder, cache, package = (Path(x) for x in r.stdout.split())
    assert folder.parent == tmp_path / "kc" and cache.is_relative_to(folder)
    assert list(cache.glob("*.nbi")), "the check compiled its kernels into the named folder"
    assert not cache.is_relative_to(package)
    assert {p for p in src.rglob("*") if p.suffix in (".nbi", ".nbc")} == before == set()
