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
    # Hinge tags are filled with the hinge colour: many pixels of it appear where the
    # picture without numbers has none (the hinge lines themselves are in both).
    def near(img):
        return (np.abs(img[..., :3].astype(int) - np.array(palette.HINGE[:3])) <= 6).all(axis=-1)

    assert (near(shown) & ~near(plain)).sum() > 100


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


# --------------------------------------------------------------- 3. honest marks

from foldsim.gearing import fold_angles  # noqa: E402
from foldsim.gui.record.caption import t_text  # noqa: E402

from helpers import strip_document, write_doc  # noqa: E402


@pytest.fixture
def strip150(tmp_path):
    """Three unit squares, the middle one fixed, both hinges closing at 150°: the outer
    squares meet at t = 0.8 (an equilateral triangle, by hand) and cross beyond it."""
    doc = strip_document()
    doc.update(name="strip 150", root=1, drive=0)
    for hinge in doc["hinges"]:
        hinge["closed_angle_deg"] = 150.0
    return write_doc(tmp_path, doc, "strip150.mech.json")


def finish_sweep(qtbot, win):
    qtbot.waitUntil(lambda: not win.sweeping(), timeout=60000)


def test_the_strip_keeps_its_detailed_tooltip_while_the_mouse_rests(window, strip150, qtbot):
    from PySide6 import QtGui

    window.open_path(strip150)
    finish_sweep(qtbot, window)
    strip = window.drive.strip
    c = window.intervals[-1]
    x = int(round(strip.x_of(0.5 * (c["first_t"] + c["last_t"]))))
    rest = QtGui.QHelpEvent(QtCore.QEvent.Type.ToolTip, QtCore.QPoint(x, 8), strip.mapToGlobal(QtCore.QPoint(x, 8)))
    QtWidgets.QApplication.sendEvent(strip, rest)
    text = QtWidgets.QToolTip.text()
    assert text.startswith("faces 0 and 2: t = ") and text != strip.GENERIC_TIP
    empty = int(round(strip.x_of(0.0)))
    rest = QtGui.QHelpEvent(QtCore.QEvent.Type.ToolTip, QtCore.QPoint(empty, 8),
                            strip.mapToGlobal(QtCore.QPoint(empty, 8)))
    QtWidgets.QApplication.sendEvent(strip, rest)
    assert QtWidgets.QToolTip.text() == strip.GENERIC_TIP


def test_the_status_says_what_the_sweep_has_covered_so_far(window, strip150, qtbot):
    window.open_path(strip150)
    window.cancel_sweep()
    text = window.status.text()
    assert "over −1..1" not in text
    seen = []
    window.start_sweep()
    window.sweep.signals.progress.connect(lambda *_: seen.append(window.status.text()))
    finish_sweep(qtbot, window)
    assert seen and all("so far" in s for s in seen)
    assert all("over −1..1 so far" in s or "over −1..1" not in s for s in seen)
    # The strip150 outer squares cross for t beyond ±0.8 (by hand): two stretches once done.
    assert window.status.text().endswith("2 collision stretches over −1..1")
    window.start_sweep()
    window.cancel_sweep()
    assert "over −1..1" not in window.status.text()


def test_build_outlines_go_with_their_panel_from_the_view_and_clips(window, qtbot, tmp_path):
    window.open_path(DEMO)
    window.drive.set_t(1.0)
    qtbot.wait(50)
    plain = window.view.render_image(*SIZE)  # the view's size and camera as they are with the panel shut
    window.stackup_dock.show()
    qtbot.wait(50)
    panel = window.stackup_panel
    panel.process.setCurrentIndex(panel.process.findData("sintered-nylon"))
    panel.samples.setValue(200)
    panel.outlined.setValue(20)
    panel.run_button.click()
    qtbot.waitUntil(lambda: not panel.running(), timeout=120000)
    assert window.view.envelope_poses is not None and "envelope" in keys(window)
    window.stackup_dock.hide()
    qtbot.wait(50)
    assert window.view.envelope_poses is None and "envelope" not in keys(window)
    np.testing.assert_array_equal(window.view.render_image(*SIZE), plain)
    # A clip made now has no outlines either: its frame is the plain one.
    from foldsim.gui.record.recorder import render_frames

    frames = render_frames(window.view, 1.0, 1.0, seconds=1, fps=1, size=SIZE, overlay=False, fit=False)
    _, _, rgba = next(frames)
    frames.close()
    np.testing.assert_array_equal(rgba, plain)
    window.stackup_dock.show()
    qtbot.wait(50)
    assert window.view.envelope_poses is not None


