"""File ▸ Open study… in the desktop app: a sortable table of nets; a chosen net is drawn.

Under a real X server (pytest-xvfb) with Mesa's software GL; the check that the
net is shown looks at pixels the view drew, as in tests/test_gui.py.
"""

import numpy as np
import pytest

pytest.importorskip("PySide6")
pytest.importorskip("pyqtgraph")

from PySide6 import QtCore  # noqa: E402

from foldsim.gui.panels.study import open_study  # noqa: E402
from foldsim.gui.view import palette  # noqa: E402
from foldsim.gui.window.app import MainWindow  # noqa: E402
from foldsim.study import table  # noqa: E402
from foldsim.study.evaluate import StudySpec  # noqa: E402
from foldsim.study.run import make_plan, run_study  # noqa: E402


@pytest.fixture
def window(qtbot, tmp_path):
    settings = QtCore.QSettings(str(tmp_path / "settings.ini"), QtCore.QSettings.Format.IniFormat)
    win = MainWindow(settings)
    qtbot.addWidget(win)
    win.resize(1000, 700)
    win.show()
    qtbot.waitExposed(win)
    yield win
    win.close()


@pytest.fixture
def cube_study(tmp_path):
    path = tmp_path / "cube-study"
    table.write_plan(path, make_plan(StudySpec("cube"), "all"))
    run_study(path, scheduler="none")
    return path


def test_the_study_table_sorts_and_a_chosen_net_is_drawn(window, cube_study, qtbot):
    panel = open_study(window, cube_study)
    assert panel is not None and panel.isVisible()
    model = panel.model
    # the cube's 11 nets (Buekenhout & Parker 1998, from memory; shared/REFERENCES.md)
    assert model.rowCount() == 11
    col = model.columns.index("diameter")
    panel.table.sortByColumn(col, QtCore.Qt.SortOrder.DescendingOrder)
    diameters = [model.row(i)["diameter"] for i in range(11)]
    assert diameters == sorted(diameters, reverse=True)
    panel.table.sortByColumn(col, QtCore.Qt.SortOrder.AscendingOrder)
    first = model.row(0)
    # the cube's shortest longest hinge chain is 3 (Hassin & Tamir; shared/REFERENCES.md)
    assert first["diameter"] == 3
    assert panel.show_row(0)
    qtbot.waitUntil(lambda: not window.loading(), timeout=60000)
    qtbot.waitUntil(lambda: not window.sweeping(), timeout=60000)
    mech = window.model.mech
    cuts = {tuple(map(int, p.split("-"))) for p in first["cuts"].split(",")}
    shown = {tuple(sorted(map(int, p))) for p in mech.cut_faces.tolist()}
    assert shown == cuts and mech.root == first["root"]
    img = window.view.render_image(480, 360)
    drawn = (np.abs(img[..., :3].astype(int) - palette.BACKGROUND).max(axis=-1) > 20).mean()
    assert drawn > 0.05


def test_a_folder_that_is_not_a_study_is_refused_with_a_message(window, tmp_path, qtbot):
    assert open_study(window, tmp_path) is None
    qtbot.waitUntil(lambda: window.error_box is not None and window.error_box.isVisible(), timeout=10000)
    assert "not a study" in window.error_box.text()
