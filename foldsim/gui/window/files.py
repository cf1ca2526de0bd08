"""Opening, reloading, watching and saving the app's model files.

`FileHandling` is a part of `window.app.MainWindow`: the File menu's open, new-from-shape,
recent, reload and save commands, the reading or making of a model in a worker
thread under a busy dialog, and the watch on the model's file that reloads it when
it changes on disk. It works on the window's ``model``, ``settings``, ``watcher``,
``reload_timer``, ``tool_pool`` and ``recording``, and shows models with the
window's ``open_path`` and ``_show_model``.
"""

from pathlib import Path

from PySide6 import QtCore, QtWidgets

from ...errors import FoldsimError
from ...io.mechanism_json import save
from ..panels.dialogs import ShapeDialog, busy_dialog, in_dialog_terms
from .model import Model, error_line
from .sweep import CallTask

MAX_RECENT = 8


class FileHandling:
    """The main window's file commands (a mixin of `app.MainWindow`)."""

    def _refresh_recent(self):
        # Not QMenu.clear(): that deletes at once the action whose signal may be running now.
        for action in self.recent_menu.actions():
            self.recent_menu.removeAction(action)
            action.deleteLater()
        recent = self.recent_files()
        for path in recent:
            action = self.recent_menu.addAction(path)
            action.triggered.connect(lambda _=False, p=path: self._open_recent(p))
        self.recent_menu.addSeparator()
        clear = self.recent_menu.addAction("Clear recent")
        clear.setStatusTip("Forget the recently opened files")
        clear.triggered.connect(self.clear_recent)
        clear.setEnabled(bool(recent))
        self.recent_menu.setEnabled(bool(recent))

    def _open_recent(self, path):
        if self.keep_or_discard("open"):
            self.open_path(path)

    def clear_recent(self):
        """File ▸ Open recent ▸ Clear recent: forget the list."""
        self.settings.setValue("recent", [])
        self._refresh_recent()

    # ----------------------------------------------------------- unsaved work

    def unsaved(self):
        """Whether the model on show exists only in memory (made from a shape, never saved)."""
        return self.model is not None and self.model.path is None

    def keep_or_discard(self, action):
        """Before ``action`` replaces or closes an unsaved model, ask Save / Discard / Cancel.

        Parameters
        ----------
        action : str
            What is about to happen, in the words of the question ("quit", "open", "new").

        Returns
        -------
        bool
            True to go ahead: nothing unsaved, the model was saved, or the user
            chose to discard it. False when the user cancelled (or the save did not
            happen).
        """
        if not self.unsaved():
            return True
        buttons = QtWidgets.QMessageBox.StandardButton
        words = {"quit": "before quitting", "open": "before opening another file",
                 "new": "before making a new model"}
        answer = QtWidgets.QMessageBox.question(
            self, "foldsim",
            f"{self.model.name()} is not saved. Save it {words.get(action, 'first')}?",
            buttons.Save | buttons.Discard | buttons.Cancel, buttons.Save)
        if answer == buttons.Save:
            self.save_as()
            return not self.unsaved()
        return answer == buttons.Discard

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
        if not self.keep_or_discard("open"):
            return
        start = str(self.model.folder()) if self.model else ""
        path, _ = QtWidgets.QFileDialog.getOpenFileName(
            self, "Open mechanism or mesh", start,
            "Mechanisms and meshes (*.mech.json *.json *.obj *.off *.stl *.ply);;All files (*)")
        if path:
            self.open_path(path)

    def shape_dialog(self):
        """File ▸ New from shape…"""
        if not self.keep_or_discard("new"):
            return None
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
        self.open_shape(recipe, remember=Path(recipe.shape) if box.use_mesh.isChecked() else None,
                        terms=box.TERMS)

    def open_shape(self, recipe, keep_view=False, remember=None, built=None, terms=None):
        """Make a model from a shape as `foldsim new` does (in the background) and show it.

        Parameters
        ----------
        recipe : argparse.Namespace
            `foldsim.design.shape_args`.
        keep_view : bool
        remember : Path, optional
            A mesh file to add to the recent files.
        built : Mechanism, optional
            Already made from the recipe: shown at once.
        terms : dict, optional
            Flags of `foldsim new` and the dialog fields that set them, to word a
            refusal in the dialog's terms (`panels.dialogs.in_dialog_terms`).
        """
        if built is not None:
            self._show_model(Model.from_shape(recipe, built), keep_view)
            if remember is not None:
                self._remember(remember)
            return True
        name = Path(recipe.shape).name
        return self._load_in_background(lambda: Model.from_shape(recipe), f"Unfolding and gearing {name}…",
                                        keep_view, remember, terms)

    def loading(self):
        """Whether a model is being read or made in the background."""
        return self.load_task is not None

    def _load_in_background(self, make, text, keep_view, remember, terms=None):
        self.cancel_load()
        task = CallTask(lambda task: make())
        dialog = busy_dialog(self, text)
        dialog.canceled.connect(lambda task=task: self.cancel_load(task))
        task.signals.finished.connect(lambda model, task=task: self._loaded(task, model, keep_view, remember))
        task.signals.failed.connect(lambda message, task=task: self._load_failed(
            task, in_dialog_terms(message, terms) if terms else message))
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
