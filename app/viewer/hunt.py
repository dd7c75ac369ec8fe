"""Bug-hunt tools of the viewer window: go to frame or time, bookmarks, measuring, turntable and
zoom steps, jumps from the Entities table's counts, animated export.

:class:`HuntTools` adds its menu, toolbar and dock to a :class:`MainWindow` and listens to the
window's :class:`Playback`; the window itself only creates it and asks it for the report's
bookmarks section. Models without Qt live in :mod:`.bookmarks` and :mod:`resweep.app.scene.animation`.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
from PyQt6.QtCore import QEvent, QObject, Qt
from PyQt6.QtWidgets import (QFileDialog, QHBoxLayout, QInputDialog, QLabel, QLineEdit, QListWidget,
                             QListWidgetItem, QMessageBox, QProgressDialog, QPushButton, QToolBar, QVBoxLayout,
                             QWidget)

from resweep.core.check.kinds import KINDS, kind_mask

from resweep.app.viewer.bookmarks import BookmarkError, Bookmarks, bookmarks_markdown, parse_goto

TURN_STEP = 15.0   # degrees per turntable step
ZOOM_STEP = 1.25   # distance ratio per zoom step


def measure_text(p, q, voxel_size: float) -> str:
    """Distance between world points ``p`` and ``q`` (float (3,)) in world units and voxels, with
    its components."""
    d = np.asarray(q, np.float64) - np.asarray(p, np.float64)
    n = float(np.linalg.norm(d))
    comps = ", ".join(f"{a} {v:+.4g}" for a, v in zip("xyz", d))
    return f"distance {n:.6g} world units = {n / voxel_size:.6g} voxels ({comps})"


class BookmarksPanel(QWidget):
    """The trace's bookmarks: double-click (or Enter) goes there; the note is edited below."""

    def __init__(self, tools: "HuntTools", parent=None):
        super().__init__(parent)
        self.tools = tools
        self.list = QListWidget(self)
        self.list.setObjectName("bookmarks")
        self.note = QLineEdit(self)
        self.note.setPlaceholderText("note for the current frame and entity")
        self.add = QPushButton("Bookmark", self)
        self.add.setToolTip("Bookmark the current frame and focused entity with this note (Ctrl+B)")
        self.remove = QPushButton("Remove", self)
        self.info = QLabel("", self)
        self.info.setObjectName("dim")
        self.info.setWordWrap(True)
        row = QHBoxLayout()
        row.addWidget(self.note, 1)
        row.addWidget(self.add)
        row.addWidget(self.remove)
        lay = QVBoxLayout(self)
        lay.setContentsMargins(4, 4, 4, 4)
        lay.addWidget(self.list, 1)
        lay.addLayout(row)
        lay.addWidget(self.info)
        self.add.clicked.connect(lambda: tools.bookmark(self.note.text()))
        self.note.returnPressed.connect(lambda: tools.bookmark(self.note.text()))
        self.remove.clicked.connect(self._remove)
        self.list.itemActivated.connect(self._go)
        self.list.itemDoubleClicked.connect(self._go)

    def show_items(self, items, path_text: str):
        self.list.clear()
        for b in items:
            who = "every entity" if b.entity is None else f"entity {b.entity}"
            it = QListWidgetItem(f"frame {b.frame} · {who}" + (f" — {b.note}" if b.note else ""))
            it.setData(Qt.ItemDataRole.UserRole, (b.frame, b.entity))
            self.list.addItem(it)
        self.info.setText(path_text)

    def _go(self, item):
        frame, entity = item.data(Qt.ItemDataRole.UserRole)
        self.tools.go_to(frame, entity)

    def _remove(self):
        it = self.list.currentItem()
        if it is not None:
            self.tools.remove_bookmark(*it.data(Qt.ItemDataRole.UserRole))


