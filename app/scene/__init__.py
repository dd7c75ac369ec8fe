"""Pictures without Qt: voxel meshes, styles, the 3-D view on any pyvista plotter (``viewport``),
the caption band and off-screen pictures (``picture``). Scene exports go here too."""
