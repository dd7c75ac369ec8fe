"""The reference solver: settings, narrow phase, broad phases and solver models (numba kernels).

- ``settings.py``: :class:`SolverSettings` and the codes the kernels share (broad phases, states).
- ``nb_narrow.py``: moving box against static boxes (Ericson 2005, sec. 5.5), tie rules, cell scans.
- ``nb_walk.py``: broad phase of long sweeps (front-to-back region walk, Amanatides & Woo 1987).
- ``nb_slide.py``: the sweep-and-slide model (earliest contact, skin, slide, up to ``passes``).
A new solver model is one more ``nb_<model>.py`` here, beside ``nb_slide.py``, chosen by a setting.
"""
from resweep.core.solve.settings import BROAD_PHASES, PRECISIONS, STATE_NAMES, SolverSettings

__all__ = ["BROAD_PHASES", "PRECISIONS", "STATE_NAMES", "SolverSettings"]
