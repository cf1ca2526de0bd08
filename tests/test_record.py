"""Recorded clips, GIFs and stills, checked by decoding what was written.

The views draw under a real X server (pytest-xvfb) with Mesa's software GL; every
check looks at decoded frames (PyAV) or rendered pixels, so a GL stack that draws
nothing fails here. One test starts `foldsim record` with no DISPLAY at all and
lets it start its own Xvfb.
"""

import os
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

pytest.importorskip("PySide6")
pytest.importorskip("pyqtgraph")
import av  # noqa: E402 - part of the gui extra: missing, the recorder is broken

from foldsim import cli, load  # noqa: E402
from foldsim.errors import FoldsimError  # noqa: E402
from foldsim.gui.view import palette  # noqa: E402
from foldsim.gui.record import recorder  # noqa: E402
from foldsim.gui.record.display import VirtualDisplay  # noqa: E402
from foldsim.gui.view.viewport import FoldView  # noqa: E402

from helpers import strip_document, write_doc  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
GIFT_BOX = ROOT / "assets" / "gift-box.mech.json"
SMALL = (320, 240)


def strip150_document():
    """Three unit squares in a row, the middle one fixed, both hinges closing at 150°.

    Hand check: at t each outer square stands at 180° − 150°·t to the middle one,
    on the same side; they meet in an equilateral triangle at 60°, t = 0.8, and
    pass through each other beyond it.
    """
    doc = strip_document()
    doc["name"] = "strip 150"
    doc["root"] = 1
    doc["drive"] = 0
    for hinge in doc["hinges"]:
        hinge["closed_angle_deg"] = 150.0
    return doc


@pytest.fixture
def make_view(qtbot):
    def make(path=GIFT_BOX, view="iso"):
        widget = FoldView()
        qtbot.addWidget(widget)
        widget.resize(480, 360)
        widget.show()
        qtbot.waitExposed(widget)
        widget.set_mechanism(load(path))
        widget.set_view(view)
        return widget

    return make


@pytest.fixture
def box_view(make_view):
    return make_view()


@pytest.fixture
def strip_view(make_view, tmp_path):
    return make_view(write_doc(tmp_path, strip150_document(), "strip150.mech.json"))


def decode(path):
    """Every frame of a video or GIF as (h, w, 3) uint8, and the stream."""
    with av.open(str(path)) as container:
        stream = container.streams.video[0]
        frames = [f for f in container.decode(stream)]
        return [f.to_ndarray(format="rgb24") for f in frames], frames, stream.codec_context.name


def drawn_fraction(rgb):
    """Fraction of pixels that are not the background."""
    return float((np.abs(rgb[..., :3].astype(int) - palette.BACKGROUND).max(axis=-1) > 20).mean())


def warning_pixels(rgb):
    """Strongly red pixels: the caption's collision line, or a colliding panel."""
    r, g, b = (rgb[..., k].astype(float) for k in range(3))
    return int(((r >= 120) & (g <= 0.45 * r) & (b <= 0.45 * r)).sum())


def only_file(folder):
    return sorted(p.name for p in Path(folder).iterdir())


# --------------------------------------------------------------- clips


def test_mp4_has_seconds_times_fps_frames_of_the_size(box_view, tmp_path):
    target = tmp_path / "clip.mp4"
    calls = []
    info = recorder.record_clip(box_view, target, seconds=1.5, fps=8, size=SMALL,
                                progress=lambda i, n: calls.append((i, n)))
    rgb, frames, codec = decode(target)
    assert len(rgb) == 12 == info.frames
    assert rgb[0].shape == (240, 320, 3)
    assert codec == "h264" and frames[0].format.name == "yuv420p"
    assert calls == [(i, 12) for i in range(1, 13)]
    # Written beside the target and renamed: nothing else is left in the folder.
    assert only_file(tmp_path) == ["clip.mp4"]


