"""`foldsim export`: write a mechanism for viewers, fabricators and reviewers."""

import argparse


def _views(text):
    """Parse ``--views``: comma-separated drive values (argparse reports a bad one, exit 2)."""
    try:
        values = [float(v) for v in text.split(",") if v.strip()]
    except ValueError:
        raise argparse.ArgumentTypeError(f"must be comma-separated numbers, not {text!r}") from None
    if not values:
        raise argparse.ArgumentTypeError("needs at least one drive value")
    return values


def register(sub):
    """Add the `export` subcommand to an argparse subparsers object."""
    ex = sub.add_parser(
        "export", help="write glTF, SVG flat pattern, CSV/JSON tables, HTML review report, STL/OBJ",
        description="Write a mechanism in the format named by the output file's suffix: .glb/.gltf "
                    "(animated hinges), .svg (flat pattern at true scale), .csv/.json (fold angles and "
                    "closure gaps), .html (design review report), .stl/.obj (posed mesh). See docs/export.md.")
    ex.add_argument("model", help="a .mech.json file")
    ex.add_argument("-o", "--output", dest="output", default=None, metavar="FILE",
                    help="output file; its suffix picks the format")
    ex.add_argument("--from", dest="t_from", type=float, default=0.0, metavar="T",
                    help="first drive value of the motion (default 0, flat)")
    ex.add_argument("--to", dest="to", default=None, metavar="T",
                    help="last drive value of the motion (default 1, closed). Deprecated: a file name "
                         "here is taken as the output file, as before, with a note")
    ex.add_argument("--to-t", dest="to_t", type=float, default=None, metavar="T",
                    help=argparse.SUPPRESS)
    ex.add_argument("--frames", type=int, default=None, metavar="N",
                    help="drive values sampled: table rows (default 11), gap-plot samples (default 41), "
                         "least number of glTF keyframes (default: as few as exact interpolation needs)")
    ex.add_argument("--seconds", type=float, default=4.0, metavar="S",
                    help="length of the glTF animation (default 4)")
    ex.add_argument("--t", dest="t", type=float, default=None, metavar="T",
                    help="pose of an STL/OBJ (default 1) or the glTF rest pose (default --from)")
    svg = ex.add_argument_group("flat pattern (.svg)")
    svg.add_argument("--seam-gap", type=float, default=0.0, metavar="LEN",
                     help="trim every cut edge so the folded seam leaves this gap (model units)")
    svg.add_argument("--tabs", type=float, default=0.0, metavar="LEN",
                     help="add a glue/registration tab of this width on one side of every cut edge")
    svg.add_argument("--no-labels", dest="labels", action="store_false",
                     help="leave out face, hinge and cut-edge numbers")
    rep = ex.add_argument_group("review report (.html)")
    rep.add_argument("--views", type=_views, default=None, metavar="T,T,...",
                     help="drive values pictured (default: --from, the middle, --to-t)")
    rep.add_argument("--clearance", type=float, default=0.0, metavar="LEN",
                     help="panels not in contact by design collide when nearer than this")
    rep.add_argument("--gap-tol", type=float, default=None, metavar="LEN",
                     help="largest closure gap that counts as meeting (default 1e-4 of the model's size)")
    rep.add_argument("--sheet", action="store_true",
                     help="the pattern is cut from one sheet: a self-overlapping flat layout is a problem")
    rep.add_argument("--study", default=None, metavar="STUDY",
                     help="add a net study (foldsim study): its Pareto front and its top nets' flat patterns")
    ex.set_defaults(run=run)


def resolve(args):
    """Settle the output file and the last drive value from the new and the old spellings.

    ``-o/--output FILE`` and ``--to T`` are the spellings of every subcommand;
    ``--to FILE`` (the output) and ``--to-t T`` are the old ones, kept for one
    release with a note on stderr.
    """
    from ..errors import FoldsimError
    from .options import deprecated, is_number

    t_to = None
    if args.to is not None:
        if is_number(args.to):
            t_to = float(args.to)
        elif args.output is None:
            deprecated("export --to FILE", "-o/--output FILE", "--to takes the last drive value, as in check "
                                                                "and record")
            args.output = args.to
        else:
            raise FoldsimError(f"--to: must be a drive value, not {args.to!r} (the output file is -o/--output)")
    if args.to_t is not None:
        deprecated("export --to-t T", "--to T")
        if t_to is not None and t_to != args.to_t:
            raise FoldsimError("--to-t: the same as --to T; give one of them")
        t_to = args.to_t
    if args.output is None:
        raise FoldsimError("export: name the output file with -o/--output FILE")
    args.t_to = 1.0 if t_to is None else t_to
    return args


def run(args):
    from ..export import export, format_of
    from ..io.mechanism_json import load

    resolve(args)
    format_of(args.output)  # refuse an unknown suffix before any work
    mech = load(args.model)
    what = export(mech, args.output, t_from=args.t_from, t_to=args.t_to, frames=args.frames,
                  seconds=args.seconds, t=args.t, seam_gap=args.seam_gap, tabs=args.tabs,
                  labels=args.labels, views=args.views, clearance=args.clearance, gap_tol=args.gap_tol,
                  sheet=args.sheet, study=args.study)
    print(f"wrote {args.output}: {what}")
    return 0
