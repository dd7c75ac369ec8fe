"""A hard dependency is imported by the tests, never ``importorskip``-ped: a broken install of
one must fail the suite, not skip the tests that need it."""
from __future__ import annotations

import re
import tomllib

from paths import ROOT


def hard_dependencies() -> set[str]:
    deps = tomllib.loads((ROOT / "pyproject.toml").read_text())["project"]["dependencies"]
    names = {re.split(r"[<>=!~ \[;]", d, maxsplit=1)[0].lower() for d in deps}
    return names | {"vtk", "vtkmodules"}  # pyvista's own hard dependency, imported as these


def test_no_test_skips_on_a_missing_hard_dependency():
    assert {"pyvista", "numpy", "h5py", "pyqt6"} <= hard_dependencies()
    found = []
    for path in sorted((ROOT / "tests").rglob("*.py")):
        if path.name == "test_hard_dependencies.py":  # this file names the pattern it looks for
            continue
        for m in re.finditer(r"importorskip\(\s*['\"]([\w.]+)['\"]", path.read_text()):
            if m.group(1).split(".")[0].lower() in hard_dependencies():
                found.append(f"{path.relative_to(ROOT)}: importorskip({m.group(1)!r})")
    assert found == []

