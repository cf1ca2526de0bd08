"""Record the 3D view's motion as a video clip, an animated GIF or a still image.

A clip is a sequence of offscreen frames of a `viewport.FoldView`
(`FoldView.render_image`): for frame i of n the view is set to the drive value
``t_from + (t_to - t_from) * i / (n - 1)`` — the core poses the panels and finds
the collisions, the view only draws — and, with an orbit, the camera turns about
the vertical axis a little each frame. Over each frame goes a caption with the
model's name, t and whether panels collide there.

Formats, from the target's suffix:

- ``.mp4``: H.264 in yuv420p (BT.709), even width and height, playable almost
  anywhere; written with PyAV, whose wheels carry FFmpeg and libx264.
- ``.gif``: an animated GIF that loops forever, one 256-colour palette for the
  whole clip (the scene is flat-shaded, so that loses next to nothing). GIF
  delays are whole hundredths of a second; at 30 fps they alternate 3 and 4 so
  the clip keeps its length.
- ``.png``: one frame (`save_screenshot`).

Every file is written beside its target under a temporary name and renamed into
place when complete, so a cancelled, failed or interrupted recording never
leaves a partial file behind.

Qt is imported only by the functions that draw; the checks of a clip's options
(`clip_format`, `check_options`) run without it, so the command line can refuse
bad input before starting a display.
"""

import math
import os
import tempfile
from dataclasses import dataclass
from fractions import Fraction
from pathlib import Path

import numpy as np

from ..errors import FoldsimError

FORMATS = {".mp4": "mp4", ".gif": "gif", ".png": "png"}
"""File suffix to format."""

ORBIT_DEGREES = 40.0
"""Azimuth turned over a whole clip with ``orbit=True``, centred on the starting view."""

MAX_SIDE = 7680
"""Largest frame width or height."""

MIN_SIDE = 16
"""Smallest frame width or height."""

MAX_FPS = {"mp4": 120, "gif": 50}
"""Highest frame rate per format (GIF players stretch delays under 2/100 s)."""

MAX_SECONDS = 600.0
"""Longest clip."""

MARGIN = 1.12
"""Room left around the model when a clip is framed, as a factor on its projected size."""

GIF_CELL_BITS = 5
"""Bits per channel of the colour grid the GIF palette is chosen and looked up on."""


class Cancelled(FoldsimError):
    """A recording was stopped by its ``cancel`` callable; no file was written."""


@dataclass
class ClipInfo:
    """What a recording wrote.

    Attributes
    ----------
    path : Path
    format : str
        ``"mp4"``, ``"gif"`` or ``"png"``.
    frames : int
    size : tuple of int
        (width, height) in pixels.
    fps : int
    t_from, t_to : float
    collision_frames : int
        Frames in which some pair of panels collides.
    first_collision_t : float or None
        The drive value of the first such frame.
    """

    path: Path
    format: str
    frames: int
    size: tuple
    fps: int
    t_from: float
    t_to: float
    collision_frames: int = 0
    first_collision_t: float = None

    def summary(self):
        """One line for the command line.

        Examples
        --------
        >>> ClipInfo(Path("a.mp4"), "mp4", 120, (1280, 720), 30, 0.0, 1.0, 25, 0.8).summary()
        'wrote a.mp4: 120 frames, 1280x720, 30 fps (4 s), t 0 to 1; panels collide from t = 0.8 (25 frames)'
        >>> ClipInfo(Path("a.png"), "png", 1, (800, 600), 0, 1.0, 1.0).summary()
        'wrote a.png: 800x600 at t = 1; no collision'
        """
        w, h = self.size
        if self.format == "png":
            head = f"wrote {self.path}: {w}x{h} at t = {self.t_to:g}"
        else:
            head = (f"wrote {self.path}: {self.frames} frames, {w}x{h}, {self.fps} fps "
                    f"({self.frames / self.fps:.3g} s), t {self.t_from:g} to {self.t_to:g}")
        if not self.collision_frames:
            return head + "; no collision"
        if self.format == "png":
            return head + "; panels collide"
        return (head + f"; panels collide from t = {self.first_collision_t:.3g} "
                       f"({self.collision_frames} frame{'s' if self.collision_frames != 1 else ''})")


# ------------------------------------------------------------------ options


def clip_format(path):
    """The format named by a target's suffix.

    Examples
    --------
    >>> clip_format("fold.MP4"), clip_format("a/b.gif"), clip_format("shot.png")
    ('mp4', 'gif', 'png')
    >>> clip_format("fold.avi")
    Traceback (most recent call last):
    ...
    foldsim.errors.FoldsimError: fold.avi: unknown output format '.avi' (use .mp4, .gif or .png)
    """
    suffix = Path(path).suffix.lower()
    if suffix not in FORMATS:
        raise FoldsimError(f"{path}: unknown output format {suffix or '(no suffix)'!r} (use .mp4, .gif or .png)")
    return FORMATS[suffix]


def parse_size(text):
    """``"WIDTHxHEIGHT"`` as a pair of ints.

    Examples
    --------
    >>> parse_size("1280x720"), parse_size(" 640 X 480 ")
    ((1280, 720), (640, 480))
    >>> parse_size("big")
    Traceback (most recent call last):
    ...
    foldsim.errors.FoldsimError: --size: must be WIDTHxHEIGHT in pixels, like 1280x720, not 'big'
    """
    parts = text.strip().lower().split("x")
    try:
        if len(parts) != 2:
            raise ValueError
        return int(parts[0]), int(parts[1])
    except ValueError:
        raise FoldsimError(f"--size: must be WIDTHxHEIGHT in pixels, like 1280x720, not {text!r}") from None


