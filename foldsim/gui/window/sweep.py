"""Slow work off the GUI thread: the collision sweep, the check report, exports, the stack-up.

`SweepTask` runs `foldsim.analysis.collision.collision_intervals` over [-1, 1] in a
worker thread, one stretch of t at a time, so it can report progress and stop
when cancelled between stretches. Intervals that run across a stretch boundary
are joined again (`join_intervals`). `ReportTask` gathers the parts of the check
report the window shows besides (part types).

`CallTask` runs any other piece of work (loading or building a model, an export,
the play stack-up) in a worker thread with progress and a stop request;
`export_file` and `run_stackup` are the work for exports and for the stack-up.
They only call the core.
"""

import os
import tempfile
import threading
from pathlib import Path

import numpy as np
from PySide6 import QtCore

from ...analysis.collision import collision_intervals
from ...errors import FoldsimError
from ...io.mechanism_json import share_like_target
from ...report import build_checks, check
from ...tolerances import DEFAULT


def join_intervals(intervals, resolution):
    """Join a pair's intervals that meet or overlap (within ``resolution`` in t).

    Parameters
    ----------
    intervals : list of dict
        ``{"faces": [a, b], "first_t", "last_t"}`` in any order.
    resolution : float
        Intervals of one pair this close are one interval.

    Returns
    -------
    list of dict
        Sorted by faces, then first_t.

    Examples
    --------
    >>> join_intervals([{"faces": [0, 2], "first_t": 0.5, "last_t": 1.0},
    ...                 {"faces": [0, 2], "first_t": 0.1, "last_t": 0.5}], 1e-3)
    [{'faces': [0, 2], 'first_t': 0.1, 'last_t': 1.0}]
    """
    out = []
    for c in sorted(intervals, key=lambda c: (c["faces"], c["first_t"])):
        if out and out[-1]["faces"] == c["faces"] and c["first_t"] <= out[-1]["last_t"] + resolution:
            out[-1]["last_t"] = max(out[-1]["last_t"], c["last_t"])
        else:
            out.append({"faces": list(c["faces"]), "first_t": c["first_t"], "last_t": c["last_t"]})
    return out


class SweepSignals(QtCore.QObject):
    """What a running sweep reports; delivered in the thread that made this object.

    Signals
    -------
    progress(int, int, object)
        Stretches done, stretches in all, and the intervals found so far.
    finished(object)
        All the intervals (list of dict), once the whole range is swept.
    cancelled()
    failed(str)
        The core refused the model: its one-line message.
    """

    progress = QtCore.Signal(int, int, object)
    finished = QtCore.Signal(object)
    cancelled = QtCore.Signal()
    failed = QtCore.Signal(str)


class SweepTask(QtCore.QRunnable):
    """Sweep a mechanism for collisions over [t_from, t_to] in stretches.

    Parameters
    ----------
    mech : Mechanism
    schedule : Schedule
    pan : Panels
    t_from, t_to : float
    stretches : int
        How many pieces the range is cut into (progress steps).
    tol : Tolerances
    """

    def __init__(self, mech, schedule, pan, t_from=-1.0, t_to=1.0, stretches=20, tol=DEFAULT):
        super().__init__()
        self.setAutoDelete(False)
        self.signals = SweepSignals()
        self.mech, self.schedule, self.pan, self.tol = mech, schedule, pan, tol
        self.edges = np.linspace(t_from, t_to, stretches + 1)
        self._stop = threading.Event()

    def cancel(self):
        """Ask the sweep to stop after the stretch it is on."""
        self._stop.set()

    def is_cancelled(self):
        return self._stop.is_set()

    def run(self):
        found = []
        total = len(self.edges) - 1
        try:
            for k in range(total):
                if self._stop.is_set():
                    self.signals.cancelled.emit()
                    return
                found.extend(collision_intervals(self.mech, self.schedule, self.edges[k], self.edges[k + 1],
                                                 tol=self.tol, pan=self.pan))
                found = join_intervals(found, 2 * self.tol.t_resolution)
                self.signals.progress.emit(k + 1, total, [dict(c) for c in found])
        except FoldsimError as exc:
            self.signals.failed.emit(str(exc))
            return
        self.signals.finished.emit(found)


class ReportSignals(QtCore.QObject):
    """What a report task says: ``finished(dict)`` or ``failed(str)``."""

    finished = QtCore.Signal(object)
    failed = QtCore.Signal(str)


class ReportTask(QtCore.QRunnable):
    """`foldsim.report.check` over no drive range (the sweep covers collisions).

    For a file with a ``build`` object the build's checks (stops, sector coverage,
    gear clearance) run over t 0..1, as `foldsim check` runs them; their problems
    are under ``build_problems``.

    Parameters
    ----------
    mech : Mechanism
    tol : Tolerances
    """

    def __init__(self, mech, tol=DEFAULT):
        super().__init__()
        self.setAutoDelete(False)
        self.signals = ReportSignals()
        self.mech, self.tol = mech, tol

    def run(self):
        try:
            report = check(self.mech, t_from=0.0, t_to=0.0, tol=self.tol)
            if "build" in report:
                keys, problems = build_checks(self.mech, t_from=0.0, t_to=1.0, tol=self.tol)
                report.update(keys, build_problems=problems)
        except FoldsimError as exc:
            self.signals.failed.emit(str(exc))
            return
        self.signals.finished.emit(report)


# ---------------------------------------------------------------- one-off work


class Stopped(Exception):
    """Raised inside a `CallTask`'s work when it has been asked to stop."""


