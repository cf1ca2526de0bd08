"""The desktop app under a real X server (pytest-xvfb) with Mesa's software GL.

Every check that something is shown looks at pixels the GL view really drew
(`FoldView.render_image`, an offscreen frame of the same scene): a GL stack that
fails silently draws a blank frame and these tests fail with it.
"""

import json
import math
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

pytest.importorskip("PySide6")
pytest.importorskip("pyqtgraph")

from PySide6 import QtCore, QtGui, QtWidgets  # noqa: E402

from foldsim import cli  # noqa: E402
from foldsim.analysis.collision import colliding_pairs  # noqa: E402
from foldsim.gui.view import palette  # noqa: E402
from foldsim.gui.view.legend import legend_entries  # noqa: E402
from foldsim.gui.window.app import DEMO, MainWindow  # noqa: E402
from foldsim.gui.panels.side import step_playback  # noqa: E402
from foldsim.kinematics import poses_at  # noqa: E402

from helpers import strip_document, write_doc  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
SIZE = (480, 360)


def strip150_document(angle=150.0):
    """Three unit squares in a row, the middle one fixed, both hinges closing at `angle`.

    Hand check: at drive t each outer square stands at 180° − 150°·t to the middle
    one, on the same side. The three make an equilateral triangle when that angle
    is 60°, i.e. at t = 0.8; beyond it the outer squares pass through each other.
    By symmetry the same happens for t <= -0.8 on the other side.
    """
    doc = strip_document()
    doc["name"] = "strip 150"
    doc["root"] = 1
    doc["drive"] = 0
    for hinge in doc["hinges"]:
        hinge["closed_angle_deg"] = angle
    return doc


@pytest.fixture
def window(qtbot, tmp_path):
    settings = QtCore.QSettings(str(tmp_path / "settings.ini"), QtCore.QSettings.Format.IniFormat)
    win = MainWindow(settings)
    qtbot.addWidget(win)
    win.resize(1100, 720)
    win.show()
    qtbot.waitExposed(win)
    yield win
    win.close()


@pytest.fixture
def strip150(tmp_path):
    return write_doc(tmp_path, strip150_document(), "strip150.mech.json")


def finish_sweep(qtbot, win):
    qtbot.waitUntil(lambda: not win.sweeping(), timeout=60000)


def frame(win):
    return win.view.render_image(*SIZE)


def warning_pixels(img):
    """Pixels of a lit warning-coloured panel: strongly red, little green or blue.

    No panel colour, line colour or the background passes this test (see palette).
    """
    r, g, b = (img[..., k].astype(float) for k in range(3))
    return int(((r >= 100) & (g <= 0.45 * r) & (b <= 0.45 * r)).sum())


def pixels_near(img, rgb, tol=12):
    diff = np.abs(img[..., :3].astype(int) - np.array(rgb)[None, None, :])
    return int((diff <= tol).all(axis=-1).sum())


# ------------------------------------------------------------------ opening


def test_demo_opens_and_the_slider_moves_the_panels(window):
    assert window.open_path(DEMO)
    window.drive.slider.setValue(0)
    flat_transforms = window.view.panel_transforms()
    flat = frame(window)
    window.drive.slider.setValue(500)
    assert window.drive.t == 0.5
    moved = window.view.panel_transforms()
    mech, schedule = window.model.mech, window.model.schedule
    np.testing.assert_allclose(moved, poses_at(mech, schedule, [0.5])[0], atol=1e-6)
    assert not np.allclose(moved[1:], flat_transforms[1:], atol=1e-3)
    np.testing.assert_allclose(moved[mech.root], np.eye(4), atol=1e-12)
    half = frame(window)
    changed = (np.abs(half.astype(int) - flat.astype(int)).max(axis=-1) > 30).mean()
    assert changed > 0.02


def test_the_view_draws_the_model_and_not_a_blank_frame(window):
    window.open_path(DEMO)
    img = frame(window)
    assert img.shape == (SIZE[1], SIZE[0], 4) and img.dtype == np.uint8
    assert (img[..., 3] == 255).all()
    assert pixels_near(img[:3, :3], palette.BACKGROUND, tol=2) == 9
    drawn = (np.abs(img[..., :3].astype(int) - palette.BACKGROUND).max(axis=-1) > 20).mean()
    assert drawn > 0.05