def orbit_degrees(orbit):
    """Azimuth turned over a clip: 0 for False/None, `ORBIT_DEGREES` for True, else the number."""
    if orbit is None or orbit is False:
        return 0.0
    if orbit is True:
        return ORBIT_DEGREES
    return float(orbit)


def frame_count(seconds, fps):
    """Frames in a clip: seconds × fps, rounded (at least 1).

    Examples
    --------
    >>> frame_count(4, 30), frame_count(0.5, 25), frame_count(0.01, 10)
    (120, 12, 1)
    """
    return max(1, round(seconds * fps))


def check_options(fmt, t_from=0.0, t_to=1.0, seconds=4.0, fps=30, size=(1280, 720), orbit=False):
    """Refuse options a clip cannot be made with (one-line FoldsimError each).

    Parameters
    ----------
    fmt : str
        ``"mp4"``, ``"gif"`` or ``"png"``.
    t_from, t_to : float
        Drive values at the first and last frame, each in [-1, 1].
    seconds : float
        Length of the clip, more than 0 and at most `MAX_SECONDS`.
    fps : int
        Frames per second, a whole number from 1 to `MAX_FPS` of the format.
    size : (int, int)
        Width and height, `MIN_SIDE` to `MAX_SIDE`; even for MP4.
    orbit : bool or float
        Degrees of orbit, at most 360 either way.

    Raises
    ------
    FoldsimError

    Examples
    --------
    >>> check_options("mp4", size=(1281, 720))
    Traceback (most recent call last):
    ...
    foldsim.errors.FoldsimError: --size 1281x720: MP4 (H.264, yuv420p) needs an even width and height
    >>> check_options("gif", fps=60)
    Traceback (most recent call last):
    ...
    foldsim.errors.FoldsimError: --fps 60: must be a whole number from 1 to 50 for GIF
    """
    w, h = size
    for name, value in (("--from", t_from), ("--to", t_to)):
        if not isinstance(value, (int, float)) or not math.isfinite(value) or not -1.0 <= value <= 1.0:
            raise FoldsimError(f"{name} {value}: the drive value must be from -1 to 1")
    if fmt not in MAX_FPS.keys() | {"png"}:
        raise FoldsimError(f"unknown output format {fmt!r}")
    if not all(isinstance(v, (int, np.integer)) and not isinstance(v, bool) for v in (w, h)) \
            or not (MIN_SIDE <= w <= MAX_SIDE and MIN_SIDE <= h <= MAX_SIDE):
        raise FoldsimError(f"--size {w}x{h}: width and height must be whole numbers from {MIN_SIDE} to {MAX_SIDE}")
    if fmt == "mp4" and (w % 2 or h % 2):
        raise FoldsimError(f"--size {w}x{h}: MP4 (H.264, yuv420p) needs an even width and height")
    if fmt == "png":
        return
    top = MAX_FPS[fmt]
    if isinstance(fps, bool) or not isinstance(fps, (int, np.integer)) or not 1 <= fps <= top:
        raise FoldsimError(f"--fps {fps}: must be a whole number from 1 to {top} for {fmt.upper()}")
    if not isinstance(seconds, (int, float)) or not math.isfinite(seconds) or not 0 < seconds <= MAX_SECONDS:
        raise FoldsimError(f"--seconds {seconds}: must be more than 0 and at most {MAX_SECONDS:g}")
    degrees = orbit_degrees(orbit)
    if not math.isfinite(degrees) or abs(degrees) > 360:
        raise FoldsimError(f"--orbit {degrees:g}: must be at most 360 degrees either way")


def clip_plan(t_from, t_to, seconds, fps, orbit=False):
    """The drive value and camera turn of every frame.

    Parameters
    ----------
    t_from, t_to : float
    seconds : float
    fps : int
    orbit : bool or float
        See `orbit_degrees`.

    Returns
    -------
    t : (n,) float
        From ``t_from`` at the first frame to exactly ``t_to`` at the last.
    turn : (n,) float
        Azimuth offsets in degrees from the starting view, from −orbit/2 to +orbit/2.

    Examples
    --------
    >>> t, turn = clip_plan(0, 1, 1, 5, orbit=40)
    >>> t.tolist(), turn.tolist()
    ([0.0, 0.25, 0.5, 0.75, 1.0], [-20.0, -10.0, 0.0, 10.0, 20.0])
    """
    n = frame_count(seconds, fps)
    degrees = orbit_degrees(orbit)
    if n == 1:
        return np.array([float(t_to)]), np.zeros(1)
    return np.linspace(float(t_from), float(t_to), n), np.linspace(-degrees / 2, degrees / 2, n)


# ------------------------------------------------------------------ overlay


