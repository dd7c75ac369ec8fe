"""The divergence strip's pixel values, kept up to date as the re-solve streams (Qt-free).

The strip shows the worst severity per pixel column over the visible frames (``TraceFlags.strip``).
:class:`StripBins` holds those values for one layout (width, visible range, entities, kind) and,
when frames change, recomputes only the pixels that show them: the cost of a streamed block is
proportional to the block, not to the trace.
"""
from __future__ import annotations

import numpy as np

from resweep.app.viewer.flags import UNSOLVED, TraceFlags, pixels_of_frames


class StripBins:
    """Per-pixel worst severity (int8 (pixels,), -1 unsolved) of ``flags`` over a layout.

    ``layout(pixels, f0, f1, columns, kind)`` sets what is shown (everything is recomputed when it
    changes); :meth:`refresh` brings the values up to date with the frames changed since the last
    call and says which pixels moved.
    """

    def __init__(self, flags: TraceFlags | None = None):
        self.flags: TraceFlags | None = None
        self.values = np.zeros(0, np.int8)
        self._layout = None
        self._dirty: tuple[int, int] | None = None
        self._full = True
        if flags is not None:
            self.attach(flags)

    def attach(self, flags: TraceFlags):
        """Show ``flags`` (a newly opened trace); listens to its changes."""
        self.flags = flags
        flags.subscribe(self._note)
        self._full = True

    def _note(self, lo: int, hi: int):
        if self._dirty is None:
            self._dirty = (lo, hi)
        else:
            self._dirty = (min(lo, self._dirty[0]), max(hi, self._dirty[1]))

    def layout(self, pixels: int, f0: int, f1: int, columns=None, kind: str | None = None) -> bool:
        """Set the layout; True when it differs from the last one (the values are then recomputed
        in full by the next :meth:`refresh`). ``columns`` None or every column: all entities."""
        cols = None if columns is None else tuple(columns)
        if self.flags is not None and cols is not None and len(cols) == self.flags.entity_count:
            cols = None
        key = (int(pixels), int(f0), int(f1), cols, kind)
        if key == self._layout:
            return False
        self._layout = key
        self._full = True
        return True

    def invalidate(self):
        """Recompute every pixel at the next :meth:`refresh` (e.g. the image was made afresh)."""
        self._full = True

    def refresh(self) -> tuple[int, int] | None:
        """Recompute what changed; returns the pixel range ``(i0, i1)`` that may differ from
        before (all pixels after a layout change), or None when nothing changed."""
        if self._layout is None:
            return None
        pixels, f0, f1, cols, kind = self._layout
        if self.flags is None or f1 <= f0:
            self.values = np.full(max(0, pixels), UNSOLVED, np.int8)
            self._full, self._dirty = False, None
            return (0, len(self.values))
        if self._full:
            self.values = self.flags.strip(pixels, f0, f1, cols, kind)
            self._full, self._dirty = False, None
            return (0, pixels)
        if self._dirty is None:
            return None
        lo, hi = max(self._dirty[0], f0), min(self._dirty[1], f1)
        self._dirty = None
        i0, i1 = pixels_of_frames(lo - f0, hi - f0, f1 - f0, pixels)
        if i1 <= i0:
            return None
        self.values[i0:i1] = self.flags.strip(pixels, f0, f1, cols, kind, i0, i1)
        return (i0, i1)
