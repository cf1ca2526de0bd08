"""The foldsim desktop app: the main window and its entry point.

The window holds the 3D view (`view.viewport.FoldView`), the drive bar under it and,
beside it, the hinge table, the cut-edge table and the gap plot; the "Play and
backlash" panel (`panels.stackup.StackupPanel`) docks below. Opening a file loads
it through the core (`foldsim.load`); a mesh file or a built-in solid is unfolded
and geared by the same code as `foldsim new`. A file the core refuses shows the
same one-line message as the command line and leaves the previous model in
place. The collision sweep over the whole range, large models, new models,
exports and the stack-up run in worker threads (`sweep`); clips are drawn by
`recorder` with a progress dialog.

This module assembles the window (layout, menus, drive, selection); its file
commands live in `files`, its background work in `jobs`, its status words and
side-column heights in `status`, its Help menu in `help` and what it holds about
one mechanism in `model`.

``FOLDSIM_QUIT_AFTER_MS`` in the environment makes `run` quit after that many
milliseconds (for smoke tests and unattended screenshots).
"""

import os
import sys
from pathlib import Path

import numpy as np
from PySide6 import QtCore, QtGui, QtWidgets

from ...design import is_mesh, shape_args
from ...errors import FoldsimError
from ...gearing import fold_angles
from ..panels.side import DriveBar, GapModel, GapPlot, HingeModel, make_table
from ..panels.stackup import StackupPanel
from ..panels.study import open_study
from ..view.numbers import NUMBERS_UP_TO
from ..view.viewport import FoldView, default_face_colors
from .files import MAX_RECENT, FileHandling
from .help import DOCS, LICENCE, HelpMenu
from .jobs import Jobs
from .model import GAP_GRID, Model, error_line, file_stem, label_colors, label_order, part_labels
from .status import GAP_PLOT_MIN, StatusBar

__all__ = ["BACKGROUND_BYTES", "DEMO", "DOCS", "GAP_GRID", "GAP_PLOT_MIN", "LICENCE", "VIEW_NAMES", "MAX_RECENT", "MainWindow", "Model", "error_line",
           "file_stem", "label_colors", "part_labels", "run"]

DEMO = Path(__file__).resolve().parents[3] / "assets" / "gift-box.mech.json"
"""The model the app opens when started without a file."""

VIEW_NAMES = {"front": "Front view", "top": "Top view", "side": "Side view", "iso": "Three-quarter view"}
"""View menu names of the standard directions; the view is in perspective, so the
corner view is not called isometric."""

STEP, BIG_STEP = 0.01, 0.1
"""Drive steps of the arrow keys, without and with Shift."""

BACKGROUND_BYTES = 64_000
"""Model files larger than this are read in a worker thread (about 450 panels and up)."""