def test_during_playback_every_part_shows_the_same_t(window, qtbot):
    window.open_path(DEMO)
    mech, schedule = window.model.mech, window.model.schedule
    checked = []

    def same_t(t):
        view = window.view
        assert view.t == t
        assert window.drive.field.text() == t_text(t).replace("−", "-")
        assert t_text(t) in window.status.text()
        assert window.gap_plot.cursor.value() == t
        np.testing.assert_allclose(window.hinge_model.now, np.degrees(fold_angles(schedule, np.array([t]))[0]))
        checked.append(t)

    window.drive.tChanged.connect(same_t)
    width = window.drive.play_button.width()
    window.drive.play(True)
    qtbot.waitUntil(lambda: len(checked) >= 15, timeout=60000)
    assert window.drive.play_button.text() == "Pause" and window.drive.play_button.width() == width
    window.drive.play(False)
    assert window.drive.play_button.width() == width
    assert len(set(checked)) > 10 and mech.n_faces > 0


@pytest.mark.parametrize("t", [k / 16 for k in range(-16, 17)] + [-0.0004, 0.0005, 0.1235, 0.999])
def test_caption_status_and_field_round_t_alike(window, t):
    window.open_path(DEMO)
    window.drive.set_t(t)
    field = window.drive.field.text()  # Qt's own rounding of the number field
    assert t_text(window.view.t).replace("−", "-") == field
    assert t_text(window.view.t) in window.status.text()
    from foldsim.gui.record.caption import overlay_lines

    assert overlay_lines(window.view)[1] == t_text(window.view.t)


# ------------------------------------------------------------- 4. gap lines

from foldsim.gui.view.overlays import LARGE_MODEL, MAX_AUTO_LABELS, NEAR_GAP  # noqa: E402


def test_gap_lines_can_be_turned_off_and_their_labels_go_too(window):
    window.open_path(TRAY)
    window.drive.set_t(0.9)
    view = window.view
    assert view._gap_lines.visible() and view._labels
    with_lines = view.render_image(*SIZE)
    window.gap_lines_action.trigger()
    assert not view._gap_lines.visible() and not view._labels and len(view.drawn_gaps()) == 0
    without = view.render_image(*SIZE)
    assert pixels_near(with_lines, palette.GAP, 20) > pixels_near(without, palette.GAP, 20) + 50
    window.gap_lines_action.trigger()
    assert view._gap_lines.visible()


def test_a_large_model_draws_only_the_chosen_or_the_widest_gaps(window):
    recipe = shape_args("geodesic:2", net="bfs", gears="none")
    window.open_shape(recipe, built=build(recipe)[0])
    view = window.view
    assert view.mech.n_faces >= LARGE_MODEL
    window.drive.set_t(0.6)
    view.set_label_edges(None)
    drawn = view.drawn_gaps()
    assert 0 < len(drawn) <= MAX_AUTO_LABELS
    near = view.gaps[view.open_edges()]
    widest = np.sort(near[near <= NEAR_GAP * view.mech.size])[::-1]  # wider ones are the net lying open
    assert view.gaps[drawn].min() >= widest[min(MAX_AUTO_LABELS, len(widest)) - 1] - 1e-12
    chosen = [int(e) for e in view.open_edges()[:2]]
    view.set_label_edges(chosen)
    assert sorted(view.drawn_gaps().tolist()) == sorted(chosen)


