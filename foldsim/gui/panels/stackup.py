"""The "Play and backlash" panel: the play stack-up of the open model.

The panel asks for a process preset (or the file's own tolerances), the number of
sampled builds and the seed, runs `foldsim.gui.window.sweep.run_stackup` (the core's
stack-up at closure) in a worker thread with progress and a stop button, and
shows what came back:

- a histogram of one cut edge's closure gap over the sampled builds, with the
  median and the 95th percentile marked;
- the hinges and gear meshes ranked by their share of the closure-gap variance
  (which to tighten first);
- the first sampled builds, handed to the 3D view (`FoldView.set_envelope`),
  which outlines their panels thin and see-through at the current t;
- a caution that preset figures are not data.
"""

import numpy as np
import pyqtgraph as pg
from PySide6 import QtCore, QtWidgets

from ...stackup import DISTRIBUTIONS, PROCESSES
from ..view.viewport import ENVELOPE
from ..window.sweep import CallTask, run_stackup
from .side import _TableModel, make_table

CAUTION = ("Caution: the presets are rough common-practice figures, not measurements. Real play and "
           "backlash vary by process, machine, material, part size and wear; measure your own parts or "
           "defer to the manufacturer's data, and put those numbers in the file.")

KIND_WORDS = {"play": "play", "tilt_across": "tilt across", "tilt_normal": "tilt in plane", "axial": "end float",
              "shift_across": "shift across", "shift_normal": "shift out of plane"}

FROM_FILE = "(file)"
"""Process entry that uses the model's own ``tolerances``."""

DEFAULT_SAMPLES = 2000
ENVELOPE_BUILDS = 30


def element_text(row):
    """How a ranked contributor is named in the table.

    Examples
    --------
    >>> element_text({"element": "hinge", "index": 2, "faces": [0, 3]})
    'hinge 2 (faces 0–3)'
    >>> element_text({"element": "mesh", "index": 1, "hinges": [2, 4]})
    'gear mesh 1 (hinges 2→4)'
    """
    if row["element"] == "hinge":
        return f"hinge {row['index']} (faces {row['faces'][0]}–{row['faces'][1]})"
    return f"gear mesh {row['index']} (hinges {row['hinges'][0]}→{row['hinges'][1]})"


def kinds_text(by_kind):
    """A hinge's share split by kind, largest first, as shown.

    Examples
    --------
    >>> kinds_text({"play": 0.8, "axial": 0.05, "tilt_across": 0.15})
    'play 80%, tilt across 15%, end float 5%'
    >>> kinds_text(None)
    'backlash'
    """
    if not by_kind:
        return "backlash"
    parts = sorted(by_kind.items(), key=lambda kv: -kv[1])
    return ", ".join(f"{KIND_WORDS.get(k, k)} {v:.0%}" for k, v in parts if v >= 0.005)


class ContributorModel(_TableModel):
    """Hinges and meshes ranked by share of the summed closure-gap variance."""

    headers = ("Rank", "Tighten", "Share", "Worst case", "Mostly")
    tips = ("Rank by share", "The hinge or gear mesh", "Share of the summed closure-gap variance over the cut edges",
            "Largest linearised worst-case gap this element alone adds to a cut edge",
            "What makes up a hinge's share: play (its angle), tilts, end float, shifts")

    def __init__(self, parent=None):
        super().__init__(parent)
        self.contributors = []

    def set_contributors(self, rows, units):
        """Rows of `foldsim.stackup.Stackup.contributors`, in their ranked order."""
        self.contributors = list(rows)
        self.set_rows([[k + 1, element_text(r), f"{r['share']:.1%}", f"{r['worst_case']:.3g} {units}",
                        kinds_text(r.get("by_kind"))] for k, r in enumerate(rows)])

    def data(self, index, role=QtCore.Qt.ItemDataRole.DisplayRole):
        if not index.isValid():
            return None
        if role == QtCore.Qt.ItemDataRole.TextAlignmentRole and index.column() in (1, 4):
            return int(QtCore.Qt.AlignmentFlag.AlignLeft | QtCore.Qt.AlignmentFlag.AlignVCenter)
        if role == QtCore.Qt.ItemDataRole.ToolTipRole:
            return self.text(index.row(), index.column())
        return super().data(index, role)