def collision_text(pairs, shown=3):
    """The caption's collision line for the colliding face pairs (k, 2).

    Examples
    --------
    >>> collision_text(np.zeros((0, 2), int))
    'no collision'
    >>> collision_text(np.array([[0, 2]]))
    'collision: panels 0 and 2'
    >>> collision_text(np.array([[0, 2], [1, 4], [3, 5], [6, 7]]))
    'collision: panels 0–2, 1–4, 3–5 and 1 more pair'
    """
    pairs = np.asarray(pairs).reshape(-1, 2)
    if not len(pairs):
        return "no collision"
    if len(pairs) == 1:
        return f"collision: panels {pairs[0, 0]} and {pairs[0, 1]}"
    text = "collision: panels " + ", ".join(f"{a}–{b}" for a, b in pairs[:shown].tolist())
    rest = len(pairs) - shown
    if rest > 0:
        text += f" and {rest} more pair{'s' if rest != 1 else ''}"
    return text


def overlay_lines(viewport, title=None):
    """The caption for the view's current state: name, drive value, collision line.

    Parameters
    ----------
    viewport : FoldView
    title : str, optional
        Default the model's name.

    Returns
    -------
    list of str
        Three lines.
    """
    mech = viewport.mech
    name = title if title is not None else (getattr(mech, "name", None) or "mechanism")
    return [str(name), t_text(viewport.t), collision_text(viewport.colliding)]


def t_text(t):
    """The caption's drive line, with a true minus sign.

    Examples
    --------
    >>> t_text(0.5), t_text(-1), t_text(-0.0)
    ('t = 0.500', 't = −1.000', 't = 0.000')
    """
    t = float(t) + 0.0
    return f"t = {abs(t):.3f}" if round(t, 3) == 0 or t > 0 else f"t = −{-t:.3f}"


def _qimage(rgba):
    """A QImage viewing an (h, w, 4) uint8 RGBA array (keep the array alive)."""
    from PySide6 import QtGui

    h, w = rgba.shape[:2]
    return QtGui.QImage(rgba.data, w, h, 4 * w, QtGui.QImage.Format.Format_RGBA8888)


def _font_families():
    from PySide6 import QtGui

    return QtGui.QFontDatabase.families()


class _Caption:
    """Fonts and sizes of the caption for one frame size (Qt needed)."""

    def __init__(self, size):
        from PySide6 import QtGui

        if not _font_families():
            raise FoldsimError("no fonts to write the caption with: install a font package "
                               "(e.g. sudo apt-get install fonts-dejavu-core) or record with --no-overlay")
        w, h = size
        self.px = max(12, round(min(h, 1.25 * w) * 0.03))
        self.pad = 0.6 * self.px
        self.regular = QtGui.QFont()
        self.regular.setPixelSize(self.px)
        self.bold = QtGui.QFont(self.regular)
        self.bold.setBold(True)
        self.dot = 0.55 * self.px

    def fonts(self, colliding):
        return [self.bold, self.regular, self.bold if colliding else self.regular]

    def box(self, lines, colliding):
        """(width, height) of the caption's box for these lines."""
        from PySide6 import QtGui

        metrics = [QtGui.QFontMetricsF(f) for f in self.fonts(colliding)]
        widths = [m.horizontalAdvance(text) for m, text in zip(metrics, lines)]
        if colliding:
            widths[-1] += self.dot + 0.4 * self.px
        return max(widths) + 2 * self.pad, sum(m.height() for m in metrics) + 1.9 * self.pad

    def corner(self, all_lines, all_colliding):
        """Width and height from the frame's top-left corner that the widest caption covers, with a gap."""
        boxes = [self.box(lines, c) for lines, c in zip(all_lines, all_colliding)]
        return (self.pad + max(b[0] for b in boxes) + self.pad,
                self.pad + max(b[1] for b in boxes) + self.pad)


def draw_overlay(rgba, lines, colliding, box_width=None):
    """Draw the caption into the top-left corner of a frame.

    A pale rounded box with the model's name (bold), t and the collision line —
    in the warning red with a red dot when panels collide. Text size follows the
    frame's size, so it reads the same at any resolution.

    Parameters
    ----------
    rgba : (h, w, 4) uint8
        The frame; not changed.
    lines : sequence of str
        `overlay_lines`.
    colliding : bool
    box_width : float, optional
        Width of the box in pixels (a clip keeps one width for all its frames);
        default: as wide as the text.

    Returns
    -------
    (h, w, 4) uint8
        A new frame with the caption.

    Raises
    ------
    FoldsimError
        Qt finds no font to write with.
    """
    from PySide6 import QtCore, QtGui

    from . import palette

    out = np.ascontiguousarray(rgba, dtype=np.uint8).copy()
    h, w = out.shape[:2]
    cap = _Caption((w, h))
    bw, bh = cap.box(lines, colliding)
    box = QtCore.QRectF(cap.pad, cap.pad, max(bw, box_width or 0.0), bh)
    image = _qimage(out)
    painter = QtGui.QPainter(image)
    try:
        painter.setRenderHints(QtGui.QPainter.RenderHint.Antialiasing | QtGui.QPainter.RenderHint.TextAntialiasing)
        edge = QtGui.QColor(*palette.WARNING) if colliding else QtGui.QColor(*palette.OUTLINE, 90)
        pen = QtGui.QPen(edge)
        pen.setWidthF(max(1.0, cap.px / 9))
        painter.setPen(pen)
        painter.setBrush(QtGui.QColor(255, 255, 255, 235))
        painter.drawRoundedRect(box, 0.35 * cap.px, 0.35 * cap.px)
        y = box.top() + cap.pad
        colours = [palette.LABEL_TEXT, palette.LABEL_TEXT, palette.WARNING if colliding else (70, 90, 80)]
        for k, (text, font) in enumerate(zip(lines, cap.fonts(colliding))):
            m = QtGui.QFontMetricsF(font)
            painter.setFont(font)
            x = box.left() + cap.pad
            if k == len(lines) - 1 and colliding:
                painter.setPen(QtCore.Qt.PenStyle.NoPen)
                painter.setBrush(QtGui.QColor(*palette.WARNING))
                painter.drawEllipse(QtCore.QRectF(x, y + (m.height() - cap.dot) / 2, cap.dot, cap.dot))
                x += cap.dot + 0.4 * cap.px
            painter.setPen(QtGui.QColor(*colours[k]))
            painter.drawText(QtCore.QPointF(x, y + m.ascent()), text)
            y += m.height()
    finally:
        painter.end()
    return out