def test_a_point_behind_a_panel_is_hidden_and_one_in_front_is_not(window):
    window.open_path(TRAY)
    window.drive.set_t(0.0)  # flat: every panel in one plane, seen from above
    view = window.view
    eye = view._eye()
    root = view.mech.root
    from foldsim.gui.view.numbers import face_centres

    centre = face_centres(view.mech)[root]  # the root face does not move (identity pose)
    towards = centre - eye
    behind, before = centre + 0.2 * towards, centre - 0.2 * towards
    assert view.hidden_points(np.array([behind, before])).tolist() == [True, False]


# ------------------------------------------------------------------ 5. framing


def model_extent(view, width, height):
    """Fraction of the frame's width and height the posed model's corners span."""
    from foldsim.gui.record.framing import _posed_corners

    px = view.model_to_pixels(_posed_corners(view, [view.t]), width, height)
    return max(np.ptp(px[:, 0]) / width, np.ptp(px[:, 1]) / height)


def test_fit_current_pose_fills_the_view_with_the_closed_model(window):
    window.open_path(TRAY)
    window.drive.set_t(1.0)
    view = window.view
    actions = {a.text().replace("&", ""): a for a in window.findChildren(QtWidgets.QMenu)[0].actions()}
    fit_pose = next(a for a in window.actions() if a.text().replace("&", "") == "Fit current pose")
    assert fit_pose.shortcut().toString() == "Shift+F" and actions is not None
    fit_motion = next(a for a in window.actions() if a.text().replace("&", "") == "Fit whole motion")
    fit_motion.trigger()
    motion = model_extent(view, view.width(), view.height())
    fit_pose.trigger()
    pose = model_extent(view, view.width(), view.height())
    # camera.fit leaves a margin of 1.1 on the larger side: the model spans 1 / 1.1 of it.
    assert pose == pytest.approx(1 / 1.1, abs=0.02)
    assert pose > motion + 0.05


def test_clips_and_screenshots_offer_both_fits_and_the_pose_fills_the_frame(window, tmp_path):
    from PySide6 import QtGui

    from foldsim.gui.view.viewport import image_array

    window.open_path(TRAY)
    window.drive.set_t(1.0)
    for box in (window.clip_dialog(), window.save_image()):
        offered = [box.fit.itemData(k) for k in range(box.fit.count())]
        assert {"pose", "motion", "keep"} <= set(offered)
        box.reject()

    def drawn_width(fit, name):
        target = tmp_path / name
        window.record(target, size=(320, 240), fit=fit)
        img = image_array(QtGui.QImage(str(target)))
        cols = np.flatnonzero((np.abs(img[..., :3].astype(int) - palette.BACKGROUND).max(axis=-1) > 20).any(axis=0))
        return cols.max() - cols.min()

    assert drawn_width("pose", "pose.png") > drawn_width("motion", "motion.png") + 20


# ------------------------------------------------------------------ 6. dialogs


def test_dialogs_remember_their_settings_in_the_session_and_the_next(window, tmp_path, qtbot):
    window.open_path(DEMO)
    box = window.clip_dialog()
    box.kind.setCurrentIndex(box.kind.findData(".gif"))
    box.path.setText(str(tmp_path / "out" / "fold.gif"))
    (tmp_path / "out").mkdir()
    box.fps.setValue(12)
    box.seconds.setValue(0.25)
    box.width_box.setValue(64)
    box.height_box.setValue(48)
    box.fit.setCurrentIndex(box.fit.findData("pose"))
    box.accept()
    assert (tmp_path / "out" / "fold.gif").is_file()
    again = window.clip_dialog()
    assert again.kind.currentData() == ".gif" and again.fps.value() == 12 and again.seconds.value() == 0.25
    assert (again.width_box.value(), again.height_box.value()) == (64, 48) and again.fit.currentData() == "pose"
    # The last folder used, not the demo's (bundled assets) folder.
    assert Path(again.path.text()).parent == (tmp_path / "out").resolve()
    again.reject()
    export = window.export_dialog()
    assert Path(export.path.text()).parent == (tmp_path / "out").resolve()
    export.kind.setCurrentIndex(export.kind.findData(".csv"))
    export.frames.setValue(7)
    export.accept()
    qtbot.waitUntil(lambda: not window.exporting(), timeout=30000)
    # A new session reads the same settings file.
    later = MainWindow(window.settings)
    qtbot.addWidget(later)
    later.open_path(DEMO)
    clip = later.clip_dialog()
    assert clip.fps.value() == 12 and clip.kind.currentData() == ".gif"
    export = later.export_dialog()
    assert export.kind.currentData() == ".csv" and export.frames.value() == 7
    clip.reject()
    export.reject()


