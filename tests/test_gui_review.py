"""The app as a design reviewer uses it: nothing lost, marks explained, dialogs and layout.

Under a real X server (pytest-xvfb) with Mesa's software GL, as `test_gui`.
Where a picture is the point (labels, the legend), the check looks at pixels
the view really drew.
"""

import os
import stat
from pathlib import Path

import numpy as np
import pytest

pytest.importorskip("PySide6")
pytest.importorskip("pyqtgraph")

from PySide6 import QtCore, QtWidgets  # noqa: E402

from foldsim import cli  # noqa: E402
from foldsim.design import build, shape_args  # noqa: E402
from foldsim.gui.window.app import DEMO, MainWindow  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
Buttons = QtWidgets.QMessageBox.StandardButton


@pytest.fixture
def window(qtbot, tmp_path):
    settings = QtCore.QSettings(str(tmp_path / "settings.ini"), QtCore.QSettings.Format.IniFormat)
    win = MainWindow(settings)
    qtbot.addWidget(win)
    win.resize(1280, 800)
    win.show()
    qtbot.waitExposed(win)
    yield win
    win.close()


@pytest.fixture
def unsaved(window):
    """The window showing a cube made with New from shape, not saved."""
    recipe = shape_args("cube", size=30.0)
    window.open_shape(recipe, built=build(recipe)[0])
    assert "(not saved)" in window.windowTitle()
    return window


@pytest.fixture
def answers(monkeypatch):
    """Answer the Save / Discard / Cancel question with the button queued here; record the questions."""
    asked, queue = [], []

    def question(parent, title, text, buttons, default):
        asked.append((text, buttons))
        # Nothing queued (the window closed when the test ends): discard.
        return queue.pop(0) if queue else Buttons.Discard

    monkeypatch.setattr(QtWidgets.QMessageBox, "question", question)
    return asked, queue


@pytest.fixture
def umask():
    """Set the process umask for one test (the old one comes back after)."""
    old = os.umask(0o022)
    os.umask(old)
    yield os.umask
    os.umask(old)


def mode(path):
    return stat.S_IMODE(os.stat(path).st_mode)


# ---------------------------------------------------------------- 1. nothing lost


def test_quitting_with_an_unsaved_model_asks_and_cancel_keeps_the_window(unsaved, answers, qtbot):
    asked, queue = answers
    queue.append(Buttons.Cancel)
    assert not unsaved.close()
    assert unsaved.isVisible()
    text, buttons = asked[0]
    assert "not saved" in text and "quit" in text
    # The usual desktop choice (common practice): Save, Discard and Cancel.
    assert buttons == Buttons.Save | Buttons.Discard | Buttons.Cancel
    queue.append(Buttons.Discard)
    assert unsaved.close()
    assert not unsaved.isVisible()


def test_save_in_the_question_writes_the_file_before_quitting(unsaved, answers, monkeypatch, tmp_path):
    asked, queue = answers
    target = tmp_path / "cube.mech.json"
    monkeypatch.setattr(QtWidgets.QFileDialog, "getSaveFileName", lambda *a, **k: (str(target), ""))
    queue.append(Buttons.Save)
    assert unsaved.close()
    assert target.is_file() and len(asked) == 1


def test_save_cancelled_in_the_file_dialog_keeps_the_window(unsaved, answers, monkeypatch):
    asked, queue = answers
    monkeypatch.setattr(QtWidgets.QFileDialog, "getSaveFileName", lambda *a, **k: ("", ""))
    queue.append(Buttons.Save)
    assert not unsaved.close()
    assert unsaved.model.path is None


def test_new_and_open_ask_before_replacing_an_unsaved_model(unsaved, answers, monkeypatch):
    asked, queue = answers
    opened = []
    monkeypatch.setattr(QtWidgets.QFileDialog, "getOpenFileName", lambda *a, **k: opened.append(1) or ("", ""))
    queue.extend([Buttons.Cancel, Buttons.Cancel])
    unsaved.open_dialog()
    assert unsaved.shape_dialog() is None
    assert not opened and len(asked) == 2
    assert "opening" in asked[0][0] and "new model" in asked[1][0]
    name = unsaved.model.name()
    # Recent files ask as well.
    unsaved.settings.setValue("recent", [str(DEMO)])
    unsaved._refresh_recent()
    queue.append(Buttons.Cancel)
    unsaved.recent_menu.actions()[0].trigger()
    assert unsaved.model.name() == name and len(asked) == 3
    queue.append(Buttons.Discard)
    unsaved.recent_menu.actions()[0].trigger()
    assert unsaved.model.path == DEMO


def test_a_saved_model_closes_without_a_question(window, answers):
    asked, _ = answers
    window.open_path(DEMO)
    assert window.close() and not asked


@pytest.mark.parametrize("mask", [0o022, 0o002, 0o077])
def test_files_written_by_new_export_and_the_app_follow_the_umask(window, tmp_path, umask, mask, qtbot):
    # POSIX open(2): a new file's mode is the requested 0666 less the umask.
    umask(mask)
    want = 0o666 & ~mask
    made = tmp_path / "cube.mech.json"
    assert cli.main(["new", "cube", "-o", str(made)]) == 0
    assert mode(made) == want
    for suffix in (".html", ".svg", ".csv", ".glb"):
        out = tmp_path / f"cube{suffix}"
        assert cli.main(["export", str(made), "-o", str(out)]) == 0
        assert mode(out) == want, suffix
    window.open_path(made)
    saved = tmp_path / "again.mech.json"
    window.save_to(saved)
    assert mode(saved) == want
    task = window.export_to(tmp_path / "app.csv")
    qtbot.waitUntil(lambda: not window.exporting(), timeout=30000)
    assert task is not None and mode(tmp_path / "app.csv") == want
    window.record(tmp_path / "shot.png", size=(64, 48))
    assert mode(tmp_path / "shot.png") == want


def test_an_existing_file_keeps_its_own_mode_when_saved_over(tmp_path, umask):
    umask(0o022)
    made = tmp_path / "cube.mech.json"
    made.write_text("")
    os.chmod(made, 0o640)
    assert cli.main(["new", "cube", "-o", str(made)]) == 0
    assert mode(made) == 0o640
