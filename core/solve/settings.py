"""Settings of the reference solver and of the comparison: one frozen, validated record."""
from __future__ import annotations

from dataclasses import asdict, dataclass

import numpy as np

from resweep.core.errors import SettingsError

#: Float types a solve can run in.
PRECISIONS = ("float64", "float32")
#: Broad phases (see nb_slide): scan the whole swept box, walk the reachable voxels, or scan short
#: and walk long motions. All give identical results apart from ``candidates``.
SCAN, WALK, AUTO = 0, 1, 2
BROAD_PHASES = {"scan": SCAN, "walk": WALK, "auto": AUTO}
#: Row states written by a solve (nb_narrow defines the same codes for the kernels).
CLEAR, HIT, STARTED_INSIDE = 0, 1, 2
STATE_NAMES = {CLEAR: "clear", HIT: "hit", STARTED_INSIDE: "started_inside"}
#: Solver models (nb_models dispatches on the code): sweep and slide, per-axis clipping, push-out.
SLIDE, AXIS, PUSHOUT = 0, 1, 2
MODELS = {"slide": SLIDE, "axis": AXIS, "pushout": PUSHOUT}
#: Models that step up (``step_height``); push-out never does.
STEPPING_MODELS = ("slide", "axis")
AXES = "xyz"
#: Bound on push-out substeps per entity-frame, so a hostile motion cannot stall a check.
MAX_SUBSTEPS = 1024


def default_axis_order(up: str) -> str:
    """The up axis first, then the other two in x, y, z order (e.g. ``"yxz"`` when y is up)."""
    return up + "".join(a for a in AXES if a != up)


@dataclass(frozen=True)
class SolverSettings:
    """Reference solver and comparison settings.

    Attributes:
        tolerance: voxels; recorded and reference ends closer than this agree (default 0.01).
        skin: voxels kept between the box and a hit face (default 0.001), applied once to the end
            of the solve and capped at half the free clearance behind the box (see nb_slide).
        passes: sweep-and-slide passes per frame, 1..8 (default 3: in 3-D the slide of the slide can
            still be blocked).
        precision: "float64" or "float32"; float32 solves stay float32 throughout.
        model: "slide" (sweep and slide, default), "axis" (per-axis clipping) or "pushout" (move,
            then push out of overlaps).
        axis_order: for "axis", a permutation of "xyz", or None for the up axis first then the
            other two in x, y, z order (the up axis comes from the trace).
        substep: for "pushout", voxels; 0 = one move, else ceil(|motion| / substep) equal substeps
            (at most MAX_SUBSTEPS).
        iterations: for "pushout", push-out rounds after each (sub)step, 1..32 (default 4).
        step_height: voxels, 0 = off (default); for "slide" and "axis", the step-up height.
    """

    tolerance: float = 0.01
    skin: float = 0.001
    passes: int = 3
    precision: str = "float64"
    model: str = "slide"
    axis_order: str | None = None
    substep: float = 0.0
    iterations: int = 4
    step_height: float = 0.0

    def __post_init__(self):
        if not (np.isfinite(self.tolerance) and self.tolerance >= 0):
            raise SettingsError("tolerance", self.tolerance, "must be a finite number >= 0 (voxels)")
        if not (np.isfinite(self.skin) and 0 <= self.skin < 0.5):
            raise SettingsError("skin", self.skin, "must be a number in [0, 0.5) (voxels)")
        if not (isinstance(self.passes, (int, np.integer)) and 1 <= self.passes <= 8):
            raise SettingsError("passes", self.passes, "must be an integer in 1..8")
        if self.precision not in PRECISIONS:
            raise SettingsError("precision", self.precision, "must be float32 or float64")
        self._check_model()

    def _check_model(self):
        if self.model not in MODELS:
            raise SettingsError("model", self.model, "must be one of " + ", ".join(MODELS))
        if self.axis_order is not None and (not isinstance(self.axis_order, str)
                                            or sorted(self.axis_order) != list(AXES)):
            raise SettingsError("axis_order", self.axis_order, "must be a permutation of xyz (e.g. yxz)")
        if not (isinstance(self.substep, (int, float, np.floating, np.integer)) and np.isfinite(self.substep)
                and 0 <= self.substep <= 1000):
            raise SettingsError("substep", self.substep, "must be a number in [0, 1000] (voxels; 0 = no substeps)")
        if not (isinstance(self.iterations, (int, np.integer)) and 1 <= self.iterations <= 32):
            raise SettingsError("iterations", self.iterations, "must be an integer in 1..32")
        if not (isinstance(self.step_height, (int, float, np.floating, np.integer)) and np.isfinite(self.step_height)
                and 0 <= self.step_height <= 4):
            raise SettingsError("step_height", self.step_height, "must be a number in [0, 4] (voxels; 0 = off)")
        if self.step_height > 0 and self.model not in STEPPING_MODELS:
            raise SettingsError("step_height", self.step_height, "step-up applies to the slide and axis models only")

    def order_for(self, up: str) -> str:
        """The axis order in effect for a trace whose up axis is ``up``."""
        return self.axis_order or default_axis_order(up)

    def describe(self) -> str:
        """The model and its parameters in a few words (captions, reports, summaries)."""
        if self.model == "slide":
            text = f"sweep and slide, {self.passes} passes"
        elif self.model == "axis":
            text = f"per-axis clipping, order {self.axis_order or 'up first'}"
        else:
            text = "push-out, " + (f"substeps of {self.substep:g}" if self.substep else "no substeps") + \
                f", {self.iterations} iterations"
        if self.step_height:
            text += f", step-up {self.step_height:g}"
        return text

    @property
    def dtype(self) -> np.dtype:
        return np.dtype(self.precision)

    def as_dict(self) -> dict:
        return asdict(self)


def settings_from_dict(d) -> SolverSettings:
    """Settings from a stored :meth:`SolverSettings.as_dict` (older dicts without the model fields
    give the defaults for those); raises SettingsError, TypeError, KeyError or ValueError."""
    base = SolverSettings()
    return SolverSettings(float(d["tolerance"]), float(d["skin"]), int(d["passes"]), str(d["precision"]),
                          str(d.get("model", base.model)), d.get("axis_order") or None,
                          float(d.get("substep", base.substep)), int(d.get("iterations", base.iterations)),
                          float(d.get("step_height", base.step_height)))