def test_the_first_output_folder_is_not_the_bundled_assets(window, monkeypatch, tmp_path):
    monkeypatch.setenv("HOME", str(tmp_path))
    window.open_path(DEMO)
    box = window.export_dialog()
    assert Path(box.path.text()).parent == Path.home()
    assert "assets" not in Path(box.path.text()).parts
    box.reject()


def test_mp4_sizes_are_even_and_refusals_name_the_dialog_fields(window, tmp_path):
    window.open_path(DEMO)
    box = window.clip_dialog()
    box.kind.setCurrentIndex(box.kind.findData(".mp4"))
    box.width_box.setValue(641)
    box.width_box.editingFinished.emit()
    box.height_box.setValue(359)
    assert box.options()["size"] == (642, 360)
    assert box.width_box.singleStep() == 2
    box.kind.setCurrentIndex(box.kind.findData(".gif"))
    box.width_box.setValue(641)
    assert box.options()["size"][0] == 641 and box.width_box.singleStep() == 1
    box.reject()
    # A refusal of a clip from the dialog names the dialog's field, not the flag.
    from foldsim.gui.panels.dialogs import ClipDialog

    assert window.record(tmp_path / "odd.mp4", terms=ClipDialog.TERMS, size=(127, 96)) is None
    assert window.error_box.text().startswith("foldsim: Width and height 127x96: ")
    assert "--" not in window.error_box.text()


# ------------------------------------------------------------------- 7. layout


def test_at_1280_by_800_every_column_is_readable_and_resizable(window):
    window.open_path(TRAY)
    assert (window.width(), window.height()) == (1280, 800)
    for table in (window.hinge_table, window.gap_table):
        header = table.horizontalHeader()
        metrics = header.fontMetrics()
        model = table.model()
        for c in range(model.columnCount()):
            text = model.headerData(c, QtCore.Qt.Orientation.Horizontal)
            assert header.sectionSize(c) >= metrics.horizontalAdvance(text)
            assert header.sectionResizeMode(c) in (QtWidgets.QHeaderView.ResizeMode.Interactive,
                                                   QtWidgets.QHeaderView.ResizeMode.Stretch)
        # What a narrow column cuts off is in the cell's tooltip.
        assert model.data(model.index(0, model.columnCount() - 1), QtCore.Qt.ItemDataRole.ToolTipRole)


def test_the_side_tables_share_height_and_the_plot_keeps_room(window, qtbot):
    from foldsim.gui.window.app import GAP_PLOT_MIN

    window.open_path(TRAY)
    qtbot.wait(50)

    def empty_rows(table):
        rows = table.model().rowCount() * table.verticalHeader().defaultSectionSize()
        return (table.viewport().height() - rows) / table.verticalHeader().defaultSectionSize()

    def scrolls(table):
        return table.verticalScrollBar().maximum() > 0

    for table, other in ((window.hinge_table, window.gap_table), (window.gap_table, window.hinge_table)):
        assert not (empty_rows(table) > 1.5 and scrolls(other))
    window.stackup_dock.show()
    qtbot.wait(100)
    assert window.gap_plot.height() >= GAP_PLOT_MIN
    for table, other in ((window.hinge_table, window.gap_table), (window.gap_table, window.hinge_table)):
        assert not (empty_rows(table) > 1.5 and scrolls(other))


def test_progress_text_fits(window):
    bar = window.drive.progress
    needed = bar.fontMetrics().horizontalAdvance("checking collisions 100%")
    assert bar.minimumWidth() >= needed
    bar = window.stackup_panel.progress
    assert bar.minimumWidth() >= bar.fontMetrics().horizontalAdvance("sampling builds 100%")


def menu_texts(window):
    out = []
    for menu in window.menuBar().findChildren(QtWidgets.QMenu):
        out.extend(a.text().replace("&", "") for a in menu.actions() if a.text())
    return out


