"""`foldsim record`: a video clip, animated GIF or still of a mechanism folding.

The options are checked and the model is loaded before anything graphical
starts, so bad input fails at once with the usual one line and exit code 2.
Only then is an X display made sure of (a virtual one when there is none, see
`foldsim.gui.record.display`) and Qt imported.
"""

from ..errors import FoldsimError

FITS = {"clip": True, "pose": "pose", "motion": "motion"}
"""``--fit`` choices and the recorder's ``fit`` for each (`foldsim.gui.record.framing.fit_values`)."""

WIDGET_HEIGHT = 480
"""Height of the hidden 3D view the frames are drawn from; lines and labels scale
with the frame's height over this, so a 720p frame looks like a 1.5x screen."""


def _number(text, flag, kind=float):
    """An option's value as a number; a one-line FoldsimError (exit 2) if it is not one.

    Examples
    --------
    >>> _number("0.5", "--to"), _number("24", "--fps", int)
    (0.5, 24)
    >>> _number("ten", "--fps", int)
    Traceback (most recent call last):
    ...
    foldsim.errors.FoldsimError: --fps: must be a whole number, not 'ten'
    """
    if not isinstance(text, str):
        return text
    try:
        return kind(text)
    except ValueError:
        what = "a whole number" if kind is int else "a number"
        raise FoldsimError(f"{flag}: must be {what}, not {text!r}") from None


def register(sub):
    """Add the `record` subcommand to an argparse subparsers object."""
    parser = sub.add_parser(
        "record", help="record the folding motion as an MP4 or GIF clip, or a PNG still",
        description="Record a mechanism folding from --from to --to as a clip for a design review. The "
                    "output's suffix picks the format: .mp4 (H.264), .gif (loops forever) or .png (one "
                    "frame at --to). Each frame is captioned with the model's name, t and whether panels "
                    "collide. Needs the gui extra and, on Linux, an X display or Xvfb (started by itself "
                    "when DISPLAY is unset). See docs/record.md.")
    parser.add_argument("model", help="a .mech.json file")
    parser.add_argument("-o", "--output", required=True, metavar="FILE",
                        help="output file: .mp4, .gif or .png")
    parser.add_argument("--from", dest="t_from", default="0", metavar="T",
                        help="drive value at the first frame (default 0, flat)")
    parser.add_argument("--to", dest="t_to", default="1", metavar="T",
                        help="drive value at the last frame, and of a .png (default 1, closed)")
    parser.add_argument("--seconds", default="4", metavar="S",
                        help="length of the clip (default 4)")
    parser.add_argument("--fps", default="30", metavar="N",
                        help="frames per second (default 30; at most 120 for MP4, 50 for GIF)")
    parser.add_argument("--size", default="1280x720", metavar="WxH",
                        help="frame size in pixels (default 1280x720; even for MP4)")
    parser.add_argument("--orbit", nargs="?", const=True, default=False, metavar="DEG",
                        help="turn the camera slowly about the vertical over the clip "
                             "(default 40 degrees when given without a number)")
    parser.add_argument("--view", choices=("iso", "front", "top", "side"), default="iso",
                        help="camera direction (default iso)")
    parser.add_argument("--fit", choices=("clip", "pose", "motion"), default="clip",
                        help="framing: every shape of the clip (default), the pose of the last frame (a "
                             "closed model fills the frame; a .png's only pose), or the whole motion from "
                             "flat to closed")
    parser.add_argument("--no-overlay", dest="overlay", action="store_false",
                        help="leave out the caption (name, t, collision state)")
    drawn = parser.add_mutually_exclusive_group()
    drawn.add_argument("--thin", dest="draw", action="store_const", const="thin", default="solids",
                       help="a file with a build object: draw the flat panels instead of its thick "
                            "panels and gear bodies")
    drawn.add_argument("--no-gears", dest="draw", action="store_const", const="panels",
                       help="a file with a build object: draw its thick panels without the gear bodies")
    parser.set_defaults(run=run)


def run(args):
    """Check the options, load the model, draw the frames and write the file; return 0."""
    from ..gui.record.recorder import check_options, check_target, clip_format, parse_size
    from ..io.mechanism_json import load

    fmt = clip_format(args.output)
    size = parse_size(args.size)
    t_from, t_to = _number(args.t_from, "--from"), _number(args.t_to, "--to")
    seconds, fps = _number(args.seconds, "--seconds"), _number(args.fps, "--fps", int)
    orbit = _number(args.orbit, "--orbit")
    check_options(fmt, t_from, t_to, seconds, fps, size, orbit)
    check_target(args.output)
    mech = load(args.model)
    info = record(mech, args.output, fmt=fmt, t_from=t_from, t_to=t_to, seconds=seconds, fps=fps, size=size,
                  orbit=orbit, overlay=args.overlay, view=args.view, fit=FITS[args.fit], draw=args.draw)
    print(info.summary())
    return 0


