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


# -------------------------------------------------------- 2. in-view identification

from foldsim.gui.view import palette  # noqa: E402
from foldsim.gui.view.numbers import NUMBERS_UP_TO, anchor_points, draw_numbers  # noqa: E402

TRAY = ROOT / "assets" / "tray-overfold.mech.json"
SIZE = (480, 360)


def pixels_near(img, rgb, tol=12):
    diff = np.abs(img[..., :3].astype(int) - np.array(rgb[:3])[None, None, :])
    return int((diff <= tol).all(axis=-1).sum())


def overlay_pixels(win):
    """What the see-through layer over the GL view painted (labels, numbers, legend), as RGBA."""
    from PySide6 import QtGui

    from foldsim.gui.view.viewport import image_array

    win.view._overlay.repaint()
    image = QtGui.QImage(win.view._overlay.size(), QtGui.QImage.Format.Format_ARGB32)
    image.fill(QtGui.QColor(0, 0, 0, 0))
    win.view._overlay.render(image)
    return image_array(image)


def keys(win):
    overlay_pixels(win)
    return [e.key for e in win.view.legend_shown]


def test_numbers_are_on_for_small_models_and_drawn_in_the_picture(window):
    window.open_path(DEMO)
    mech = window.model.mech
    assert mech.n_faces < NUMBERS_UP_TO and window.numbers_action.isChecked()
    window.drive.set_t(0.5)
    shown = window.view.render_image(*SIZE)
    overlay_pixels(window)
    assert window.view.numbers_drawn == {"face", "hinge", "edge"}
    window.numbers_action.trigger()
    assert not window.view.show_numbers
    plain = window.view.render_image(*SIZE)
    changed = (np.abs(shown[..., :3].astype(int) - plain[..., :3]).max(axis=-1) > 60).sum()
    assert changed > 200
    # Hinge tags are filled with the hinge colour: many more such pixels with the numbers on.
    assert pixels_near(shown, palette.HINGE, 6) > pixels_near(plain, palette.HINGE, 6) + 100


def test_numbers_never_overlap_and_fewer_fit_when_zoomed_out(window):
    from PySide6 import QtGui

    window.open_path(DEMO)
    view = window.view

    def placed_boxes():
        image = QtGui.QImage(640, 480, QtGui.QImage.Format.Format_ARGB32)
        painter = QtGui.QPainter(image)
        placed = []
        draw_numbers(painter, view, anchor_points(view.mech, view.poses, view._centres), 640, 480, 1.0, placed)
        painter.end()
        return placed

    near = placed_boxes()
    mech = view.mech
    assert len(near) > mech.n_faces // 2
    for k, a in enumerate(near):
        assert not any(a.intersects(b) for b in near[k + 1:])
    view.opts["distance"] *= 12
    far = placed_boxes()
    assert 0 < len(far) < len(near)
    for k, a in enumerate(far):
        assert not any(a.intersects(b) for b in far[k + 1:])


def test_numbers_are_off_by_default_on_a_large_model(window):
    recipe = shape_args("geodesic:2", net="bfs", gears="none")
    window.open_shape(recipe, built=build(recipe)[0])
    assert window.model.mech.n_faces >= NUMBERS_UP_TO
    assert not window.numbers_action.isChecked() and not window.view.show_numbers


def test_a_picked_panel_is_named_in_the_status_bar(window, qtbot):
    window.open_path(TRAY)
    mech = window.model.mech
    face = next(f for f in range(mech.n_faces) if f != mech.root)
    window._face_picked(face)
    h = int(mech.face_hinge[face])
    assert window.picked_label.text().startswith(f"face {face}: hinge {h} from face {int(mech.parent[h])}")
    assert window.picked_label.isVisible()
    window._face_picked(mech.root)
    assert window.picked_label.text().startswith(f"face {mech.root}: the fixed face")
    qtbot.waitUntil(lambda: window.model.labels is not None, timeout=30000)
    window._face_picked(face)
    assert window.picked_label.text().endswith(f"part {window.model.labels[face]}")
    window._face_picked(-1)
    assert window.picked_label.text() == ""


def test_the_legend_lists_exactly_the_marks_on_screen(window, qtbot):
    window.open_path(TRAY)
    window.drive.set_t(0.0)
    flat = keys(window)
    # Flat: nothing collides; the walls' corner edges are near (gap lines); the numbers are on.
    assert flat == ["gap", "face", "hinge", "edge"]
    legend_flat = overlay_pixels(window)
    assert pixels_near(legend_flat, palette.WARNING, 2) == 0
    window.drive.set_t(0.9)
    view = window.view
    assert len(view.colliding) and view._crossings.visible() and view._gap_lines.visible()
    assert keys(window) == ["collision", "crossing", "gap", "face", "hinge", "edge"]
    # The legend's red swatch: the warning colour is painted over the view only now.
    assert pixels_near(overlay_pixels(window), palette.WARNING, 2) > 40
    window._face_picked(2)
    assert "selection" in keys(window)
    window.gap_lines_action.trigger()
    assert "gap" not in keys(window) and not view._gap_lines.visible()
    window.numbers_action.trigger()
    assert keys(window) == ["collision", "crossing", "selection"]
    window.legend_action.trigger()
    assert keys(window) == [] and view.legend_box is None


def test_the_legend_names_the_part_types_in_their_colours(window, qtbot):
    window.open_path(TRAY)
    qtbot.waitUntil(window.color_by_part.isEnabled, timeout=30000)
    window.color_by_part.trigger()
    overlay_pixels(window)
    entries = [e for e in window.view.legend_shown if e.key == "part-type"]
    labels = window.model.labels
    assert [e.text for e in entries] == [f"part {name}" for name in dict.fromkeys(labels)]
    front, _ = window.view.panel_colors()
    for entry in entries:
        face = labels.index(entry.text[len("part "):])
        np.testing.assert_allclose(front[face, :3], np.array(entry.color) / 255, atol=1e-6)
    window.color_by_face.trigger()
    assert "part-type" not in keys(window)


def test_part_type_colours_stay_apart_for_colour_blind_viewers():
    colorspacious = pytest.importorskip("colorspacious")
    import itertools

    def least_difference(colours, cvd=None):
        rgb = np.array(colours, float)
        if cvd is not None:
            # Machado, Oliveira and Fernandes (2009) simulation, as colorspacious implements it.
            space = {"name": "sRGB1+CVD", "cvd_type": cvd, "severity": 100}
            rgb = np.clip(colorspacious.cspace_convert(rgb / 255, space, "sRGB1"), 0, 1) * 255
        # Colour difference in CAM02-UCS (Luo, Cui and Li 2006); a just-noticeable
        # difference is about 1 to 2 units, so 8 is plainly apart (common practice, from memory).
        return min(colorspacious.deltaE(a, b, input_space="sRGB255") for a, b in itertools.combinations(rgb, 2))

    types = palette.PART_TYPES
    # Paul Tol's "light" qualitative scheme (SRON/EPS/TN/09-002), as published.
    assert [f"#{r:02X}{g:02X}{b:02X}" for r, g, b in types] == [
        "#77AADD", "#EE8866", "#EEDD88", "#FFAABB", "#99DDFF", "#44BB99", "#BBCC33", "#AAAA00", "#DDDDDD"]
    assert least_difference(types) > 8
    assert least_difference(types, "deuteranomaly") > 8
    assert least_difference(types, "protanomaly") > 8
    assert least_difference(types, "tritanomaly") > 5
    # The per-face palette was not made for this: two of its colours merge for a deuteranope.
    assert least_difference(palette.PANELS, "deuteranomaly") < 5