def test_help_menu_has_about_with_version_and_licence_and_the_guide(window, monkeypatch):
    from PySide6 import QtGui

    import foldsim
    from foldsim.gui.window.app import DOCS

    texts = menu_texts(window)
    assert "About foldsim" in texts and "Guide to the app" in texts
    about = window.about()
    assert foldsim.__version__ in about.text() and "MIT" in about.text()
    about.close()
    opened = []
    monkeypatch.setattr(QtGui.QDesktopServices, "openUrl", lambda url: opened.append(url.toLocalFile()))
    window.open_docs()
    assert opened == [str(DOCS)] and DOCS.is_file()


def test_clear_recent_forgets_the_list(window, tmp_path):
    window.open_path(DEMO)
    assert window.recent_files()
    clear = next(a for a in window.recent_menu.actions() if a.text() == "Clear recent")
    clear.trigger()
    assert window.recent_files() == []
    assert [a.text() for a in window.recent_menu.actions() if a.text()] == ["Clear recent"]


def test_labels_are_in_sentence_case_and_no_view_claims_a_projection_it_lacks(window):
    texts = menu_texts(window) + [window.stackup_dock.windowTitle()]
    assert "Play and backlash" in texts and "Play and Backlash" not in texts
    keep = {"PNG", "MP4", "GIF", "Space"}
    for text in texts:
        words = text.replace("…", "").split()
        assert all(not w[:1].isupper() or w in keep for w in words[1:]), text
    # The view is drawn in perspective (a field of view), so no name says otherwise.
    assert window.view.opts["fov"] > 0
    for text in texts:
        assert not any(w in text.lower() for w in ("iso view", "isometric", "orthographic", "parallel"))


# ------------------------------------------------------------ 8. command line


def test_old_spellings_still_work_with_a_note(tmp_path, capsys):
    new = tmp_path / "new.csv"
    old = tmp_path / "old.csv"
    assert cli.main(["export", str(DEMO), "-o", str(new), "--from", "0.2", "--to", "0.6"]) == 0
    assert capsys.readouterr().err == ""
    assert cli.main(["export", str(DEMO), "--to", str(old), "--from", "0.2", "--to-t", "0.6"]) == 0
    err = capsys.readouterr().err.splitlines()
    assert len(err) == 2 and all(line.startswith("foldsim: note: ") and "deprecated" in line for line in err)
    assert "-o/--output FILE" in err[0] and "--to T" in err[1]
    assert new.read_text() == old.read_text()
    assert cli.main(["nets", "cube", "--out", str(tmp_path / "a")]) == 0
    assert "use -o/--output DIR" in capsys.readouterr().err
    assert cli.main(["nets", "cube", "-o", str(tmp_path / "b")]) == 0
    assert capsys.readouterr().err == ""
    assert (tmp_path / "a" / "net-1.mech.json").read_text() == (tmp_path / "b" / "net-1.mech.json").read_text()
    # Refused input keeps its one line alone, old spelling or not.
    assert cli.main(["export", str(DEMO), "--to", str(tmp_path / "x.dwg")]) == 2
    assert capsys.readouterr().err.count("\n") == 1
    assert cli.main(["export", str(DEMO)]) == 2
    assert "-o/--output" in capsys.readouterr().err


def test_new_summarises_a_large_model_and_lists_with_verbose(tmp_path, capsys):
    from foldsim.commands.new import LIST_UP_TO

    assert cli.main(["new", "geodesic:2", "-o", str(tmp_path / "g.mech.json")]) == 0
    short = capsys.readouterr().out.splitlines()
    assert cli.main(["new", "geodesic:2", "-o", str(tmp_path / "g.mech.json"), "--verbose"]) == 0
    full = capsys.readouterr().out.splitlines()
    # geodesic:2 has 320 faces (20 * 4**2), so a spanning tree of 319 hinges and 318 gear pairs on it.
    pairs = [line for line in full if "->" in line and "bevel" in line]
    assert len(pairs) == 318 > LIST_UP_TO
    assert len(short) < 12 and any("318 gear pairs (list them with --verbose)" in line for line in short)
    # A small model still lists its pairs without --verbose.
    assert cli.main(["new", "cube", "-o", str(tmp_path / "c.mech.json")]) == 0
    assert sum("->" in line for line in capsys.readouterr().out.splitlines()) > 1