def test_render_image_takes_any_size_and_rejects_empty(window):
    window.open_path(DEMO)
    assert window.view.render_image(200, 120).shape == (120, 200, 4)
    assert window.view.render_image(1000, 700).shape == (700, 1000, 4)
    with pytest.raises(ValueError, match="positive"):
        window.view.render_image(0, 10)


# --------------------------------------------------------------- collisions


def test_warning_colour_where_the_outer_panels_collide_and_not_before(window, strip150):
    window.open_path(strip150)
    mech = window.model.mech
    window.view.set_view("iso")
    window.drive.set_t(0.5)
    assert len(window.view.colliding) == 0
    assert warning_pixels(frame(window)) == 0
    window.drive.set_t(0.9)
    assert window.view.colliding.tolist() == [[0, 2]]
    img = frame(window)
    assert warning_pixels(img) > 500
    # Where they cut each other, the intersection line is drawn on top.
    assert pixels_near(img, palette.INTERSECTION, tol=40) > 20
    np.testing.assert_array_equal(colliding_pairs(mech, poses_at(mech, window.model.schedule, [0.79])[0]),
                                  np.zeros((0, 2)))


def test_collision_strip_shows_the_sweep_and_a_click_jumps_into_it(window, strip150, qtbot):
    window.open_path(strip150)
    finish_sweep(qtbot, window)
    stretches = [(c["faces"], c["first_t"], c["last_t"]) for c in window.intervals]
    assert [s[0] for s in stretches] == [[0, 2], [0, 2]]
    (_, lo0, hi0), (_, lo1, hi1) = stretches
    # Hand check (strip150_document): collide for |t| > 0.8; ends good to 1e-3.
    np.testing.assert_allclose([lo0, hi0, lo1, hi1], [-1.0, -0.8, 0.8, 1.0], atol=2e-3)
    strip = window.drive.strip
    assert strip.swept == (-1.0, 1.0)
    img = strip.grab().toImage()
    x = int(round(strip.x_of(0.9)))
    assert QtGui.QColor(img.pixel(x, strip.height() // 2)).getRgb()[:3] == palette.WARNING
    x_free = int(round(strip.x_of(0.3)))
    assert QtGui.QColor(img.pixel(x_free, strip.height() // 2)).getRgb()[:3] != palette.WARNING
    qtbot.mouseClick(strip, QtCore.Qt.MouseButton.LeftButton, pos=QtCore.QPoint(x, strip.height() // 2))
    assert 0.8 < window.drive.t < 0.81
    assert window.view.colliding.tolist() == [[0, 2]]


def test_scrubbing_a_swept_model_reads_collisions_from_the_sweep(window, strip150, qtbot, monkeypatch):
    # Once the background sweep is done, a frame takes its colliding pairs from
    # the intervals instead of querying the pose. They must agree with the pose
    # query (and with the hand check: the outer squares cross for |t| > 0.8)
    # everywhere away from the interval ends, within the sweep's resolution.
    from foldsim.gui.view import viewport

    window.open_path(strip150)
    finish_sweep(qtbot, window)
    view = window.view
    assert view.known is not None and (view.known.lo, view.known.hi) == (-1.0, 1.0)
    calls = []
    direct = viewport.colliding_pairs
    monkeypatch.setattr(viewport, "colliding_pairs", lambda *a, **k: calls.append(1) or direct(*a, **k))
    for t in np.linspace(-1.0, 1.0, 81):
        if abs(abs(t) - 0.8) < 2e-3:
            continue
        window.set_t(t)
        expected = [[0, 2]] if abs(t) > 0.8 else []
        assert view.colliding.tolist() == expected, t
        assert direct(view.mech, view.poses, pan=view.pan).tolist() == expected, t
    # t = 0 is tested directly (flat-layout overlaps are not in the intervals).
    assert len(calls) == 1
    # A stretch not yet swept is tested frame by frame.
    view.set_known_collisions(window.intervals, (-1.0, 0.0))
    window.set_t(0.9)
    assert len(calls) == 2 and view.colliding.tolist() == [[0, 2]]
    view.set_known_collisions(None)
    window.set_t(0.5)
    assert len(calls) == 3 and view.colliding.tolist() == []


def test_cancelling_the_sweep_stops_it(window, strip150, qtbot):
    window.open_path(strip150)
    task = window.sweep
    window.cancel_sweep()
    assert task.is_cancelled() and not window.sweeping()
    assert not window.drive.progress.isVisible()
    window.pool.waitForDone()
    qtbot.wait(50)
    t0, t1 = window.drive.strip.swept
    assert t1 - t0 < 2.0


# ------------------------------------------------------ tables and the plot


def test_hinge_table_and_gap_plot_follow_the_slider(window):
    window.open_path(DEMO)
    mech = window.model.mech
    window.drive.slider.setValue(500)
    model = window.hinge_model
    # Every gift-box hinge closes at 90° with ratio 1 to the drive: 45° at t = 0.5.
    assert [model.data(model.index(h, model.NOW)) for h in range(mech.n_hinges)] == ["45.00°"] * 5
    assert model.data(model.index(0, 2)) == "90.00°"
    assert window.gap_plot.cursor.value() == 0.5
    # Cut edge between the front (1) and right (2) walls: the corner vertex's two
    # copies sit at (120, -60 cos θ, 60 sin θ) and (120 + 60 cos θ, 0, 60 sin θ),
    # so the gap is 60·√2·cos θ with θ = 90°·t.
    e = [tuple(f) for f in mech.cut_faces.tolist()].index((1, 2))
    np.testing.assert_allclose(window.view.gaps[e], 60 * math.sqrt(2) * math.cos(math.pi / 4), rtol=1e-9)
    assert window.gap_model.data(window.gap_model.index(e, window.gap_model.NOW)) == "60 mm"
    window._select_edges([e])
    (curve,) = window.gap_plot.curves
    t, gap = curve.getData()
    np.testing.assert_allclose(gap, 60 * math.sqrt(2) * np.cos(np.pi / 2 * t), atol=1e-9)
    # The table marks the row with its curve's colour; unplotted rows get none.
    swatch = window.gap_model.data(window.gap_model.index(e, 0), QtCore.Qt.ItemDataRole.DecorationRole)
    assert swatch == curve.opts["pen"].color()
    other = (e + 1) % len(mech.cut_faces)
    assert window.gap_model.data(window.gap_model.index(other, 0), QtCore.Qt.ItemDataRole.DecorationRole) is None
    window.drive.set_t(-0.25)
    assert window.gap_plot.cursor.value() == -0.25
    assert model.data(model.index(3, model.NOW)) == "-22.50°"


def test_selecting_a_hinge_row_highlights_the_hinge(window):
    window.open_path(DEMO)
    window.drive.set_t(0.5)
    window.view.set_view("iso")
    before = pixels_near(frame(window), palette.HIGHLIGHT, tol=10)
    assert before == 0
    window._select_hinge_row(2)
    assert window.view.selected_hinge == 2
    after = pixels_near(frame(window), palette.HIGHLIGHT, tol=10)
    assert after > 100
    window._select_hinge_row(-1)
    assert window.view.selected_hinge == -1
    assert pixels_near(frame(window), palette.HIGHLIGHT, tol=10) == 0


def test_clicking_a_panel_selects_its_hinge_row(window, qtbot):
    window.open_path(DEMO)
    window.drive.set_t(0.3)
    window.view.set_view("top")
    mech = window.model.mech
    face = 1
    centre = window.view.model_to_pixels(window.view.poses[face, :3, :3] @ mech.flat_faces[face].mean(axis=0)
                                         + window.view.poses[face, :3, 3])[0]
    assert window.view.pick(*centre) == face
    qtbot.mouseClick(window.view, QtCore.Qt.MouseButton.LeftButton, pos=QtCore.QPoint(*map(int, centre)))
    assert window.view.selected_face == face
    assert window._selected_hinge() == mech.face_hinge[face]
    assert window.view.selected_hinge == mech.face_hinge[face]
    # Empty space clears both.
    qtbot.mouseClick(window.view, QtCore.Qt.MouseButton.LeftButton, pos=QtCore.QPoint(3, 3))
    assert window.view.selected_face == -1 and window._selected_hinge() == -1


def test_colour_by_part_type_gives_same_parts_one_colour(window, strip150, qtbot):
    window.open_path(strip150)
    # Part types come with the check report, computed in the background.
    qtbot.waitUntil(window.color_by_part.isEnabled, timeout=30000)
    window.color_by_part.trigger()
    front, _ = window.view.panel_colors()
    # The two outer squares are one part type, the middle one another.
    np.testing.assert_allclose(front[0], front[2])
    assert not np.allclose(front[0], front[1])
    window.color_by_face.trigger()
    front, _ = window.view.panel_colors()
    assert not np.allclose(front[0], front[2])


# -------------------------------------------------------------- keyboard


def test_keyboard_steps_the_drive(window, qtbot):
    window.open_path(DEMO)
    window.drive.set_t(0.0)
    window.activateWindow()
    qtbot.waitUntil(window.isActiveWindow)
    window.view.setFocus()
    qtbot.keyClick(window, QtCore.Qt.Key.Key_Right)
    assert window.drive.t == pytest.approx(0.01)
    qtbot.keyClick(window, QtCore.Qt.Key.Key_Right, QtCore.Qt.KeyboardModifier.ShiftModifier)
    assert window.drive.t == pytest.approx(0.11)
    qtbot.keyClick(window, QtCore.Qt.Key.Key_Left)
    assert window.drive.t == pytest.approx(0.10)
    qtbot.keyClick(window, QtCore.Qt.Key.Key_End)
    assert window.drive.t == 1.0
    assert window.drive.slider.value() == 1000
    qtbot.keyClick(window, QtCore.Qt.Key.Key_Home)
    assert window.drive.t == 0.0
    qtbot.keyClick(window, QtCore.Qt.Key.Key_Space)
    assert window.drive.is_playing()
    qtbot.keyClick(window, QtCore.Qt.Key.Key_Space)
    assert not window.drive.is_playing()


def test_number_field_sets_the_drive(window):
    window.open_path(DEMO)
    window.drive.field.setValue(-0.4)
    assert window.drive.t == pytest.approx(-0.4)
    assert window.drive.slider.value() == -400
    np.testing.assert_allclose(window.view.panel_transforms(),
                               poses_at(window.model.mech, window.model.schedule, [-0.4])[0], atol=1e-6)


@pytest.mark.parametrize("mode, expect", [
    ("Once", (1.0, 1, False)),
    ("Loop", (0.15, 1, True)),
    ("Back and forth", (0.85, -1, True)),
])
def test_playback_at_the_end_of_the_range(mode, expect):
    # From 0.9, one second at 1× (0.25 per second) goes 0.15 past the end.
    t, direction, running = step_playback(0.9, 1, 1.0, 1.0, (0.0, 1.0), mode)
    assert (round(t, 9), direction, running) == expect


def test_playback_runs_toward_negative_t():
    t, direction, running = step_playback(0.0, 1, 2.0, 1.0, (0.0, -1.0), "Once")
    assert (t, direction, running) == (-0.5, 1, True)


# --------------------------------------------------------------- files


def cli_error_line(path, capsys):
    assert cli.main(["check", str(path)]) == 2
    return capsys.readouterr().err.strip()


def test_bad_file_shows_the_cli_message_and_keeps_the_model(window, tmp_path, capsys):
    window.open_path(DEMO)
    mech = window.model.mech
    doc = strip_document()
    doc["faces"][1] = [1, 2, 2, 5]
    bad = write_doc(tmp_path, doc, "bad.mech.json")
    expected = cli_error_line(bad, capsys)
    assert expected.startswith("foldsim: ") and "faces[1]" in expected and "\n" not in expected
    assert not window.open_path(bad)
    box = window.error_box
    assert box is not None and box.isVisible()
    assert box.text() == expected
    assert window.model.mech is mech and window.view.mech is mech
    assert window.model.path == DEMO
    box.close()
    assert not box.isVisible()


def test_file_is_reloaded_when_it_changes_and_a_bad_edit_keeps_the_model(window, tmp_path, qtbot, capsys):
    path = write_doc(tmp_path, strip150_document(), "live.mech.json")
    window.open_path(path)
    window.drive.set_t(0.5)
    first = window.model.mech
    path.write_text(json.dumps(strip150_document(120.0)), encoding="utf-8")
    qtbot.waitUntil(lambda: window.model.mech is not first, timeout=10000)
    np.testing.assert_allclose(np.degrees(window.model.mech.closed_angles), [120.0, 120.0])
    assert window.drive.t == 0.5
    second = window.model.mech
    path.write_text("{ not json", encoding="utf-8")
    qtbot.waitUntil(lambda: window.error_box is not None and window.error_box.isVisible(), timeout=10000)
    assert window.error_box.text() == cli_error_line(path, capsys)
    assert window.model.mech is second
    window.error_box.close()
    # The watch survives the bad edit: a good one is picked up again.
    path.write_text(json.dumps(strip150_document(100.0)), encoding="utf-8")
    qtbot.waitUntil(lambda: window.model.mech is not second, timeout=10000)
    np.testing.assert_allclose(np.degrees(window.model.mech.closed_angles), [100.0, 100.0])


def test_save_as_writes_a_file_that_loads_the_same(window, tmp_path, monkeypatch):
    window.open_path(DEMO)
    target = tmp_path / "copy.mech.json"
    monkeypatch.setattr(QtWidgets.QFileDialog, "getSaveFileName", lambda *a, **k: (str(target), ""))
    window.save_as()
    assert window.model.path == target
    from foldsim import load

    again = load(target)
    np.testing.assert_allclose(again.vertices, window.model.mech.vertices)
    assert again.hinge_faces.tolist() == window.model.mech.hinge_faces.tolist()
    assert window.recent_files()[0] == str(target.resolve())


def test_recent_files_newest_first(window, strip150):
    window.open_path(DEMO)
    window.open_path(strip150)
    window.open_path(DEMO)
    assert window.recent_files()[:2] == [str(DEMO.resolve()), str(strip150.resolve())]
    assert [a.text() for a in window.recent_menu.actions()][:2] == window.recent_files()[:2]


def test_dropping_a_file_opens_it(window, strip150):
    window.open_path(DEMO)
    mime = QtCore.QMimeData()
    mime.setUrls([QtCore.QUrl.fromLocalFile(str(strip150))])
    event = QtGui.QDropEvent(QtCore.QPointF(50, 50), QtCore.Qt.DropAction.CopyAction, mime,
                             QtCore.Qt.MouseButton.LeftButton, QtCore.Qt.KeyboardModifier.NoModifier)
    window.dropEvent(event)
    assert window.model.path == strip150
    assert window.model.mech.n_faces == 3


# ----------------------------------------------------------- long running


@pytest.mark.slow
def test_long_animation_runs_thousands_of_frames(window, qtbot, capfd):
    # PySide6 6.12.0 aborted long animations after a few thousand frames; run well past that.
    window.resize(560, 400)
    window.open_path(DEMO)
    drive = window.drive
    drive.mode.setCurrentText("Back and forth")
    drive.speed.setCurrentIndex(drive.speed.count() - 1)
    drive.timer.setInterval(0)
    drawn_before = window.view.frames_drawn
    drive.play(True)
    qtbot.waitUntil(lambda: drive.frames >= 5000, timeout=900000)
    drive.play(False)
    assert window.view.frames_drawn - drawn_before > 500
    assert -1.0 <= drive.t <= 1.0
    np.testing.assert_allclose(window.view.panel_transforms(),
                               poses_at(window.model.mech, window.model.schedule, [drive.t])[0], atol=1e-6)
    drawn = (np.abs(frame(window)[..., :3].astype(int) - palette.BACKGROUND).max(axis=-1) > 20).mean()
    assert drawn > 0.02
    err = capfd.readouterr().err
    assert "Traceback" not in err and "Error" not in err


# ------------------------------------------------------------ smoke tests


def run_app(args, tmp_path, quit_ms=2500):
    env = dict(os.environ, FOLDSIM_QUIT_AFTER_MS=str(quit_ms), XDG_CONFIG_HOME=str(tmp_path / "config"),
               PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    return subprocess.run([sys.executable, "-m", "foldsim", *args], capture_output=True, text=True,
                          env=env, cwd=tmp_path, timeout=120)


def test_foldsim_without_arguments_opens_the_demo_and_quits_cleanly(tmp_path):
    done = run_app([], tmp_path)
    assert done.returncode == 0, done.stderr
    assert "Traceback" not in done.stderr
    assert "Error" not in done.stderr


@pytest.mark.parametrize("example", sorted(p.name for p in (ROOT / "assets").glob("*.mech.json")))
def test_every_example_opens_without_a_traceback(example, tmp_path):
    done = run_app(["open", str(ROOT / "assets" / example)], tmp_path)
    assert done.returncode == 0, done.stderr
    assert "Traceback" not in done.stderr


def test_open_refuses_a_bad_file_like_check_without_starting_the_app(tmp_path, capsys):
    bad = write_doc(tmp_path, {"schema": "foldsim.mechanism/1"}, "bad.mech.json")
    expected = cli_error_line(bad, capsys)
    done = run_app(["open", str(bad)], tmp_path)
    assert done.returncode == 2
    assert done.stderr.strip() == expected


# ------------------------------------------------------ the build's solids


def test_thick_panels_are_drawn_from_the_build_and_toggle_off(window, tmp_path):
    # The gift box given a build object, 4 units thick toward the back. Seen edge-on
    # (front view) while flat, a zero-thickness sheet is a thin line; its prisms are a
    # band about as tall as the thickness, so many more pixels are drawn. The toggle
    # brings the flat panels back, pixel for pixel. A file without a build keeps the
    # toggle disabled. (Hand check of what a prism looks like edge-on.)
    doc = json.loads(DEMO.read_text())
    doc["build"] = {"thickness": 4.0}
    path = write_doc(tmp_path, doc, "thick.mech.json")
    assert window.open_path(path)
    assert window.show_solids.isEnabled() and window.show_solids.isChecked()
    assert window.view.solids and len(window.view.solids) == window.model.mech.n_faces
    window.set_t(0.0)
    window._select_edges([])  # no gap labels and no numbers: only panels are drawn
    window.view.set_numbers(False)
    window.view.set_view("front")
    # Edge-on: level with the sheet, looking at its centre.
    from foldsim.gui.view.camera import stage_transform

    mech = window.model.mech
    centre = stage_transform(mech) @ np.append(np.concatenate(mech.flat_faces).mean(axis=0), 1.0)
    window.view.opts["center"] = QtGui.QVector3D(*centre[:3])
    window.view.opts["elevation"] = 0.0

    def drawn():
        img = frame(window)
        return int((np.abs(img[..., :3].astype(int) - palette.BACKGROUND).max(axis=-1) > 20).sum())

    thick = drawn()
    window.show_solids.trigger()
    assert not window.show_solids.isChecked() and window.view.solids is None
    thin = drawn()
    assert thick > 2.5 * thin > 0
    window.show_solids.trigger()
    assert drawn() == thick
    assert window.open_path(DEMO)
    assert not window.show_solids.isEnabled() and window.view.solids is None


def test_hinge_table_shows_the_stop_its_overrun_and_sector_coverage(window, tmp_path, qtbot):
    # Hand case (as in tests/test_build.py): a two-panel flap closing at 90° with its
    # stop at 80° passes the stop by 10° from t = 80/90 = 0.889.
    doc = {"schema": "foldsim.mechanism/1", "state": "flat",
           "vertices": [[0, 0, 0], [40, 0, 0], [40, 40, 0], [0, 40, 0], [80, 0, 0], [80, 40, 0]],
           "faces": [[0, 1, 2, 3], [1, 4, 5, 2]], "hinges": [{"faces": [0, 1], "closed_angle_deg": 90}],
           "build": {"thickness": 2, "stops": [{"hinge": 0, "stop_deg": 80}]}}
    assert window.open_path(write_doc(tmp_path, doc, "flap.mech.json"))
    model = window.hinge_model
    qtbot.waitUntil(lambda: "Stop" in model.headers, timeout=60000)
    columns = {name: k for k, name in enumerate(model.headers)}
    assert model.text(0, columns["Stop"]) == "80.00°"
    assert model.text(0, columns["Overrun"]) == "10.00° from t = 0.889"
    assert model.text(0, columns["Sector"]) == "–"  # no gears on this flap
    assert "pass their stop" in window.statusBar().currentMessage()
    # A file without a build keeps the plain columns.
    assert window.open_path(DEMO)
    assert "Stop" not in window.hinge_model.headers


def test_gear_bodies_are_drawn_with_the_thick_panels_and_toggle(window, qtbot):
    # The lantern demo with its build: three bevel pairs, so six gear bodies besides
    # the eight prisms (assets/lantern-build.mech.json); the legend names them only
    # while they are drawn. Its gears stay in mesh: every sector's least contact
    # ratio is above 1 (docs/build.md; Dudley's transverse contact ratio).
    assert window.open_path(ROOT / "assets" / "lantern-build.mech.json")
    view = window.view
    kinds = sorted(s.kind for s in view.solids)
    assert kinds.count("panel") == window.model.mech.n_faces and kinds.count("gear") == 6
    assert "gear-body" in [e.key for e in legend_entries(view)]
    with_gears = frame(window)
    window.show_gears.trigger()
    assert all(s.kind == "panel" for s in view.solids)
    assert "gear-body" not in [e.key for e in legend_entries(view)]
    assert not np.array_equal(frame(window), with_gears)
    window.show_gears.trigger()
    assert np.array_equal(frame(window), with_gears)
    model = window.hinge_model
    qtbot.waitUntil(lambda: "Sector" in model.headers, timeout=120000)
    sector = model.headers.index("Sector")
    texts = [model.text(r, sector) for r in range(model.rowCount())]
    geared = [t for t in texts if t != "–"]
    assert geared and all(t.startswith("ε ≥ ") and float(t[4:]) > 1.0 for t in geared)


def test_thick_panel_clashes_show_on_the_strip_and_in_red(window, qtbot):
    # The lantern demo with its build: its top (face 6) and side 7 prisms clash just
    # before closing, t 0.986..0.997, which python-fcl confirms on the same prisms
    # (tests/test_build.py); the thin panels do not collide. The clash shows as a
    # collision does: a stretch on the strip and the two panels in the warning colour.
    assert window.open_path(ROOT / "assets" / "lantern-build.mech.json")
    finish_sweep(qtbot, window)
    qtbot.waitUntil(lambda: bool(window.build_intervals), timeout=120000)
    assert window.intervals == []
    (clash,) = window.build_intervals
    assert clash["faces"] == [6, 7] and 0.98 < clash["first_t"] < clash["last_t"] < 1.0
    strip = window.drive.strip
    mid = 0.5 * (clash["first_t"] + clash["last_t"])
    assert any(c["faces"] == [6, 7] for c in strip.intervals)
    img = strip.grab().toImage()
    x = int(round(strip.x_of(mid)))
    assert QtGui.QColor(img.pixel(x, strip.height() // 2)).getRgb()[:3] == palette.WARNING
    window.view.set_view("iso")
    window.set_t(mid)
    assert window.view.colliding.tolist() == [[6, 7]]
    assert warning_pixels(frame(window)) > 200
    window.set_t(0.5)
    assert window.view.colliding.tolist() == [] and warning_pixels(frame(window)) == 0
    assert "1 collision stretch" in window.sweep_text()


def test_culling_back_faces_of_the_solids_changes_no_pixel_that_matters(window, monkeypatch):
    # The solids are closed and face outward (tests/test_build*.py check both), so a
    # back face is always behind a front face of the same solid and the depth test
    # would hide it anyway: drawing them culled must give the same picture.
    from foldsim.gui.view.solid_layer import SolidLayer

    assert window.open_path(ROOT / "assets" / "lantern-build.mech.json")
    window.view.set_view("iso")
    for t in (0.3, 0.8):
        window.set_t(t)
        culled = frame(window).astype(int)
        monkeypatch.setattr(SolidLayer, "closed", False)
        window.view.update()
        full = frame(window).astype(int)
        monkeypatch.setattr(SolidLayer, "closed", True)
        differ = (np.abs(culled[..., :3] - full[..., :3]).max(axis=-1) > 24).mean()
        assert differ < 2e-3, (t, differ)