class GapHistogram(pg.PlotWidget):
    """How many sampled builds leave one cut edge's closure gap in each bin."""

    def __init__(self, parent=None):
        super().__init__(parent, background="w")
        self.setLabel("left", "builds")
        self.setLabel("bottom", "closure gap")
        self.showGrid(x=True, y=True, alpha=0.25)
        self.setMouseEnabled(x=False, y=False)
        self.hideButtons()
        self.bars = None
        self.counts = np.zeros(0, np.int64)
        self.bin_edges = np.zeros(0)
        pen = pg.mkPen((40, 40, 50), width=1.5)
        label = {"color": (40, 40, 50), "fill": (255, 255, 255, 210)}
        self.median_line = pg.InfiniteLine(angle=90, pen=pen, label="median", labelOpts=dict(label, position=0.93))
        self.p95_line = pg.InfiniteLine(angle=90, pen=pg.mkPen((40, 40, 50), width=1.5,
                                                               style=QtCore.Qt.PenStyle.DashLine),
                                        label="95%", labelOpts=dict(label, position=0.80))
        for line in (self.median_line, self.p95_line):
            self.addItem(line)
            line.setVisible(False)

    def set_values(self, values, median, p95, units):
        """Closure gaps (N,) of the sampled builds, with their median and 95th percentile (from the core)."""
        values = np.asarray(values, dtype=float)
        if self.bars is not None:
            self.removeItem(self.bars)
            self.bars = None
        self.getAxis("bottom").setLabel(f"closure gap ({units})")
        if not len(values):
            self.counts, self.bin_edges = np.zeros(0, np.int64), np.zeros(0)
            for line in (self.median_line, self.p95_line):
                line.setVisible(False)
            return
        bins = int(np.clip(round(np.sqrt(len(values))), 8, 40))
        low, high = float(values.min()), float(values.max())
        if high <= low:
            high = low + max(abs(low), 1e-12) * 1e-3
        self.counts, self.bin_edges = np.histogram(values, bins=bins, range=(low, high))
        self.bars = pg.BarGraphItem(x0=self.bin_edges[:-1], x1=self.bin_edges[1:], height=self.counts,
                                    brush=pg.mkBrush(*ENVELOPE, 150), pen=pg.mkPen(*ENVELOPE, 220))
        self.bars.setZValue(-10)  # under the median and 95% lines and their labels
        self.addItem(self.bars)
        self.median_line.setValue(float(median))
        self.p95_line.setValue(float(p95))
        for line in (self.median_line, self.p95_line):
            line.setVisible(True)
        pad = 0.04 * (high - low)
        self.setXRange(low - pad, high + pad, padding=0)
        self.setYRange(0, max(int(self.counts.max()), 1) * 1.1, padding=0)


