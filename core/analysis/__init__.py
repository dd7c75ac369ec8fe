"""Questions asked of a whole trace or one frame, built on the check: ``describe`` (what
``resweep info`` shows) and ``frames`` (a trace's frames solved on demand, for pictures and the
viewer). Clips, comparisons of recordings and fits of the engine's model go here too."""
