"""The ``resweep view`` main window: viewport in the centre, dockable panels, scrub bar, status bar.

Data flow: widgets write to the :class:`Playback` model; the window listens, asks the session for
the frame state (one small re-solve) and hands it to the viewport and the Frame panel. Opening a
trace and re-solving the whole trace run on :class:`TraceWorker` threads; divergence marks fill
the timeline block by block while the first frame is already on screen.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
from PyQt6.QtCore import QSettings, Qt
from PyQt6.QtGui import QAction, QColor, QGuiApplication, QImage, QKeySequence, QPalette
from PyQt6.QtWidgets import (QApplication, QDialog, QDockWidget, QFileDialog, QHeaderView, QLabel, QMainWindow,
                             QMessageBox, QProgressBar, QPushButton, QTableWidget, QTableWidgetItem, QVBoxLayout,
                             QWidget)

from resweep.core.analysis.describe import ended_early_line
from resweep.core.errors import ResweepError
from resweep.core.solve.settings import SolverSettings, settings_from_dict

from resweep.app.viewer.panels import EntitiesPanel, FramePanel, SettingsPanel
from resweep.app.viewer.playback import Playback
from resweep.app.viewer.report_md import frame_facts, report_markdown, snapshot_command
from resweep.app.viewer.flags import TraceFlags
from resweep.app.viewer.resolve import ResolveFeed
from resweep.app.viewer.hunt import HuntTools
from resweep.app.viewer.follow import RecordingFollower
from resweep.app.viewer.view_paint import ViewPaint
from resweep.app.viewer.timeline import ACCENT, GROOVE, INK, PANEL, Timeline, draw_icon
from resweep.app.viewer.worker import TraceWorker, error_line, off_thread, wait_for
from resweep.sample_traces import demo_path

ORG, APP = "resweep", "resweep view"
MAX_RECENT = 8
TRACE_FILTER = "resweep traces (*.h5 *.hdf5 *.trace);;All files (*)"


def default_session_factory(path, settings):
    from resweep.core.analysis.frames import TraceSession
    return TraceSession(path, settings)


class MainWindow(QMainWindow):
    """The viewer. ``store`` is the QSettings used for layout, recent files and solver settings;
    ``with_viewport=False`` replaces the 3-D view by a label (for machines without OpenGL)."""

    def __init__(self, store: QSettings | None = None, with_viewport: bool = True, session_factory=None):
        super().__init__()
        self.store = store if store is not None else QSettings(ORG, APP)
        self.setWindowTitle("resweep view")
        self.setWindowIcon(draw_icon("logo", size=64))
        self.setAcceptDrops(True)
        self.pb = Playback(self._stored_settings())
        self.session = None
        self.state = None  # FrameState on screen
        self.flags: TraceFlags | None = None
        self.worker = TraceWorker(session_factory or default_session_factory, self)
        self.follower = RecordingFollower(self)
        self._pending: dict = {}
        self.feed: ResolveFeed | None = None  # takes the background re-solve's results into the flags
        self._camera = "story"
        self._refreshing = False  # a frame is being solved off the GUI thread (see refresh_view)
        self._refresh_again = False
        self._frame_moved = False  # the refresh to come shows another frame (drawn as a draft)
        self._frame_cancel = False
        self._frame_thread = None
        self.plotter = None
        self.view_paint = None  # paint scheduling of the 3-D view (drafts while scrubbing)
        self.viewport = None
        self.view_options = None
        self._build_centre(with_viewport)
        self._build_docks()
        self._build_status()
        self._build_actions()
        self.hunt = HuntTools(self)  # go to, bookmarks, measuring, turntable, animation export
        self.pb.subscribe(self._on_playback)
        self.worker.loaded.connect(self._adopt)
        self.worker.load_failed.connect(self._load_failed)
        self.worker.progress.connect(self._on_progress)
        self.worker.block.connect(self._on_block)
        self.worker.solved.connect(self._on_solved)
        self.worker.solve_failed.connect(lambda m: self.status(f"background re-solve stopped: {m}"))
        self.worker.busy.connect(self._on_busy)
        self.resize(1560, 940)
        geo = self.store.value("window/geometry")
        if geo is not None:
            self.restoreGeometry(geo)
        st = self.store.value("window/state")
        if st is not None:
            self.restoreState(st)

    # -- construction --------------------------------------------------------------------------
    def _build_centre(self, with_viewport: bool):
        centre = QWidget(self)
        lay = QVBoxLayout(centre)
        lay.setContentsMargins(0, 0, 0, 0)
        lay.setSpacing(0)
        if with_viewport:
            from resweep.app.scene.viewport import ViewOptions, Viewport  # first: it defers pyplot
            from resweep.app.viewer.raster_view import RasterView
            # VTK renders off screen and the widget shows its picture as plain raster: a GL widget
            # would have Qt compose it through (software) GL on every paint (raster_view.py).
            # No render timer: the window asks for a paint when the scene changes.
            self.plotter = RasterView(centre)
            self.plotter.setFocusPolicy(Qt.FocusPolicy.ClickFocus)
            self.view_paint = ViewPaint(self.plotter, parent=self)
            self.viewport = Viewport(self.plotter)
            self.viewport.enable_inset()
            self.view_options = ViewOptions()
            lay.addWidget(self.plotter, 1)
        else:
            self.placeholder = QLabel("3-D view disabled", centre)
            self.placeholder.setAlignment(Qt.AlignmentFlag.AlignCenter)
            lay.addWidget(self.placeholder, 1)
        self.timeline = Timeline(self.pb, centre)
        self.timeline.setObjectName("timeline")
        lay.addWidget(self.timeline)
        self.setCentralWidget(centre)

    def _dock(self, title: str, name: str, widget, area=Qt.DockWidgetArea.RightDockWidgetArea) -> QDockWidget:
        d = QDockWidget(title, self)
        d.setObjectName(name)  # saveState keys docks by object name
        d.setWidget(widget)
        self.addDockWidget(area, d)
        return d

    def _build_docks(self):
        self.entities = EntitiesPanel(self.pb, self)
        self.frame_panel = FramePanel(self)
        self.settings_panel = SettingsPanel(self.pb, self)
        self.dock_entities = self._dock("Entities", "dock_entities", self.entities, Qt.DockWidgetArea.LeftDockWidgetArea)
        self.dock_frame = self._dock("Frame", "dock_frame", self.frame_panel)
        self.dock_settings = self._dock("Solver settings", "dock_settings", self.settings_panel)
        self.resizeDocks([self.dock_entities, self.dock_frame], [390, 500], Qt.Orientation.Horizontal)
        self.resizeDocks([self.dock_frame, self.dock_settings], [560, 200], Qt.Orientation.Vertical)

    def _build_status(self):
        sb = self.statusBar()
        self.status_label = QLabel("", self)
        self.progress = QProgressBar(self)
        self.progress.setMaximumWidth(220)
        self.progress.setFormat("re-solving %p%")
        self.cancel_button = QPushButton("Cancel", self)
        self.cancel_button.setToolTip("Stop the background re-solve (Esc)")
        self.cancel_button.clicked.connect(self.cancel_background)
        sb.addWidget(self.status_label, 1)
        sb.addPermanentWidget(self.progress)
        sb.addPermanentWidget(self.cancel_button)
        self.progress.hide()
        self.cancel_button.hide()

    def _act(self, menu, text, slot, keys=(), group="", checkable=False) -> QAction:
        a = QAction(text, self)
        if keys:
            a.setShortcuts([QKeySequence(k) for k in keys])
        a.setShortcutContext(Qt.ShortcutContext.WindowShortcut)
        a.setCheckable(checkable)
        a.triggered.connect(slot)
        a.setData(group)
        menu.addAction(a)
        self.addAction(a)  # shortcuts work with the menu bar hidden or a dock floating
        self.actions_list.append(a)
        return a

    def _build_actions(self):
        self.actions_list: list[QAction] = []
        m = self.menuBar()
        f = m.addMenu("&File")
        A = self._act
        A(f, "&Open trace…", self.open_dialog, ["Ctrl+O"], "File")
        self.recent_menu = f.addMenu("Open &recent")
        A(f, "Open the &demo trace", self.open_demo, ["Ctrl+D"], "File")
        f.addSeparator()
        A(f, "&Save picture…", self.save_picture_dialog, ["Ctrl+S"], "File")
        A(f, "&Copy report", self.copy_report, ["Ctrl+Shift+C"], "File")
        f.addSeparator()
        A(f, "&Quit", self.close, ["Ctrl+Q"], "File")
        p = m.addMenu("&Playback")
        A(p, "Play / pause", self.pb.toggle_play, ["Space"], "Playback")
        A(p, "Step forward", lambda: self.pb.step(1), ["Right", "."], "Playback")
        A(p, "Step back", lambda: self.pb.step(-1), ["Left", ","], "Playback")
        A(p, "Forward 10 frames", lambda: self.pb.step(10), ["PgDown"], "Playback")
        A(p, "Back 10 frames", lambda: self.pb.step(-10), ["PgUp"], "Playback")
        A(p, "First frame", self.pb.first, ["Home"], "Playback")
        A(p, "Last frame", self.pb.last, ["End"], "Playback")
        p.addSeparator()
        A(p, "Next divergence", lambda: self.timeline.jump(+1), ["Shift+Right", "N"], "Playback")
        A(p, "Previous divergence", lambda: self.timeline.jump(-1), ["Shift+Left", "P"], "Playback")
        A(p, "Next divergence kind filter", self.cycle_kind, ["K"], "Playback")
        A(p, "Faster", self.pb.faster, ["]"], "Playback")
        A(p, "Slower", self.pb.slower, ["["], "Playback")
        e = m.addMenu("&Entity")
        A(e, "Next entity", lambda: self.cycle_entity(1), ["E"], "Entity")
        A(e, "Previous entity", lambda: self.cycle_entity(-1), ["Shift+E"], "Entity")
        A(e, "Focus camera on entity", self.focus_camera, ["F"], "Entity")
        v = m.addMenu("&View")
        for key, preset in (("1", "follow"), ("2", "motion"), ("3", "top"), ("4", "side"), ("5", "story")):
            A(v, f"Camera: {preset}", lambda _=False, pr=preset: self.set_camera(pr), [key], "View")
        A(v, "Fit the whole world", self.fit, ["0"], "View")
        v.addSeparator()
        self.act_others = A(v, "Show other entities", self._toggle_opts, ["O"], "View", True)
        self.act_swept = A(v, "Show swept volume", self._toggle_opts, ["W"], "View", True)
        self.act_trail = A(v, "Show trail", self._toggle_opts, ["T"], "View", True)
        for a in (self.act_others, self.act_swept, self.act_trail):
            a.setChecked(True)
        v.addSeparator()
        self.act_follow = A(v, "Follow recording (pick up flushed frames)", self.follower.set_enabled, ["Ctrl+F"],
                            "View", True)
        self.act_newest = A(v, "Stay on the newest frame while following", self.follower.set_newest, [],
                            "View", True)
        v.addSeparator()
        for d in (self.dock_entities, self.dock_frame, self.dock_settings):
            v.addAction(d.toggleViewAction())
        sv = m.addMenu("&Solver")
        A(sv, "&Fit model to this trace…", self.fit_model_dialog, ["Ctrl+M"], "Solver")
        h = m.addMenu("&Help")
        A(h, "Keyboard shortcuts", self.show_shortcuts, ["F1", "?"], "Help")
        A(h, "Cancel background re-solve", self.cancel_background, ["Esc"], "Help")
        self._rebuild_recent()

    # -- opening -------------------------------------------------------------------------------
    def open_path(self, path, frame: int | None = None, entity_id: int | None = None):
        """Open ``path`` in the background; the current trace stays until the new one is ready."""
        self._pending = {"frame": frame, "entity": entity_id}
        self.status(f"opening {path} …")
        self.worker.load(str(path), self.pb.settings, frame or 0)

    def open_dialog(self):
        start = self.store.value("dialog/dir", str(Path.home()))
        path, _ = QFileDialog.getOpenFileName(self, "Open trace", start, TRACE_FILTER)
        if path:
            self.store.setValue("dialog/dir", str(Path(path).parent))
            self.open_path(path)

    def open_demo(self):
        self.open_path(demo_path())

    def _load_failed(self, path, message):
        self.status(f"could not open {Path(path).name}")
        QMessageBox.warning(self, "Cannot open trace", message)

    def _adopt(self, session, path):
        """A trace finished loading: show its first frame now, start the whole-trace re-solve."""
        try:
            first = session.frame_state(min(self._pending.get("frame") or 0, max(0, session.trace.frame_count - 1)))
        except Exception as exc:  # the GUI boundary: the trace cannot be shown, keep what we had
            session.close()
            self._load_failed(path, f"{path}: {error_line(exc)}")
            return
        del first  # cached by the session; proves the trace can be shown before anything changes
        old = self.session
        self.session = session
        tr = session.trace
        pend, self._pending = self._pending, {}
        note = []
        frame = pend.get("frame") or 0
        if frame >= tr.frame_count:
            note.append(f"frame {frame} is past the last frame {tr.frame_count - 1}")
            frame = max(0, tr.frame_count - 1)
        focus = None
        if pend.get("entity") is not None:
            try:
                focus = session.column_of(pend["entity"])
            except ResweepError as exc:
                note.append(exc.reason if hasattr(exc, "reason") else str(exc))
        if focus is None and tr.frame_count:
            focus = session.default_column(frame)
        self.flags = TraceFlags(tr.frame_count, tr.entity_count)
        self.feed = ResolveFeed(self.flags)
        if self.viewport is not None:
            self.viewport.set_session(session)
            self._redraw()
        self.entities.set_trace(tr.ids, tr.names, self.flags)
        self.timeline.set_trace(tr.time, self.flags)
        self.pb.adopt(tr.frame_count, tr.entity_count, frame, focus)
        if old is not None:
            old.close()
        self._add_recent(path)
        early = ended_early_line(tr)
        if early:
            note.insert(0, early)
        self.setWindowTitle(f"{Path(path).name}{' (ended early)' if early else ''} — resweep view")
        self.status("; ".join(note) if note else f"opened {path}: {tr.frame_count} frames, "
                    f"{tr.entity_count} entities")
        if self.viewport is not None:
            self.set_camera(self._camera)
        self._start_solve()

    def _start_solve(self):
        if self.session is None:
            return
        self.feed.restart()
        self.progress.setValue(0)
        self.worker.solve(self.session.path, self.pb.settings)

    # -- background results --------------------------------------------------------------------
    def _on_block(self, rows):
        if self.feed is not None:
            self.feed.rows(rows)
            self.timeline.strip.update()
            self.entities.schedule_refresh()

    def _on_progress(self, done, total):
        if self.feed is not None:
            self.feed.progress(done, total)
        self.progress.setMaximum(max(1, total))
        self.progress.setValue(done)

    def _on_solved(self, report):
        self.entities.refresh_counts()
        self.timeline.strip.update()
        found = ", ".join(f"{k} {n}" for k, n in report.counts.items() if n) or "no divergences"
        self.status(f"re-solved {report.entity_frames} entity-frames: {found}")

    def _on_busy(self, busy):
        self.progress.setVisible(busy and self.worker.solving())
        self.cancel_button.setVisible(busy)

    def cancel_background(self):
        self._frame_cancel = True
        if self.worker.is_busy():
            self.worker.cancel()
            self.entities.refresh_counts()
            self.status("background re-solve cancelled; marks cover the frames solved so far")

    # -- showing a frame -----------------------------------------------------------------------
    def _on_playback(self, event, pb):
        if self.session is None:
            return
        if event == "settings":
            self.session.set_settings(pb.settings)
            self.store.setValue("solver", pb.settings.as_dict())
            self._start_solve()
        if event in ("frame", "focus", "settings", "trace"):
            self._frame_moved = self._frame_moved or event == "frame"
            self.refresh_view()
        if event == "focus" and self.viewport is not None:
            self.set_camera(self._camera)

    def refresh_view(self):
        """Solve the current frame (the session caches) and show it everywhere.

        The solve runs on a worker thread while the event loop keeps running, so a slow frame
        never freezes the window; frames asked for meanwhile (keys, playback) are shown next,
        and Cancel (Esc) stops waiting and keeps the picture on screen.
        """
        if self.session is None or not self.pb.frame_count:
            return
        if self._refreshing:
            self._refresh_again = True
            return
        self._refreshing = True
        try:
            self._refresh_again = True
            while self._refresh_again and self.session is not None:
                self._refresh_again = False
                self._refresh_once()
        finally:
            self._refreshing = False

    def _frame_state(self, session, frame: int):
        """``session.frame_state(frame)``, solved off the GUI thread unless quick (cached, or no world
        edit to apply in a trace of few entities); None when cancelled or superseded (another
        frame asked for, another trace opened)."""
        if session.is_quick(frame):  # a thread and its hand-over would cost half as much again
            return session.frame_state(frame)
        self._frame_cancel = False
        stop = lambda: self._frame_cancel or self.session is not session or self._refresh_again  # noqa: E731
        if not wait_for(self._frame_thread, stop):  # one solve at a time on a session
            return None
        def slow():  # only a frame that keeps the user waiting says so (no status churn per step)
            self.status(f"solving frame {frame} …")
            self.cancel_button.setVisible(True)
        try:
            self._frame_thread, state = off_thread(lambda: session.frame_state(frame), stop, on_slow=slow)
        finally:
            if self.cancel_button.isHidden() == self.worker.is_busy():
                self.cancel_button.setVisible(self.worker.is_busy())
        return state

    def _refresh_once(self):
        col = self.pb.focus
        try:
            state = self._frame_state(self.session, self.pb.frame)
            if state is None or self.session is None:
                return
            self.state = state
            if self.viewport is not None and col is not None:
                self.viewport.show(self.state, col, self.view_options)
                self._redraw(draft=self._frame_moved)
            self._frame_moved = False
            facts = frame_facts(self.session, self.state, col) if col is not None else None
        except Exception as exc:  # the GUI boundary: one line in the panel, the window stays usable
            self.frame_panel.show_facts(None, f"frame {self.pb.frame} cannot be shown: {error_line(exc)}")
            self.status(f"frame {self.pb.frame}: {error_line(exc)}")
            return
        legend = []
        if self.viewport is not None:
            legend = list(self.viewport.legend) + list(getattr(self.viewport, "block_legend", []))
        self.frame_panel.show_facts(facts, legend=legend)
        self.entities.show_frame(self.state.rows.flags, self.state.active)

    def _toggle_opts(self):
        if self.view_options is None:
            return
        self.view_options.show_others = self.act_others.isChecked()
        self.view_options.show_swept = self.act_swept.isChecked()
        self.view_options.show_trail = self.act_trail.isChecked()
        self.refresh_view()

    def _redraw(self, draft: bool = False):
        """Ask for one paint of the 3-D view (it renders there); paints asked for before it
        happens merge into one. ``draft``: a change of frame, drawn as a draft until the frames
        stop changing (view_paint.py)."""
        if self.view_paint is not None:
            self.view_paint.request(draft)

    def set_camera(self, preset: str):
        self._camera = preset
        if self.viewport is not None and self.state is not None:
            self.viewport.set_camera(preset)
            self._redraw()

    def fit(self):
        if self.viewport is not None and self.state is not None:
            self.viewport.fit()
            self._redraw()

    def focus_camera(self):
        self.set_camera("story")

    def cycle_entity(self, step: int):
        n = self.pb.entity_count
        if n:
            cur = self.pb.focus if self.pb.focus is not None else -step
            self.pb.set_focus((cur + step) % n)

    def cycle_kind(self):
        from resweep.core.check.kinds import KINDS
        order = [None, *KINDS]
        self.pb.set_kind(order[(order.index(self.pb.kind) + 1) % len(order)])
        self.status(f"divergence filter: {self.pb.kind or 'every kind'}")

    # -- picture and report --------------------------------------------------------------------
    def picture_array(self) -> np.ndarray:
        """The viewport as it is now with the caption band below (the same composer as
        ``resweep snapshot``): uint8 (H, W, 3)."""
        from resweep.app.scene.caption import caption_lines
        from resweep.app.scene.picture import compose
        if self.plotter is not None:
            self.view_paint.full()  # a picture is always the full-quality one
            self.plotter.render()  # the scene as it is now, even if its paint is still queued
            view = np.ascontiguousarray(self.plotter.screenshot(return_img=True)[..., :3])
        else:
            img = self.centralWidget().grab().toImage().convertToFormat(QImage.Format.Format_RGB888)
            ptr = img.constBits()
            ptr.setsize(img.sizeInBytes())
            rows = np.frombuffer(ptr, np.uint8).reshape(img.height(), img.bytesPerLine())
            view = np.ascontiguousarray(rows[:, : 3 * img.width()].reshape(img.height(), img.width(), 3))
        have = self.state is not None and self.pb.focus is not None
        story = self.viewport.story if self.viewport is not None else None
        lines = caption_lines(self.session, self.state, self.pb.focus, story) if have else []
        legend = self.viewport.legend if self.viewport is not None else []
        return np.ascontiguousarray(compose(view, lines, legend))

    def picture(self) -> QImage:
        """:meth:`picture_array` as a QImage RGB888."""
        out = self.picture_array()
        h, w = out.shape[:2]
        return QImage(out.data, w, h, 3 * w, QImage.Format.Format_RGB888).copy()

    def save_picture(self, path: str) -> bool:
        """Write the picture to ``path`` (PNG, or JPEG for .jpg/.jpeg), atomically."""
        from resweep.app.scene.picture import save_picture
        try:
            save_picture(self.picture_array(), path)
            ok = True
        except (OSError, ValueError):
            ok = False
        self.status(f"saved {path}" if ok else f"could not write {path}")
        return ok

    def save_picture_dialog(self):
        if self.session is None:
            return
        eid = self._focus_id()
        name = f"{Path(self.session.path).stem}-f{self.pb.frame}" + (f"-e{eid}" if eid is not None else "") + ".png"
        start = str(Path(self.store.value("dialog/picture_dir", str(Path.home()))) / name)
        path, _ = QFileDialog.getSaveFileName(self, "Save picture", start, "PNG images (*.png)")
        if path:
            if not path.lower().endswith(".png"):
                path += ".png"
            self.store.setValue("dialog/picture_dir", str(Path(path).parent))
            self.save_picture(path)

    def _focus_id(self):
        col = self.pb.focus
        return int(self.session.trace.ids[col]) if self.session is not None and col is not None else None

    def report(self) -> str:
        """Markdown describing the current view (what Copy report puts on the clipboard)."""
        if self.session is None or self.state is None:
            return ""
        col = self.pb.focus
        facts = frame_facts(self.session, self.state, col) if col is not None else None
        return report_markdown(facts, self.session.path, self.state.frame, self.state.time, self.pb.settings,
                               self.session.trace.title) + self.hunt.report_section()

    def copy_report(self):
        text = self.report()
        if text:
            QGuiApplication.clipboard().setText(text)
            self.status("report copied to the clipboard (Markdown)")

    def snapshot_command(self) -> str:
        return snapshot_command(self.session.path, self.pb.frame, self._focus_id(), self.pb.settings)

    # -- recent files, drag and drop, settings -------------------------------------------------
    def recent(self) -> list[str]:
        v = self.store.value("recent", [])
        return [v] if isinstance(v, str) else list(v or [])

    def _add_recent(self, path):
        path = str(Path(path).resolve())
        items = [path] + [p for p in self.recent() if p != path]
        self.store.setValue("recent", items[:MAX_RECENT])
        self._rebuild_recent()

    def _rebuild_recent(self):
        self.recent_menu.clear()
        for i, p in enumerate(self.recent()):
            a = self.recent_menu.addAction(f"&{i + 1}  {p}")
            a.triggered.connect(lambda _=False, path=p: self.open_path(path))
        self.recent_menu.setEnabled(bool(self.recent()))
        if self.recent():
            self.recent_menu.addSeparator()
            self.recent_menu.addAction("Clear list", lambda: (self.store.setValue("recent", []),
                                                              self._rebuild_recent()))

    def fit_model_dialog(self):
        """Rank the solver models on the open trace; the dialog applies a chosen one."""
        if self.session is None:
            self.status("Open a trace first")
            return None
        from resweep.app.viewer.fit_dialog import FitDialog
        self.fit_dialog = FitDialog(str(self.session.path), self.pb, self)
        self.fit_dialog.show()
        return self.fit_dialog

    def _stored_settings(self) -> SolverSettings:
        d = self.store.value("solver")
        try:
            return settings_from_dict(d)
        except (TypeError, KeyError, ValueError, ResweepError):
            return SolverSettings()

    def dragEnterEvent(self, event):
        if dropped_path(event.mimeData()) is not None:
            event.acceptProposedAction()

    def dropEvent(self, event):
        path = dropped_path(event.mimeData())
        if path is not None:
            event.acceptProposedAction()
            self.open_path(path)

    def status(self, text: str):
        self.status_label.setText(text)

    def show_shortcuts(self):
        ShortcutsDialog(self.actions_list, self).exec()

    def closeEvent(self, event):
        self.pb.set_playing(False)
        self._frame_cancel = True
        self.worker.shutdown()
        if self._frame_thread is not None:
            self._frame_thread.join(10)
        self.store.setValue("window/geometry", self.saveGeometry())
        self.store.setValue("window/state", self.saveState())
        self.store.sync()
        if self.session is not None:
            self.session.close()
            self.session = None
        if self.plotter is not None:
            self.view_paint.full()  # no full-quality paint pending on a closed view
            self.plotter.close()
        super().closeEvent(event)


def dropped_path(mime) -> str | None:
    """The first local file in a drop, or None."""
    if mime is None or not mime.hasUrls():
        return None
    for url in mime.urls():
        if url.isLocalFile() and Path(url.toLocalFile()).is_file():
            return url.toLocalFile()
    return None


class ShortcutsDialog(QDialog):
    """Every keyboard shortcut of the window, read from its actions (so the list cannot go stale)."""

    def __init__(self, actions, parent=None):
        super().__init__(parent)
        self.setWindowTitle("Keyboard shortcuts")
        rows = [(a.data(), a.text().replace("&", ""), ", ".join(k.toString(QKeySequence.SequenceFormat.NativeText)
                                                                for k in a.shortcuts()))
                for a in actions if a.shortcuts()]
        self.table = QTableWidget(len(rows), 3, self)
        self.table.setHorizontalHeaderLabels(["group", "action", "keys"])
        self.table.verticalHeader().hide()
        for r, row in enumerate(rows):
            for c, text in enumerate(row):
                self.table.setItem(r, c, QTableWidgetItem(text))
        self.table.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.ResizeToContents)
        self.table.horizontalHeader().setStretchLastSection(True)
        lay = QVBoxLayout(self)
        lay.addWidget(self.table)
        close = QPushButton("Close", self)
        close.clicked.connect(self.accept)
        lay.addWidget(close)
        self.resize(520, 640)


def apply_identity(app: QApplication):
    """The viewer's own look: a dark slate palette with a teal accent."""
    app.setStyle("Fusion")
    pal = QPalette()
    roles = {QPalette.ColorRole.Window: "#20282f", QPalette.ColorRole.WindowText: INK.name(),
             QPalette.ColorRole.Base: PANEL.name(), QPalette.ColorRole.AlternateBase: GROOVE.name(),
             QPalette.ColorRole.Text: INK.name(), QPalette.ColorRole.Button: "#2a333b",
             QPalette.ColorRole.ButtonText: INK.name(), QPalette.ColorRole.Highlight: "#1f7f76",
             QPalette.ColorRole.HighlightedText: "#ffffff", QPalette.ColorRole.ToolTipBase: "#11161a",
             QPalette.ColorRole.ToolTipText: INK.name(), QPalette.ColorRole.PlaceholderText: "#7d8b96"}
    for role, colour in roles.items():
        pal.setColor(role, QColor(colour))
    app.setPalette(pal)
    app.setStyleSheet(
        "QDockWidget::title { background: #2a333b; padding: 4px 8px; }"
        "QDockWidget { font-weight: 600; }"
        "QLabel#dim { color: #7d8b96; }"
        "QProgressBar { border: 1px solid #3a444d; border-radius: 3px; text-align: center; height: 14px; }"
        f"QProgressBar::chunk {{ background: {ACCENT.name()}; }}"
        "QHeaderView::section { background: #2a333b; border: 0; padding: 3px 6px; }"
        "QStatusBar { background: #1a2026; }")
    app.setWindowIcon(draw_icon("logo", size=64))


def run_window(trace: str | None, frame: int = 0, entity_id: int | None = None, settings: dict | None = None,
               follow: bool = False) -> int:
    """Start the application, open ``trace`` (the demo when None) and run until the window closes.

    ``settings``: SolverSettings fields that override the remembered ones for this run. ``follow``:
    pick up frames a recorder keeps flushing to ``trace`` (the "Follow recording" toggle)."""
    import sys
    app = QApplication.instance() or QApplication(sys.argv[:1])
    app.setOrganizationName(ORG)
    app.setApplicationName(APP)
    apply_identity(app)
    win = MainWindow()
    if settings:
        win.pb.update_settings(**settings)
    win.show()
    win.open_path(trace if trace is not None else demo_path(), frame, entity_id)
    if follow:
        win.act_follow.trigger()  # checks the toggle and starts following
    return app.exec()
