"""The reference solver's command-line options (check, snapshot, view, explain) and the settings
they make. Bad values leave as the core's typed SettingsError (one line, exit status 2)."""
from __future__ import annotations


def add_solver_opts(sp, model: bool = True) -> None:
    """Add the solver options to sub-parser ``sp`` (``model=False``: tolerance and precision only)."""
    sp.add_argument("--tolerance", type=float, default=0.01, metavar="T",
                    help="voxels; ends closer than this agree (default 0.01)")
    sp.add_argument("--precision", choices=("float64", "float32"), default="float64",
                    help="solve precision (default float64)")
    if not model:
        return
    sp.add_argument("--skin", type=float, default=0.001, metavar="E",
                    help="voxels kept between a box and a hit face (default 0.001)")
    sp.add_argument("--model", choices=("slide", "axis", "pushout"), default="slide",
                    help="reference model: sweep and slide (default), per-axis clipping, or move then push out")
    sp.add_argument("--passes", type=int, default=3, metavar="N", help="slide passes per frame (default 3)")
    sp.add_argument("--axis-order", default=None, metavar="ORDER",
                    help="axis model: order of the axes, a permutation of xyz (default: up axis first)")
    sp.add_argument("--substep", type=float, default=0.0, metavar="L",
                    help="pushout model: substep length in voxels (default 0 = one move)")
    sp.add_argument("--iterations", type=int, default=4, metavar="K",
                    help="pushout model: push-out rounds per (sub)step (default 4)")
    sp.add_argument("--step-height", type=float, default=0.0, metavar="H",
                    help="slide and axis models: step-up height in voxels (default 0 = off)")


def settings_from(args):
    """SolverSettings of parsed options (raises SettingsError on bad values)."""
    from resweep.core.solve.settings import SolverSettings
    return SolverSettings(tolerance=args.tolerance, skin=args.skin, passes=args.passes, precision=args.precision,
                          model=args.model, axis_order=args.axis_order.lower() if args.axis_order else None,
                          substep=args.substep, iterations=args.iterations, step_height=args.step_height)
