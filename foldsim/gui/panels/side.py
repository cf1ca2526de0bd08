"""The app's side panels: the drive bar, the collision strip, the tables, the gap plot.

Each widget shows values the core computed and emits what the user asked for; the
main window (`foldsim.gui.window.app`) wires them to each other and to the 3D view.
"""

import numpy as np
import pyqtgraph as pg
from PySide6 import QtCore, QtGui, QtWidgets

from ..record.caption import t_text
from ..view import palette

SLIDER_STEPS = 1000
"""Slider positions per unit of t: the slider runs from -1000 to 1000."""

SPEEDS = (0.25, 0.5, 1.0, 2.0, 4.0)
"""Playback speeds offered, as factors on one pass in `PASS_SECONDS`."""

PASS_SECONDS = 4.0
"""Seconds for one pass from 0 to 1 at speed 1."""

RANGES = {"0 → 1": (0.0, 1.0), "0 → −1": (0.0, -1.0), "−1 → 1": (-1.0, 1.0)}
"""Playback ranges: from the first value toward the second."""

MODES = ("Once", "Loop", "Back and forth")


def step_playback(t, direction, dt, speed, span, mode):
    """Where playback goes next.

    Parameters
    ----------
    t : float
        Current drive value.
    direction : {1, -1}
        1 moves from ``span[0]`` toward ``span[1]``.
    dt : float
        Seconds since the last step.
    speed : float
        Factor on one pass from 0 to 1 in `PASS_SECONDS`.
    span : (float, float)
        Start and end of the range.
    mode : str
        One of `MODES`.

    Returns
    -------
    t : float
    direction : int
    running : bool
        False once a "Once" pass has reached its end.

    Examples
    --------
    >>> step_playback(0.9, 1, 1.0, 1.0, (0.0, 1.0), "Back and forth")
    (0.85, -1, True)
    >>> step_playback(0.9, 1, 1.0, 1.0, (0.0, 1.0), "Once")
    (1.0, 1, False)
    """
    a, b = span
    length = abs(b - a)
    # Position along the range in [0, length], moving by s.
    s = abs(t - a) if min(a, b) <= t <= max(a, b) else 0.0
    s += direction * dt * speed / PASS_SECONDS
    running = True
    if mode == "Once":
        if s >= length:
            s, running = length, False
        s = max(s, 0.0)
    elif mode == "Loop":
        s = s % length if length else 0.0
    else:
        while s > length or s < 0:
            s = 2 * length - s if s > length else -s
            direction = -direction
    sign = 1.0 if b >= a else -1.0
    return round(a + sign * s, 12), direction, running


