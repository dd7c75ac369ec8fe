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