def test_mp4_frames_show_the_model_moving(box_view, tmp_path):
    target = tmp_path / "clip.mp4"
    recorder.record_clip(box_view, target, seconds=1, fps=6, size=SMALL, overlay=False)
    rgb, _, _ = decode(target)
    for frame in rgb:
        assert drawn_fraction(frame) > 0.03
    first, middle, last = (rgb[k].astype(int) for k in (0, 3, 5))
    for a, b in ((first, middle), (middle, last), (first, last)):
        assert (np.abs(a - b).max(axis=-1) > 40).mean() > 0.02


def test_mp4_frames_match_the_rendered_pixels(box_view, tmp_path):
    target = tmp_path / "clip.mp4"
    recorder.record_clip(box_view, target, seconds=0.5, fps=4, size=SMALL)
    rendered = [rgba for _, _, rgba in recorder.render_frames(box_view, seconds=0.5, fps=4, size=SMALL)]
    rgb, _, _ = decode(target)
    assert len(rgb) == len(rendered) == 2
    for got, want in zip(rgb, rendered, strict=True):
        # yuv420p halves the colour resolution, so edges differ; the bulk must not.
        err = np.abs(got.astype(int) - want[..., :3].astype(int))
        assert np.median(err) <= 2 and err.mean() < 4


def test_gif_has_the_frames_the_size_and_loops_forever(box_view, tmp_path):
    target = tmp_path / "clip.gif"
    info = recorder.record_clip(box_view, target, seconds=1, fps=10, size=(240, 160))
    rgb, frames, codec = decode(target)
    assert codec == "gif" and info.frames == len(rgb) == 10
    assert rgb[0].shape == (160, 240, 3)
    # Frame times in the file's hundredths of a second: one clip second in all.
    assert [int(f.pts * f.time_base * 100) for f in frames] == list(range(0, 100, 10))
    data = target.read_bytes()
    loop = data.index(b"NETSCAPE2.0")
    assert data[loop + 11:loop + 16] == b"\x03\x01\x00\x00\x00"  # loop count 0: forever
    assert only_file(tmp_path) == ["clip.gif"]


def test_gif_at_30_fps_keeps_the_clip_length(box_view, tmp_path):
    target = tmp_path / "clip.gif"
    recorder.record_clip(box_view, target, seconds=0.5, fps=30, size=(160, 120), overlay=False)
    _, frames, _ = decode(target)
    times = [round(float(f.pts * f.time_base) * 100) for f in frames]
    assert len(frames) == 15
    assert set(np.diff(times)) <= {3, 4} and times[-1] == round(14 * 100 / 30)


def test_gif_colours_are_close_to_the_rendered_frames(strip_view, tmp_path):
    target = tmp_path / "clip.gif"
    options = dict(t_from=0.5, t_to=1.0, seconds=0.4, fps=10, size=(320, 240))
    recorder.record_clip(strip_view, target, **options)
    rendered = [rgba for _, _, rgba in recorder.render_frames(strip_view, **options)]
    rgb, _, _ = decode(target)
    assert len(rgb) == len(rendered) == 4
    for got, want in zip(rgb, rendered, strict=True):
        err = np.abs(got.astype(int) - want[..., :3].astype(int)).max(axis=-1)
        assert np.median(err) <= 2 and (err > 24).mean() < 0.01
    # The caption's red collision line survives the palette at t = 1.
    assert warning_pixels(rgb[-1][:60, :160]) > 20


# --------------------------------------------------------------- overlay


def test_overlay_text_changes_pixels_in_its_corner_only(box_view):
    options = dict(t_from=0.4, t_to=0.4, seconds=1, fps=1, size=(640, 360), fit=False)
    (_, _, plain), = recorder.render_frames(box_view, overlay=False, **options)
    (_, _, captioned), = recorder.render_frames(box_view, overlay=True, **options)
    diff = np.abs(plain.astype(int) - captioned.astype(int)).max(axis=-1) > 0
    corner = diff[:100, :260]
    assert corner.mean() > 0.3
    diff[:100, :260] = False
    assert not diff.any()
    # Dark text on the pale box: both extremes are there.
    grey = captioned[:100, :260, :3].mean(axis=-1)
    assert (grey < 80).sum() > 200 and (grey > 245).sum() > 2000


