"""Record the 3D view's motion as a video clip, an animated GIF or a still image.

A clip is a sequence of offscreen frames of a `view.viewport.FoldView`
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

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ...errors import FoldsimError
from .caption import _Caption, _qimage, clip_captions, collision_text, draw_overlay, overlay_lines, t_text
from .clip_options import (FORMATS, MAX_FPS, MAX_SECONDS, MAX_SIDE, MIN_SIDE, ORBIT_DEGREES, check_options,
                           clip_format, clip_plan, frame_count, orbit_degrees, parse_size)
from .encoders import _WRITERS, GIF_CELL_BITS, _AtomicTarget, check_target, choose_palette, palette_lookup
from .framing import MARGIN, _camera, _set_camera, hull_meets_box, plan_camera

__all__ = [  # the recorder's whole interface, including what it takes from its helper modules
    "FORMATS", "GIF_CELL_BITS", "MARGIN", "MAX_FPS", "MAX_SECONDS", "MAX_SIDE", "MIN_SIDE", "ORBIT_DEGREES",
    "Cancelled", "ClipInfo", "check_options", "check_target", "choose_palette", "clip_captions", "clip_format",
    "clip_plan", "collision_text", "draw_overlay", "frame_count", "hull_meets_box", "is_blank", "orbit_degrees",
    "overlay_lines", "palette_lookup", "parse_size", "plan_camera", "record_clip", "render_frames",
    "save_screenshot", "t_text",
]


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
            cameras = plan_camera(viewport, t_values, turns, size, reserve=reserve, fit=fit)
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


# ------------------------------------------------------------------ recording


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
    fit : bool or str
        Frame the whole clip (every shape over the range of t, at every orbit
        angle) from the view's current direction; ``"pose"`` frames the shape at
        the last frame (a closed model fills the frame), ``"motion"`` every shape
        from flat to closed (`framing.fit_values`); False keeps the camera as it
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
    written = False
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
        written = True
    finally:
        if not written:
            if writer is not None:
                writer.abort()
            target.discard()
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
    fit : bool or str
        Frame the model at t in the picture (True or ``"pose"``), or every shape
        from flat to closed (``"motion"``); False keeps the camera.
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
    written = False
    try:
        frames = render_frames(viewport, t, t, seconds=1, fps=1, size=size, overlay=overlay,
                               fit="pose" if fit is True else fit,
                               title=title, samples=samples)
        try:
            _, colliding, rgba = next(frames)
        finally:
            frames.close()
        if not _qimage(rgba).save(str(target.path), "PNG"):
            raise FoldsimError(f"{path}: cannot write file")
        target.commit()
        written = True
    finally:
        if not written:
            target.discard()
    return ClipInfo(Path(path), "png", 1, size, 0, t, t, collision_frames=int(colliding),
                    first_collision_t=t if colliding else None)