# ------------------------------------------------------------------ frames


def is_blank(rgba):
    """Whether a frame is one colour all over (GL drew nothing).

    Examples
    --------
    >>> is_blank(np.zeros((4, 4, 4), np.uint8))
    True
    >>> frame = np.zeros((4, 4, 4), np.uint8); frame[1, 2, 0] = 9
    >>> is_blank(frame)
    False
    """
    rgb = np.asarray(rgba)[..., :3]
    return not (rgb != rgb[0, 0]).any()


def _check_not_blank(rgba):
    if is_blank(rgba):
        raise FoldsimError(
            "the 3D view drew a blank frame (one colour): OpenGL is not drawing here, or the model is out of "
            "view; on Linux check that Mesa and libxcb-glx0 are installed (sudo apt-get install "
            "libgl1-mesa-dri libglx-mesa0 libxcb-glx0)")


def _clip_poses(viewport, t_values, chunk=64):
    """The core's poses (T, F, 4, 4) at each drive value, in chunks."""
    from ..kinematics import poses_at

    t_values = np.asarray(t_values, dtype=float)
    return np.concatenate([poses_at(viewport.mech, viewport.schedule, t_values[k:k + chunk])
                           for k in range(0, len(t_values), chunk)])


def _posed_corners(viewport, t_values):
    """Every panel corner (n, 3), in the model frame, at each drive value (from the core)."""
    from ..geometry import transform_points

    mech = viewport.mech
    flat = np.concatenate(mech.flat_faces)
    owner = np.concatenate([np.full(len(p), f) for f, p in enumerate(mech.flat_faces)])
    return np.concatenate([transform_points(p[owner], flat) for p in _clip_poses(viewport, t_values)])


def clip_captions(viewport, t_values, title=None):
    """Every frame's caption lines and collision state, from the core, before drawing.

    Returns
    -------
    lines : list of list of str
    colliding : list of bool
    """
    from ..analysis.collision import colliding_pairs

    mech = viewport.mech
    name = title if title is not None else (getattr(mech, "name", None) or "mechanism")
    lines, colliding = [], []
    for t, poses in zip(t_values, _clip_poses(viewport, t_values)):
        pairs = colliding_pairs(mech, poses, pan=viewport.pan)
        lines.append([str(name), t_text(t), collision_text(pairs)])
        colliding.append(len(pairs) > 0)
    return lines, colliding


def _eye_axes(viewport):
    """The camera's right and up directions (3,) in the display frame."""
    m = np.array(viewport.viewMatrix().data(), dtype=float).reshape(4, 4).T
    return m[0, :3], m[1, :3]


def _fit_region(viewport, points, size, region, margin, distance=None):
    """Aim the camera (along its line of sight) so that ``points`` fill ``region`` of the frame.

    ``region`` is (x0, y0, x1, y1) in pixels of a frame of ``size``. Without
    ``distance`` the camera also moves nearer or farther until the points'
    projected box is ``1 / margin`` of the region; with it, only the centre moves.
    """
    from pyqtgraph import Vector

    w, h = size
    x0, y0, x1, y1 = region
    if distance is not None:
        viewport.opts["distance"] = float(distance)
    for _ in range(12):
        px = viewport.model_to_pixels(points, w, h)
        if not np.isfinite(px).all():
            viewport.opts["distance"] *= 2.0
            continue
        lo, hi = px.min(axis=0), px.max(axis=0)
        if distance is None:
            factor = max((hi[0] - lo[0]) / (x1 - x0), (hi[1] - lo[1]) / (y1 - y0)) * margin
            viewport.opts["distance"] *= factor
        else:
            factor = 1.0
        dx, dy = (x0 + x1) / 2 - (lo[0] + hi[0]) / 2, (y0 + y1) / 2 - (lo[1] + hi[1]) / 2
        per_pixel = 2 * viewport.opts["distance"] * math.tan(math.radians(viewport.opts["fov"]) / 2) / w
        right, up = _eye_axes(viewport)
        c = viewport.opts["center"]
        centre = np.array([c.x(), c.y(), c.z()]) + per_pixel * (-dx * right + dy * up)
        viewport.opts["center"] = Vector(*centre)
        if abs(factor - 1.0) < 1e-3 and abs(dx) < 0.25 and abs(dy) < 0.25:
            break
    c = viewport.opts["center"]
    return np.array([c.x(), c.y(), c.z()]), float(viewport.opts["distance"])