def test_overlay_says_when_the_outer_panels_collide(strip_view):
    strip_view.set_t(1.0)
    assert recorder.overlay_lines(strip_view) == ["strip 150", "t = 1.000", "collision: panels 0 and 2"]
    strip_view.set_t(0.5)
    assert recorder.overlay_lines(strip_view)[1:] == ["t = 0.500", "no collision"]
    for t, red in ((0.5, False), (1.0, True)):
        options = dict(t_from=t, t_to=t, seconds=1, fps=1, size=(640, 360), fit=False)
        (_, colliding, plain), = recorder.render_frames(strip_view, overlay=False, **options)
        (_, _, captioned), = recorder.render_frames(strip_view, overlay=True, **options)
        assert colliding is red
        caption = np.abs(plain.astype(int) - captioned.astype(int)).max(axis=-1) > 0
        assert caption[:100, :300].sum() > 1000
        # Red in the caption (its collision line, dot and border) only when panels collide.
        assert (warning_pixels(captioned[caption][None]) > 40) is red


def test_framing_leaves_the_caption_corner_free(box_view):
    # Seen from the top, the closed box fitted alone fills the frame's height,
    # corners included; framed for a caption it keeps clear of the caption's corner.
    box_view.set_view("top")
    size = (640, 360)
    lines, colliding = recorder.clip_captions(box_view, [1.0])
    width, height = recorder._Caption(size).corner(lines, colliding)
    assert 150 < width < 300 and 40 < height < 100
    frames = {}
    for room in (False, True):
        (_, _, frames[room]), = recorder.render_frames(box_view, 1.0, 1.0, 1, 1, size, overlay=False,
                                                       caption_room=room)
    corner = (slice(0, int(height)), slice(0, int(width)))
    assert drawn_fraction(frames[False][corner]) > 0.2
    assert drawn_fraction(frames[True][corner]) == 0
    assert drawn_fraction(frames[True]) > 0.5 * drawn_fraction(frames[False])


def test_clip_info_counts_the_colliding_frames(strip_view, tmp_path):
    info = recorder.record_clip(strip_view, tmp_path / "c.mp4", t_from=0.0, t_to=1.0, seconds=1, fps=11,
                                size=SMALL)
    # Frames at t = 0, 0.1, ..., 1; the panels collide for t > 0.8 (t = 0.8 itself touches).
    assert info.collision_frames == 2
    assert info.first_collision_t == pytest.approx(0.9)
    assert "panels collide from t = 0.9 (2 frames)" in info.summary()


# --------------------------------------------------------------- camera


def test_orbit_turns_the_view_and_the_camera_comes_back(box_view):
    box_view.set_t(0.3)
    before = dict(box_view.opts)
    options = dict(t_from=0.6, t_to=0.6, seconds=1, fps=3, size=SMALL, overlay=False)
    still = [rgba for _, _, rgba in recorder.render_frames(box_view, **options)]
    turning = [rgba for _, _, rgba in recorder.render_frames(box_view, orbit=60, **options)]
    np.testing.assert_array_equal(still[0], still[-1])
    assert (np.abs(turning[0].astype(int) - turning[-1].astype(int)).max(axis=-1) > 40).mean() > 0.02
    assert box_view.t == 0.3
    for key in ("azimuth", "elevation", "distance"):
        assert box_view.opts[key] == before[key]
    assert box_view.opts["center"] == before["center"]


def test_framing_keeps_the_whole_motion_inside_a_wide_frame(box_view):
    # The widget is 4:3, the clip 3:1: fitted for the clip, no panel touches its edges.
    for _, _, rgba in recorder.render_frames(box_view, seconds=1, fps=5, size=(600, 200), overlay=False,
                                             orbit=True):
        border = np.concatenate([rgba[0], rgba[-1], rgba[:, 0], rgba[:, -1]])[:, :3]
        assert drawn_fraction(border[None]) == 0
        assert drawn_fraction(rgba) > 0.05


# --------------------------------------------------------------- failures