class StackupPanel(QtWidgets.QWidget):
    """Settings, results and caution of the play stack-up of one model.

    Parameters
    ----------
    pool : QThreadPool
        Where the stack-up runs.

    Signals
    -------
    envelopeChanged(object)
        Errors of the sampled builds to outline in the 3D view, or None.
    failed(str)
        The core refused the run: its one-line message.
    hingeChosen(int)
        A hinge row of the contributor table was chosen.
    """

    envelopeChanged = QtCore.Signal(object)
    failed = QtCore.Signal(str)
    hingeChosen = QtCore.Signal(int)

    def __init__(self, pool, parent=None):
        super().__init__(parent)
        self.pool = pool
        self.mech = None
        self.task = None
        self.run_result = None
        self.process = QtWidgets.QComboBox()
        self.process.setToolTip("Where the play of every hinge and the backlash of every mesh come from")
        self.dist = QtWidgets.QComboBox()
        for d in DISTRIBUTIONS:
            self.dist.addItem({"uniform": "uniform within ± bound", "normal": "normal, bound at 3σ"}[d], d)
        self.samples = QtWidgets.QSpinBox()
        self.samples.setRange(10, 1_000_000)
        self.samples.setSingleStep(500)
        self.samples.setGroupSeparatorShown(True)
        self.samples.setValue(DEFAULT_SAMPLES)
        self.samples.setToolTip("Sampled builds (the command line's default is 10,000)")
        self.seed = QtWidgets.QSpinBox()
        self.seed.setRange(0, 2**31 - 1)
        self.seed.setToolTip("The same seed gives the same builds and the same numbers")
        self.outlined = QtWidgets.QSpinBox()
        self.outlined.setRange(0, 200)
        self.outlined.setValue(ENVELOPE_BUILDS)
        self.outlined.setToolTip("How many of the sampled builds the 3D view outlines (0: none)")
        self.run_button = QtWidgets.QPushButton("Run")
        self.stop_button = QtWidgets.QPushButton("Stop")
        self.stop_button.setEnabled(False)
        self.progress = QtWidgets.QProgressBar()
        self.progress.setMinimumWidth(self.progress.fontMetrics().horizontalAdvance("sampling builds 100%") + 40)
        self.progress.setFormat("sampling builds %p%")
        self.progress.setVisible(False)
        self.note = QtWidgets.QLabel("Not run yet.")
        self.note.setWordWrap(True)

        settings = QtWidgets.QFormLayout()
        settings.addRow("Process", self.process)
        settings.addRow("Errors", self.dist)
        settings.addRow("Builds", self.samples)
        settings.addRow("Seed", self.seed)
        settings.addRow("Outlined in view", self.outlined)
        buttons = QtWidgets.QHBoxLayout()
        buttons.addWidget(self.run_button)
        buttons.addWidget(self.stop_button)
        left = QtWidgets.QVBoxLayout()
        left.addLayout(settings)
        left.addLayout(buttons)
        left.addWidget(self.progress)
        left.addWidget(self.note)
        left.addStretch(1)

        self.edge = QtWidgets.QComboBox()
        self.edge.setToolTip("The cut edge whose closure gap the histogram shows")
        self.summary = QtWidgets.QLabel()
        self.summary.setWordWrap(True)
        self.histogram = GapHistogram()
        edge_row = QtWidgets.QHBoxLayout()
        edge_row.addWidget(QtWidgets.QLabel("Cut edge"))
        edge_row.addWidget(self.edge, 1)
        middle = QtWidgets.QVBoxLayout()
        middle.addLayout(edge_row)
        middle.addWidget(self.summary)
        middle.addWidget(self.histogram, 1)

        self.contributor_model = ContributorModel(self)
        self.contributors = make_table(self.contributor_model)
        self.contributors.setSelectionMode(QtWidgets.QAbstractItemView.SelectionMode.SingleSelection)
        right = QtWidgets.QVBoxLayout()
        right.addWidget(QtWidgets.QLabel("Tighten first (share of the closure-gap variance, all cut edges)"))
        right.addWidget(self.contributors, 1)

        self.caution = QtWidgets.QLabel(CAUTION)
        self.caution.setWordWrap(True)
        self.caution.setStyleSheet("color: #6a4a00")
        row = QtWidgets.QHBoxLayout()
        row.addLayout(left, 0)
        row.addLayout(middle, 3)
        row.addLayout(right, 4)
        column = QtWidgets.QVBoxLayout(self)
        column.setContentsMargins(6, 4, 6, 4)
        column.addLayout(row, 1)
        column.addWidget(self.caution)

        self.run_button.clicked.connect(self.run)
        self.stop_button.clicked.connect(self.stop)
        self.edge.currentIndexChanged.connect(self._show_edge)
        self.contributors.selectionModel().selectionChanged.connect(self._contributor_chosen)
        self.set_model(None)

    # ------------------------------------------------------------------ model

    def set_model(self, mech):
        """Show this mechanism's settings and drop any results of the previous one."""
        self.stop()
        self.mech = mech
        self.run_result = None
        previous = self.process.currentData()
        self.process.clear()
        has_file = mech is not None and mech.extras.get("tolerances") is not None
        self.process.addItem("as the file gives" if has_file else "the file gives none", FROM_FILE)
        self.process.model().item(0).setEnabled(has_file)
        for name in PROCESSES:
            self.process.addItem(f"{name.replace('-', ' ')} (common practice)", name)
        index = self.process.findData(previous) if previous not in (None, FROM_FILE) else -1
        self.process.setCurrentIndex(0 if has_file and index < 0 else max(index, 1))
        self.edge.blockSignals(True)
        self.edge.clear()
        if mech is not None:
            for e, (a, b) in enumerate(mech.cut_faces.tolist()):
                self.edge.addItem(f"edge {e} (faces {a}–{b})", e)
        self.edge.blockSignals(False)
        self.run_button.setEnabled(mech is not None)
        self.histogram.set_values([], 0, 0, mech.units if mech is not None else "")
        self.contributor_model.set_contributors([], "")
        self.summary.setText("")
        self.note.setText("Not run yet." if mech is not None else "Open a model first.")
        self.envelopeChanged.emit(None)

    # -------------------------------------------------------------------- run

    def settings(self):
        """The run's settings as `run_stackup` takes them."""
        process = self.process.currentData()
        return {"process": None if process == FROM_FILE else process, "samples": self.samples.value(),
                "seed": self.seed.value(), "dist": self.dist.currentData(), "envelope": self.outlined.value()}

    def running(self):
        return self.task is not None

    def run(self):
        """Start the stack-up with the chosen settings (a running one is stopped first)."""
        if self.mech is None:
            return
        self.stop()
        mech, settings = self.mech, self.settings()
        task = CallTask(lambda task: run_stackup(mech, task=task, **settings))
        task.signals.progress.connect(lambda done, total, task=task: self._progress(task, done, total))
        task.signals.finished.connect(lambda out, task=task: self._done(task, out))
        task.signals.failed.connect(lambda message, task=task: self._ended(task, message))
        task.signals.cancelled.connect(lambda task=task: self._ended(task))
        self.task = task
        self.progress.setRange(0, 1)
        self.progress.setValue(0)
        self.progress.setVisible(True)
        self.run_button.setEnabled(False)
        self.stop_button.setEnabled(True)
        self.note.setText(f"Sampling {settings['samples']:,} builds…")
        self.pool.start(task)

    def stop(self):
        """Stop a running stack-up (it ends after the piece of builds it is on)."""
        if self.task is not None:
            self.task.cancel()
            self._ended(self.task)
            self.note.setText("Stopped.")

    def _progress(self, task, done, total):
        if task is self.task:
            self.progress.setRange(0, total)
            self.progress.setValue(done)

    def _ended(self, task, message=None):
        if task is not self.task:
            return
        self.task = None
        self.progress.setVisible(False)
        self.run_button.setEnabled(self.mech is not None)
        self.stop_button.setEnabled(False)
        if message:
            self.note.setText("The stack-up could not run.")
            self.failed.emit(message)

    def _done(self, task, out):
        if task is not self.task or out["result"].mech is not self.mech:
            return
        self._ended(task)
        self.run_result = out
        result = out["result"]
        units = self.mech.units
        p95 = result.mc.gap_p95[result.closure]
        where = f"preset {out['process']}" if out["process"] else "the file's tolerances"
        outlined = len(out["envelope"]) if out["envelope"] is not None else 0
        note = (f"{out['samples']:,} builds, {where}, seed {out['seed']}, {out['dist']}: "
                f"largest p95 gap {result.p95_gap:.3g} {units}.")
        if outlined:
            note += f" The 3D view outlines the first {outlined} builds at the current t."
        self.note.setText(note)
        self.contributor_model.set_contributors(result.contributors(), units)
        self.contributors.resizeColumnsToContents()
        if len(p95):
            self.edge.blockSignals(True)
            self.edge.setCurrentIndex(int(np.argmax(p95)))
            self.edge.blockSignals(False)
        self._show_edge()
        self.envelopeChanged.emit(out["envelope"])

    # ---------------------------------------------------------------- results

    def select_edge(self, edge):
        """Show this cut edge's histogram."""
        if 0 <= edge < self.edge.count():
            self.edge.setCurrentIndex(int(edge))

    def _show_edge(self, *_):
        if self.run_result is None or self.mech is None:
            return
        result = self.run_result["result"]
        units, c, e = self.mech.units, result.closure, self.edge.currentIndex()
        if e < 0:
            self.summary.setText("The model has no cut edges: nothing to close.")
            self.histogram.set_values([], 0, 0, units)
            return
        mc, lin = result.mc, result.linear
        self.histogram.set_values(mc.gaps[:, c, e], mc.gap_median[c, e], mc.gap_p95[c, e], units)
        self.summary.setText(
            f"At closure (t = 1): median {mc.gap_median[c, e]:.3g}, 95% {mc.gap_p95[c, e]:.3g}, "
            f"largest sampled {mc.gap_max[c, e]:.3g}, linearised worst case {lin.gap_bound[c, e]:.3g} {units}.")

    def _contributor_chosen(self, *_):
        rows = self.contributors.selectionModel().selectedRows()
        if rows:
            row = self.contributor_model.contributors[rows[0].row()]
            if row["element"] == "hinge":
                self.hingeChosen.emit(int(row["index"]))