def hull_meets_box(points, box):
    """Whether the convex hull of 2D points overlaps an axis-aligned box.

    Parameters
    ----------
    points : (n, 2) float
    box : (x0, y0, x1, y1)

    Examples
    --------
    >>> tri = np.array([[0.0, 0.0], [10.0, 0.0], [0.0, 10.0]])
    >>> hull_meets_box(tri, (6, 6, 9, 9)), hull_meets_box(tri, (4, 4, 9, 9))
    (False, True)
    """
    from scipy.spatial import ConvexHull, QhullError

    pts = np.asarray(points, dtype=float)
    x0, y0, x1, y1 = box
    lo, hi = pts.min(axis=0), pts.max(axis=0)
    if lo[0] >= x1 or lo[1] >= y1 or hi[0] <= x0 or hi[1] <= y0:
        return False
    try:
        hull = pts[ConvexHull(pts).vertices]
    except (QhullError, ValueError):
        return True  # flat or tiny: its bounding box overlaps, call it a meet
    corners = np.array([[x0, y0], [x1, y0], [x1, y1], [x0, y1]], dtype=float)
    edges = np.roll(hull, -1, axis=0) - hull
    for normal in np.column_stack([-edges[:, 1], edges[:, 0]]):
        a, b = hull @ normal, corners @ normal
        if a.max() <= b.min() or b.max() <= a.min():
            return False
    return True


def plan_camera(viewport, t_values, turns, size, margin=MARGIN, reserve=None):
    """Camera of every frame such that the whole clip stays in view.

    From the view's current direction, turned by each frame's offset, the
    model's shapes over the clip's range of t are fitted into the frame,
    centred. With ``reserve``, if those shapes would reach into the caption's
    corner, they are fitted instead into the larger of the parts the caption
    leaves free (below it, or right of it). The farthest camera distance over
    the orbit is kept for every frame, so the model does not seem to grow and
    shrink; the centre is found for each direction.

    Parameters
    ----------
    viewport : FoldView
    t_values, turns : (n,) float
        `clip_plan`.
    size : (int, int)
    margin : float
    reserve : (float, float), optional
        Width and height in pixels to keep clear in the top-left corner.

    Returns
    -------
    list of dict
        Per frame: ``center`` (3,), ``distance``, ``azimuth``, ``elevation``.
        The view's camera is left as it was.
    """
    w, h = size
    saved = _camera(viewport)
    lo, hi = float(np.min(t_values)), float(np.max(t_values))
    samples = np.unique(np.concatenate([np.linspace(lo, hi, 13), [t_values[0], t_values[-1]]]))
    points = _posed_corners(viewport, samples)
    turns = np.asarray(turns, dtype=float)
    sample_turns = np.unique(np.linspace(turns.min(), turns.max(), 9 if np.ptp(turns) > 0 else 1))
    whole = (0.0, 0.0, float(w), float(h))

    def aim(turn, region, distance=None):
        viewport.opts["azimuth"] = saved["azimuth"] + turn
        if distance is None:
            viewport.fit(t_values=samples, margin=margin)
        return _fit_region(viewport, points, size, region, margin, distance)

    def framing(region):
        distance = max(aim(turn, region)[1] for turn in sample_turns)
        centres, clear = [], True
        for turn in sample_turns:
            centres.append(aim(turn, region, distance)[0])
            if reserve is not None:
                clear &= not hull_meets_box(viewport.model_to_pixels(points, w, h), (0, 0, *reserve))
        return distance, np.array(centres), clear

    try:
        distance, centres, clear = framing(whole)
        if not clear:
            rw, rh = reserve
            options = [framing(r) for r in ((0.0, rh, w, h), (rw, 0.0, w, h))
                       if r[2] - r[0] > w / 4 and r[3] - r[1] > h / 4]
            if options:
                distance, centres, _ = min(options, key=lambda o: o[0])
    finally:
        _set_camera(viewport, saved)
    plan = []
    for turn in turns:
        centre = [np.interp(turn, sample_turns, centres[:, k]) for k in range(3)]
        plan.append({"center": np.array(centre), "distance": distance,
                     "azimuth": saved["azimuth"] + turn, "elevation": saved["elevation"]})
    return plan


def _camera(viewport):
    c = viewport.opts["center"]
    return {"center": np.array([c.x(), c.y(), c.z()]), "distance": float(viewport.opts["distance"]),
            "azimuth": float(viewport.opts["azimuth"]), "elevation": float(viewport.opts["elevation"]),
            "fitted": getattr(viewport, "_fitted", False)}


def _set_camera(viewport, camera):
    from pyqtgraph import Vector

    viewport.opts["center"] = Vector(*(float(v) for v in camera["center"]))
    viewport.opts["distance"] = float(camera["distance"])
    viewport.opts["azimuth"] = float(camera["azimuth"])
    viewport.opts["elevation"] = float(camera["elevation"])
    if "fitted" in camera and hasattr(viewport, "_fitted"):
        viewport._fitted = camera["fitted"]
    viewport.update()