class CollisionStrip(QtWidgets.QWidget):
    """A lane under the drive slider that marks the t where panels collide.

    It is drawn on the slider's own scale (a value's mark sits under the slider's
    handle at that value). Hovering over a mark lists the face pairs; clicking one
    asks to go to the start of that collision.

    Signals
    -------
    jump(float)
        The user clicked a collision; the t to go to.
    """

    jump = QtCore.Signal(float)

    def __init__(self, slider, parent=None):
        super().__init__(parent)
        self.slider = slider
        self.intervals = []
        self.swept = (0.0, 0.0)
        self.resolution = 1e-3
        self.t = 0.0
        self.setMinimumHeight(16)
        self.setMaximumHeight(16)
        self.setMouseTracking(True)
        self.setToolTip(self.GENERIC_TIP)

    GENERIC_TIP = "Where panels collide (red); click a mark to go there"

    def tip_at(self, x):
        """The tooltip at a pixel column: the face pairs and t ranges over a mark, else the generic one."""
        c = self.interval_at(x)
        if c is None:
            return self.GENERIC_TIP
        pairs = [d for d in self.intervals if d["first_t"] <= c["last_t"] and d["last_t"] >= c["first_t"]]
        return "\n".join(f"faces {d['faces'][0]} and {d['faces'][1]}: t = {d['first_t']:.3f} to {d['last_t']:.3f}"
                         for d in pairs)

    def event(self, ev):
        # Qt's own tooltip (the mouse resting) would show the generic text over a
        # mark too: answer it with the text for where the mouse is.
        if ev.type() == QtCore.QEvent.Type.ToolTip:
            QtWidgets.QToolTip.showText(ev.globalPos(), self.tip_at(ev.pos().x()), self)
            return True
        return super().event(ev)

    def set_intervals(self, intervals, swept):
        """Show these collisions (list of dict), found over ``swept`` = (t0, t1) so far."""
        self.intervals = list(intervals)
        self.swept = tuple(swept)
        self.update()

    def set_t(self, t):
        self.t = float(t)
        self.update()

    def _handle_length(self):
        opt = QtWidgets.QStyleOptionSlider()
        self.slider.initStyleOption(opt)
        rect = self.slider.style().subControlRect(QtWidgets.QStyle.ComplexControl.CC_Slider, opt,
                                                  QtWidgets.QStyle.SubControl.SC_SliderHandle, self.slider)
        return rect.width()

    def x_of(self, t):
        """Pixel column of drive value t (the slider handle's centre at that value)."""
        handle = self._handle_length()
        left = self.slider.mapTo(self.window(), QtCore.QPoint(0, 0)).x() - self.mapTo(
            self.window(), QtCore.QPoint(0, 0)).x()
        span = max(self.slider.width() - handle, 1)
        return left + handle / 2 + (t + 1.0) / 2.0 * span

    def t_of(self, x):
        """Drive value at a pixel column (inverse of `x_of`, clamped to [-1, 1])."""
        handle = self._handle_length()
        left = self.x_of(-1.0)
        span = max(self.slider.width() - handle, 1)
        return float(np.clip((x - left) / span * 2.0 - 1.0, -1.0, 1.0))

    def interval_at(self, x):
        """The collision interval drawn at a pixel column, or None."""
        t = self.t_of(x)
        slack = 2.0 / max(self.slider.width(), 1) * 2
        hits = [c for c in self.intervals if c["first_t"] - slack <= t <= c["last_t"] + slack]
        return min(hits, key=lambda c: c["first_t"]) if hits else None

    def paintEvent(self, ev):
        painter = QtGui.QPainter(self)
        h = self.height()
        lane = QtCore.QRectF(self.x_of(-1.0), 3, self.x_of(1.0) - self.x_of(-1.0), h - 6)
        painter.fillRect(lane, QtGui.QColor(225, 228, 234))
        t0, t1 = self.swept
        if t1 > t0:
            painter.fillRect(QtCore.QRectF(self.x_of(t0), 3, self.x_of(t1) - self.x_of(t0), h - 6),
                             QtGui.QColor(205, 222, 205))
        warn = QtGui.QColor(*palette.WARNING)
        for c in self.intervals:
            x0, x1 = self.x_of(c["first_t"]), self.x_of(c["last_t"])
            painter.fillRect(QtCore.QRectF(x0, 2, max(x1 - x0, 2.0), h - 4), warn)
        painter.setPen(QtGui.QPen(QtGui.QColor(40, 40, 50), 1.5))
        x = self.x_of(self.t)
        painter.drawLine(QtCore.QPointF(x, 0), QtCore.QPointF(x, h))
        painter.end()

    def mouseMoveEvent(self, ev):
        if self.interval_at(ev.position().x()) is None:
            QtWidgets.QToolTip.hideText()
            return
        QtWidgets.QToolTip.showText(ev.globalPosition().toPoint(), self.tip_at(ev.position().x()), self)

    def mousePressEvent(self, ev):
        c = self.interval_at(ev.position().x())
        if c is not None and ev.button() == QtCore.Qt.MouseButton.LeftButton:
            # Just inside the start, so the collision shows at the t jumped to.
            inside = min(c["first_t"] + self.resolution, 0.5 * (c["first_t"] + c["last_t"]))
            self.jump.emit(float(inside))