@pytest.mark.parametrize("name", ["clip.gif", "clip.mp4"])
def test_cancel_stops_removes_the_temporary_file_and_keeps_an_old_target(box_view, tmp_path, name):
    target = tmp_path / name
    target.write_bytes(b"an earlier clip")
    done = []
    # The GIF muxer writes every frame at once; H.264 holds frames back, so stop
    # the MP4 late enough for packets to have been written.
    stop = 3 if name.endswith(".gif") else 50
    with pytest.raises(recorder.Cancelled, match="cancelled"):
        recorder.record_clip(box_view, target, seconds=6, fps=10, size=(160, 120),
                             progress=lambda i, n: done.append(i), cancel=lambda: len(done) >= stop)
    assert done == list(range(1, stop + 1))
    assert only_file(tmp_path) == [name]
    assert target.read_bytes() == b"an earlier clip"
    with pytest.raises(recorder.Cancelled):
        recorder.record_clip(box_view, tmp_path / "new.gif", seconds=1, fps=5, size=SMALL, cancel=lambda: True)
    assert only_file(tmp_path) == [name]


def test_a_blank_frame_fails_loudly_and_writes_nothing(box_view, tmp_path, monkeypatch):
    monkeypatch.setattr(box_view, "render_image", lambda w, h, samples=4: np.full((h, w, 4), 255, np.uint8))
    for name in ("clip.mp4", "clip.gif", "shot.png"):
        with pytest.raises(FoldsimError, match="blank frame"):
            recorder.record_clip(box_view, tmp_path / name, seconds=0.5, fps=4, size=SMALL)
    assert only_file(tmp_path) == []


@pytest.mark.parametrize("kwargs, message", [
    (dict(size=(321, 240)), "even width and height"),
    (dict(size=(8, 8)), "whole numbers from 16"),
    (dict(fps=0), "--fps 0"),
    (dict(fps=2.5), "--fps 2.5"),
    (dict(t_to=1.5), "--to 1.5"),
    (dict(seconds=0), "--seconds 0"),
])
def test_record_clip_refuses_bad_options(box_view, tmp_path, kwargs, message):
    with pytest.raises(FoldsimError, match=message):
        recorder.record_clip(box_view, tmp_path / "clip.mp4", **kwargs)
    assert only_file(tmp_path) == []


# --------------------------------------------------------------- stills


def test_png_screenshot_has_the_requested_size(box_view, tmp_path):
    from PySide6 import QtGui

    box_view.set_t(0.25)
    target = tmp_path / "shot.png"
    info = recorder.save_screenshot(box_view, target, (333, 222))
    image = QtGui.QImage(str(target))
    assert (image.width(), image.height()) == (333, 222) and info.size == (333, 222)
    pixels = np.array([[QtGui.QColor(image.pixel(x, y)).getRgb()[:3] for x in range(0, 333, 3)]
                       for y in range(0, 222, 3)])
    assert drawn_fraction(pixels) > 0.03
    assert box_view.t == 0.25
    assert only_file(tmp_path) == ["shot.png"]


# --------------------------------------------------------------- command line


def run_cli(args, tmp_path, env=None, timeout=240):
    base = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    base.update(env or {})
    base = {k: v for k, v in base.items() if v is not None}
    return subprocess.run([sys.executable, "-m", "foldsim", *args], capture_output=True, text=True, check=False,
                          env=base, cwd=tmp_path, timeout=timeout)


@pytest.mark.skipif(shutil.which("Xvfb") is None, reason="Xvfb is not installed")
def test_record_without_a_display_starts_xvfb_and_writes_a_clip(tmp_path):
    done = run_cli(["record", str(GIFT_BOX), "-o", "fold.mp4", "--seconds", "0.5", "--fps", "10",
                    "--size", "320x240", "--orbit"], tmp_path,
                   env={"DISPLAY": None, "WAYLAND_DISPLAY": None, "QT_QPA_PLATFORM": "offscreen"})
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip().splitlines() == [
        "wrote fold.mp4: 5 frames, 320x240, 10 fps (0.5 s), t 0 to 1; no collision"]
    rgb, _, codec = decode(tmp_path / "fold.mp4")
    assert codec == "h264" and len(rgb) == 5 and rgb[0].shape == (240, 320, 3)
    assert all(drawn_fraction(f) > 0.03 for f in rgb)
    assert only_file(tmp_path) == ["fold.mp4"]