def render_frames(viewport, t_from=0.0, t_to=1.0, seconds=4.0, fps=30, size=(1280, 720), orbit=False,
                  overlay=True, fit=True, title=None, samples=4, cancel=None, caption_room=None, only=None):
    """Yield a clip's frames one at a time, without writing anything.

    The view's drive value and camera are restored when the generator finishes
    or is closed.

    Parameters
    ----------
    viewport : FoldView
        With a mechanism set.
    t_from, t_to, seconds, fps, size, orbit, overlay, fit, title
        See `record_clip`.
    samples : int
        Multisampling per pixel (`FoldView.render_image`).
    cancel : callable, optional
        Called before every frame; True raises `Cancelled`.
    caption_room : bool, optional
        With ``fit``, frame the model clear of the caption's corner (default:
        when there is a caption).
    only : sequence of int, optional
        Draw only these frames of the clip (same camera and caption as in the
        whole clip).

    Yields
    ------
    t : float
        The frame's drive value.
    colliding : bool
        Whether panels collide at t.
    rgba : (h, w, 4) uint8
        The frame.

    Raises
    ------
    FoldsimError
        The first frame is blank (see `is_blank`), or no mechanism is shown.
    Cancelled
    """
    if getattr(viewport, "mech", None) is None:
        raise FoldsimError("the 3D view shows no mechanism to record")
    w, h = size
    t_values, turns = clip_plan(t_from, t_to, seconds, fps, orbit)
    saved_t = float(viewport.t)
    saved = _camera(viewport)
    box_width, reserve = None, None
    if overlay or caption_room:
        caption = _Caption(size)
        all_lines, all_colliding = clip_captions(viewport, t_values, title)
        reserve = caption.corner(all_lines, all_colliding)
        box_width = reserve[0] - 2 * caption.pad
        if caption_room is False:
            reserve = None
    try:
        if fit:
            cameras = plan_camera(viewport, t_values, turns, size, reserve=reserve)
        else:
            cameras = [dict(saved, azimuth=saved["azimuth"] + turn) for turn in turns]
        chosen = range(len(t_values)) if only is None else sorted({int(k) for k in only})
        for i, k in enumerate(chosen):
            t, camera = t_values[k], cameras[k]
            if cancel is not None and cancel():
                raise Cancelled("recording cancelled; nothing was written")
            viewport.set_t(float(t))
            _set_camera(viewport, {k: v for k, v in camera.items() if k != "fitted"})
            rgba = viewport.render_image(w, h, samples=samples)
            if i == 0:
                _check_not_blank(rgba)
            colliding = len(viewport.colliding) > 0
            if overlay:
                rgba = draw_overlay(rgba, overlay_lines(viewport, title), colliding, box_width)
            yield float(t), colliding, rgba
    finally:
        viewport.set_t(saved_t)
        _set_camera(viewport, saved)


# ------------------------------------------------------------------ writers


def check_target(path):
    """Refuse a target whose folder does not exist (one-line FoldsimError)."""
    parent = Path(path).parent
    if not parent.is_dir():
        raise FoldsimError(f"{path}: cannot write file: folder {parent} does not exist")


class _AtomicTarget:
    """A temporary file beside ``target``, renamed onto it by `commit`, else removed."""

    def __init__(self, target):
        self.target = Path(target)
        check_target(self.target)
        try:
            fd, name = tempfile.mkstemp(dir=self.target.parent, prefix=f".{self.target.name}.", suffix=".part")
        except OSError as exc:
            raise FoldsimError(f"{self.target}: cannot write file: {exc.strerror or exc}") from None
        os.close(fd)
        self.path = Path(name)

    def commit(self):
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(self.path, 0o666 & ~umask)
        try:
            os.replace(self.path, self.target)
        except OSError as exc:
            self.discard()
            raise FoldsimError(f"{self.target}: cannot write file: {exc.strerror or exc}") from None

    def discard(self):
        try:
            self.path.unlink()
        except FileNotFoundError:
            pass


def _av():
    try:
        import av
    except ImportError:
        raise FoldsimError("recording MP4 and GIF needs PyAV (pip install av)") from None
    return av


class _Mp4Writer:
    """H.264 (libx264), yuv420p with BT.709 colour, in an MP4 with the index up front."""

    def __init__(self, path, size, fps):
        av = _av()
        from av.video.reformatter import ColorRange, Colorspace

        self._space, self._range, self._full = Colorspace.ITU709, ColorRange.MPEG, ColorRange.JPEG
        self.container = av.open(str(path), mode="w", format="mp4", container_options={"movflags": "+faststart"})
        codec = "libx264" if "libx264" in av.codecs_available else "h264"
        stream = self.container.add_stream(codec, rate=int(fps))
        stream.width, stream.height = size
        stream.pix_fmt = "yuv420p"
        stream.options = {"crf": "18", "preset": "medium", "tune": "animation"}
        ctx = stream.codec_context
        ctx.colorspace = ctx.color_primaries = ctx.color_trc = 1  # BT.709
        ctx.color_range = 1  # limited (MPEG) range
        self.stream = stream
        self.frames = 0

    def write(self, rgba):
        from av.video.frame import VideoFrame

        frame = VideoFrame.from_ndarray(np.ascontiguousarray(rgba[..., :3]), format="rgb24")
        frame = frame.reformat(format="yuv420p", src_colorspace=self._space, dst_colorspace=self._space,
                               src_color_range=self._full, dst_color_range=self._range,
                               dst_color_trc=1, dst_color_primaries=1)
        frame.pts = self.frames
        self.frames += 1
        for packet in self.stream.encode(frame):
            self.container.mux(packet)

    def close(self):
        for packet in self.stream.encode():
            self.container.mux(packet)
        self.container.close()

    def abort(self):
        try:
            self.container.close()
        except Exception:  # noqa: BLE001 - the file is removed anyway
            pass


