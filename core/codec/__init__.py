"""Decoders of stored (filtered) HDF5 chunks; numba kernels, imported only when frames are read."""
