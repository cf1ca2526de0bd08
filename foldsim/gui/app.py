"""The foldsim desktop app: the main window and its entry point.

The window holds the 3D view (`viewport.FoldView`), the drive bar under it and,
beside it, the hinge table, the cut-edge table and the gap plot. Opening a file
loads it through the core (`foldsim.load`); a file the core refuses shows the same
one-line message as the command line and leaves the previous model in place. The
collision sweep over the whole range runs in a worker thread (`sweep.SweepTask`).

``FOLDSIM_QUIT_AFTER_MS`` in the environment makes `run` quit after that many
milliseconds (for smoke tests and unattended screenshots).
"""

import os
import sys
from pathlib import Path

import numpy as np
from PySide6 import QtCore, QtGui, QtWidgets

from ..analysis.closure import cut_edge_gaps
from ..analysis.collision import panels
from ..analysis.report import hinge_table
from ..errors import FoldsimError
from ..gearing import fold_angles, fold_schedule
from ..io.mechanism_json import load, save
from ..kinematics import poses_at
from ..tolerances import DEFAULT
from . import palette
from .panels import DriveBar, GapModel, GapPlot, HingeModel, make_table
from .sweep import ReportTask, SweepTask
from .viewport import FoldView, default_face_colors

DEMO = Path(__file__).resolve().parents[2] / "assets" / "gift-box.mech.json"
"""The model the app opens when started without a file."""

MAX_RECENT = 8
GAP_GRID = 401
"""Drive values from -1 to 1 at which the gap plot is computed."""

SIDE_PANEL_MS = 100
"""During playback the tables, the gap plot's cursor and the status follow this often."""

STEP, BIG_STEP = 0.01, 0.1
"""Drive steps of the arrow keys, without and with Shift."""


def error_line(exc):
    """The one line the command line prints for a refused file.

    Examples
    --------
    >>> error_line(FoldsimError("box.mech.json: faces[2]: repeats a vertex"))
    'foldsim: box.mech.json: faces[2]: repeats a vertex'
    """
    return f"foldsim: {exc}"


def part_labels(part_types, n_faces):
    """A part-type label per face from a report's ``part_types``, or None.

    Accepts the core's list of groups (each a list of faces; labelled "type 1",
    "type 2", ... in order), a list of groups as dicts with ``faces`` (and
    optionally ``name``), a mapping from label to faces, or one label per face.
    Anything else, or groups that leave a face out, gives None.

    Examples
    --------
    >>> part_labels([[0, 2], [1]], 3)
    ['type 1', 'type 2', 'type 1']
    >>> part_labels({"x": [1], "y": [0]}, 2)
    ['y', 'x']
    >>> part_labels([[0]], 2) is None
    True
    """
    if isinstance(part_types, dict):
        groups = list(part_types.items())
    elif isinstance(part_types, list) and part_types and all(isinstance(g, (list, tuple)) for g in part_types):
        groups = [(f"type {k + 1}", g) for k, g in enumerate(part_types)]
    elif isinstance(part_types, list) and part_types and all(isinstance(g, dict) for g in part_types):
        groups = [(g.get("name", f"type {k + 1}"), g.get("faces", [])) for k, g in enumerate(part_types)]
    elif isinstance(part_types, list) and len(part_types) == n_faces:
        return [str(p) for p in part_types]
    else:
        return None
    labels = [None] * n_faces
    for name, faces in groups:
        for f in faces:
            if isinstance(f, (int, np.integer)) and 0 <= f < n_faces:
                labels[f] = str(name)
    return labels if all(label is not None for label in labels) else None


def label_colors(labels):
    """Colours (F, 3) in [0, 1]: one palette colour per distinct label, in order of first use."""
    order = {}
    for label in labels:
        order.setdefault(label, len(order))
    return np.array([palette.unit_rgb(palette.PANELS[order[label] % len(palette.PANELS)]) for label in labels])


