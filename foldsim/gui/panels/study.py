"""File ▸ Open study…: a net study's rows in a sortable table; a chosen row is shown.

A study (`foldsim study`, docs/study.md) is read through `foldsim.study.table`;
the table lists every net with its criteria, sortable by any column (numbers sort
as numbers, empty cells last). Choosing a row makes that net's mechanism as
`foldsim study --pick` does (the window's `open_shape`, in the background), so it
shows in the viewport and its collision strip fills in as for any model.
"""

import math
from pathlib import Path

from PySide6 import QtCore, QtWidgets

from ...design import shape_args
from ...errors import FoldsimError
from ...study.rank import cell_text

SHOWN = ("net", "ok", "collision_free", "first_collision_t", "diameter", "part_types", "gear_count",
         "gear_chain", "worst_case_gap", "rss_gap", "p95_gap", "closure_gap", "error", "cuts")
"""The table's columns, in order (names of the study table's columns)."""


def _sort_key(value):
    """Numbers and booleans as numbers, text as text; empty last in ascending order."""
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return (2, 0.0, "")
    if isinstance(value, (bool, int, float)):
        return (0, float(value), "")
    return (1, 0.0, str(value))


class StudyModel(QtCore.QAbstractTableModel):
    """Rows of a study table; sorting reorders the rows in place."""

    def __init__(self, rows, columns=SHOWN, parent=None):
        super().__init__(parent)
        self.rows = list(rows)
        self.columns = [c for c in columns if not self.rows or c in self.rows[0]]

    def rowCount(self, parent=QtCore.QModelIndex()):
        return 0 if parent.isValid() else len(self.rows)

    def columnCount(self, parent=QtCore.QModelIndex()):
        return 0 if parent.isValid() else len(self.columns)

    def data(self, index, role=QtCore.Qt.ItemDataRole.DisplayRole):
        if not index.isValid():
            return None
        value = self.rows[index.row()][self.columns[index.column()]]
        if role == QtCore.Qt.ItemDataRole.DisplayRole:
            return cell_text(value, missing="")
        if role == QtCore.Qt.ItemDataRole.TextAlignmentRole and isinstance(value, (int, float)) \
                and not isinstance(value, bool):
            return int(QtCore.Qt.AlignmentFlag.AlignRight | QtCore.Qt.AlignmentFlag.AlignVCenter)
        return None

    def headerData(self, section, orientation, role=QtCore.Qt.ItemDataRole.DisplayRole):
        if role != QtCore.Qt.ItemDataRole.DisplayRole:
            return None
        if orientation == QtCore.Qt.Orientation.Horizontal:
            return self.columns[section].replace("_", " ")
        return None

    def sort(self, column, order=QtCore.Qt.SortOrder.AscendingOrder):
        name = self.columns[column]
        self.layoutAboutToBeChanged.emit()
        filled = [r for r in self.rows if _sort_key(r[name])[0] < 2]
        empty = [r for r in self.rows if _sort_key(r[name])[0] == 2]
        filled.sort(key=lambda r: (_sort_key(r[name]), r["net"]),
                    reverse=order == QtCore.Qt.SortOrder.DescendingOrder)
        self.rows = filled + empty
        self.layoutChanged.emit()

    def row(self, i):
        return self.rows[i]


class StudyPanel(QtWidgets.QDialog):
    """A study's nets; double-click or Enter (or Show) loads the chosen net into the window."""

    def __init__(self, window, study):
        from ...study import table

        super().__init__(window)
        self.window_ = window
        self.study = Path(study)
        plan = table.read_plan(self.study)
        self.spec = table.plan_spec(plan)
        self.model = StudyModel(table.read_table(self.study), parent=self)
        self.setWindowTitle(f"Study: {plan['shape']} ({len(self.model.rows):,} nets) — {self.study.name}")
        self.table = QtWidgets.QTableView(self)
        self.table.setModel(self.model)
        self.table.setSortingEnabled(True)
        self.table.setSelectionBehavior(QtWidgets.QAbstractItemView.SelectionBehavior.SelectRows)
        self.table.setSelectionMode(QtWidgets.QAbstractItemView.SelectionMode.SingleSelection)
        self.table.verticalHeader().setVisible(False)
        self.table.sortByColumn(0, QtCore.Qt.SortOrder.AscendingOrder)
        self.table.doubleClicked.connect(lambda index: self.show_row(index.row()))
        self.note = QtWidgets.QLabel(
            "Sort by clicking a column; double-click a net to show it. A study ranks nets of an idealised "
            "model: check the chosen one, and mind the pinch points of folding panels.", self)
        self.note.setWordWrap(True)
        show = QtWidgets.QPushButton("Show net", self)
        show.clicked.connect(self._show_selected)
        close = QtWidgets.QPushButton("Close", self)
        close.clicked.connect(self.close)
        buttons = QtWidgets.QHBoxLayout()
        buttons.addStretch(1)
        buttons.addWidget(show)
        buttons.addWidget(close)
        layout = QtWidgets.QVBoxLayout(self)
        layout.addWidget(self.table)
        layout.addWidget(self.note)
        layout.addLayout(buttons)
        self.resize(900, 420)
        self.shown_net = None

    def _show_selected(self):
        rows = self.table.selectionModel().selectedRows()
        if rows:
            self.show_row(rows[0].row())

    def recipe(self, row):
        """`foldsim.design.shape_args` that make a row's net as `foldsim study --pick` does."""
        return shape_args(self.spec.shape, self.spec.size, self.spec.units, cut=row["cuts"], root=row["root"],
                          gears=self.spec.gears)

    def show_row(self, i):
        """Load the net in table row ``i`` (as currently sorted) into the window."""
        row = self.model.row(i)
        if row["error"] is not None:
            self.window_.show_error(f"net {row['net']} could not be evaluated: {row['error']}")
            return False
        self.shown_net = row["net"]
        self.window_.statusBar().showMessage(f"Unfolding net {row['net']} of the study…", 5000)
        return self.window_.open_shape(self.recipe(row))


def open_study(window, path=None):
    """File ▸ Open study…: ask for a study directory (unless given) and show its nets.

    Returns
    -------
    StudyPanel or None
    """
    from ...study import table

    if path is None:
        start = str(window.model.folder()) if window.model else ""
        path = QtWidgets.QFileDialog.getExistingDirectory(window, "Open study (a foldsim study directory)", start)
        if not path:
            return None
    try:
        if not table.is_study(path):
            raise FoldsimError(f"{path}: not a study (no study.json)")
        panel = StudyPanel(window, path)
    except FoldsimError as exc:
        window.show_error(str(exc))
        return None
    old = getattr(window, "study_panel", None)
    if old is not None:
        old.close()
    window.study_panel = panel
    panel.show()
    return panel