def _cells(rgb):
    """Index of every pixel's cell on the palette grid (`GIF_CELL_BITS` per channel)."""
    shift = 8 - GIF_CELL_BITS
    q = (np.asarray(rgb, dtype=np.uint32) >> shift).reshape(-1, 3)
    return (q[:, 0] << (2 * GIF_CELL_BITS)) | (q[:, 1] << GIF_CELL_BITS) | q[:, 2]


def choose_palette(frames, colours=256):
    """A palette for a set of frames by median cut over their pixels.

    Parameters
    ----------
    frames : sequence of (h, w, 3 or 4) uint8
    colours : int

    Returns
    -------
    (k, 3) uint8
        At most ``colours`` colours, each the mean of the pixels it stands for.

    Examples
    --------
    >>> f = np.zeros((2, 2, 3), np.uint8); f[0, 0] = (200, 10, 10); f[1, 1] = (10, 10, 200)
    >>> sorted(map(tuple, choose_palette([f]).tolist()))
    [(0, 0, 0), (10, 10, 200), (200, 10, 10)]
    """
    n_cells = 1 << (3 * GIF_CELL_BITS)
    counts = np.zeros(n_cells)
    sums = np.zeros((n_cells, 3))
    for frame in frames:
        rgb = np.asarray(frame)[..., :3].reshape(-1, 3).astype(float)
        cells = _cells(rgb)
        counts += np.bincount(cells, minlength=n_cells)
        for k in range(3):
            sums[:, k] += np.bincount(cells, weights=rgb[:, k], minlength=n_cells)
    used = np.flatnonzero(counts)
    weight = counts[used]
    mean = sums[used] / weight[:, None]
    boxes = [np.arange(len(used))]
    while len(boxes) < colours:
        # Split the box whose colours spread widest, weighted gently by how many
        # pixels it holds, so small but distinct marks (a red dot, a yellow line)
        # keep their own colours.
        scores = [np.ptp(mean[b], axis=0).max() * math.log2(2 + weight[b].sum()) if len(b) > 1 else -1
                  for b in boxes]
        k = int(np.argmax(scores))
        if scores[k] <= 0:
            break
        box = boxes.pop(k)
        axis = int(np.argmax(np.ptp(mean[box], axis=0)))
        order = box[np.argsort(mean[box, axis], kind="stable")]
        cum = np.cumsum(weight[order])
        cut = int(np.searchsorted(cum, cum[-1] / 2))
        cut = min(max(cut, 1), len(order) - 1)
        boxes += [order[:cut], order[cut:]]
    pal = [np.average(mean[b], axis=0, weights=weight[b]) for b in boxes]
    return np.clip(np.round(pal), 0, 255).astype(np.uint8)


def palette_lookup(pal):
    """For every cell of the palette grid, the index of the nearest palette colour."""
    n = 1 << GIF_CELL_BITS
    step = 1 << (8 - GIF_CELL_BITS)
    axis = np.arange(n) * step + step / 2 - 0.5
    grid = np.stack(np.meshgrid(axis, axis, axis, indexing="ij"), axis=-1).reshape(-1, 3)
    pal = pal.astype(float)
    out = np.empty(len(grid), np.uint8)
    for start in range(0, len(grid), 4096):
        part = grid[start:start + 4096]
        d = ((part[:, None, :] - pal[None, :, :]) ** 2).sum(axis=-1)
        out[start:start + 4096] = np.argmin(d, axis=1)
    # A cell holding a palette colour exactly maps to that colour, not to a neighbour.
    out[_cells(pal.astype(np.uint8))] = np.arange(len(pal), dtype=np.uint8)
    return out


class _GifWriter:
    """An animated GIF looping forever, one palette for all frames (set by `set_palette`)."""

    def __init__(self, path, size, fps):
        av = _av()
        self.container = av.open(str(path), mode="w", format="gif", container_options={"loop": "0"})
        stream = self.container.add_stream("gif", rate=int(fps))
        stream.width, stream.height = size
        stream.pix_fmt = "pal8"
        self.stream = stream
        self.fps = int(fps)
        self.frames = 0
        self.argb = None
        self.lookup = None

    def set_palette(self, pal):
        argb = np.zeros((256, 4), np.uint8)
        argb[:, 0] = 255
        argb[:len(pal), 1:] = pal
        self.argb = argb
        self.lookup = palette_lookup(pal)

    def write(self, rgba):
        from av.video.frame import VideoFrame

        h, w = rgba.shape[:2]
        index = self.lookup[_cells(rgba[..., :3])].reshape(h, w)
        frame = VideoFrame.from_ndarray((np.ascontiguousarray(index), self.argb), format="pal8")
        # The muxer counts in hundredths of a second: rounding each frame's time
        # (not its delay) keeps the clip's length at frame rates like 30.
        frame.pts = self.frames
        frame.time_base = Fraction(1, self.fps)
        self.frames += 1
        for packet in self.stream.encode(frame):
            self.container.mux(packet)

    def close(self):
        for packet in self.stream.encode():
            self.container.mux(packet)
        self.container.close()

    def abort(self):
        try:
            self.container.close()
        except Exception:  # noqa: BLE001 - the file is removed anyway
            pass


_WRITERS = {"mp4": _Mp4Writer, "gif": _GifWriter}