class Model:
    """Everything the window shows about one loaded mechanism.

    Attributes
    ----------
    path : Path
    mech, schedule, pan
    table : list of dict
        `foldsim.analysis.report.hinge_table`.
    t_grid : (T,) float
        Drive values from -1 to 1 (the last is exactly 1).
    gaps : (T, E) float
        Every cut edge's gap over ``t_grid``.
    labels : list of str or None
        Part type of every face, once the background report has come in.
    """

    def __init__(self, path, tol=DEFAULT):
        self.path = Path(path)
        self.mech = load(self.path, tol)
        self.schedule = fold_schedule(self.mech, tol)
        self.pan = panels(self.mech, tol)
        self.table = hinge_table(self.mech, self.schedule)
        self.t_grid = np.linspace(-1.0, 1.0, GAP_GRID)
        chunks = []
        for k in range(0, GAP_GRID, 64):
            poses = poses_at(self.mech, self.schedule, self.t_grid[k:k + 64])
            chunks.append(cut_edge_gaps(self.mech, poses))
        self.gaps = np.concatenate(chunks)
        self.labels = None


class MainWindow(QtWidgets.QMainWindow):
    """The app's window; `open_path` loads a model into it."""

    def __init__(self, settings=None):
        super().__init__()
        self.settings = settings or QtCore.QSettings("foldsim", "foldsim")
        self.model = None
        self.sweep = None
        self.report_task = None
        self.intervals = []
        self.error_box = None
        self.pool = QtCore.QThreadPool(self)
        self.pool.setMaxThreadCount(1)
        self.watcher = QtCore.QFileSystemWatcher(self)
        self.watcher.fileChanged.connect(self._file_changed)
        self.reload_timer = QtCore.QTimer(self)
        self.reload_timer.setSingleShot(True)
        self.reload_timer.setInterval(250)
        self.reload_timer.timeout.connect(lambda: self.reload(auto=True))
        self.side_clock = QtCore.QElapsedTimer()
        self.side_timer = QtCore.QTimer(self)
        self.side_timer.setSingleShot(True)
        self.side_timer.timeout.connect(self._update_side)
        self.setWindowTitle("foldsim")
        self.setAcceptDrops(True)
        self.resize(1280, 800)

        self.view = FoldView()
        self.drive = DriveBar()
        self.hinge_model = HingeModel(self)
        self.hinge_table = make_table(self.hinge_model)
        self.hinge_table.setSelectionMode(QtWidgets.QAbstractItemView.SelectionMode.SingleSelection)
        self.gap_model = GapModel(self)
        self.gap_table = make_table(self.gap_model)
        self.gap_table.setSelectionMode(QtWidgets.QAbstractItemView.SelectionMode.ExtendedSelection)
        self.gap_plot = GapPlot()

        centre = QtWidgets.QWidget()
        column = QtWidgets.QVBoxLayout(centre)
        column.setContentsMargins(0, 0, 0, 0)
        column.setSpacing(0)
        column.addWidget(self.view, 1)
        column.addWidget(self.drive)
        side = QtWidgets.QSplitter(QtCore.Qt.Orientation.Vertical)
        for title, widget in (("Hinges", self.hinge_table), ("Cut edges", self.gap_table),
                              ("Gap over t", self.gap_plot)):
            box = QtWidgets.QGroupBox(title)
            inner = QtWidgets.QVBoxLayout(box)
            inner.setContentsMargins(4, 4, 4, 4)
            inner.addWidget(widget)
            side.addWidget(box)
        side.setSizes([300, 200, 260])
        split = QtWidgets.QSplitter(QtCore.Qt.Orientation.Horizontal)
        split.addWidget(centre)
        split.addWidget(side)
        split.setStretchFactor(0, 3)
        split.setStretchFactor(1, 1)
        split.setSizes([900, 380])
        self.setCentralWidget(split)
        self.status = QtWidgets.QLabel()
        self.statusBar().addWidget(self.status, 1)

        self._build_menus()
        self.drive.tChanged.connect(self.set_t)
        self.drive.cancel_button.clicked.connect(self.cancel_sweep)
        self.view.facePicked.connect(self._face_picked)
        self.hinge_table.selectionModel().selectionChanged.connect(self._hinge_selected)
        self.gap_table.selectionModel().selectionChanged.connect(self._edges_selected)

    # ------------------------------------------------------------------ menus

    def _action(self, menu, text, slot, shortcut=None, tip=None):
        action = QtGui.QAction(text, self)
        if shortcut:
            action.setShortcut(QtGui.QKeySequence(shortcut))
            action.setShortcutContext(QtCore.Qt.ShortcutContext.WindowShortcut)
        if tip:
            action.setStatusTip(tip)
        action.triggered.connect(slot)
        menu.addAction(action)
        self.addAction(action)
        return action

    def _build_menus(self):
        bar = self.menuBar()
        files = bar.addMenu("&File")
        self._action(files, "&Open…", self.open_dialog, QtGui.QKeySequence.StandardKey.Open)
        self.recent_menu = files.addMenu("Open &Recent")
        self._action(files, "Re&load", lambda: self.reload(), "Ctrl+R", "Read the model's file again")
        files.addSeparator()
        self._action(files, "&Save", self.save, QtGui.QKeySequence.StandardKey.Save)
        self._action(files, "Save &As…", self.save_as, QtGui.QKeySequence.StandardKey.SaveAs)
        self._action(files, "Save &Image…", self.save_image, "Ctrl+I", "Save the 3D view as a PNG")
        files.addSeparator()
        self._action(files, "&Quit", self.close, QtGui.QKeySequence.StandardKey.Quit)
        view = bar.addMenu("&View")
        self._action(view, "&Fit", self.view.fit_motion, "F", "Fit the model to the view")
        for name, key in (("front", "1"), ("top", "2"), ("side", "3"), ("iso", "4")):
            self._action(view, f"{name.capitalize()} view", lambda _=False, n=name: self.view.set_view(n), key)
        view.addSeparator()
        colours = view.addMenu("&Colour panels by")
        group = QtGui.QActionGroup(self)
        self.color_by_face = self._action(colours, "Face", lambda: self.apply_colors())
        self.color_by_part = self._action(colours, "Part type", lambda: self.apply_colors())
        for action in (self.color_by_face, self.color_by_part):
            action.setCheckable(True)
            group.addAction(action)
        self.color_by_face.setChecked(True)
        drive = bar.addMenu("&Drive")
        self._action(drive, "Play / pause", self.drive.toggle_play, "Space")
        self._action(drive, "Step forward", lambda: self.drive.step(STEP), "Right")
        self._action(drive, "Step back", lambda: self.drive.step(-STEP), "Left")
        self._action(drive, "Big step forward", lambda: self.drive.step(BIG_STEP), "Shift+Right")
        self._action(drive, "Big step back", lambda: self.drive.step(-BIG_STEP), "Shift+Left")
        drive.addSeparator()
        self._action(drive, "Flat (t = 0)", lambda: self.drive.set_t(0.0), "Home")
        self._action(drive, "Closed (t = 1)", lambda: self.drive.set_t(1.0), "End")
        self._action(drive, "Closed the other way (t = −1)", lambda: self.drive.set_t(-1.0), "Shift+End")
        self._refresh_recent()

    def _refresh_recent(self):
        self.recent_menu.clear()
        for path in self.recent_files():
            action = self.recent_menu.addAction(path)
            action.triggered.connect(lambda _=False, p=path: self.open_path(p))
        self.recent_menu.setEnabled(bool(self.recent_files()))

    def recent_files(self):
        """Recently opened files, newest first."""
        value = self.settings.value("recent", [])
        return [value] if isinstance(value, str) else list(value or [])

    def _remember(self, path):
        path = str(Path(path).resolve())
        recent = [path] + [p for p in self.recent_files() if p != path]
        self.settings.setValue("recent", recent[:MAX_RECENT])
        self._refresh_recent()

    # ------------------------------------------------------------------ files

    def open_dialog(self):
        start = str(self.model.path.parent) if self.model else ""
        path, _ = QtWidgets.QFileDialog.getOpenFileName(self, "Open mechanism", start,
                                                        "Mechanisms (*.mech.json *.json);;All files (*)")
        if path:
            self.open_path(path)

    def open_path(self, path, keep_view=False):
        """Load a model file and show it; on a bad file show the error and keep the old model.

        Returns
        -------
        bool
            Whether the file was loaded.
        """
        try:
            model = Model(path)
        except FoldsimError as exc:
            self.show_error(error_line(exc))
            return False
        self._show_model(model, keep_view)
        self._remember(path)
        return True

    def reload(self, auto=False):
        """Read the current model's file again, keeping t, the camera and the selection."""
        if self.model is None:
            return False
        path = self.model.path
        if not path.exists():
            self._watch(path)
            if not auto:
                self.show_error(error_line(FoldsimError(f"{path}: cannot read file: No such file or directory")))
            return False
        ok = self.open_path(path, keep_view=True)
        if not ok:
            self._watch(path)
        return ok

    def _watch(self, path):
        files = self.watcher.files()
        if files:
            self.watcher.removePaths(files)
        if Path(path).exists():
            self.watcher.addPath(str(path))

    def _file_changed(self, path):
        if self.model is not None and Path(path) == self.model.path:
            self.reload_timer.start()

    def save(self):
        if self.model is not None:
            self._write(self.model.path)

    def save_as(self):
        if self.model is None:
            return
        path, _ = QtWidgets.QFileDialog.getSaveFileName(self, "Save mechanism as", str(self.model.path),
                                                        "Mechanisms (*.mech.json)")
        if path:
            self._write(Path(path))
            self.model.path = Path(path)
            self._watch(path)
            self._remember(path)
            self._update_title()

    def _write(self, path):
        try:
            self.watcher.blockSignals(True)
            save(self.model.mech, path)
        except OSError as exc:
            self.show_error(error_line(FoldsimError(f"{path}: cannot write file: {exc.strerror or exc}")))
        finally:
            self.watcher.blockSignals(False)
            self._watch(self.model.path)

    def save_image(self):
        path, _ = QtWidgets.QFileDialog.getSaveFileName(self, "Save image", "view.png", "PNG images (*.png)")
        if path:
            pixels = self.view.render_image(self.view.width() * 2, self.view.height() * 2)
            QtGui.QImage(pixels.data, pixels.shape[1], pixels.shape[0],
                         QtGui.QImage.Format.Format_RGBA8888).save(path)

    def show_error(self, message):
        """Tell the user about a refused file in a dialog (non-blocking) and the status bar."""
        self.statusBar().showMessage(message, 10000)
        if self.error_box is not None:
            self.error_box.close()
        box = QtWidgets.QMessageBox(QtWidgets.QMessageBox.Icon.Warning, "foldsim", message,
                                    QtWidgets.QMessageBox.StandardButton.Ok, self)
        box.setTextInteractionFlags(QtCore.Qt.TextInteractionFlag.TextSelectableByMouse)
        box.open()
        self.error_box = box

    def dragEnterEvent(self, ev):
        if any(url.isLocalFile() for url in ev.mimeData().urls()):
            ev.acceptProposedAction()

    def dropEvent(self, ev):
        files = [url.toLocalFile() for url in ev.mimeData().urls() if url.isLocalFile()]
        if files:
            ev.acceptProposedAction()
            self.open_path(files[0])

    # ------------------------------------------------------------------ model

    def _show_model(self, model, keep_view):
        old = self.model
        same = keep_view and old is not None and old.mech.n_faces == model.mech.n_faces
        camera = dict(self.view.opts) if same else None
        picked_hinge = self._selected_hinge() if same else -1
        picked_edges = self._selected_edges() if same else None
        self.cancel_sweep()
        self.model = model
        mech = model.mech
        self.view.set_mechanism(mech, model.schedule, model.pan, face_colors=self._colors(model))
        if camera is not None:
            for key in ("center", "distance", "elevation", "azimuth"):
                self.view.opts[key] = camera[key]
            self.view.update()
        else:
            self.view.set_view("iso")
        self.hinge_model.set_table(model.table, mech, model.schedule)
        self.gap_model.set_edges(mech.cut_faces, model.gaps[-1], mech.units, self.view.gap_tolerance)
        self.gap_plot.set_data(model.t_grid, model.gaps, mech.units)
        self._part_types_ready(model)
        if picked_edges is None:
            at_end = model.gaps[-1] if model.gaps.size else np.zeros(0)
            picked_edges = list(np.argsort(-at_end, kind="stable")[:3])
        self._select_edges(picked_edges)
        self._select_hinge_row(picked_hinge)
        self.intervals = []
        self.drive.strip.set_intervals([], (0.0, 0.0))
        self._watch(model.path)
        self._update_title()
        self.set_t(self.drive.t)
        self._size_columns()
        self.start_report()
        self.start_sweep()

    def start_report(self):
        """Ask for the check report (part types) in the background."""
        model = self.model
        task = ReportTask(model.mech)
        task.signals.finished.connect(lambda report, task=task, model=model: self._report_done(model, report))
        task.signals.failed.connect(lambda message: self.statusBar().showMessage(error_line(message), 10000))
        self.report_task = task
        self.pool.start(task)

    def _report_done(self, model, report):
        if model is not self.model:
            return
        model.labels = part_labels(report.get("part_types"), model.mech.n_faces)
        self._part_types_ready(model)

    def _part_types_ready(self, model):
        have = model.labels is not None
        self.color_by_part.setEnabled(have)
        self.color_by_part.setToolTip("" if have else "Part types come from the check report")
        if self.color_by_part.isChecked():
            if have:
                self.apply_colors()
            else:
                self.color_by_face.setChecked(True)

    def _size_columns(self):
        """Fit the table columns to their text, leaving room for any angle and gap."""
        metrics = self.fontMetrics()
        for table, column, widest in ((self.hinge_table, HingeModel.NOW, "−180.00°"),
                                      (self.gap_table, GapModel.NOW, f"8.88e+88 {self.model.mech.units}")):
            table.resizeColumnsToContents()
            table.setColumnWidth(column, max(table.columnWidth(column), metrics.horizontalAdvance(widest) + 16))

    def _colors(self, model):
        if self.color_by_part.isChecked() and model.labels is not None:
            return label_colors(model.labels)
        return default_face_colors(model.mech)

    def apply_colors(self):
        """Colour the panels per face or per part type, as chosen in the View menu."""
        if self.model is not None:
            self.view.set_face_colors(self._colors(self.model))

    def _update_title(self):
        name = self.model.path.name if self.model else ""
        self.setWindowTitle(f"{name} — foldsim" if name else "foldsim")

    # ------------------------------------------------------------------ sweep

    def start_sweep(self):
        """Start the collision sweep over [-1, 1] for the current model in the background."""
        model = self.model
        task = SweepTask(model.mech, model.schedule, model.pan)
        task.signals.progress.connect(lambda done, total, found, task=task: self._sweep_progress(task, done, total, found))
        task.signals.finished.connect(lambda found, task=task: self._sweep_done(task, found))
        task.signals.cancelled.connect(lambda task=task: self._sweep_stopped(task))
        task.signals.failed.connect(lambda message, task=task: self._sweep_stopped(task, message))
        self.sweep = task
        self.drive.show_progress((0, len(task.edges) - 1))
        self.pool.start(task)

    def cancel_sweep(self):
        """Stop a running sweep (what it found so far stays on the strip)."""
        if self.sweep is not None:
            self.sweep.cancel()
            self.drive.show_progress(None)
            self.sweep = None

    def sweeping(self):
        return self.sweep is not None

    def _sweep_progress(self, task, done, total, found):
        if task is not self.sweep:
            return
        self.intervals = found
        self.drive.strip.set_intervals(found, (task.edges[0], task.edges[done]))
        self.drive.show_progress((done, total))

    def _sweep_done(self, task, found):
        if task is not self.sweep:
            return
        self.intervals = found
        self.drive.strip.set_intervals(found, (task.edges[0], task.edges[-1]))
        self.drive.show_progress(None)
        self.sweep = None
        self._update_status()

    def _sweep_stopped(self, task, message=None):
        if task is self.sweep:
            self.sweep = None
            self.drive.show_progress(None)
        if message:
            self.statusBar().showMessage(error_line(message), 10000)

    # ------------------------------------------------------------------ drive

    def set_t(self, t):
        """Show the model at drive value t (the drive bar calls this)."""
        if self.model is None:
            return
        if self.drive.t != t:
            self.drive.set_t(t)
            return
        self.view.set_t(t)
        # While playing, the side panels follow at a calmer rate than the 3D view
        # (every panel repainted each frame costs more than the view itself); the
        # trailing timer shows the last value when playback stops between updates.
        if self.drive.is_playing() and self.side_clock.isValid() and self.side_clock.elapsed() < SIDE_PANEL_MS:
            if not self.side_timer.isActive():
                self.side_timer.start(SIDE_PANEL_MS)
            return
        self._update_side()

    def _update_side(self):
        if self.model is None:
            return
        t = self.view.t
        self.side_clock.start()
        self.hinge_model.set_now(np.degrees(fold_angles(self.model.schedule, np.array([t]))[0]))
        self.gap_model.set_now(self.view.gaps)
        self.gap_plot.set_t(t)
        self._update_status()

    def _update_status(self):
        if self.model is None:
            return
        mech, view = self.model.mech, self.view
        parts = [f"{mech.name or self.model.path.name}: {mech.n_faces} panels, {mech.n_hinges} hinges",
                 f"t = {view.t:.3f}"]
        n = len(view.colliding)
        parts.append(f"{n} colliding pair{'s' if n != 1 else ''}" if n else "no collision here")
        open_ = view.open_edges()
        if len(open_):
            parts.append(f"widest gap {view.gaps[open_].max():.3g} {mech.units}")
        else:
            parts.append("every cut edge meets")
        if self.sweep is None and self.intervals is not None:
            parts.append(f"{len(self.intervals)} collision stretch(es) over −1..1" if self.intervals
                         else "no collision over −1..1")
        self.status.setText("   ·   ".join(parts))

    # -------------------------------------------------------------- selection

    def _selected_hinge(self):
        rows = self.hinge_table.selectionModel().selectedRows()
        return rows[0].row() if rows else -1

    def _selected_edges(self):
        return sorted(index.row() for index in self.gap_table.selectionModel().selectedRows())

    def _select_hinge_row(self, h):
        selection = self.hinge_table.selectionModel()
        if h < 0:
            selection.clearSelection()
            return
        selection.select(self.hinge_model.index(h, 0),
                         QtCore.QItemSelectionModel.SelectionFlag.ClearAndSelect
                         | QtCore.QItemSelectionModel.SelectionFlag.Rows)
        self.hinge_table.scrollTo(self.hinge_model.index(h, 0))

    def _select_edges(self, edges):
        selection = self.gap_table.selectionModel()
        selection.clearSelection()
        for e in edges:
            selection.select(self.gap_model.index(int(e), 0),
                             QtCore.QItemSelectionModel.SelectionFlag.Select
                             | QtCore.QItemSelectionModel.SelectionFlag.Rows)

    def _hinge_selected(self, *_):
        h = self._selected_hinge()
        self.view.select_hinge(h)
        if h >= 0 and self.view.selected_face not in (-1, int(self.model.mech.child[h])):
            self.view.select_face(-1)

    def _face_picked(self, face):
        """A click in the 3D view: select the panel and the hinge that carries it."""
        self.view.select_face(face)
        if face < 0:
            self._select_hinge_row(-1)
            return
        self._select_hinge_row(int(self.model.mech.face_hinge[face]))

    def _edges_selected(self, *_):
        edges = self._selected_edges()
        self.gap_model.set_curve_colors(self.gap_plot.show_edges(edges))
        self.view.set_label_edges(edges if edges else None)

    # ------------------------------------------------------------------ close

    def closeEvent(self, ev):
        self.drive.play(False)
        self.cancel_sweep()
        self.pool.waitForDone()
        super().closeEvent(ev)


def run(path=None, argv=None):
    """Start the app on a model file (the bundled demo if None); return the exit code."""
    app = QtWidgets.QApplication.instance() or QtWidgets.QApplication(argv or [sys.argv[0]])
    app.setApplicationName("foldsim")
    window = MainWindow()
    window.show()
    target = path if path is not None else (DEMO if DEMO.exists() else None)
    if target is not None:
        window.open_path(target)
    else:
        window.statusBar().showMessage("Open a mechanism file (File → Open)")
    quit_after = os.environ.get("FOLDSIM_QUIT_AFTER_MS")
    if quit_after:
        QtCore.QTimer.singleShot(int(quit_after), window.close)
    return app.exec()