class DriveBar(QtWidgets.QWidget):
    """The drive slider from -1 to 1 with its number field, playback and collision strip.

    Signals
    -------
    tChanged(float)
        The drive value changed (slider, field, keys or playback).
    """

    tChanged = QtCore.Signal(float)

    def __init__(self, parent=None):
        super().__init__(parent)
        self.t = 0.0
        self.direction = 1
        self.frames = 0
        self.slider = QtWidgets.QSlider(QtCore.Qt.Orientation.Horizontal)
        self.slider.setRange(-SLIDER_STEPS, SLIDER_STEPS)
        self.slider.setPageStep(SLIDER_STEPS // 10)
        self.slider.setTickPosition(QtWidgets.QSlider.TickPosition.TicksBelow)
        self.slider.setTickInterval(SLIDER_STEPS // 2)
        self.slider.setToolTip("Drive: −1 closed the other way, 0 flat, 1 closed")
        self.field = QtWidgets.QDoubleSpinBox()
        self.field.setRange(-1.0, 1.0)
        self.field.setDecimals(3)
        self.field.setSingleStep(0.01)
        self.field.setPrefix("t = ")
        self.field.setKeyboardTracking(False)
        self.strip = CollisionStrip(self.slider)
        self.play_button = QtWidgets.QToolButton()
        self.play_button.setCheckable(True)
        self.play_button.setText("Play")
        self.play_button.setToolTip("Play / pause (Space)")
        # As wide as its wider word, so the bar does not shift when it changes.
        metrics = self.play_button.fontMetrics()
        self.play_button.setFixedWidth(max(metrics.horizontalAdvance(w) for w in ("Play", "Pause")) + 24)
        self.mode = QtWidgets.QComboBox()
        self.mode.addItems(MODES)
        self.mode.setCurrentText("Back and forth")
        self.mode.setToolTip("What playback does at the end of the range")
        self.range = QtWidgets.QComboBox()
        self.range.addItems(list(RANGES))
        self.range.setToolTip("Range that playback runs over")
        self.speed = QtWidgets.QComboBox()
        for s in SPEEDS:
            self.speed.addItem(f"{s:g}×", s)
        self.speed.setCurrentIndex(SPEEDS.index(1.0))
        self.speed.setToolTip(f"Playback speed (1× folds from flat to closed in {PASS_SECONDS:g} s)")
        self.progress = QtWidgets.QProgressBar()
        self.progress.setTextVisible(True)
        self.progress.setFormat("checking collisions %p%")
        self.progress.setMinimumWidth(self.progress.fontMetrics().horizontalAdvance("checking collisions 100%") + 40)
        self.cancel_button = QtWidgets.QToolButton()
        self.cancel_button.setText("Stop check")
        self.cancel_button.setToolTip("Stop the collision check over the range")
        ends = QtWidgets.QHBoxLayout()
        for text in ("−1 closed", "0 flat", "1 closed"):
            label = QtWidgets.QLabel(text)
            label.setStyleSheet("color: #667")
            ends.addWidget(label)
            if text != "1 closed":
                ends.addStretch(1)
        grid = QtWidgets.QGridLayout(self)
        grid.setContentsMargins(6, 2, 6, 2)
        grid.setVerticalSpacing(1)
        grid.addWidget(self.play_button, 1, 0)
        grid.addWidget(self.strip, 0, 1)
        grid.addWidget(self.slider, 1, 1)
        grid.addLayout(ends, 2, 1)
        grid.addWidget(self.field, 1, 2)
        controls = QtWidgets.QHBoxLayout()
        controls.setSpacing(4)
        for label, widget in (("Range", self.range), ("Mode", self.mode), ("Speed", self.speed)):
            controls.addWidget(QtWidgets.QLabel(label))
            controls.addWidget(widget)
            controls.addSpacing(12)
        controls.addStretch(1)
        controls.addWidget(self.progress)
        controls.addWidget(self.cancel_button)
        grid.addLayout(controls, 3, 1, 1, 2)
        grid.setColumnStretch(1, 1)
        self.timer = QtCore.QTimer(self)
        self.timer.setInterval(16)
        self.timer.timeout.connect(self._tick)
        self.clock = QtCore.QElapsedTimer()
        self.slider.valueChanged.connect(lambda v: self.set_t(v / SLIDER_STEPS))
        self.field.valueChanged.connect(self.set_t)
        self.play_button.toggled.connect(self.play)
        self.strip.jump.connect(self.set_t)
        self.show_progress(None)

    def set_t(self, t):
        """Go to drive value t (clamped to [-1, 1]); emits `tChanged` if it moved."""
        t = float(np.clip(t, -1.0, 1.0))
        if t == self.t and self.slider.value() == round(t * SLIDER_STEPS):
            return
        self.t = t
        for widget, value in ((self.slider, int(round(t * SLIDER_STEPS))), (self.field, t)):
            widget.blockSignals(True)
            widget.setValue(value)
            widget.blockSignals(False)
        self.strip.set_t(t)
        self.tChanged.emit(t)

    def step(self, dt):
        """Move the drive value by dt (keyboard stepping); stops playback."""
        self.play(False)
        self.set_t(round(self.t + dt, 9))

    def play(self, on=True):
        """Start or pause playback."""
        on = bool(on)
        self.play_button.blockSignals(True)
        self.play_button.setChecked(on)
        self.play_button.setText("Pause" if on else "Play")
        self.play_button.blockSignals(False)
        if on and not self.timer.isActive():
            a, b = RANGES[self.range.currentText()]
            if not min(a, b) <= self.t <= max(a, b) or (self.mode.currentText() == "Once" and self.t == b):
                self.set_t(a)
                self.direction = 1
            self.clock.start()
            self.timer.start()
        elif not on:
            self.timer.stop()

    def toggle_play(self):
        self.play(not self.timer.isActive())

    def is_playing(self):
        return self.timer.isActive()

    def _tick(self):
        dt = self.clock.restart() / 1000.0
        t, self.direction, running = step_playback(self.t, self.direction, dt, self.speed.currentData(),
                                                   RANGES[self.range.currentText()], self.mode.currentText())
        self.frames += 1
        self.set_t(t)
        if not running:
            self.play(False)

    def show_progress(self, done_total):
        """Show sweep progress (done, total), or hide the bar with None."""
        visible = done_total is not None
        self.progress.setVisible(visible)
        self.cancel_button.setVisible(visible)
        if visible:
            self.progress.setRange(0, done_total[1])
            self.progress.setValue(done_total[0])


class _TableModel(QtCore.QAbstractTableModel):
    """Rows of values with fixed headers; one column may be refreshed every frame."""

    headers = ()
    tips = ()

    def __init__(self, parent=None):
        super().__init__(parent)
        self.rows = []

    def rowCount(self, parent=QtCore.QModelIndex()):
        return 0 if parent.isValid() else len(self.rows)

    def columnCount(self, parent=QtCore.QModelIndex()):
        return 0 if parent.isValid() else len(self.headers)

    def headerData(self, section, orientation, role=QtCore.Qt.ItemDataRole.DisplayRole):
        if orientation == QtCore.Qt.Orientation.Horizontal:
            if role == QtCore.Qt.ItemDataRole.DisplayRole:
                return self.headers[section]
            if role == QtCore.Qt.ItemDataRole.ToolTipRole and self.tips:
                return self.tips[section]
        return None

    def data(self, index, role=QtCore.Qt.ItemDataRole.DisplayRole):
        if not index.isValid():
            return None
        if role in (QtCore.Qt.ItemDataRole.DisplayRole, QtCore.Qt.ItemDataRole.ToolTipRole):
            # The tooltip shows what a narrow column cuts off.
            return self.text(index.row(), index.column())
        if role == QtCore.Qt.ItemDataRole.TextAlignmentRole:
            return int(QtCore.Qt.AlignmentFlag.AlignRight | QtCore.Qt.AlignmentFlag.AlignVCenter)
        return None

    def text(self, row, column):
        return str(self.rows[row][column])

    def set_rows(self, rows):
        self.beginResetModel()
        self.rows = rows
        self.endResetModel()

    def column_changed(self, column):
        if self.rows:
            self.dataChanged.emit(self.index(0, column), self.index(len(self.rows) - 1, column),
                                  [QtCore.Qt.ItemDataRole.DisplayRole])


class HingeModel(_TableModel):
    """One row per hinge: index, faces, closing angle, angle now, couplings, ratio."""

    headers = ("Hinge", "Faces", "Closes at", "Now", "Ratio", "Gears")
    tips = ("Hinge index in the file", "Parent face → child face (the child moves)",
            "Fold angle that closes this hinge", "Fold angle at the current t",
            "Fold rate relative to the drive hinge", "Couplings on this hinge (gear pairs: hinge → hinge)")
    NOW = 3

    def __init__(self, parent=None):
        super().__init__(parent)
        self.now = np.zeros(0)

    def set_table(self, table, mech, schedule):
        """Fill from `foldsim.report.hinge_table` rows and the schedule."""
        self.headers, self.tips = type(self).headers, type(self).tips
        drive_rate = schedule.rates[mech.drive]
        rows = []
        for row in table:
            h = row["hinge"]
            gears = []
            for k in row["couplings"]:
                c = mech.couplings[k]
                ratio = f"{c.teeth[0]}:{c.teeth[1]}" if c.teeth else f"×{c.ratio:g}"
                gears.append(f"{c.hinges[0]}→{c.hinges[1]} {ratio}")
            if h == mech.drive:
                gears.insert(0, "drive")
            if h in schedule.free_hinges:
                gears.append("free")
            ratio = schedule.rates[h] / drive_rate if drive_rate else np.nan
            rows.append([h, f"{row['parent']} → {row['child']}", f"{row['closed_angle_deg']:.2f}°", None,
                         f"{ratio:.4g}", ", ".join(gears) or "–"])
        self.now = np.zeros(len(rows))
        self.set_rows(rows)

    def set_now(self, degrees):
        """Angles (H,) at the current t, in degrees."""
        self.now = np.asarray(degrees, dtype=float)
        self.column_changed(self.NOW)

    BUILD_HEADERS = ("Stop", "Overrun", "Sector")
    BUILD_TIPS = ("The hinge's stop angle (build.stops, or closing plus the margin)",
                  "How far the hinge passes its stop over t 0..1, and from which t",
                  "Least effective contact ratio of its gears over t 0..1 (sector gears), "
                  "and the t where a sector runs out of teeth")

    def set_build(self, stops, coverage, mech):
        """Add the build's columns from a check report's ``stops`` and ``sector_coverage``.

        Parameters
        ----------
        stops : list of dict
            ``hinge``, ``stop_deg``, ``overrun_deg``, ``at_t``.
        coverage : list of dict
            ``coupling``, ``min_contact_ratio``, ``runs_out_at_t``.
        mech : Mechanism
            For the hinges of each coupling.
        """
        if not self.rows:
            return
        base = len(type(self).headers)
        by_hinge = {}
        for row in coverage:
            for h in dict.fromkeys(int(h) for h in mech.couplings[row["coupling"]].hinges):
                by_hinge.setdefault(h, []).append(row)
        stop_of = {row["hinge"]: row for row in stops}
        rows = []
        for cells in self.rows:
            h = cells[0]
            stop = stop_of.get(h)
            extra = ["–", "–", "–"]
            if stop is not None:
                extra[0] = f"{stop['stop_deg']:.2f}°"
                if stop["overrun_deg"] > 0:
                    extra[1] = f"{stop['overrun_deg']:.2f}° from {t_text(stop['at_t'])}"
                else:
                    extra[1] = "none"
            mine = by_hinge.get(h, [])
            if mine:
                worst = min(mine, key=lambda r: r["min_contact_ratio"])
                out = [r["runs_out_at_t"] for r in mine if r["runs_out_at_t"] is not None]
                extra[2] = (f"runs out at {t_text(min(out))}" if out
                            else f"ε ≥ {worst['min_contact_ratio']:.2f}")
            # Before the long Gears column, so they show without scrolling.
            rows.append(list(cells[:base - 1]) + extra + list(cells[base - 1:base]))
        head, tips = type(self).headers, type(self).tips
        self.headers = head[:-1] + self.BUILD_HEADERS + head[-1:]
        self.tips = tips[:-1] + self.BUILD_TIPS + tips[-1:]
        self.set_rows(rows)

    def text(self, row, column):
        if column == self.NOW:
            return f"{self.now[row]:.2f}°"
        return str(self.rows[row][column])


class GapModel(_TableModel):
    """One row per cut edge: index, faces, gap now, gap when closed."""

    headers = ("Edge", "Faces", "Gap now", "At t = 1")
    tips = ("Cut edge index", "The two faces whose edges should meet",
            "Largest distance between the edge's two copies now", "The same at t = 1 (closed)")
    NOW = 2

    def __init__(self, parent=None):
        super().__init__(parent)
        self.now = np.zeros(0)
        self.units = ""
        self.tolerance = 0.0
        self.curve_colors = {}

    def set_curve_colors(self, colors):
        """Mark rows with the colour of their curve in the gap plot (edge -> RGB)."""
        self.curve_colors = dict(colors)
        if self.rows:
            self.dataChanged.emit(self.index(0, 0), self.index(len(self.rows) - 1, 0),
                                  [QtCore.Qt.ItemDataRole.DecorationRole])

    def data(self, index, role=QtCore.Qt.ItemDataRole.DisplayRole):
        if (role == QtCore.Qt.ItemDataRole.DecorationRole and index.isValid() and index.column() == 0
                and index.row() in self.curve_colors):
            return QtGui.QColor(*self.curve_colors[index.row()])
        return super().data(index, role)

    def set_edges(self, cut_faces, closed_gaps, units, tolerance):
        """Cut edges (E, 2), their gaps at t = 1 (E,); gaps up to ``tolerance`` meet."""
        self.units, self.tolerance = units, float(tolerance)
        self.now = np.zeros(len(cut_faces))
        self.set_rows([[e, f"{a} – {b}", None, self.gap_text(g)]
                       for e, ((a, b), g) in enumerate(zip(cut_faces.tolist(), closed_gaps))])

    def gap_text(self, gap):
        """A gap as shown: "meets" within the tolerance, else its length."""
        return "meets" if gap <= self.tolerance else f"{gap:.3g} {self.units}"

    def set_now(self, gaps):
        self.now = np.asarray(gaps, dtype=float)
        self.column_changed(self.NOW)

    def text(self, row, column):
        if column == self.NOW:
            return self.gap_text(self.now[row])
        return str(self.rows[row][column])


def make_table(model):
    """A compact, whole-row-selecting table view over a model."""
    view = QtWidgets.QTableView()
    view.setModel(model)
    view.setSelectionBehavior(QtWidgets.QAbstractItemView.SelectionBehavior.SelectRows)
    view.verticalHeader().setVisible(False)
    view.verticalHeader().setDefaultSectionSize(20)
    view.horizontalHeader().setStretchLastSection(True)
    view.setAlternatingRowColors(True)
    view.setEditTriggers(QtWidgets.QAbstractItemView.EditTrigger.NoEditTriggers)
    return view


CURVE_COLORS = ((128, 64, 208), (0, 128, 160), (200, 120, 0), (60, 150, 60), (90, 90, 110), (180, 60, 150))


class GapPlot(pg.PlotWidget):
    """Gap against t for chosen cut edges, with a cursor at the current t."""

    def __init__(self, parent=None):
        super().__init__(parent, background="w")
        self.setLabel("bottom", "t")
        self.setLabel("left", "gap")
        self.showGrid(x=True, y=True, alpha=0.25)
        self.setXRange(-1, 1, padding=0.02)
        self.setMouseEnabled(x=False, y=False)
        self.hideButtons()
        self.cursor = pg.InfiniteLine(pos=0.0, angle=90, pen=pg.mkPen((40, 40, 50), width=1.5))
        self.addItem(self.cursor)
        self.curves = []
        self.t_grid = np.zeros(0)
        self.gaps = np.zeros((0, 0))

    def set_data(self, t_grid, gaps, units):
        """Gaps (T, E) of every cut edge over the drive values t_grid (T,)."""
        self.t_grid, self.gaps = np.asarray(t_grid), np.asarray(gaps)
        self.setLabel("left", "gap", units=None)
        self.getAxis("left").setLabel(f"gap ({units})")
        self.show_edges([])

    def show_edges(self, edges):
        """Draw the curves of these cut edges (sequence of int).

        Returns
        -------
        dict
            Edge -> its curve's colour (0-255 RGB), for the table to show.
        """
        for curve in self.curves:
            self.removeItem(curve)
        self.curves = []
        colors = {}
        for k, e in enumerate(edges):
            colors[int(e)] = CURVE_COLORS[k % len(CURVE_COLORS)]
            self.curves.append(self.plot(self.t_grid, self.gaps[:, e], pen=pg.mkPen(colors[int(e)], width=2)))
        if len(edges):
            top = float(self.gaps[:, list(edges)].max())
            self.setYRange(0, top if top > 0 else 1, padding=0.05)
        return colors

    def set_t(self, t):
        self.cursor.setValue(float(t))