@pytest.mark.skipif(shutil.which("Xvfb") is None, reason="Xvfb is not installed")
def test_record_png_from_the_command_line(tmp_path):
    doc = write_doc(tmp_path, strip150_document(), "strip.mech.json")
    done = run_cli(["record", str(doc), "-o", "end.png", "--size", "400x300"], tmp_path)
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == "wrote end.png: 400x300 at t = 1; panels collide"
    from PySide6 import QtGui

    image = QtGui.QImage(str(tmp_path / "end.png"))
    assert (image.width(), image.height()) == (400, 300)


def test_missing_xvfb_is_one_line_naming_what_to_install(tmp_path):
    done = run_cli(["record", str(GIFT_BOX), "-o", "fold.mp4"], tmp_path,
                   env={"DISPLAY": None, "WAYLAND_DISPLAY": None, "PATH": str(tmp_path / "empty")})
    assert done.returncode == 2
    (line,) = done.stderr.strip().splitlines()
    assert line.startswith("foldsim: no display to draw on: DISPLAY is not set and Xvfb")
    assert "sudo apt-get install xvfb" in line and "libxcb-glx0" in line and "libgl1-mesa-dri" in line
    assert only_file(tmp_path) == []


def test_a_virtual_display_starts_on_a_free_number_and_stops():
    if shutil.which("Xvfb") is None:
        pytest.skip("Xvfb is not installed")
    with VirtualDisplay(timeout=30) as first, VirtualDisplay(timeout=30) as second:
        assert first.display != second.display
        for server in (first, second):
            assert server.running()
            assert Path(f"/tmp/.X11-unix/X{server.display[1:]}").exists()
    assert not first.running() and not second.running()


@pytest.mark.parametrize("args, message", [
    (["--size", "1280x"], "--size: must be WIDTHxHEIGHT"),
    (["--size", "1281x720"], "even width and height"),
    (["--size", "0x0"], "whole numbers from 16"),
    (["--fps", "0"], "--fps 0"),
    (["--fps", "ten"], "--fps: must be a whole number"),
    (["--fps", "200"], "from 1 to 120"),
    (["--from", "-2"], "--from -2.0: the drive value must be from -1 to 1"),
    (["--to", "nan"], "--to nan"),
    (["--seconds", "-1"], "--seconds -1.0"),
    (["--orbit", "720"], "--orbit 720"),
])
def test_bad_options_exit_2_with_one_line(args, message, tmp_path, capsys):
    assert cli.main(["record", str(GIFT_BOX), "-o", str(tmp_path / "fold.mp4"), *args]) == 2
    err = capsys.readouterr().err
    (line,) = err.strip().splitlines()
    assert line.startswith("foldsim: ") and message in line
    assert only_file(tmp_path) == []


def test_gif_frame_rate_limit_and_unknown_format(tmp_path, capsys):
    assert cli.main(["record", str(GIFT_BOX), "-o", str(tmp_path / "a.gif"), "--fps", "60"]) == 2
    assert "from 1 to 50 for GIF" in capsys.readouterr().err
    assert cli.main(["record", str(GIFT_BOX), "-o", str(tmp_path / "a.avi")]) == 2
    assert "unknown output format '.avi'" in capsys.readouterr().err


def test_bad_model_exits_2_like_check(tmp_path, capsys):
    doc = strip_document()
    doc["faces"][1] = [1, 2, 2, 5]
    bad = write_doc(tmp_path, doc, "bad.mech.json")
    assert cli.main(["check", str(bad)]) == 2
    expected = capsys.readouterr().err
    assert cli.main(["record", str(bad), "-o", str(tmp_path / "fold.mp4")]) == 2
    assert capsys.readouterr().err == expected
    assert only_file(tmp_path) == ["bad.mech.json"]


