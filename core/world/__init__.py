"""The voxel world: block shapes, the chunk hash, edits over time (``VoxelWorld``), the form the
kernels read (``kernel``) and the world kernels (``nb_world``: chunk lookup, ranges, overlap depth)."""
