"""Bundled demo traces (package data); ``make_samples.py`` regenerates them."""


def demo_path() -> str:
    """The bundled demo trace (present after a plain pip install)."""
    from importlib.resources import files
    return str(files("resweep.sample_traces") / "quarry.h5")