def record_clip(viewport, path, t_from=0.0, t_to=1.0, seconds=4.0, fps=30, size=(1280, 720), orbit=False,
                overlay=True, progress=None, cancel=None, fit=True, title=None, samples=4):
    """Record the view folding from ``t_from`` to ``t_to`` as an MP4 or GIF (or a PNG).

    Parameters
    ----------
    viewport : FoldView
        With a mechanism set. Its drive value and camera are restored afterwards.
    path : str or Path
        Target; its suffix picks the format (`FORMATS`). A ``.png`` target gets
        one frame at ``t_to`` (`save_screenshot`).
    t_from, t_to : float
        Drive values at the first and the last frame, in [-1, 1].
    seconds : float
        Length; the clip has ``round(seconds * fps)`` frames.
    fps : int
        Frames per second (at most 120 for MP4, 50 for GIF).
    size : (int, int)
        Frame width and height in pixels (even for MP4).
    orbit : bool or float
        Turn the camera about the vertical axis over the clip: True for
        `ORBIT_DEGREES`, or a number of degrees; centred on the current view.
    overlay : bool
        Caption each frame with the model's name, t and the collision state.
    progress : callable, optional
        ``progress(i, n)`` after frame i (1-based) of n is written.
    cancel : callable, optional
        Asked before every frame; when it returns True the recording stops, the
        temporary file is removed and `Cancelled` is raised.
    fit : bool
        Frame the whole clip (every shape over the range of t, at every orbit
        angle) from the view's current direction; False keeps the camera as it
        is (orbiting about its centre).
    title : str, optional
        Caption's first line instead of the model's name.
    samples : int
        Multisampling per pixel.

    Returns
    -------
    ClipInfo

    Raises
    ------
    FoldsimError
        Bad options, an unwritable target, or a blank first frame (GL not
        drawing); nothing is written.
    Cancelled
    """
    fmt = clip_format(path)
    if fmt == "png":
        return save_screenshot(viewport, path, size, t=t_to, overlay=overlay, fit=fit, title=title,
                               samples=samples)
    size = tuple(size)
    check_options(fmt, t_from, t_to, seconds, fps, size, orbit)
    target = _AtomicTarget(path)
    writer = None
    options = {"t_from": t_from, "t_to": t_to, "seconds": seconds, "fps": fps, "size": size, "orbit": orbit,
               "overlay": overlay, "fit": fit, "title": title, "samples": samples}
    info = ClipInfo(Path(path), fmt, 0, size, int(fps), float(t_from), float(t_to))
    n = frame_count(seconds, fps)
    try:
        writer = _WRITERS[fmt](target.path, size, fps)
        if fmt == "gif":
            writer.set_palette(_gif_palette(viewport, options, cancel))
        frames = render_frames(viewport, cancel=cancel, **options)
        try:
            for i, (t, colliding, rgba) in enumerate(frames):
                writer.write(rgba)
                if colliding:
                    if not info.collision_frames:
                        info.first_collision_t = t
                    info.collision_frames += 1
                if progress is not None:
                    progress(i + 1, n)
        finally:
            frames.close()
        writer.close()
        writer = None
        target.commit()
    except BaseException:
        if writer is not None:
            writer.abort()
        target.discard()
        raise
    info.frames = n
    return info


def _gif_palette(viewport, options, cancel):
    """The GIF's palette from a few frames of the clip drawn at half size."""
    w, h = options["size"]
    small = dict(options, size=(max(MIN_SIDE, w // 2), max(MIN_SIDE, h // 2)))
    n = frame_count(options["seconds"], options["fps"])
    pick = np.linspace(0, n - 1, min(n, 7)).round().astype(int)
    frames = render_frames(viewport, cancel=cancel, only=pick, **small)
    try:
        kept = [rgba for _, _, rgba in frames]
    finally:
        frames.close()
    return choose_palette(kept)


def save_screenshot(viewport, path, size=(1280, 720), t=None, overlay=False, fit=False, title=None, samples=4):
    """Save one frame of the view as a PNG.

    Parameters
    ----------
    viewport : FoldView
        With a mechanism set; its drive value and camera are restored afterwards.
    path : str or Path
        Target ``.png`` file, written atomically.
    size : (int, int)
        Width and height in pixels.
    t : float, optional
        Drive value to show (default the view's current one).
    overlay : bool
        Caption the frame (name, t, collision state).
    fit : bool
        Frame the model at t in the picture; False keeps the camera.
    title : str, optional
        Caption's first line instead of the model's name.
    samples : int
        Multisampling per pixel.

    Returns
    -------
    ClipInfo

    Raises
    ------
    FoldsimError
        Not a .png target, bad size, an unwritable target or a blank frame.
    """
    if clip_format(path) != "png":
        raise FoldsimError(f"{path}: a screenshot is saved as .png")
    size = tuple(size)
    t = float(viewport.t if t is None else t)
    check_options("png", t, t, size=size)
    target = _AtomicTarget(path)
    try:
        frames = render_frames(viewport, t, t, seconds=1, fps=1, size=size, overlay=overlay, fit=fit,
                               title=title, samples=samples)
        try:
            _, colliding, rgba = next(frames)
        finally:
            frames.close()
        if not _qimage(rgba).save(str(target.path), "PNG"):
            raise FoldsimError(f"{path}: cannot write file")
        target.commit()
    except BaseException:
        target.discard()
        raise
    return ClipInfo(Path(path), "png", 1, size, 0, t, t, collision_frames=int(colliding),
                    first_collision_t=t if colliding else None)