class MainWindow(FileHandling, Jobs, StatusBar, HelpMenu, QtWidgets.QMainWindow):
    """The app's window; `open_path` loads a model into it."""

    def __init__(self, settings=None):
        super().__init__()
        self.settings = settings or QtCore.QSettings("foldsim", "foldsim")
        self.model = None
        self.sweep = None
        self.report_task = None
        self.intervals = []
        self.build_intervals = []
        self.error_box = None
        self.load_task = None
        self.load_dialog = None
        self.export_task = None
        self.export_progress = None
        self.dialog = None
        self.recording = False
        self.ask_before_close = True
        self.pool = QtCore.QThreadPool(self)
        self.pool.setMaxThreadCount(1)
        # Loads, exports and the stack-up: apart from the sweep, so none waits for it.
        self.tool_pool = QtCore.QThreadPool(self)
        self.tool_pool.setMaxThreadCount(2)
        self.watcher = QtCore.QFileSystemWatcher(self)
        self.watcher.fileChanged.connect(self._file_changed)
        self.reload_timer = QtCore.QTimer(self)
        self.reload_timer.setSingleShot(True)
        self.reload_timer.setInterval(250)
        self.reload_timer.timeout.connect(lambda: self.reload(auto=True))
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
        side.setChildrenCollapsible(False)
        self.gap_plot.setMinimumHeight(GAP_PLOT_MIN)
        self.side = side
        split = QtWidgets.QSplitter(QtCore.Qt.Orientation.Horizontal)
        split.addWidget(centre)
        split.addWidget(side)
        split.setStretchFactor(0, 3)
        split.setStretchFactor(1, 1)
        split.setSizes([900, 380])
        self.setCentralWidget(split)
        self.status = QtWidgets.QLabel()
        self.statusBar().addWidget(self.status, 1)
        self.picked_label = QtWidgets.QLabel()
        self.statusBar().addPermanentWidget(self.picked_label)
        self.swept = (0.0, 0.0)
        self.swept_whole = False
        self.stackup_panel = StackupPanel(self.tool_pool)
        self.stackup_dock = QtWidgets.QDockWidget("Play and backlash", self)
        self.stackup_dock.setObjectName("play-and-backlash")
        self.stackup_dock.setWidget(self.stackup_panel)
        self.addDockWidget(QtCore.Qt.DockWidgetArea.BottomDockWidgetArea, self.stackup_dock)
        self.stackup_dock.hide()
        self.stackup_dock.visibilityChanged.connect(self._dock_shown)
        self._dock_sized = False
        self._numbers_chosen = False
        self.picked_face = -1

        self._build_menus()
        self.envelope_errors = None
        self.stackup_panel.envelopeChanged.connect(self._envelope_changed)
        self.stackup_panel.failed.connect(lambda message: self.show_error(error_line(message)))
        self.stackup_panel.hingeChosen.connect(self._select_hinge_row)
        self.drive.tChanged.connect(self.set_t)
        self.drive.cancel_button.clicked.connect(self.cancel_sweep)
        self.view.facePicked.connect(self._face_picked)
        self.hinge_table.selectionModel().selectionChanged.connect(self._hinge_selected)
        self.gap_table.selectionModel().selectionChanged.connect(self._edges_selected)

    def _envelope_changed(self, errors):
        self.envelope_errors = errors
        self.view.set_envelope(errors if self.stackup_dock.isVisible() else None)

    def _dock_shown(self, visible):
        # The sampled builds are outlined only while their panel is open.
        self.view.set_envelope(self.envelope_errors if visible else None)
        # The first time it opens, give the panel a third of the window and the view the rest.
        if visible and not self._dock_sized:
            self._dock_sized = True
            self.resizeDocks([self.stackup_dock], [max(260, self.height() // 3)], QtCore.Qt.Orientation.Vertical)
        QtCore.QTimer.singleShot(0, self.share_side_height)

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

    def _toggle(self, menu, text, shortcut, slot, tip, checked=False):
        action = self._action(menu, text, lambda: None, shortcut, tip)
        action.setCheckable(True)
        action.setChecked(checked)
        action.toggled.connect(slot)
        return action

    def _numbers_toggled(self, on):
        self._numbers_chosen = True
        self.view.set_numbers(on)

    def _build_menus(self):
        bar = self.menuBar()
        files = bar.addMenu("&File")
        self._action(files, "&Open…", self.open_dialog, QtGui.QKeySequence.StandardKey.Open)
        self._action(files, "&New from shape…", self.shape_dialog, QtGui.QKeySequence.StandardKey.New,
                     "Unfold and gear a built-in solid or a mesh file")
        self.recent_menu = files.addMenu("Open &recent")
        self._action(files, "Open s&tudy…", lambda: open_study(self), None,
                     "List the nets of a net study (foldsim study) and show one")
        self._action(files, "Re&load", lambda: self.reload(), "Ctrl+R", "Read the model's file again")
        files.addSeparator()
        self._action(files, "&Save", self.save, QtGui.QKeySequence.StandardKey.Save)
        self._action(files, "Save &as…", self.save_as, QtGui.QKeySequence.StandardKey.SaveAs)
        self._action(files, "&Export…", self.export_dialog, "Ctrl+E",
                     "glTF, flat pattern, tables, review report or a posed mesh")
        files.addSeparator()
        self._action(files, "Save screens&hot…", self.save_image, "Ctrl+I", "Save the 3D view as a PNG")
        self._action(files, "Record &clip…", self.clip_dialog, "Ctrl+Shift+R",
                     "Record the motion as MP4, GIF or PNG")
        files.addSeparator()
        self._action(files, "&Quit", self.close, QtGui.QKeySequence.StandardKey.Quit)
        view = bar.addMenu("&View")
        self._action(view, "&Fit whole motion", self.view.fit_motion, "F",
                     "Fit every shape from flat to closed into the view")
        self._action(view, "Fit &current pose", self.view.fit_pose, "Shift+F",
                     "Fit the model as it stands at this t into the view")
        for name, key in (("front", "1"), ("top", "2"), ("side", "3"), ("iso", "4")):
            self._action(view, VIEW_NAMES[name], lambda _=False, n=name: self.view.set_view(n), key)
        view.addSeparator()
        self.numbers_action = self._toggle(view, "&Numbers", "N", self._numbers_toggled,
                                           "Face, hinge (h) and cut-edge (e) numbers, as in the tables")
        self.gap_lines_action = self._toggle(view, "&Gap lines", "G", self.view.set_gap_lines,
                                             "Lines and lengths of the cut edges still open", checked=True)
        self.legend_action = self._toggle(view, "&Legend", "L", self.view.set_legend,
                                          "The key to the marks in the view's corner", checked=True)
        colours = view.addMenu("&Colour panels by")
        group = QtGui.QActionGroup(self)
        self.color_by_face = self._action(colours, "Face", lambda: self.apply_colors())
        self.color_by_part = self._action(colours, "Part type", lambda: self.apply_colors())
        for action in (self.color_by_face, self.color_by_part):
            action.setCheckable(True)
            group.addAction(action)
        self.color_by_face.setChecked(True)
        self.show_solids = self._action(view, "&Thick panels", lambda: self.apply_solids(), None,
                                        "Draw the panels as the build's solids (files with a build object)")
        self.show_solids.setCheckable(True)
        self.show_solids.setChecked(True)
        self.show_solids.setEnabled(False)
        self.show_gears = self._action(view, "G&ear bodies", lambda: self.apply_solids(), None,
                                       "Draw the build's gear bodies with the thick panels")
        self.show_gears.setCheckable(True)
        self.show_gears.setChecked(True)
        self.show_gears.setEnabled(False)
        view.addSeparator()
        dock = self.stackup_dock.toggleViewAction()
        dock.setText("&Play and backlash")
        dock.setShortcut(QtGui.QKeySequence("Ctrl+B"))
        dock.setStatusTip("Closure gaps of sampled builds with hinge play and gear backlash")
        view.addAction(dock)
        self.addAction(dock)
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
        help_ = bar.addMenu("&Help")
        self._action(help_, "&Guide to the app", self.open_docs, QtGui.QKeySequence.StandardKey.HelpContents,
                     "The bundled guide (docs/app.md) in your browser or viewer")
        self._action(help_, "&About foldsim", self.about)
        self._refresh_recent()

    # ------------------------------------------------------------------ files

    def open_path(self, path, keep_view=False):
        """Load a model file and show it; on a bad file show the error and keep the old model.

        A mesh file (.obj, .off, .stl, .ply) is unfolded and geared as by
        `foldsim new` with its defaults; that, and a large mechanism file
        (`BACKGROUND_BYTES`), happens in a worker thread (see `loading`).

        Returns
        -------
        bool
            Whether the file was loaded (for work in the background: started).
        """
        path = Path(path)
        if is_mesh(path):
            return self.open_shape(shape_args(path), keep_view=keep_view, remember=path)
        if path.is_file() and path.stat().st_size > BACKGROUND_BYTES:
            return self._load_in_background(lambda: Model(path), f"Reading {path.name}…", keep_view, path)
        try:
            model = Model(path)
        except FoldsimError as exc:
            self.show_error(error_line(exc))
            return False
        self._show_model(model, keep_view)
        self._remember(path)
        return True

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
            if self.keep_or_discard("open"):
                self.open_path(files[0])

    # ------------------------------------------------------------------ model

    def apply_solids(self):
        """Draw thick panels when the model has a build and the View toggle is on."""
        model = self.model
        built = model is not None and model.has_build()
        self.show_solids.setEnabled(built)
        self.show_gears.setEnabled(built and self.show_solids.isChecked())
        if model is None:
            return
        try:
            solids = (model.solids(gears=self.show_gears.isChecked())
                      if built and self.show_solids.isChecked() else None)
        except FoldsimError as exc:
            self.statusBar().showMessage(error_line(exc), 10000)
            solids = None
        self.view.set_solids(solids or None)

    def _show_model(self, model, keep_view):
        old = self.model
        same = keep_view and old is not None and old.mech.n_faces == model.mech.n_faces
        camera = dict(self.view.opts) if same else None
        picked_hinge = self._selected_hinge() if same else -1
        picked_edges = self._selected_edges() if same else None
        self.cancel_sweep()
        self.model = model
        mech = model.mech
        if not self._numbers_chosen:
            self.numbers_action.blockSignals(True)
            self.numbers_action.setChecked(mech.n_faces < NUMBERS_UP_TO)
            self.numbers_action.blockSignals(False)
        self.view.set_numbers(self.numbers_action.isChecked())
        self.picked_face = -1
        self.view.set_mechanism(mech, model.schedule, model.pan, face_colors=self._colors(model))
        self.apply_solids()
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
        self.build_intervals = []
        self.swept, self.swept_whole = (0.0, 0.0), False
        self.drive.strip.set_intervals([], (0.0, 0.0))
        self.stackup_panel.set_model(mech)
        self._watch(model.source)
        self._update_title()
        self.set_t(self.drive.t)
        self._size_columns()
        QtCore.QTimer.singleShot(0, self.share_side_height)
        if model.labels is None or model.has_build():
            self.start_report()
        self.start_sweep()
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
            by_part = self.color_by_part.isChecked() and self.model.labels is not None
            self.view.set_part_types(label_order(self.model.labels) if by_part else None)

    def _update_title(self):
        if self.model is None:
            name = ""
        elif self.model.path is not None:
            name = self.model.path.name
        else:
            name = f"{self.model.name()} (not saved)"
        self.setWindowTitle(f"{name} — foldsim" if name else "foldsim")

    # ------------------------------------------------------------------ drive

    def set_t(self, t):
        """Show the model at drive value t (the drive bar calls this)."""
        if self.model is None:
            return
        if self.drive.t != t:
            self.drive.set_t(t)
            return
        # The view, the t field, the tables, the gap plot's cursor and the status
        # bar all show this t in the same frame, during playback too.
        self.view.set_t(t)
        self._update_side()

    def _update_side(self):
        if self.model is None:
            return
        t = self.view.t
        self.hinge_model.set_now(np.degrees(fold_angles(self.model.schedule, np.array([t]))[0]))
        self.gap_model.set_now(self.view.gaps)
        self.gap_plot.set_t(t)
        self._update_status()

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
            self.picked_face = -1
            self._update_status()

    def _face_picked(self, face):
        """A click in the 3D view: select the panel and the hinge that carries it."""
        self.view.select_face(face)
        self.picked_face = int(face)
        if face < 0:
            self._select_hinge_row(-1)
        else:
            self._select_hinge_row(int(self.model.mech.face_hinge[face]))
        self._update_status()

    def _edges_selected(self, *_):
        edges = self._selected_edges()
        self.gap_model.set_curve_colors(self.gap_plot.show_edges(edges))
        self.view.set_label_edges(edges if edges else None)
        if len(edges) == 1:
            self.stackup_panel.select_edge(edges[0])

    # ------------------------------------------------------------------ close

    def closeEvent(self, ev):
        if self.ask_before_close and not self.keep_or_discard("quit"):
            ev.ignore()
            return
        self.drive.play(False)
        self.cancel_sweep()
        self.cancel_load()
        self.cancel_export()
        self.stackup_panel.stop()
        self.pool.waitForDone()
        self.tool_pool.waitForDone()
        super().closeEvent(ev)


def run(path=None, argv=None, built=None):
    """Start the app on a model file (the bundled demo if None); return the exit code.

    ``built`` is a mesh file's (recipe, mechanism) already made by the command line.
    """
    app = QtWidgets.QApplication.instance() or QtWidgets.QApplication(argv or [sys.argv[0]])
    app.setApplicationName("foldsim")
    window = MainWindow()
    window.show()
    target = path if path is not None else (DEMO if DEMO.exists() else None)
    if built is not None:
        window.open_shape(built[0], built=built[1], remember=path)
    elif target is not None:
        window.open_path(target)
    else:
        window.statusBar().showMessage("Open a mechanism file (File → Open)")
    quit_after = os.environ.get("FOLDSIM_QUIT_AFTER_MS")
    if quit_after:
        window.ask_before_close = False  # unattended: nobody to answer
        QtCore.QTimer.singleShot(int(quit_after), window.close)
    return app.exec()
