"""The viewer's playback model: what is shown, independent of any widget.

Widgets write to one :class:`Playback` and listen to its change events; nothing here imports Qt,
so the rules (clamping, rate limits, selection) are testable on their own.

Events (the first argument of every listener call):
    ``"trace"``     a new frame count / entity list was adopted (everything else was reset),
    ``"frame"``     current frame changed,
    ``"focus"``     focused entity column changed (the one the camera and frame panel follow),
    ``"selection"`` set of entity columns the divergence strip summarises changed,
    ``"settings"``  solver settings changed,
    ``"play"``      play state changed, ``"rate"`` playback rate changed,
    ``"filter"``    divergence kind filter changed (None = every kind).
"""
from __future__ import annotations

from dataclasses import replace

from resweep.core.check.kinds import KINDS
from resweep.core.solve.settings import SolverSettings

#: Playback rates offered, multiples of the recorded rate.
RATES = (0.25, 0.5, 1.0, 2.0, 4.0)
MIN_RATE, MAX_RATE = RATES[0], RATES[-1]


class Playback:
    """Current frame, focused and selected entities, solver settings, play state and rate, kind filter.

    Attributes (read them; change them through the setters so listeners hear about it):
        frame_count: int F (0 before a trace is adopted); entity_count: int N.
        frame: int in [0, F-1]. focus: entity column or None. selection: tuple of columns (empty = all).
        settings: SolverSettings. playing: bool. rate: float in [0.25, 4]. kind: str in KINDS or None.
    """

    def __init__(self, settings: SolverSettings = SolverSettings()):
        self.frame_count = 0
        self.entity_count = 0
        self.frame = 0
        self.focus: int | None = None
        self.selection: tuple[int, ...] = ()
        self.settings = settings
        self.playing = False
        self.rate = 1.0
        self.kind: str | None = None
        self._listeners: list = []

    # -- listeners -------------------------------------------------------------------------
    def subscribe(self, listener):
        """Call ``listener(event, playback)`` on every change; returns a function that unsubscribes."""
        self._listeners.append(listener)

        def unsubscribe():
            if listener in self._listeners:
                self._listeners.remove(listener)
        return unsubscribe

    def _emit(self, event: str):
        for fn in list(self._listeners):
            fn(event, self)

    # -- trace -----------------------------------------------------------------------------
    def adopt(self, frame_count: int, entity_count: int, frame: int = 0, focus: int | None = None):
        """Reset for a newly opened trace: stop playing, clear the selection, keep settings and rate."""
        self.frame_count = max(0, int(frame_count))
        self.entity_count = max(0, int(entity_count))
        self.frame = self._clamp(frame)
        self.focus = focus if focus is not None and 0 <= focus < self.entity_count else None
        self.selection = ()
        self.playing = False
        self._emit("trace")

    def _clamp(self, frame: int) -> int:
        return min(max(0, int(frame)), max(0, self.frame_count - 1))

    # -- frame -----------------------------------------------------------------------------
    def set_frame(self, frame: int) -> bool:
        """Move to ``frame`` (clamped to the trace); True when the frame changed."""
        f = self._clamp(frame)
        if f == self.frame:
            return False
        self.frame = f
        self._emit("frame")
        return True

    def step(self, n: int = 1) -> bool:
        """Move ``n`` frames (negative = back); stepping stops playback, like any manual move."""
        self.set_playing(False)
        return self.set_frame(self.frame + n)

    def first(self) -> bool:
        self.set_playing(False)
        return self.set_frame(0)

    def last(self) -> bool:
        self.set_playing(False)
        return self.set_frame(self.frame_count - 1)

    @property
    def at_end(self) -> bool:
        return self.frame >= self.frame_count - 1

    # -- entities --------------------------------------------------------------------------
    def set_focus(self, column: int | None):
        """Focus entity ``column`` (None = none); out-of-range columns are ignored."""
        if column is not None and not 0 <= int(column) < self.entity_count:
            return
        column = None if column is None else int(column)
        if column != self.focus:
            self.focus = column
            self._emit("focus")

    def set_selection(self, columns):
        """Entity columns the divergence strip summarises (empty = every entity)."""
        sel = tuple(sorted({int(c) for c in columns if 0 <= int(c) < self.entity_count}))
        if sel != self.selection:
            self.selection = sel
            self._emit("selection")

    @property
    def strip_columns(self) -> tuple[int, ...]:
        """The selected columns, or every column when nothing is selected."""
        return self.selection or tuple(range(self.entity_count))

    # -- solver settings -------------------------------------------------------------------
    def set_settings(self, settings: SolverSettings):
        if settings != self.settings:
            self.settings = settings
            self._emit("settings")

    def update_settings(self, **changes):
        """Replace some settings fields; raises core SettingsError for out-of-range values."""
        self.set_settings(replace(self.settings, **changes))

    # -- play ------------------------------------------------------------------------------
    def set_playing(self, playing: bool):
        playing = bool(playing) and self.frame_count > 1
        if playing != self.playing:
            if playing and self.at_end:
                self.frame = 0  # playing from the last frame starts over
                self._emit("frame")
            self.playing = playing
            self._emit("play")

    def toggle_play(self):
        self.set_playing(not self.playing)

    def set_rate(self, rate: float):
        """Playback rate as a multiple of the recorded rate, clamped to [0.25, 4]."""
        r = min(MAX_RATE, max(MIN_RATE, float(rate)))
        if r != self.rate:
            self.rate = r
            self._emit("rate")

    def faster(self):
        """Next offered rate up (e.g. 1 -> 2)."""
        up = [r for r in RATES if r > self.rate]
        self.set_rate(up[0] if up else MAX_RATE)

    def slower(self):
        down = [r for r in RATES if r < self.rate]
        self.set_rate(down[-1] if down else MIN_RATE)

    # -- divergence filter -----------------------------------------------------------------
    def set_kind(self, kind: str | None):
        """Restrict divergence jumps and marks to one kind (None = every kind)."""
        if kind is not None and kind not in KINDS:
            raise ValueError(f"unknown divergence kind {kind!r}; kinds are {', '.join(KINDS)}")
        if kind != self.kind:
            self.kind = kind
            self._emit("filter")
