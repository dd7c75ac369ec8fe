"""resweep.core: the headless computation (trace format, voxel world, reference solver, check).

Never imports Qt, VTK or pyvista; usable from scripts, notebooks and CI.
"""
from .check import KINDS, SEVERITY, BlockResult, Divergence, TraceReport, check_trace
from .errors import ResweepError, SettingsError, TraceFormatError
from .shapes import BlockShapes, shapes_from_lists, unit_cube_shapes
from .solver import RowResults, SolverSettings, overlap_depths, solve_rows
from .trace import FrameBlock, Trace, open_trace
from .world import VoxelWorld, chunks_from_dense
from .writer import write_trace

__all__ = [
    "KINDS", "SEVERITY", "BlockResult", "Divergence", "TraceReport", "check_trace",
    "ResweepError", "SettingsError", "TraceFormatError",
    "BlockShapes", "shapes_from_lists", "unit_cube_shapes",
    "RowResults", "SolverSettings", "overlap_depths", "solve_rows",
    "FrameBlock", "Trace", "open_trace", "VoxelWorld", "chunks_from_dense", "write_trace",
]
