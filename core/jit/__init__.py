"""Numba plumbing shared by every kernel module: typed constants, the kernel decorators, and the
per-user folder where compiled kernels are cached (never inside the installed package)."""
