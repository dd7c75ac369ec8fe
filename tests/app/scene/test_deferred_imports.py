"""Deferred imports: pictures never load matplotlib's pyplot; a deferred module still works when used.

Each check runs in a fresh interpreter, since this test process may have imported anything.
"""
from __future__ import annotations

import subprocess
import sys


def run_py(code: str) -> str:
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=300)
    assert r.returncode == 0, r.stderr
    return r.stdout.strip()


def test_an_off_screen_plotter_with_our_viewport_loads_no_pyplot():
    out = run_py(
        "import sys\n"
        "from resweep.app.scene.picture import PictureMaker\n"
        "import pyvista as pv\n"
        "p = pv.Plotter(off_screen=True, window_size=(64, 48))\n"
        "from resweep.app.scene.viewport import Viewport\n"
        "Viewport(p)\n"
        "p.render()\n"
        "print(sorted(m for m in ('matplotlib.pyplot', 'matplotlib.figure', 'matplotlib.axes')"
        " if type(sys.modules.get(m)).__name__ == 'module'))\n")
    assert out == "[]"


def test_a_deferred_module_imports_on_first_use_and_then_behaves_as_itself():
    out = run_py(
        "import sys\n"
        "from resweep.app.scene.deferred_imports import defer_plot_modules\n"
        "assert 'tabnanny' not in sys.modules\n"
        "defer_plot_modules(('tabnanny', 'no_such_module_here'))\n"
        "import tabnanny as t\n"
        "before = type(sys.modules['tabnanny']).__name__\n"
        "check = t.check\n"  # first attribute use imports the real module
        "import tabnanny\n"
        "print(before, type(sys.modules['tabnanny']).__name__, check is tabnanny.check,"
        " 'no_such_module_here' in sys.modules)\n")
    assert out == "_Deferred module True False"


def test_an_already_imported_module_is_left_alone():
    out = run_py(
        "import sys, matplotlib.pyplot as plt\n"
        "from resweep.app.scene.deferred_imports import defer_plot_modules\n"
        "defer_plot_modules()\n"
        "print(sys.modules['matplotlib.pyplot'] is plt)\n")
    assert out == "True"


def test_deferring_pyplot_does_not_import_matplotlib():
    # The placeholder's spec is found from the package's folder, without running its __init__.
    out = run_py(
        "import sys, importlib.util\n"
        "from resweep.app.scene.deferred_imports import defer_plot_modules\n"
        "defer_plot_modules()\n"
        "placeholder = sys.modules['matplotlib.pyplot']\n"
        "print('matplotlib' in sys.modules, type(placeholder).__name__, placeholder.__spec__.name)\n"
        "import matplotlib.pyplot as plt\n"
        "plt.figure\n"
        "real = importlib.util.find_spec('matplotlib.pyplot')\n"
        "print(type(sys.modules['matplotlib.pyplot']).__name__, real.origin == placeholder.__spec__.origin)\n")
    assert out.splitlines() == ["False _Deferred matplotlib.pyplot", "module True"]