class HuntTools(QObject):
    """Adds the bug-hunt tools to ``win`` (a MainWindow)."""

    def __init__(self, win):
        super().__init__(win)
        self.win = win
        self.bookmarks: Bookmarks | None = None
        self.measuring = False
        self.picked: list = []
        self.last_measure = ""
        self._measure_actor = None
        self.panel = BookmarksPanel(self, win)
        self.dock = win._dock("Bookmarks", "dock_bookmarks", self.panel)
        self._build_toolbar()
        self._build_menu()
        win.pb.subscribe(self._on_playback)
        win.entities.table.cellClicked.connect(self._count_clicked)
        win.timeline.jumped.connect(lambda _f: self.frame_story())
        if win.plotter is not None:
            self._clicks = _Clicks(self)
            win.plotter.installEventFilter(self._clicks)

    # -- construction ----------------------------------------------------------------------------
    def _build_toolbar(self):
        tb = QToolBar("Go to", self.win)
        tb.setObjectName("toolbar_goto")
        tb.addWidget(QLabel(" go to ", tb))
        self.goto_field = QLineEdit(tb)
        self.goto_field.setObjectName("goto")
        self.goto_field.setPlaceholderText("frame, or time like 2.5s")
        self.goto_field.setMaximumWidth(180)
        self.goto_field.returnPressed.connect(self._goto_entered)
        tb.addWidget(self.goto_field)
        self.win.addToolBar(Qt.ToolBarArea.TopToolBarArea, tb)
        self.toolbar = tb

    def _build_menu(self):
        m = self.win.menuBar().addMenu("&Hunt")
        A = self.win._act
        A(m, "Go to frame or time", self.focus_goto, ["Ctrl+G"], "Hunt")
        A(m, "Clear the focus (jumps then cover every entity)", lambda: self.win.pb.set_focus(None), ["U"], "Hunt")
        A(m, "Next divergence, any entity", lambda: self.win.timeline.jump(+1, any_entity=True),
          ["Ctrl+Shift+Right"], "Hunt")
        A(m, "Previous divergence, any entity", lambda: self.win.timeline.jump(-1, any_entity=True),
          ["Ctrl+Shift+Left"], "Hunt")
        m.addSeparator()
        A(m, "Bookmark this frame…", self.bookmark_dialog, ["Ctrl+B"], "Hunt")
        self.act_measure = A(m, "Measure between two picked points", self.toggle_measure, ["M"], "Hunt", True)
        m.addSeparator()
        A(m, "Turn left", lambda: self.turn(-TURN_STEP), ["J"], "Hunt")
        A(m, "Turn right", lambda: self.turn(TURN_STEP), ["L"], "Hunt")
        A(m, "Zoom in", lambda: self.zoom(ZOOM_STEP), ["+", "="], "Hunt")
        A(m, "Zoom out", lambda: self.zoom(1 / ZOOM_STEP), ["-"], "Hunt")
        A(m, "Draw more world around the story", lambda: self.widen(+4), ["Ctrl+Up"], "Hunt")
        A(m, "Draw less world around the story", lambda: self.widen(-4), ["Ctrl+Down"], "Hunt")
        m.addSeparator()
        A(m, "Export animation…", self.export_dialog, ["Ctrl+Shift+A"], "Hunt")
        m.addAction(self.dock.toggleViewAction())

    # -- go to -----------------------------------------------------------------------------------
    def focus_goto(self):
        self.goto_field.setFocus()
        self.goto_field.selectAll()

    def _goto_entered(self):
        s = self.win.session
        if s is None:
            return
        try:
            f = parse_goto(self.goto_field.text(), s.trace.time, s.trace.frame_count)
        except ValueError as exc:
            self.win.status(f"go to: {exc}")
            return
        self.win.pb.set_playing(False)
        self.win.pb.set_frame(f)
        self.win.status(f"frame {f} (t = {float(s.trace.time[f]):.6f} s)")

    def go_to(self, frame: int, entity: int | None = None):
        s = self.win.session
        if s is None:
            return
        self.win.pb.set_playing(False)
        if entity is not None and s.trace.entity_index(entity) >= 0:
            self.win.pb.set_focus(s.trace.entity_index(entity))
        self.win.pb.set_frame(frame)

    def _count_clicked(self, row: int, column: int):
        """A count in the Entities table: that entity's first divergence of that kind."""
        flags = self.win.flags
        if flags is None or column < 2 or column - 2 >= len(KINDS):
            return
        kind = KINDS[column - 2]
        hit = np.flatnonzero(flags.flags[:, row] & kind_mask(kind))
        if not len(hit):
            return
        self.win.pb.set_kind(kind)
        self.win.pb.set_playing(False)
        self.win.pb.set_focus(row)
        self.win.pb.set_frame(int(hit[0]))
        self.frame_story()
        self.win.status(f"first {kind} of entity {int(self.win.session.trace.ids[row])}: frame {int(hit[0])}")

    # -- bookmarks -------------------------------------------------------------------------------
    def _on_playback(self, event, pb):
        if event == "trace" and self.win.session is not None:
            self.bookmarks = Bookmarks(self.win.session.path)
            try:
                self.bookmarks.load()
            except BookmarkError as exc:
                self.win.status(str(exc))
            self._show()

    def _show(self):
        b = self.bookmarks
        self.panel.show_items(b.items if b else [], f"saved in {b.path.name}" if b else "")

    def bookmark(self, note: str = "") -> bool:
        """Bookmark the current frame and focused entity with ``note`` (saved beside the trace)."""
        if self.bookmarks is None or self.win.session is None:
            return False
        col = self.win.pb.focus
        eid = int(self.win.session.trace.ids[col]) if col is not None else None
        try:
            self.bookmarks.set(self.win.pb.frame, eid, note)
        except BookmarkError as exc:
            QMessageBox.warning(self.win, "Cannot save bookmark", str(exc))
            return False
        self.panel.note.clear()
        self._show()
        self.win.status(f"bookmarked frame {self.win.pb.frame}" + (f", entity {eid}" if eid is not None else ""))
        return True

    def bookmark_dialog(self):
        note, ok = QInputDialog.getText(self.win, "Bookmark", f"Note for frame {self.win.pb.frame}:")
        if ok:
            self.bookmark(note)

    def remove_bookmark(self, frame, entity):
        if self.bookmarks is not None:
            try:
                self.bookmarks.remove(frame, entity)
            except BookmarkError as exc:
                QMessageBox.warning(self.win, "Cannot save bookmarks", str(exc))
            self._show()

    def report_section(self) -> str:
        if self.bookmarks is None or self.win.session is None:
            return ""
        return bookmarks_markdown(self.bookmarks.items, self.win.session.trace.time)

    # -- camera ----------------------------------------------------------------------------------
    def frame_story(self):
        """Point the camera preset in use at the focused story (after a jump to a divergence)."""
        if self.win.viewport is not None and self.win.state is not None:
            self.win.set_camera(self.win._camera)
            self.win.plotter.render()

    def turn(self, degrees: float):
        if self.win.viewport is not None and self.win.state is not None:
            self.win.viewport.turn(degrees)
            self.win.plotter.render()

    def widen(self, voxels: float):
        """Change how far around the story's lines the world is drawn (2..64 voxels)."""
        opts = self.win.view_options
        if opts is None:
            return
        opts.cutaway_radius = float(np.clip(opts.cutaway_radius + voxels, 2.0, 64.0))
        self.win.refresh_view()
        self.win.status(f"world drawn {opts.cutaway_radius:g} voxels around the story")

    def zoom(self, factor: float):
        if self.win.viewport is not None and self.win.state is not None:
            self.win.viewport.zoom(factor)
            self.win.plotter.render()

    # -- measuring -------------------------------------------------------------------------------
    def toggle_measure(self):
        self.measuring = self.act_measure.isChecked()
        self.picked = []
        self.win.status("measure: click two points in the view" if self.measuring else "measuring off")

    def pick_at(self, x: float, y: float):
        """A click at widget pixel (x, y) while measuring: the second one measures."""
        vp = self.win.viewport
        if vp is None or self.win.session is None:
            return None
        p = vp.pick(x, y)
        if p is None:
            self.win.status("measure: nothing drawn there")
            return None
        self.picked = (self.picked + [p])[-2:] if len(self.picked) < 2 else [p]
        if len(self.picked) == 2:
            self.last_measure = measure_text(*self.picked, self.win.session.world.voxel_size)
            self._draw_measure()
            self.win.status("measure: " + self.last_measure)
        else:
            self.win.status(f"measure: first point ({', '.join(f'{v:.4g}' for v in p)}); click the second")
        return p

    def _draw_measure(self):
        from resweep.app.scene.voxel_mesh import mesh_type
        line = mesh_type(self.win.plotter)(np.array([self.picked[0], self.picked[1]], np.float64), lines=[2, 0, 1])
        if self._measure_actor is None:
            self._measure_actor = self.win.plotter.add_mesh(line, color=(0.1, 0.1, 0.12), line_width=3,
                                                            lighting=False, reset_camera=False)
            self._measure_mesh = self._measure_actor.GetMapper().GetInput()
        self._measure_mesh.copy_from(line)
        self._measure_actor.SetVisibility(True)
        self.win.plotter.render()

    # -- animation -------------------------------------------------------------------------------
    def export_dialog(self):
        s = self.win.session
        if s is None:
            return
        f = self.win.pb.frame
        text, ok = QInputDialog.getText(self.win, "Export animation", "Frames (first:last):",
                                        text=f"{max(0, f - 15)}:{min(s.trace.frame_count - 1, f + 15)}")
        if not ok:
            return
        try:
            a, b = (int(v) for v in text.split(":"))
        except ValueError:
            self.win.status(f"export: {text!r} is not a range like 20:60")
            return
        start = str(Path(self.win.store.value("dialog/picture_dir", str(Path.home()))) / f"{Path(s.path).stem}-{a}-{b}.gif")
        path, _ = QFileDialog.getSaveFileName(self.win, "Export animation", start, "GIF animations (*.gif)")
        if path:
            self.export(a, b, path if path.lower().endswith(".gif") else path + ".gif")

    def export(self, first: int, last: int, path, size=(640, 360)) -> bool:
        """Write frames ``first..last`` of the focused entity as a GIF, with a progress bar."""
        from resweep.app.scene.animation import render_frames, save_gif
        from resweep.app.viewer.worker import error_line
        s = self.win.session
        col = self.win.pb.focus
        eid = int(s.trace.ids[col]) if col is not None else None
        bar = QProgressDialog("Rendering frames…", "Cancel", 0, abs(last - first) + 1, self.win)
        bar.setObjectName("export_progress")
        bar.setWindowModality(Qt.WindowModality.WindowModal)
        bar.setMinimumDuration(0)
        self.progress = bar

        def step(done, total):
            bar.setValue(done)
            from PyQt6.QtWidgets import QApplication
            QApplication.processEvents()
        try:
            pics = render_frames(s, first, last, eid, size, on_frame=step, cancelled=bar.wasCanceled)
            if bar.wasCanceled():
                self.win.status("export cancelled")
                return False
            dt = float(np.median(np.diff(s.trace.time))) if s.trace.frame_count > 1 else 0.0
            save_gif(pics, path, fps=float(np.clip(1.0 / dt, 1.0, 50.0)) if dt > 0 else 30.0)
        except Exception as exc:  # the GUI boundary: one line, the window stays usable
            self.win.status(f"export failed: {error_line(exc)}")
            return False
        finally:
            bar.close()
            self.win.refresh_view()  # the session's world moved with the export
        self.win.status(f"saved {path} ({len(pics)} frames)")
        return True


class _Clicks(QObject):
    """Left clicks on the 3-D view go to the measuring tool while it is on."""

    def __init__(self, tools: HuntTools):
        super().__init__(tools)
        self.tools = tools

    def eventFilter(self, obj, event):
        if (self.tools.measuring and event.type() == QEvent.Type.MouseButtonPress
                and event.button() == Qt.MouseButton.LeftButton):
            pos = event.position()
            self.tools.pick_at(pos.x(), pos.y())
            return True
        return False