def failure_text(exc):
    """The one line a failure in background work shows (without the ``foldsim:`` prefix).

    A `FoldsimError` is the core's own message; anything else is reported as an
    internal error, so the app carries on instead of dying.

    Examples
    --------
    >>> failure_text(FoldsimError("box.mech.json: faces[2]: repeats a vertex"))
    'box.mech.json: faces[2]: repeats a vertex'
    >>> failure_text(ValueError("bad"))
    'internal error (ValueError: bad)'
    """
    if isinstance(exc, FoldsimError):
        return str(exc)
    return f"internal error ({type(exc).__name__}: {exc})"


class TaskSignals(QtCore.QObject):
    """What a `CallTask` says.

    Signals
    -------
    progress(int, int)
        Steps done, steps in all.
    finished(object)
        The work's result.
    failed(str)
        The one-line message (`failure_text`).
    cancelled()
    """

    progress = QtCore.Signal(int, int)
    finished = QtCore.Signal(object)
    failed = QtCore.Signal(str)
    cancelled = QtCore.Signal()


class CallTask(QtCore.QRunnable):
    """Run ``work(task)`` in a worker thread and report how it went.

    The work may call ``task.progress(done, total)`` and ``task.check()`` (which
    raises `Stopped` once `cancel` was called) between steps. A task cancelled
    while the work is inside one long core call reports ``cancelled`` when the
    call returns and drops its result.

    Parameters
    ----------
    work : callable
        Called with the task; returns the result.
    """

    alive = set()
    """Tasks not yet over: held here so a task nobody waits for is not freed while it runs."""

    def __init__(self, work):
        super().__init__()
        self.setAutoDelete(False)
        self.signals = TaskSignals()
        self.work = work
        self._stop = threading.Event()
        self.done = threading.Event()
        CallTask.alive.add(self)
        for signal in (self.signals.finished, self.signals.failed, self.signals.cancelled):
            signal.connect(lambda *_: CallTask.alive.discard(self))

    def cancel(self):
        self._stop.set()

    def is_cancelled(self):
        return self._stop.is_set()

    def check(self):
        """Raise `Stopped` if the task was cancelled."""
        if self._stop.is_set():
            raise Stopped()

    def progress(self, done, total):
        self.signals.progress.emit(int(done), int(total))

    def run(self):
        try:
            result = self.work(self)
        except Stopped:
            self.done.set()
            self.signals.cancelled.emit()
            return
        except Exception as exc:  # noqa: BLE001 - the app reports it and carries on
            self.done.set()
            if self._stop.is_set():
                self.signals.cancelled.emit()
            else:
                self.signals.failed.emit(failure_text(exc))
            return
        self.done.set()
        if self._stop.is_set():
            self.signals.cancelled.emit()
        else:
            self.signals.finished.emit(result)


# ---------------------------------------------------------------- exports


def export_file(mech, path, options, task=None):
    """`foldsim.export.export` to ``path``, by way of a file beside it.

    The core writes a hidden file in the target's folder; only when the export
    is complete and was not cancelled is it renamed onto the target, so a
    cancelled export leaves any old file whole.

    Returns
    -------
    str
        The line the command line prints (``wrote PATH: ...``).
    """
    from ...export import export, format_of

    path = Path(path)
    format_of(path)
    if not path.parent.is_dir():
        return f"wrote {path}: {export(mech, path, **options)}"  # it cannot: the core says why
    fd, tmp = tempfile.mkstemp(prefix=f".{path.stem}.", suffix=path.suffix, dir=path.parent)
    os.close(fd)
    try:
        try:
            what = export(mech, tmp, **options)
        except FoldsimError as exc:
            raise FoldsimError(str(exc).replace(tmp, str(path))) from None
        if task is not None:
            task.check()
        share_like_target(tmp, path)
        os.replace(tmp, path)
    finally:
        if os.path.exists(tmp):
            os.remove(tmp)
    return f"wrote {path}: {what.replace(tmp, str(path))}"


# ---------------------------------------------------------------- play stack-up


STACKUP_STEPS = 25
"""Pieces the sampled builds are cut into, for progress and stopping."""


def run_stackup(mech, process=None, samples=2000, seed=0, dist="uniform", envelope=30, task=None):
    """The play stack-up at closure, as `foldsim stackup` computes it, in steps.

    `foldsim.stackup.stackup` draws the builds in chunks of about 1/STACKUP_STEPS
    of the samples and reports after each; the draws do not depend on the chunk
    size, so every number equals the command line's at t = 1.

    Parameters
    ----------
    mech : Mechanism
    process : str or None
        Preset (`foldsim.stackup.PROCESSES`), or None for the file's tolerances.
    samples, seed, dist
        As for `foldsim stackup`.
    envelope : int
        How many of the first sampled builds to return for the 3D view.
    task : CallTask, optional
        For progress and stopping between chunks.

    Returns
    -------
    dict
        ``result`` (`foldsim.stackup.Stackup`, with every build's closure gaps
        kept in ``result.mc.gaps``), ``envelope`` (`foldsim.stackup.Errors` of
        the first builds, or None), and the settings.
    """
    from ...stackup import draw_errors, play_spec, stackup

    if isinstance(samples, bool) or not isinstance(samples, (int, np.integer)) or samples < 1:
        raise FoldsimError(f"--samples: must be a positive integer, not {samples}")
    spec = play_spec(mech, process)

    def progress(done, total):
        if task is not None:
            task.check()
            task.progress(done, total + 1)

    result = stackup(mech, spec, samples=int(samples), seed=seed, dist=dist, times=(1.0,), keep=True,
                     chunk=max(1, -(-int(samples) // STACKUP_STEPS)), progress=progress)
    errors = None
    if envelope:
        errors = draw_errors(spec, min(int(envelope), samples), np.random.default_rng(seed), dist)
    if task is not None:
        task.progress(1, 1)
    return {"result": result, "envelope": errors, "process": spec.process,
            "samples": int(samples), "seed": seed, "dist": dist}
