"""resweep.core: the headless computation (trace format, voxel world, reference solver, check).

Never imports Qt, VTK or pyvista; usable from scripts, notebooks and CI. Importing it loads
neither h5py nor numba: each name below is imported on first use, so ``resweep info``,
importers and cluster schedulers do not pay for the solver.

Layers (lowest first; enforced by import-linter): ``errors``, ``jit`` < ``world``, ``codec`` <
``format`` < ``solve`` < ``check`` < ``analysis`` < ``demo``.
"""
from __future__ import annotations

import importlib

#: Public name -> module that defines it.
_EXPORTS = {
    "ResweepError": "errors", "SettingsError": "errors", "TraceFormatError": "errors",
    "FrameBlock": "format.reader", "Trace": "format.reader", "open_trace": "format.reader",
    "write_trace": "format.writer",
    "BlockShapes": "world.shapes", "shapes_from_lists": "world.shapes", "unit_cube_shapes": "world.shapes",
    "VoxelWorld": "world.voxel_world", "chunks_from_dense": "world.voxel_world",
    "SolverSettings": "solve.settings",
    "KINDS": "check.kinds", "SEVERITY": "check.kinds",
    "RowResults": "check.rows", "overlap_depths": "check.rows", "solve_rows": "check.rows",
    "BlockResult": "check.stream", "Divergence": "check.stream", "TraceReport": "check.stream",
    "check_trace": "check.stream",
}

__all__ = sorted(_EXPORTS)


def __getattr__(name):
    mod = _EXPORTS.get(name)
    if mod is None:
        raise AttributeError(f"module 'resweep.core' has no attribute {name!r}")
    value = getattr(importlib.import_module(f"resweep.core.{mod}"), name)
    globals()[name] = value
    return value


def __dir__():
    return __all__
