"""The name of the setting that places the kernel cache, readable before numba loads.

A farm worker receives the cache folder as a setting and must export it before any kernel module
is imported (``nb_jit`` fixes its folder on import), so the name lives here, away from numba.
"""

#: Environment variable naming the kernel cache folder (a shared or per-node folder on a cluster).
CACHE_ENV = "RESWEEP_CACHE_DIR"