def test_missing_output_folder_exits_2(box_view, tmp_path, capsys):
    target = tmp_path / "nowhere" / "clip.mp4"
    assert cli.main(["record", str(GIFT_BOX), "-o", str(target)]) == 2
    (line,) = capsys.readouterr().err.strip().splitlines()
    assert line == f"foldsim: {target}: cannot write file: folder {target.parent} does not exist"
    with pytest.raises(FoldsimError, match="does not exist"):
        recorder.record_clip(box_view, target, seconds=0.5, fps=4, size=SMALL)


def test_refusing_bad_input_loads_no_qt(tmp_path):
    code = ("import sys\nfrom foldsim import cli\n"
            f"rc = cli.main(['record', {str(GIFT_BOX)!r}, '-o', 'x.mp4', '--size', '12x12'])\n"
            "print(rc, any(m.startswith(('PySide6', 'pyqtgraph', 'OpenGL')) for m in sys.modules))\n")
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=False, env=env,
                          cwd=tmp_path, timeout=120)
    assert done.stdout.split() == ["2", "False"], done.stderr


LANTERN_BUILD = ROOT / "assets" / "lantern-build.mech.json"


def _png_rgb(path):
    from PySide6 import QtGui

    image = QtGui.QImage(str(path)).convertToFormat(QtGui.QImage.Format.Format_RGB888)
    ptr = image.constBits()
    return np.frombuffer(ptr, np.uint8, image.sizeInBytes()).reshape(image.height(), image.bytesPerLine())[
        :, :3 * image.width()].reshape(image.height(), image.width(), 3).copy()


def test_record_draws_a_build_and_captions_its_clashes_as_check_finds_them(qtbot, tmp_path, capsys):
    # The lantern's top and a side run into each other as thick panels near the
    # end (docs/build.md's worked example; python-fcl confirms the check's prism
    # clashes in tests/test_build.py). The clip's caption takes its collisions from
    # the same sweeps as `check`, so a still inside the clash says so, whatever is
    # drawn; one before it does not.
    assert cli.main(["check", str(LANTERN_BUILD), "--json"]) == 1
    import json

    clash = json.loads(capsys.readouterr().out)["panel_clashes"][0]
    inside = round(0.5 * (clash["first_t"] + clash["last_t"]), 4)
    shots = {}
    for draw in ("", "--no-gears", "--thin"):
        out = tmp_path / f"lantern{draw}.png"
        args = ["record", str(LANTERN_BUILD), "-o", str(out), "--to", str(inside), "--size", "400x300"]
        assert cli.main(args + ([draw] if draw else [])) == 0
        said = capsys.readouterr().out.strip()
        assert said == f"wrote {out}: 400x300 at t = {inside:g}; panels collide"
        shots[draw] = _png_rgb(out)
    assert cli.main(["record", str(LANTERN_BUILD), "-o", str(tmp_path / "early.png"), "--to", "0.6",
                     "--size", "400x300"]) == 0
    assert capsys.readouterr().out.strip().endswith("at t = 0.6; no collision")
    # A still swept over no range at all: the sweep's resolution about its t.
    assert cli.main(["record", str(LANTERN_BUILD), "-o", str(tmp_path / "still.png"), "--from", str(inside),
                     "--to", str(inside), "--size", "400x300"]) == 0
    assert capsys.readouterr().out.strip().endswith(f"at t = {inside:g}; panels collide")
    # Thick panels and gear bodies are drawn: each choice gives a different picture.
    assert (shots[""] != shots["--no-gears"]).any(axis=2).mean() > 1e-3
    assert (shots["--no-gears"] != shots["--thin"]).any(axis=2).mean() > 1e-2


def test_a_long_title_is_cut_short_inside_the_frame(qtbot):
    from foldsim.gui.record.caption import _Caption, draw_overlay

    lines = ["a lantern " * 40, "t = 0.5", "no collision"]
    cap = _Caption((320, 240))
    width, _ = cap.box(lines, False)
    assert width <= 320 - 2 * cap.pad
    assert cap.fitted(lines, False)[0].endswith("\u2026")
    frame = np.full((240, 320, 4), 200, np.uint8)
    drawn = draw_overlay(frame, lines, False)
    # The box's right edge stays inside the frame: its last column is untouched.
    assert (drawn[:, -1] == frame[:, -1]).all()