def build_collisions(mech, lo, hi):
    """For a file with a ``build`` object: what collides from t = lo to hi, as `check` finds it.

    The thin panels' sweep and the build's thick-panel clashes and gear contacts
    (`foldsim.report.build_checks`), as intervals ``{"faces", "first_t", "last_t"}``
    for `FoldView.set_known_collisions`, so that a clip's caption says what the
    app's strip shows. None for a file without one (each frame is then queried).
    """
    from ..analysis.collision import collision_intervals
    from ..build.spec import build_spec
    from ..gearing import fold_schedule
    from ..report import build_checks

    if build_spec(mech) is None:
        return None
    schedule = fold_schedule(mech)
    found = list(collision_intervals(mech, schedule, lo, hi))
    keys, _ = build_checks(mech, schedule, lo, hi)
    found += [{"faces": list(c["faces"]), "first_t": c["first_t"], "last_t": c["last_t"]}
              for c in keys.get("panel_clashes", []) + keys.get("gear_contacts", []) if "last_t" in c]
    return found


def _swept_range(t_from, t_to):
    """The range of t whose collisions a clip reads: its own, or a still's t with the sweep's resolution about it."""
    from ..tolerances import DEFAULT

    lo, hi = sorted((float(t_from), float(t_to)))
    if hi - lo < 2 * DEFAULT.t_resolution:
        mid = 0.5 * (lo + hi)
        lo, hi = max(-1.0, mid - DEFAULT.t_resolution), min(1.0, mid + DEFAULT.t_resolution)
    return lo, hi


def drawn_solids(mech, draw="solids"):
    """The solids a view draws for ``draw`` ("solids", "panels" or "thin"): None for the flat panels."""
    from ..build.gears import build_solids
    from ..build.spec import build_spec

    spec = build_spec(mech)
    if spec is None or draw == "thin":
        return None
    from ..gui.window.model import DETAIL_PAIRS

    made = build_solids(mech, spec, coarse=len(spec.gears) > DETAIL_PAIRS)
    return [s for s in made if draw == "solids" or s.kind == "panel"]


def record(mech, output, fmt, size, view="iso", t_to=1.0, fit=True, draw="solids", **options):
    """Draw a mechanism in a hidden 3D view and record it (see `foldsim.gui.record.recorder`).

    Parameters
    ----------
    mech : Mechanism
    output : str
    fmt : str
    size : (int, int)
    view : str
        Standard camera direction (`foldsim.gui.view.viewport.VIEWS`).
    t_to : float
    fit : True, "pose" or "motion"
        Framing (`foldsim.gui.record.recorder.record_clip`).
    draw : str
        For a file with a ``build`` object: "solids" (thick panels and gear
        bodies), "panels" (thick panels only) or "thin" (the flat panels).
        Collisions are then the `check`'s, thick panels and gear bodies included,
        whatever is drawn (`build_collisions`).
    **options
        The rest of `record_clip`'s options.

    Returns
    -------
    ClipInfo
    """
    from ..gui.record.display import ensure_display

    ensure_display()
    try:
        from PySide6 import QtCore, QtWidgets

        from ..gui.record import recorder
        from ..gui.view.viewport import FoldView
    except ImportError as exc:
        raise FoldsimError(f"recording needs the gui extra (pip install 'foldsim[gui]'): {exc}") from None
    app = QtWidgets.QApplication.instance() or QtWidgets.QApplication(["foldsim"])
    widget = FoldView()
    try:
        widget.setAttribute(QtCore.Qt.WidgetAttribute.WA_DontShowOnScreen)
        w, h = size
        widget.resize(max(1, round(WIDGET_HEIGHT * w / h)), WIDGET_HEIGHT)
        widget.show()
        app.processEvents()
        if not widget.isValid():
            widget.grabFramebuffer()
        if not widget.isValid():
            raise FoldsimError("cannot draw: no OpenGL context could be made on this display")
        swept = _swept_range(options.get("t_from", 0.0), t_to)
        known = build_collisions(mech, *swept)
        widget.set_mechanism(mech)
        solids = drawn_solids(mech, draw)
        if solids:
            widget.set_solids(solids)
        if known is not None:
            widget.set_known_collisions(known, swept)
        widget.set_t(t_to)
        widget.set_view(view)
        if fmt == "png":
            return recorder.save_screenshot(widget, output, size, t=t_to, overlay=options["overlay"], fit=fit)
        return recorder.record_clip(widget, output, t_to=t_to, size=size, fit=fit, **options)
    finally:
        widget.close()
        widget.deleteLater()
        app.processEvents()
