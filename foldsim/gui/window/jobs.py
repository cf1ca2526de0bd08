"""The app's work beside the model on show: sweep, check report, exports and recordings.

`Jobs` is a part of `window.app.MainWindow`. The collision sweep over the whole range and
the check report (for part types) run in the window's ``pool``; exports run in its
``tool_pool`` under a busy dialog whose Cancel writes nothing; clips and stills are
drawn by `recorder` on the GUI thread (the view's GL context lives there) under a
progress dialog.
"""

import os
from pathlib import Path

from PySide6 import QtCore, QtWidgets

from ...errors import FoldsimError
from ..panels.dialogs import ClipDialog, ExportDialog, busy_dialog, in_dialog_terms
from ..record import recorder
from .model import error_line, part_labels
from .sweep import CallTask, ReportTask, SweepTask, export_file


ASSETS = Path(__file__).resolve().parents[3] / "assets"
"""The bundled demo models' folder: not where a user's exports should land."""


class Jobs:
    """The main window's background and long-running work (a mixin of `app.MainWindow`)."""

    def output_folder(self):
        """Where exports, clips and screenshots are offered: the last folder used for one.

        Before any, the model's folder, unless that is the bundled assets folder
        or cannot be written to; then the user's home.
        """
        last = self.settings.value("output/folder", "")
        if last and Path(last).is_dir():
            return Path(last)
        folder = self.model.folder()
        try:
            bundled = folder.resolve() == ASSETS.resolve()
        except OSError:
            bundled = True
        if bundled or not os.access(folder, os.W_OK):
            return Path.home()
        return folder

    def _used_folder(self, path):
        self.settings.setValue("output/folder", str(Path(path).resolve().parent))

    # ---------------------------------------------------------------- exports

    def export_dialog(self):
        """File ▸ Export…"""
        if self.model is None:
            return None
        start = self.output_folder() / f"{self.model.default_stem()}.glb"
        box = ExportDialog(str(start), t_now=self.view.t, units=self.model.mech.units, parent=self)
        box.restore(self.settings, "export")
        box.accepted.connect(lambda box=box: self._export_chosen(box))
        box.finished.connect(box.deleteLater)
        self.dialog = box
        box.open()
        return box

    def _export_chosen(self, box):
        box.remember(self.settings, "export")
        try:
            options = box.options()
        except FoldsimError as exc:
            self.show_error(error_line(exc))
            return
        self._used_folder(box.target())
        self.export_to(box.target(), terms=box.TERMS, **options)

    def exporting(self):
        return self.export_task is not None

    def export_to(self, path, terms=None, **options):
        """Export the model through `foldsim.export.export` in the background.

        Parameters are those of `foldsim.export.export`; ``terms`` maps the
        flags a refusal names to the fields of the dialog that asked
        (`panels.dialogs.in_dialog_terms`). The result line goes to the status
        bar; a refusal to a dialog.
        """
        if self.model is None:
            return None
        self.cancel_export()
        mech, path = self.model.mech, Path(path)
        task = CallTask(lambda task: export_file(mech, path, options, task))
        dialog = busy_dialog(self, f"Writing {path.name}…")
        dialog.canceled.connect(lambda task=task: self.cancel_export(task))
        task.signals.finished.connect(lambda line, task=task: self._export_ended(task, line))
        task.signals.failed.connect(lambda message, task=task: self._export_ended(
            task, error=in_dialog_terms(message, terms) if terms else message))
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
        start = self.output_folder() / f"{self.model.default_stem()}{suffix}"
        box = ClipDialog(str(start), size=size, still=still, t_now=self.view.t, parent=self)
        group = "screenshot" if still else "clip"
        box.restore(self.settings, group)
        if still:
            box.t_to.setValue(self.view.t)  # a screenshot is of the t shown
        box.accepted.connect(lambda box=box: self._clip_chosen(box, group))
        box.finished.connect(box.deleteLater)
        self.dialog = box
        box.open()
        return box

    def _clip_chosen(self, box, group):
        box.remember(self.settings, group)
        self._used_folder(box.target())
        self.record(box.target(), terms=box.TERMS, **box.options())

    def record(self, path, terms=None, **options):
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
            self.show_error(error_line(in_dialog_terms(exc, terms) if terms else exc))
        finally:
            self.recording = False
            progress.cancel()
            progress.deleteLater()
        if info is not None:
            self.statusBar().showMessage(info.summary(), 10000)
        return info

    # ----------------------------------------------------------------- report

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
        if "stops" in report:
            self.hinge_model.set_build(report.get("stops", []), report.get("sector_coverage", []),
                                       model.mech)
            # Thick panels that clash and gear bodies too near show as collisions do.
            self.build_intervals = [{"faces": list(c["faces"]), "first_t": c["first_t"], "last_t": c["last_t"]}
                                    for c in report.get("panel_clashes", []) + report.get("gear_contacts", [])
                                    if "last_t" in c]
            self._show_collisions()
            self._size_columns()
            if report.get("build_problems"):
                problems = report["build_problems"]
                self.statusBar().showMessage(f"build: {problems[0]}" + (f" (and {len(problems) - 1} more)"
                                                                         if len(problems) > 1 else ""), 15000)

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
        self.intervals = []
        self.swept, self.swept_whole = (task.edges[0], task.edges[0]), False
        self.drive.show_progress((0, len(task.edges) - 1))
        self.pool.start(task)

    def cancel_sweep(self):
        """Stop a running sweep (what it found so far stays on the strip)."""
        if self.sweep is not None:
            self.sweep.cancel()
            self.drive.show_progress(None)
            self.sweep = None
            self._update_status()

    def sweeping(self):
        return self.sweep is not None

    def all_intervals(self):
        """The collisions on the strip: the thin panels' sweep and the build's clashes and contacts."""
        return list(self.intervals or []) + list(self.build_intervals or [])

    def _show_collisions(self):
        found = self.all_intervals()
        self.drive.strip.set_intervals(found, self.swept)
        # Scrubbing inside the settled stretch reads collisions from here (docs/app.md).
        self.view.set_known_collisions(found, self.swept)
        self._update_status()

    def _sweep_progress(self, task, done, total, found):
        if task is not self.sweep:
            return
        self.intervals = found
        self.swept = (task.edges[0], task.edges[done])
        self._show_collisions()
        self.drive.show_progress((done, total))
        self._update_status()

    def _sweep_done(self, task, found):
        if task is not self.sweep:
            return
        self.intervals = found
        self.swept, self.swept_whole = (task.edges[0], task.edges[-1]), True
        self._show_collisions()
        self.drive.show_progress(None)
        self.sweep = None
        self._update_status()

    def _sweep_stopped(self, task, message=None):
        if task is self.sweep:
            self.sweep = None
            self.drive.show_progress(None)
            self._update_status()
        if message:
            self.statusBar().showMessage(error_line(message), 10000)
