"""The reference solver's command-line options (check, snapshot, view, explain) and the settings
they make. Bad values leave as the core's typed SettingsError (one line, exit status 2)."""
from __future__ import annotations


#: Option destinations that are SolverSettings fields (the viewer overrides only those given).
SOLVER_OPTIONS = ("tolerance", "skin", "passes", "precision", "model", "axis_order", "substep", "iterations",
                  "step_height")


def add_solver_opts(sp, model: bool = True, remembered: bool = False) -> None:
    """Add the solver options to sub-parser ``sp`` (``model=False``: tolerance and precision only).
    With ``remembered`` (the viewer) an option not given is None and the viewer's remembered
    setting applies."""
    def dflt(value):
        return None if remembered else value

    def said(value):
        return "the viewer's last setting" if remembered else str(value)
    sp.add_argument("--tolerance", type=float, default=dflt(0.01), metavar="T",
                    help=f"voxels; ends closer than this agree (default {said(0.01)})")
    sp.add_argument("--precision", choices=("float64", "float32"), default=dflt("float64"),
                    help=f"solve precision (default {said('float64')})")
    if not model:
        return
    sp.add_argument("--skin", type=float, default=dflt(0.001), metavar="E",
                    help=f"voxels kept between a box and a hit face (default {said(0.001)})")
    sp.add_argument("--model", choices=("slide", "axis", "pushout"), default=dflt("slide"),
                    help="reference model: sweep and slide, per-axis clipping, or move then push out "
                         f"(default {said('slide')})")
    sp.add_argument("--passes", type=int, default=dflt(3), metavar="N",
                    help=f"slide passes per frame (default {said(3)})")
    sp.add_argument("--axis-order", default=None, metavar="ORDER",
                    help="axis model: order of the axes, a permutation of xyz (default: up axis first)")
    sp.add_argument("--substep", type=float, default=dflt(0.0), metavar="L",
                    help=f"pushout model: substep length in voxels (default {said('0 = one move')})")
    sp.add_argument("--iterations", type=int, default=dflt(4), metavar="K",
                    help=f"pushout model: push-out rounds per (sub)step (default {said(4)})")
    sp.add_argument("--step-height", type=float, default=dflt(0.0), metavar="H",
                    help=f"slide and axis models: step-up height in voxels (default {said('0 = off')})")


def settings_from(args):
    """SolverSettings of parsed options (raises SettingsError on bad values); options left None
    keep the settings' defaults."""
    from resweep.core.solve.settings import SolverSettings
    given = {k: getattr(args, k) for k in SOLVER_OPTIONS if getattr(args, k, None) is not None}
    if given.get("axis_order"):
        given["axis_order"] = given["axis_order"].lower()
    return SolverSettings(**given)
