"""The app's tools under a real X server: exports, the play stack-up, new models, clips.

Every check looks at what the work really produced: files read back by an
independent parser, numbers compared with the command line's, pixels of the GL
view (`FoldView.render_image`).
"""

import csv
import json
import os
import subprocess
import sys
import xml.etree.ElementTree as ET
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest

pytest.importorskip("PySide6")
pytest.importorskip("pyqtgraph")

from PySide6 import QtCore, QtGui  # noqa: E402

from foldsim import cli, load  # noqa: E402
from foldsim.report import check  # noqa: E402
from foldsim.gui.window import app as app_module  # noqa: E402
from foldsim.gui.window.app import DEMO, MainWindow  # noqa: E402
from foldsim.stackup import stackup  # noqa: E402

from helpers import strip_document, write_doc  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
SIZE = (480, 360)


@pytest.fixture
def window(qtbot, tmp_path):
    settings = QtCore.QSettings(str(tmp_path / "settings.ini"), QtCore.QSettings.Format.IniFormat)
    win = MainWindow(settings)
    qtbot.addWidget(win)
    win.resize(1100, 760)
    win.show()
    qtbot.waitExposed(win)
    yield win
    win.close()


@pytest.fixture
def demo(window):
    assert window.open_path(DEMO)
    return window


def cli_error(args, capsys):
    """The one line the command line prints for refused input (exit 2)."""
    assert cli.main([str(a) for a in args]) == 2
    return capsys.readouterr().err.strip()


def wait_export(qtbot, win):
    qtbot.waitUntil(lambda: not win.exporting(), timeout=60000)


def wait_load(qtbot, win):
    qtbot.waitUntil(lambda: not win.loading(), timeout=60000)


def polygon_area(points):
    p = np.asarray(points, float)
    return 0.5 * np.linalg.norm(np.cross(p, np.roll(p, -1, axis=0)).sum(axis=0))


# ------------------------------------------------------------------ exports


class _Html(HTMLParser):
    def __init__(self):
        super().__init__()
        self.ids, self.classes = set(), []

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        if "id" in attrs:
            self.ids.add(attrs["id"])
        self.classes.append((tag, attrs.get("class", "")))


def _check_glb(path, mech):
    import pygltflib

    doc = pygltflib.GLTF2().load_binary(str(path)) if path.suffix == ".glb" else pygltflib.GLTF2().load(str(path))
    names = [n.name for n in doc.nodes]
    assert sorted(n for n in names if n.startswith("face ")) == sorted(f"face {f}" for f in range(mech.n_faces))
    assert sum(n.startswith("hinge ") for n in names) == mech.n_hinges
    assert len(doc.animations) == 1
    assert len(doc.animations[0].channels) == mech.n_hinges


def _check_svg(path, mech):
    tree = ET.parse(path)
    classes = [el.get("class", "").split() for el in tree.iter()]
    assert sum("panel" in c for c in classes) == mech.n_faces
    assert sum("hinge" in c for c in classes) >= mech.n_hinges
    assert tree.getroot().get("width").endswith("mm")


def _check_csv(path, mech):
    with open(path, newline="") as fh:
        rows = list(csv.reader(fh))
    head, body = rows[0], rows[1:]
    assert head[0] == "t" and len(body) == 11
    assert float(body[0][0]) == 0.0 and float(body[-1][0]) == 1.0
    angles = [float(body[-1][head.index(f"hinge_{h}_deg")]) for h in range(mech.n_hinges)]
    np.testing.assert_allclose(angles, np.degrees(mech.closed_angles), atol=1e-9)


def _check_json(path, mech):
    doc = json.loads(path.read_text())
    assert doc["schema"] == "foldsim.motion-table/1"
    assert len(doc["t"]) == 11 and len(doc["hinges"]) == mech.n_hinges
    assert len(doc["cut_edges"]) == len(mech.cut_faces)


