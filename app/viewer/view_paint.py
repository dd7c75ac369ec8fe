"""Paints of the 3-D view while frames change fast: drafts, then one full-quality paint.

On a software-GL machine (Mesa llvmpipe) a render of the view with multisampling and
order-independent translucency costs several times one without, and a gradient background alone
costs about 6 ms of a 14 ms draft (measured: the empty view at 733 x 789, 8.4 ms with the
gradient, 2.2 ms with one colour). A change of frame (scrubbing, playing, stepping) is painted as
a draft: without either, on one colour (the gradient's middle) and at ``DRAFT_SCALE`` of the
widget's pixels (Qt scales the picture up; lines, points and text shrink alike, so they keep their
size on screen). ``SETTLE_MS`` after the last draft is on screen (and no other change came) one
more paint comes at full quality, so the picture that stays on screen, and every saved picture
(:meth:`ViewPaint.full`), is the full one. Other changes (camera, focus, settings) paint at full
quality at once. Paints asked for before the event loop gets to them merge into one (Qt's
``update``), so a drag never queues a render per step. (Drawing drafts while the user moves things
and a full picture once they stop is common practice in interactive 3-D viewers.)
"""
from __future__ import annotations

from PyQt6.QtCore import QObject, QTimer

SETTLE_MS = 200  # the full-quality paint waits this long after the last change of frame
#: Render pixels per widget pixel of a draft. At half size a draft of the 733 x 789 view rendered in
#: 5.7 ms against 9.7 (medians of 15, same scene; not a quarter: a render has fixed costs), and
#: the scrub benchmark's steps took 20 % less CPU; Qt scales the picture up to the widget.
DRAFT_SCALE = 0.5


class ViewPaint(QObject):
    """Schedules the paints of ``plotter`` (a :class:`~resweep.app.viewer.raster_view.RasterView`).

    Attributes:
        draft: bool, the render window is in draft settings now.
        full_samples: int, multisamples of a full-quality paint (the render window's own setting,
            read when the first draft starts: VTK may lower the asked-for count to what GL offers).
        drafts, fulls: int, draft and full-quality paints asked for so far (tests read them).
    """

    def __init__(self, plotter, settle_ms: int = SETTLE_MS, parent=None):
        super().__init__(parent)
        self.plotter = plotter
        self.full_samples = None
        self.draft = False
        self.drafts = self.fulls = 0
        self._oit: list = []  # (renderer, its own UseOIT, gradient on, background) while drafting
        self._timer = QTimer(self)
        self._timer.setSingleShot(True)
        self._timer.setInterval(settle_ms)
        self._timer.timeout.connect(self._settled)
        # The settle delay counts from when a draft is on screen, not from when it was asked for:
        # on a busy machine a draft can take longer to render than the delay itself.
        plotter.render_window.AddObserver("EndEvent", self._rendered)

    def request(self, draft: bool = False) -> None:
        """The scene changed: paint it at the next event-loop pass; ``draft`` (a change of frame):
        as a draft, with a full-quality paint once no draft was asked for during ``SETTLE_MS``."""
        if draft:
            self._set_draft(True)
            self.drafts += 1
            self._timer.stop()  # the full paint waits until this draft is shown
        elif self.draft:
            self.full()
            self.fulls += 1
        else:
            self.fulls += 1
        self.plotter.update()

    def full(self) -> None:
        """Full quality from now on (before a picture is read back); no paint is asked for."""
        self._timer.stop()
        self._set_draft(False)

    def _rendered(self, *_):
        if self.draft:
            self._timer.start()

    def _settled(self):
        if self.draft and self.plotter.render_window is not None:
            self.full()
            self.fulls += 1
            self.plotter.update()

    def _set_draft(self, on: bool):
        rw = self.plotter.render_window
        if on == self.draft or rw is None:  # None: the plotter is closed
            return
        self.draft = on
        if on:
            self.full_samples = int(rw.GetMultiSamples())
        rw.SetMultiSamples(0 if on else self.full_samples)
        self.plotter.set_render_scale(DRAFT_SCALE if on else 1.0)
        if on:
            rens = rw.GetRenderers()
            rens.InitTraversal()
            self._oit = [(r, r.GetUseOIT(), bool(r.GetGradientBackground()), r.GetBackground())
                         for r in (rens.GetNextItem() for _ in range(rens.GetNumberOfItems()))]
            for r, _, gradient, bottom in self._oit:
                r.UseOITOff()  # translucent parts blend unsorted: fine for a passing frame
                if gradient:  # one colour, the gradient's middle: a gradient costs a shaded full-view quad
                    top = r.GetBackground2()
                    r.GradientBackgroundOff()
                    r.SetBackground(*((a + b) / 2 for a, b in zip(bottom, top)))
        else:
            for r, use, gradient, bottom in self._oit:
                r.SetUseOIT(use)
                if gradient:
                    r.SetBackground(*bottom)
                    r.GradientBackgroundOn()
            self._oit = []
