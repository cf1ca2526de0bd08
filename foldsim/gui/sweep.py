"""Slow analysis off the GUI thread: the collision sweep and the check report.

`SweepTask` runs `foldsim.analysis.collision.collision_intervals` over [-1, 1] in a
worker thread, one stretch of t at a time, so it can report progress and stop
when cancelled between stretches. Intervals that run across a stretch boundary
are joined again (`join_intervals`). `ReportTask` gathers the parts of the check
report the window shows besides (part types).
"""

import threading

import numpy as np
from PySide6 import QtCore

from ..analysis.collision import collision_intervals
from ..analysis.report import check
from ..errors import FoldsimError
from ..tolerances import DEFAULT


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
    """`foldsim.analysis.report.check` over no drive range (the sweep covers collisions).

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
        except FoldsimError as exc:
            self.signals.failed.emit(str(exc))
            return
        self.signals.finished.emit(report)