def test_record_fit_pose_fills_the_frame_more_than_the_whole_motion(tmp_path, capsys):
    from PySide6 import QtGui

    from foldsim.gui.view.viewport import image_array

    def drawn_width(fit):
        target = tmp_path / f"{fit}.png"
        assert cli.main(["record", str(TRAY), "-o", str(target), "--to", "1", "--size", "320x240",
                         "--fit", fit, "--no-overlay"]) == 0
        img = image_array(QtGui.QImage(str(target)))
        cols = np.flatnonzero((np.abs(img[..., :3].astype(int) - palette.BACKGROUND).max(axis=-1) > 20).any(axis=0))
        return cols.max() - cols.min()

    assert drawn_width("pose") > drawn_width("motion") + 20
    assert drawn_width("clip") == drawn_width("pose")  # a still's clip is its one pose


def test_new_from_shape_refusals_name_the_dialog_field(window, qtbot, tmp_path, capsys):
    window.open_path(DEMO)
    # The command line words it with its flag ...
    assert cli.main(["new", "cube", "-o", str(tmp_path / "x.mech.json"), "--teeth", "5"]) == 2
    line = capsys.readouterr().err.strip()
    assert line.startswith("foldsim: --teeth: ")
    box = window.shape_dialog()
    box.solid.setCurrentText("cube")
    box.teeth.setText("5")
    box.accept()
    qtbot.waitUntil(lambda: not window.loading(), timeout=30000)
    # ... the dialog with its field.
    assert window.error_box.text() == line.replace("--teeth", "Teeth")
    assert window.model.path == DEMO


def test_hidden_points_agree_with_the_core_picking_ray_by_ray(window):
    from foldsim.gui.view.numbers import face_centres
    from foldsim.picking import pick_face

    window.open_path(DEMO)
    window.drive.set_t(0.7)
    view = window.view
    rng = np.random.default_rng(7)
    centres = anchor_points(view.mech, view.poses)["face"][0]
    lo, hi = centres.min(axis=0), centres.max(axis=0)
    points = np.vstack([centres, rng.uniform(lo, hi, size=(150, 3))])
    eye = view._eye()
    slack = 1e-2 * view.mech.size
    expected = []
    for p in points:
        ray = p - eye
        reach = np.linalg.norm(ray)
        _, distance = pick_face(view.mech, view.poses, eye, ray / reach, pan=view.pan)
        expected.append(distance < reach - slack)
    assert view.hidden_points(points, chunk=16).tolist() == expected
    assert 0 < sum(expected) < len(points) and len(face_centres(view.mech)) == view.mech.n_faces


def test_a_closed_box_numbers_only_the_faces_in_sight(window):
    window.open_path(DEMO)
    window.drive.set_t(1.0)
    view = window.view
    faces = anchor_points(view.mech, view.poses)["face"][0]
    hidden = view.hidden_points(faces)
    # A closed box seen from outside a corner: three faces in sight, three behind them (by hand).
    assert hidden.sum() == 3


def test_many_part_types_are_summed_up_in_one_legend_line(window, qtbot):
    from foldsim.gui.view.legend import MAX_TYPES, legend_entries

    window.open_path(TRAY)
    view = window.view
    names = [f"t{k}" for k in range(20)]
    view.set_part_types([(n, palette.PART_TYPES[k % len(palette.PART_TYPES)]) for k, n in enumerate(names)])
    entries = legend_entries(view)
    listed = [e for e in entries if e.key == "part-type"]
    assert len(listed) == MAX_TYPES
    assert entries[len(entries) - 1 - len(view.numbers_drawn)].text == f"+{20 - MAX_TYPES} more part types (colours repeat)"
    short = legend_entries(view, max_rows=6)
    assert len(short) <= 6 and short[-1 - len(view.numbers_drawn)].key == "more"
