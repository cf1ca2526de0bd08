"""The foldsim desktop app: the main window and its entry point.

The window holds the 3D view (`viewport.FoldView`), the drive bar under it and,
beside it, the hinge table, the cut-edge table and the gap plot; the "Play and
backlash" panel (`stackup_view.StackupPanel`) docks below. Opening a file loads
it through the core (`foldsim.load`); a mesh file or a built-in solid is unfolded
and geared by the same code as `foldsim new`. A file the core refuses shows the
same one-line message as the command line and leaves the previous model in
place. The collision sweep over the whole range, large models, new models,
exports and the stack-up run in worker threads (`sweep`); clips are drawn by
`recorder` with a progress dialog.

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
from ..commands.app import is_mesh, shape_args
from ..errors import FoldsimError
from ..gearing import fold_angles, fold_schedule
from ..io.mechanism_json import load, save
from ..kinematics import poses_at
from ..tolerances import DEFAULT
from . import palette, recorder
from .panels import DriveBar, GapModel, GapPlot, HingeModel, make_table
from .stackup_view import StackupPanel
from .sweep import CallTask, ReportTask, SweepTask, export_file
from .tools import ClipDialog, ExportDialog, ShapeDialog, busy_dialog
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

BACKGROUND_BYTES = 64_000
"""Model files larger than this are read in a worker thread (about 450 panels and up)."""


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


def file_stem(path):
    """A model file's name without ``.mech.json`` (or its one suffix).

    Examples
    --------
    >>> file_stem("a/gift-box.mech.json"), file_stem("cube.stl")
    ('gift-box', 'cube')
    """
    name = Path(path).name
    return name[:-len(".mech.json")] if name.endswith(".mech.json") else Path(name).stem


class Model:
    """Everything the window shows about one loaded mechanism.

    A model comes from a mechanism file (``path``), or is made from a shape
    (`from_shape`: ``recipe`` holds the options of `foldsim new`; ``path`` is
    None until it is saved).

    Attributes
    ----------
    path : Path or None
        The mechanism file, once there is one.
    source : Path or None
        The file the model was read or made from (watched for changes).
    recipe : argparse.Namespace or None
        How a model made from a shape was made.
    build_report : dict or None
        `foldsim new`'s report for a model made from a shape.
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

    def __init__(self, path=None, tol=DEFAULT, mech=None, recipe=None, source=None):
        self.path = Path(path) if path is not None else None
        self.source = Path(source) if source is not None else self.path
        self.recipe = recipe
        self.build_report = None
        self.mech = load(self.path, tol) if mech is None else mech
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

    @classmethod
    def from_shape(cls, recipe, mech=None):
        """A model made from a built-in solid or a mesh file as `foldsim new` makes it.

        Parameters
        ----------
        recipe : argparse.Namespace
            `foldsim.commands.app.shape_args`.
        mech : Mechanism, optional
            Already made from the recipe.
        """
        from ..commands.new import build

        report = None
        if mech is None:
            mech, report = build(recipe)
        shape = Path(recipe.shape)
        model = cls(mech=mech, recipe=recipe, source=shape if is_mesh(shape) or shape.is_file() else None)
        model.build_report = report
        if report is not None:
            model.labels = part_labels(report.get("part_types"), mech.n_faces)
        return model

    def name(self):
        """What the window calls the model."""
        if self.mech.name:
            return self.mech.name
        return self.source.name if self.source is not None else "new model"

    def default_stem(self):
        """A file name (no suffix) for saving or exporting the model."""
        if self.path is not None:
            return file_stem(self.path)
        if self.source is not None:
            return file_stem(self.source)
        return "".join(c if c.isalnum() or c in "-_" else "-" for c in self.name()) or "model"

    def folder(self):
        """The folder of the model's file, or the current one."""
        return self.source.parent if self.source is not None else Path.cwd()


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
        self.load_task = None
        self.load_dialog = None
        self.export_task = None
        self.export_progress = None
        self.dialog = None
        self.recording = False
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
        self.stackup_panel = StackupPanel(self.tool_pool)
        self.stackup_dock = QtWidgets.QDockWidget("Play and backlash", self)
        self.stackup_dock.setObjectName("play-and-backlash")
        self.stackup_dock.setWidget(self.stackup_panel)
        self.addDockWidget(QtCore.Qt.DockWidgetArea.BottomDockWidgetArea, self.stackup_dock)
        self.stackup_dock.hide()
        self.stackup_dock.visibilityChanged.connect(self._dock_shown)
        self._dock_sized = False

        self._build_menus()
        self.stackup_panel.envelopeChanged.connect(self.view.set_envelope)
        self.stackup_panel.failed.connect(lambda message: self.show_error(error_line(message)))
        self.stackup_panel.hingeChosen.connect(self._select_hinge_row)
        self.drive.tChanged.connect(self.set_t)
        self.drive.cancel_button.clicked.connect(self.cancel_sweep)
        self.view.facePicked.connect(self._face_picked)
        self.hinge_table.selectionModel().selectionChanged.connect(self._hinge_selected)
        self.gap_table.selectionModel().selectionChanged.connect(self._edges_selected)

    def _dock_shown(self, visible):
        # The first time it opens, give the panel a third of the window and the view the rest.
        if visible and not self._dock_sized:
            self._dock_sized = True
            self.resizeDocks([self.stackup_dock], [max(260, self.height() // 3)], QtCore.Qt.Orientation.Vertical)

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
        self._action(files, "&New from Shape…", self.shape_dialog, QtGui.QKeySequence.StandardKey.New,
                     "Unfold and gear a built-in solid or a mesh file")
        self.recent_menu = files.addMenu("Open &Recent")
        self._action(files, "Re&load", lambda: self.reload(), "Ctrl+R", "Read the model's file again")
        files.addSeparator()
        self._action(files, "&Save", self.save, QtGui.QKeySequence.StandardKey.Save)
        self._action(files, "Save &As…", self.save_as, QtGui.QKeySequence.StandardKey.SaveAs)
        self._action(files, "&Export…", self.export_dialog, "Ctrl+E",
                     "glTF, flat pattern, tables, review report or a posed mesh")
        files.addSeparator()
        self._action(files, "Save Screens&hot…", self.save_image, "Ctrl+I", "Save the 3D view as a PNG")
        self._action(files, "Record &Clip…", self.clip_dialog, "Ctrl+Shift+R",
                     "Record the motion as MP4, GIF or PNG")
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
        view.addSeparator()
        dock = self.stackup_dock.toggleViewAction()
        dock.setText("&Play and Backlash")
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
        start = str(self.model.folder()) if self.model else ""
        path, _ = QtWidgets.QFileDialog.getOpenFileName(
            self, "Open mechanism or mesh", start,
            "Mechanisms and meshes (*.mech.json *.json *.obj *.off *.stl *.ply);;All files (*)")
        if path:
            self.open_path(path)

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

    def shape_dialog(self):
        """File ▸ New from shape…"""
        box = ShapeDialog(self.model.folder() if self.model else "", self)
        box.accepted.connect(lambda box=box: self._shape_chosen(box))
        box.finished.connect(box.deleteLater)
        self.dialog = box
        box.open()
        return box

    def _shape_chosen(self, box):
        try:
            recipe = box.recipe()
        except FoldsimError as exc:
            self.show_error(error_line(exc))
            return
        self.open_shape(recipe, remember=Path(recipe.shape) if box.use_mesh.isChecked() else None)

    def open_shape(self, recipe, keep_view=False, remember=None, built=None):
        """Make a model from a shape as `foldsim new` does (in the background) and show it.

        Parameters
        ----------
        recipe : argparse.Namespace
            `foldsim.commands.app.shape_args`.
        keep_view : bool
        remember : Path, optional
            A mesh file to add to the recent files.
        built : Mechanism, optional
            Already made from the recipe: shown at once.
        """
        if built is not None:
            self._show_model(Model.from_shape(recipe, built), keep_view)
            if remember is not None:
                self._remember(remember)
            return True
        name = Path(recipe.shape).name
        return self._load_in_background(lambda: Model.from_shape(recipe), f"Unfolding and gearing {name}…",
                                        keep_view, remember)

    def loading(self):
        """Whether a model is being read or made in the background."""
        return self.load_task is not None

    def _load_in_background(self, make, text, keep_view, remember):
        self.cancel_load()
        task = CallTask(lambda task: make())
        dialog = busy_dialog(self, text)
        dialog.canceled.connect(lambda task=task: self.cancel_load(task))
        task.signals.finished.connect(lambda model, task=task: self._loaded(task, model, keep_view, remember))
        task.signals.failed.connect(lambda message, task=task: self._load_failed(task, message))
        task.signals.cancelled.connect(lambda task=task: self._load_ended(task))
        self.load_task, self.load_dialog = task, dialog
        self.tool_pool.start(task)
        return True

    def cancel_load(self, task=None):
        """Stop waiting for a model being read or made; the shown model stays."""
        if self.load_task is not None and task in (None, self.load_task):
            self.load_task.cancel()
            self._load_ended(self.load_task)
            self.statusBar().showMessage("Stopped; the model shown stays", 5000)

    def _load_ended(self, task):
        if task is not self.load_task:
            return False
        self.load_task = None
        dialog, self.load_dialog = self.load_dialog, None
        if dialog is not None:
            dialog.cancel()
            dialog.deleteLater()
        return True

    def _loaded(self, task, model, keep_view, remember):
        if task is not self.load_task:
            return
        if self.recording:
            QtCore.QTimer.singleShot(200, lambda: self._loaded(task, model, keep_view, remember))
            return
        self._load_ended(task)
        self._show_model(model, keep_view)
        if remember is not None:
            self._remember(remember)
        report = model.build_report
        if report is not None:
            self.statusBar().showMessage(
                f"made {model.name()}: {report['faces']} panels, {len(report['couplings'])} gear pairs, "
                f"degrees of freedom {report['dof']}; not saved yet", 10000)

    def _load_failed(self, task, message):
        if not self._load_ended(task):
            return
        self.show_error(error_line(message))
        if self.model is not None:
            self._watch(self.model.source)

    def reload(self, auto=False):
        """Read the current model's file again, keeping t, the camera and the selection.

        A model made from a shape is made again (from its mesh file, which may
        have changed).
        """
        if self.model is None:
            return False
        if auto and self.recording:
            self.reload_timer.start()
            return False
        path = self.model.path
        if path is None:
            if self.model.recipe is None:
                return False
            return self.open_shape(self.model.recipe, keep_view=True)
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
        if path is not None and Path(path).exists():
            self.watcher.addPath(str(path))

    def _file_changed(self, path):
        if self.model is not None and self.model.source is not None and Path(path) == self.model.source:
            self.reload_timer.start()

    def save(self):
        if self.model is None:
            return
        if self.model.path is None:
            self.save_as()
        else:
            self._write(self.model.path)

    def save_as(self):
        if self.model is None:
            return
        start = self.model.path or self.model.folder() / f"{self.model.default_stem()}.mech.json"
        path, _ = QtWidgets.QFileDialog.getSaveFileName(self, "Save mechanism as", str(start),
                                                        "Mechanisms (*.mech.json)")
        if path:
            self.save_to(path)

    def save_to(self, path):
        """Write the model to a mechanism file, which becomes the model's file."""
        if self._write(Path(path)):
            self.model.path = self.model.source = Path(path)
            self.model.recipe = None
            self._watch(path)
            self._remember(path)
            self._update_title()

    def _write(self, path):
        try:
            self.watcher.blockSignals(True)
            save(self.model.mech, path)
        except OSError as exc:
            self.show_error(error_line(FoldsimError(f"{path}: cannot write file: {exc.strerror or exc}")))
            return False
        finally:
            self.watcher.blockSignals(False)
            self._watch(self.model.source)
        return True

    # ---------------------------------------------------------------- exports

    def export_dialog(self):
        """File ▸ Export…"""
        if self.model is None:
            return None
        start = self.model.folder() / f"{self.model.default_stem()}.glb"
        box = ExportDialog(str(start), t_now=self.view.t, units=self.model.mech.units, parent=self)
        box.accepted.connect(lambda box=box: self._export_chosen(box))
        box.finished.connect(box.deleteLater)
        self.dialog = box
        box.open()
        return box

    def _export_chosen(self, box):
        try:
            options = box.options()
        except FoldsimError as exc:
            self.show_error(error_line(exc))
            return
        self.export_to(box.target(), **options)

    def exporting(self):
        return self.export_task is not None

    def export_to(self, path, **options):
        """Export the model through `foldsim.export.export` in the background.

        Parameters are those of `foldsim.export.export`. The result line goes to
        the status bar; a refusal to a dialog.
        """
        if self.model is None:
            return None
        self.cancel_export()
        mech, path = self.model.mech, Path(path)
        task = CallTask(lambda task: export_file(mech, path, options, task))
        dialog = busy_dialog(self, f"Writing {path.name}…")
        dialog.canceled.connect(lambda task=task: self.cancel_export(task))
        task.signals.finished.connect(lambda line, task=task: self._export_ended(task, line))
        task.signals.failed.connect(lambda message, task=task: self._export_ended(task, error=message))
        task.signals.cancelled.connect(lambda task=task: self._export_ended(task))
        self.export_task, self.export_progress = task, dialog
        self.tool_pool.start(task)
        return task

    def cancel_export(self, task=None):
        """Stop an export: nothing is written (an old file of that name stays whole)."""
        if self.export_task is not None and task in (None, self.export_task):
            self.export_task.cancel()
            self._export_ended(self.export_task)
            self.statusBar().showMessage("Export stopped; nothing was written", 5000)

    def _export_ended(self, task, line=None, error=None):
        if task is not self.export_task:
            return
        self.export_task = None
        dialog, self.export_progress = self.export_progress, None
        if dialog is not None:
            dialog.cancel()
            dialog.deleteLater()
        if line:
            self.statusBar().showMessage(line, 10000)
        if error:
            self.show_error(error_line(error))

    # --------------------------------------------------------- clips and stills

    def save_image(self):
        """File ▸ Save screenshot…: one PNG of the view (by default twice its size, as shown)."""
        return self.clip_dialog(still=True)

    def clip_dialog(self, still=False):
        """File ▸ Record clip… (or, with ``still``, Save screenshot…)."""
        if self.model is None:
            return None
        suffix = ".png" if still else ".mp4"
        size = (self.view.width() * 2, self.view.height() * 2) if still else (1280, 720)
        start = self.model.folder() / f"{self.model.default_stem()}{suffix}"
        box = ClipDialog(str(start), size=size, still=still, t_now=self.view.t, parent=self)
        box.accepted.connect(lambda box=box: self.record(box.target(), **box.options()))
        box.finished.connect(box.deleteLater)
        self.dialog = box
        box.open()
        return box

    def record(self, path, **options):
        """Write a clip (MP4, GIF) or a still (PNG) of the view with `recorder`.

        The frames are drawn by the view's GL context, which lives on this
        thread, so the recording runs here under a progress dialog whose Cancel
        stops it between frames (nothing is written then).

        Returns
        -------
        recorder.ClipInfo or None
        """
        if self.model is None:
            return None
        self.drive.play(False)
        progress = QtWidgets.QProgressDialog(f"Recording {Path(path).name}…", "Cancel", 0, 0, self)
        progress.setWindowTitle("foldsim")
        progress.setWindowModality(QtCore.Qt.WindowModality.WindowModal)
        progress.setMinimumDuration(0)
        progress.setAutoClose(False)
        progress.setAutoReset(False)

        def step(done, total):
            progress.setMaximum(total)
            progress.setValue(done)
            QtWidgets.QApplication.processEvents()

        self.recording = True
        info = None
        try:
            QtWidgets.QApplication.processEvents()
            if recorder.clip_format(path) == "png":
                info = recorder.save_screenshot(self.view, path, **options)
            else:
                info = recorder.record_clip(self.view, path, progress=step, cancel=progress.wasCanceled,
                                            **options)
        except recorder.Cancelled as exc:
            self.statusBar().showMessage(str(exc), 5000)
        except FoldsimError as exc:
            self.show_error(error_line(exc))
        finally:
            self.recording = False
            progress.cancel()
            progress.deleteLater()
        if info is not None:
            self.statusBar().showMessage(info.summary(), 10000)
        return info

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
        self.stackup_panel.set_model(mech)
        self._watch(model.source)
        self._update_title()
        self.set_t(self.drive.t)
        self._size_columns()
        if model.labels is None:
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
        if self.model is None:
            name = ""
        elif self.model.path is not None:
            name = self.model.path.name
        else:
            name = f"{self.model.name()} (not saved)"
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
        parts = [f"{self.model.name()}: {mech.n_faces} panels, {mech.n_hinges} hinges",
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
        if len(edges) == 1:
            self.stackup_panel.select_edge(edges[0])

    # ------------------------------------------------------------------ close

    def closeEvent(self, ev):
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
        QtCore.QTimer.singleShot(int(quit_after), window.close)
    return app.exec()
