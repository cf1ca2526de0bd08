"""A clip's options, checked, and its plan: the drive value and camera turn of every frame.

Nothing here needs Qt, so the command line can refuse bad input before it
starts a display.
"""

import math
from pathlib import Path

import numpy as np

from ...errors import FoldsimError

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
