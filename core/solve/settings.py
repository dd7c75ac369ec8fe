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
    """

    tolerance: float = 0.01
    skin: float = 0.001
    passes: int = 3
    precision: str = "float64"

    def __post_init__(self):
        if not (np.isfinite(self.tolerance) and self.tolerance >= 0):
            raise SettingsError("tolerance", self.tolerance, "must be a finite number >= 0 (voxels)")
        if not (np.isfinite(self.skin) and 0 <= self.skin < 0.5):
            raise SettingsError("skin", self.skin, "must be a number in [0, 0.5) (voxels)")
        if not (isinstance(self.passes, (int, np.integer)) and 1 <= self.passes <= 8):
            raise SettingsError("passes", self.passes, "must be an integer in 1..8")
        if self.precision not in PRECISIONS:
            raise SettingsError("precision", self.precision, "must be float32 or float64")

    @property
    def dtype(self) -> np.dtype:
        return np.dtype(self.precision)

    def as_dict(self) -> dict:
        return asdict(self)