def _check_html(path, mech):
    parser = _Html()
    parser.feed(path.read_text(encoding="utf-8"))
    parser.close()
    assert "verdict" in parser.ids and "gap-plot" in parser.ids
    assert sum(tag == "tr" and "cut-edge" in cls.split() for tag, cls in parser.classes) == len(mech.cut_faces)


def _check_mesh(path, mech):
    import trimesh

    mesh = trimesh.load(str(path), force="mesh")
    mesh.merge_vertices()
    # The gift box posed at t = 1 is closed: 120 x 80 x 60 mm.
    np.testing.assert_allclose(sorted(mesh.extents), [60.0, 80.0, 120.0], atol=1e-6)
    assert mesh.is_watertight
    np.testing.assert_allclose(mesh.area, 2 * (120 * 80 + 120 * 60 + 80 * 60), rtol=1e-9)


CHECKS = {".glb": _check_glb, ".gltf": _check_glb, ".svg": _check_svg, ".csv": _check_csv, ".json": _check_json,
          ".html": _check_html, ".stl": _check_mesh, ".obj": _check_mesh}


@pytest.mark.parametrize("suffix", sorted(CHECKS))
def test_export_from_the_app_writes_each_format_and_the_file_parses(demo, qtbot, tmp_path, suffix):
    demo.drive.set_t(1.0)
    box = demo.export_dialog()
    box.kind.setCurrentIndex(box.kind.findData(suffix))
    target = tmp_path / f"box{suffix}"
    box.set_path(target)
    assert box.suffix() == suffix
    box.accept()
    wait_export(qtbot, demo)
    assert target.is_file()
    assert demo.statusBar().currentMessage().startswith(f"wrote {target}: ")
    CHECKS[suffix](target, demo.model.mech)
    # Nothing but the file itself is left in the folder.
    assert sorted(p.name for p in tmp_path.iterdir() if p.name != "settings.ini") == [target.name]


def test_export_options_reach_the_file(demo, qtbot, tmp_path):
    target = tmp_path / "rows.csv"
    demo.export_to(target, t_from=-1.0, t_to=1.0, frames=5)
    wait_export(qtbot, demo)
    with open(target, newline="") as fh:
        rows = list(csv.reader(fh))
    assert [float(r[0]) for r in rows[1:]] == [-1.0, -0.5, 0.0, 0.5, 1.0]


def test_export_refusal_is_the_cli_line_in_a_dialog_and_writes_nothing(demo, qtbot, tmp_path, capsys):
    target = tmp_path / "missing" / "box.svg"
    expected = cli_error(["export", DEMO, "--to", target], capsys)
    demo.export_to(target)
    wait_export(qtbot, demo)
    assert demo.error_box is not None and demo.error_box.isVisible()
    assert demo.error_box.text() == expected
    bad = tmp_path / "box.txt"
    expected = cli_error(["export", DEMO, "--to", bad], capsys)
    box = demo.export_dialog()
    box.path.setText(str(bad))
    box.accept()
    wait_export(qtbot, demo)
    assert demo.error_box.text() == expected
    assert not bad.exists() and not target.parent.exists()
    views = demo.export_dialog()
    views.kind.setCurrentIndex(views.kind.findData(".html"))
    views.views.setText("0, half")
    views.accept()
    # The dialog names its own field, not the command line's flag (--views).
    assert demo.error_box.text() == "foldsim: Pictures at t: must be comma-separated numbers, not '0, half'"
    assert demo.model.path == DEMO


def test_cancelled_export_leaves_the_old_file_whole(demo, qtbot, tmp_path):
    target = tmp_path / "review.html"
    target.write_text("old report", encoding="utf-8")
    demo.export_to(target)
    demo.cancel_export()
    demo.tool_pool.waitForDone()
    qtbot.wait(50)
    assert target.read_text(encoding="utf-8") == "old report"
    assert sorted(p.name for p in tmp_path.iterdir() if p.name != "settings.ini") == ["review.html"]


