"""Keep pyvista's plotting module from importing matplotlib's pyplot until something uses it.

``pyvista.plotting`` imports ``matplotlib.pyplot`` at import time for colour cycles and charts;
resweep uses neither, and pyplot with its figures and axes is about a sixth of a warm
``resweep snapshot``'s CPU time. A placeholder module stands in for it until an attribute is
first read, which then imports the real module: nothing changes for code that does use it, it
only pays later. (A module imported with ``from M import name`` cannot be deferred so: the name
is read at once. pyvista's charts import the Agg canvas that way.)
"""
from __future__ import annotations

import importlib
import importlib.machinery
import importlib.util
import sys
import types

DEFERRED = ("matplotlib.pyplot",)


class _Deferred(types.ModuleType):
    """Stands in for a module not imported yet; the first attribute read imports it."""

    def __getattr__(self, attr):  # only called for attributes the placeholder does not have
        real = sys.modules.get(self.__name__)
        if real is self or real is None:
            sys.modules.pop(self.__name__, None)
            real = importlib.import_module(self.__name__)
        return getattr(real, attr)


def defer_plot_modules(names=DEFERRED) -> None:
    """Put placeholders for ``names`` in ``sys.modules`` (those not imported yet and installed)."""
    for name in names:
        if name in sys.modules:
            continue
        spec = _spec_without_import(name)
        if spec is None:
            continue
        mod = _Deferred(name)
        mod.__spec__ = spec  # the import system reads it; it must not trigger the real import
        mod.__file__ = spec.origin
        sys.modules[name] = mod


def _spec_without_import(name: str):
    """The module spec of ``name``, found without importing its parent packages (``find_spec``
    of a dotted name imports the parents, and matplotlib's package alone is a tenth of a
    picture's start-up); None when it is not installed."""
    head, _, _ = name.partition(".")
    try:
        spec = importlib.util.find_spec(head) if head not in sys.modules else sys.modules[head].__spec__
    except (ImportError, ValueError):
        return None
    parts = name.split(".")
    for i in range(1, len(parts)):
        dotted = ".".join(parts[: i + 1])
        parent = sys.modules.get(".".join(parts[:i]))
        if parent is not None and not isinstance(parent, _Deferred):
            spec = importlib.util.find_spec(dotted)
        elif spec is None or spec.submodule_search_locations is None:
            return None
        else:
            spec = importlib.machinery.PathFinder.find_spec(dotted, list(spec.submodule_search_locations))
    return spec