# ------------------------------------------------------------------ play stack-up


def run_panel(qtbot, win, process="filament", samples=600, seed=3, outlined=30):
    panel = win.stackup_panel
    win.stackup_dock.show()
    panel.process.setCurrentIndex(panel.process.findData(process))
    panel.samples.setValue(samples)
    panel.seed.setValue(seed)
    panel.outlined.setValue(outlined)
    panel.run_button.click()
    assert panel.running()
    qtbot.waitUntil(lambda: not panel.running(), timeout=120000)
    return panel


def test_stackup_panel_matches_the_command_line(demo, qtbot, capsys):
    panel = run_panel(qtbot, demo)
    assert panel.run_result is not None
    mech = demo.model.mech
    assert cli.main(["stackup", str(DEMO), "--process", "filament", "--samples", "600", "--seed", "3",
                     "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    result = panel.run_result["result"]
    c = result.closure
    np.testing.assert_array_equal(result.mc.gap_p95[c], [e["p95"] for e in report["edges"]])
    np.testing.assert_array_equal(result.linear.gap_bound[c], [e["worst_case"] for e in report["edges"]])
    # The histogram holds every sampled build of the chosen edge: the one with the widest p95 gap.
    e = panel.edge.currentIndex()
    assert e == int(np.argmax([x["p95"] for x in report["edges"]]))
    assert panel.histogram.counts.sum() == 600
    gaps = result.mc.gaps[:, c, e]
    assert panel.histogram.bin_edges[0] == gaps.min() and panel.histogram.bin_edges[-1] == gaps.max()
    assert panel.histogram.p95_line.value() == pytest.approx(report["edges"][e]["p95"])
    assert f"95% {report['edges'][e]['p95']:.3g}" in panel.summary.text()
    # Another edge chosen in the cut-edge table shows its own builds.
    other = (e + 1) % len(mech.cut_faces)
    demo._select_edges([other])
    assert panel.edge.currentIndex() == other
    np.testing.assert_array_equal(panel.histogram.counts,
                                  np.histogram(result.mc.gaps[:, c, other], bins=len(panel.histogram.counts))[0])


def test_contributors_are_ranked_by_share_as_the_core_ranks_them(demo, qtbot):
    panel = run_panel(qtbot, demo, process="sintered-nylon", samples=200)
    model = panel.contributor_model
    rows = model.contributors
    assert model.rowCount() == len(rows) > 3
    shares = [r["share"] for r in rows]
    assert shares == sorted(shares, reverse=True) and sum(shares) == pytest.approx(1.0)
    expected = stackup(demo.model.mech, process="sintered-nylon", samples=200, seed=3).contributors()
    assert [(r["element"], r["index"]) for r in rows] == [(r["element"], r["index"]) for r in expected]
    first = expected[0]
    assert model.text(0, 0) == "1" and model.text(0, 2) == f"{first['share']:.1%}"
    assert model.text(0, 1).startswith(f"{'hinge' if first['element'] == 'hinge' else 'gear mesh'} {first['index']}")
    # Choosing a hinge row selects that hinge in the hinge table.
    hinge_row = next(k for k, r in enumerate(rows) if r["element"] == "hinge")
    panel.contributors.selectRow(hinge_row)
    assert demo._selected_hinge() == rows[hinge_row]["index"]
    assert "Caution" in panel.caution.text() and "manufacturer" in panel.caution.text()


def envelope_pixels(img):
    """Pixels tinted toward the envelope colour (`viewport.ENVELOPE`, orange): red well above green and blue.

    No panel colour of the gift box passes (see palette.PANELS); a collision's red would,
    and the closed gift box has none.
    """
    r, g, b = (img[..., k].astype(float) for k in range(3))
    return int(((r - b > 60) & (r > g + 25)).sum())


def test_envelope_of_sampled_builds_changes_the_view_and_follows_t(demo, qtbot):
    demo.stackup_dock.show()
    qtbot.wait(50)
    demo.open_path(DEMO)  # fitted to the view as it is with the panel open
    demo.drive.set_t(1.0)
    plain = demo.view.render_image(*SIZE)
    panel = run_panel(qtbot, demo, process="sintered-nylon", samples=300, outlined=30)
    errors = panel.run_result["envelope"]
    assert len(errors) == 30
    shown = demo.view.render_image(*SIZE)
    changed = (np.abs(shown[..., :3].astype(int) - plain[..., :3]).sum(axis=-1) > 30).sum()
    assert changed > 500
    assert envelope_pixels(shown) > envelope_pixels(plain) + 300
    # The outlined builds are the run's first builds: their gaps at closure are the sampled ones.
    from foldsim.analysis.closure import cut_edge_gaps

    np.testing.assert_allclose(cut_edge_gaps(demo.model.mech, demo.view.envelope_poses),
                               panel.run_result["result"].mc.gaps[:30, 0], rtol=0, atol=1e-12)
    half = demo.view.envelope_poses.copy()
    demo.drive.set_t(0.5)
    assert not np.allclose(demo.view.envelope_poses, half)
    # A new model drops the envelope; the view looks as it did without one.
    demo.open_path(DEMO)
    demo.drive.set_t(1.0)
    assert demo.view.envelope_poses is None and panel.run_result is None
    np.testing.assert_array_equal(demo.view.render_image(*SIZE), plain)


def test_stopping_the_stackup_ends_it_without_results(demo, qtbot):
    panel = demo.stackup_panel
    demo.stackup_dock.show()
    panel.process.setCurrentIndex(panel.process.findData("filament"))
    panel.samples.setValue(400_000)
    panel.run()
    qtbot.waitUntil(lambda: panel.progress.value() >= 1, timeout=60000)
    panel.stop_button.click()
    assert not panel.running() and panel.run_result is None
    assert panel.run_button.isEnabled() and panel.note.text() == "Stopped."
    demo.tool_pool.waitForDone()
    qtbot.wait(50)
    assert panel.run_result is None and demo.view.envelope_poses is None


def test_stackup_refusal_is_the_cli_line_in_a_dialog(window, qtbot, tmp_path, capsys):
    doc = strip_document()
    doc["units"] = "cubit"
    path = write_doc(tmp_path, doc, "cubit.mech.json")
    expected = cli_error(["stackup", path, "--process", "filament"], capsys)
    window.open_path(path)
    panel = window.stackup_panel
    assert not panel.process.model().item(0).isEnabled()  # the file gives no tolerances
    run_panel(qtbot, window, process="filament", samples=50)
    assert window.error_box is not None and window.error_box.text() == expected
    assert panel.run_result is None


# ------------------------------------------------------------------ new from shape


def test_new_from_shape_cube_opens_a_six_panel_model_with_one_degree_of_freedom(demo, qtbot, tmp_path):
    box = demo.shape_dialog()
    box.solid.setCurrentText("cube")
    box.size.setValue(40.0)
    box.accept()
    assert demo.loading()
    wait_load(qtbot, demo)
    mech = demo.model.mech
    assert mech.n_faces == 6 and mech.n_hinges == 5
    assert check(mech, t_from=0.0, t_to=1.0)["dof"] == 1
    assert demo.model.path is None and "(not saved)" in demo.windowTitle()
    assert "degrees of freedom 1" in demo.statusBar().currentMessage()
    areas = [polygon_area(p) for p in mech.flat_faces]
    np.testing.assert_allclose(areas, 1600.0, rtol=1e-9)
    # Saved, it becomes an ordinary mechanism file that loads the same.
    target = tmp_path / "cube.mech.json"
    demo.save_to(target)
    again = load(target)
    assert again.n_faces == 6 and demo.model.path == target
    assert demo.windowTitle().startswith("cube.mech.json")


def test_new_from_shape_net_and_gear_choices_reach_the_model(demo, qtbot):
    box = demo.shape_dialog()
    box.solid.setCurrentText("prism:5")
    box.net.setCurrentIndex(box.net.findData("bfs"))
    box.root.setValue(2)
    box.gears.setCurrentIndex(box.gears.findData("none"))
    box.accept()
    wait_load(qtbot, demo)
    mech = demo.model.mech
    assert mech.n_faces == 7 and mech.root == 2 and len(mech.couplings) == 0
    box = demo.shape_dialog()
    box.solid.setCurrentText("cube")
    box.teeth.setText("12:40")
    box.accept()
    wait_load(qtbot, demo)
    teeth = [c.teeth for c in demo.model.mech.couplings]
    assert teeth and all(12 <= a <= 40 and 12 <= b <= 40 for a, b in teeth)


def test_a_mesh_file_written_by_trimesh_opens(demo, qtbot, tmp_path):
    import trimesh

    path = tmp_path / "block.stl"
    trimesh.creation.box(extents=(20.0, 30.0, 40.0)).export(str(path))
    assert demo.open_path(path)
    wait_load(qtbot, demo)
    mech = demo.model.mech
    assert mech.n_faces == 6
    assert check(mech, t_from=0.0, t_to=1.0)["dof"] == 1
    total = sum(polygon_area(p) for p in mech.flat_faces)
    assert total == pytest.approx(2 * (20 * 30 + 20 * 40 + 30 * 40), rel=1e-9)
    assert demo.recent_files()[0] == str(path.resolve())
    # The closed shell's cut edges meet: the panels fold back into the block.
    demo.drive.set_t(1.0)
    assert len(demo.view.open_edges()) == 0


def test_a_bad_mesh_gives_the_cli_line_and_keeps_the_previous_model(demo, qtbot, tmp_path, capsys):
    import trimesh

    mesh = trimesh.creation.box()
    mesh.update_faces(np.arange(len(mesh.faces)) != 0)  # one triangle missing: not closed
    bad = tmp_path / "open.stl"
    mesh.export(str(bad))
    expected = cli_error(["new", bad, "-o", tmp_path / "x.mech.json"], capsys)
    assert "not closed" in expected
    mech = demo.model.mech
    demo.open_path(bad)
    wait_load(qtbot, demo)
    assert demo.error_box is not None and demo.error_box.isVisible()
    assert demo.error_box.text() == expected
    assert demo.model.mech is mech and demo.view.mech is mech and demo.model.path == DEMO
    box = demo.shape_dialog()
    box.solid.setCurrentText("pyramid")
    box.accept()
    wait_load(qtbot, demo)
    assert demo.error_box.text() == cli_error(["new", "pyramid", "-o", tmp_path / "y.mech.json"], capsys)
    assert demo.model.mech is mech


def test_a_large_file_loads_in_the_background_and_can_be_cancelled(demo, qtbot, tmp_path, monkeypatch):
    monkeypatch.setattr(app_module, "BACKGROUND_BYTES", 0)
    mech = demo.model.mech
    from test_gui import strip150_document

    strip = write_doc(tmp_path, strip150_document(), "strip.mech.json")
    assert demo.open_path(strip)
    assert demo.loading() and demo.model.mech is mech
    demo.cancel_load()
    demo.tool_pool.waitForDone()
    qtbot.wait(50)
    assert demo.model.mech is mech and not demo.loading()
    demo.open_path(strip)
    wait_load(qtbot, demo)
    assert demo.model.path == strip and demo.model.mech.n_faces == 3
    bad = write_doc(tmp_path, {"schema": "foldsim.mechanism/1"}, "bad.mech.json")
    demo.open_path(bad)
    wait_load(qtbot, demo)
    assert demo.error_box.text().startswith(f"foldsim: {bad}")
    assert demo.model.path == strip


def run_app(args, tmp_path, quit_ms=2500):
    env = dict(os.environ, FOLDSIM_QUIT_AFTER_MS=str(quit_ms), XDG_CONFIG_HOME=str(tmp_path / "config"),
               PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    return subprocess.run([sys.executable, "-m", "foldsim", *args], capture_output=True, text=True,
                          env=env, cwd=tmp_path, timeout=120)


def test_foldsim_open_takes_a_mesh_file_and_refuses_a_bad_one(tmp_path, capsys):
    import trimesh

    good = tmp_path / "block.obj"
    trimesh.creation.box(extents=(2.0, 3.0, 4.0)).export(str(good))
    done = run_app(["open", str(good), "--net", "bfs", "--gears", "none"], tmp_path)
    assert done.returncode == 0, done.stderr
    assert "Traceback" not in done.stderr
    mesh = trimesh.creation.box()
    mesh.update_faces(np.arange(len(mesh.faces)) != 0)
    bad = tmp_path / "open.ply"
    mesh.export(str(bad))
    expected = cli_error(["new", bad, "-o", tmp_path / "x.mech.json"], capsys)
    done = run_app(["open", str(bad)], tmp_path)
    assert done.returncode == 2 and done.stderr.strip() == expected
    done = run_app(["open", str(DEMO), "--net", "bfs"], tmp_path)
    assert done.returncode == 2 and "mesh files" in done.stderr and "\n" not in done.stderr.strip()


# ------------------------------------------------------------------ clips and stills


def test_record_clip_from_the_menu_writes_a_gif(demo, qtbot, tmp_path):
    from PIL import Image

    box = demo.clip_dialog()
    box.kind.setCurrentIndex(box.kind.findData(".gif"))
    target = tmp_path / "fold.gif"
    box.path.setText(str(target))
    box.seconds.setValue(1.0)
    box.fps.setValue(10)
    box.width_box.setValue(160)
    box.height_box.setValue(120)
    box.orbit.setChecked(True)
    t_before = demo.view.t
    box.accept()
    assert target.is_file()
    with Image.open(target) as gif:
        assert gif.size == (160, 120) and gif.n_frames == 10
        gif.seek(0)
        first = np.asarray(gif.convert("RGB"), dtype=int)
        gif.seek(9)
        last = np.asarray(gif.convert("RGB"), dtype=int)
    assert np.abs(first - last).sum(axis=-1).astype(bool).sum() > 500  # the model moved
    assert demo.view.t == t_before
    assert demo.statusBar().currentMessage().startswith(f"wrote {target}: 10 frames, 160x120")


def test_record_mp4_and_a_bad_size_is_refused(demo, qtbot, tmp_path):
    import av

    target = tmp_path / "fold.mp4"
    info = demo.record(target, t_from=0.0, t_to=1.0, seconds=0.5, fps=12, size=(128, 96))
    assert info is not None and target.is_file()
    with av.open(str(target)) as clip:
        frames = [f for f in clip.decode(video=0)]
    assert len(frames) == 6 and (frames[0].width, frames[0].height) == (128, 96)
    assert demo.record(tmp_path / "odd.mp4", size=(127, 96)) is None
    assert "--size 127x96" in demo.error_box.text() and demo.error_box.text().startswith("foldsim: ")
    assert not (tmp_path / "odd.mp4").exists()


def test_save_screenshot_writes_a_png_of_the_chosen_size(demo, qtbot, tmp_path):
    demo.drive.set_t(0.6)
    box = demo.save_image()
    assert (box.width_box.value(), box.height_box.value()) == (demo.view.width() * 2, demo.view.height() * 2)
    target = tmp_path / "shot.png"
    box.path.setText(str(target))
    box.width_box.setValue(300)
    box.height_box.setValue(200)
    box.accept()
    image = QtGui.QImage(str(target))
    assert (image.width(), image.height()) == (300, 200)
    from foldsim.gui.view.viewport import image_array

    pixels = image_array(image)
    assert len(np.unique(pixels[..., :3].reshape(-1, 3), axis=0)) > 20  # a drawn model, not a blank frame
