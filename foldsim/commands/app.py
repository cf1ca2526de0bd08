"""`foldsim open`, and `foldsim` alone: the desktop app.

Qt is imported only when the app starts, so the rest of the command line (and its
tests) never loads it.
"""

import sys

from ..design import GEARS, NETS, build, is_mesh, shape_args
from ..errors import FoldsimError


def register(sub):
    """Add the `open` subcommand to an argparse subparsers object."""
    parser = sub.add_parser("open", help="open a mechanism or a mesh in the desktop app",
                            description="Open a mechanism in the desktop app: scrub the drive from flat "
                                        "to closed and see collisions and open cut edges. A mesh file "
                                        "(OBJ, OFF, STL, PLY) is unfolded and geared as by `foldsim new`.")
    parser.add_argument("model", nargs="?", default=None,
                        help="a .mech.json file or a mesh file (default: the bundled demo)")
    parser.add_argument("--net", choices=NETS, default=None, help="mesh files: how to choose the net (as for new)")
    parser.add_argument("--root", type=int, default=None, metavar="F", help="mesh files: the face that stays put")
    parser.add_argument("--gears", choices=GEARS, default="auto", help="mesh files: gears (as for new)")
    parser.add_argument("--teeth", default=None, metavar="MIN:MAX", help="mesh files: integer teeth in this range")
    parser.set_defaults(run=run)


def run(args):
    """Check that the file loads (a bad one fails like `foldsim check`), then open it."""
    built = None
    mesh_options = args.net is not None or args.root is not None or args.gears != "auto" or args.teeth
    if args.model is not None and is_mesh(args.model):
        recipe = shape_args(args.model, net=args.net, root=args.root, gears=args.gears, teeth=args.teeth)
        built = (recipe, build(recipe)[0])
    elif mesh_options:
        raise FoldsimError("--net, --root, --gears and --teeth apply to mesh files (.obj, .off, .stl, .ply) only")
    elif args.model is not None:
        from ..io.mechanism_json import load

        load(args.model)
    return launch(args.model, built)


def launch(path=None, built=None):
    """Start the desktop app on a file (the bundled demo if None); return its exit code.

    ``built`` is a mesh file's (`shape_args` options, mechanism), already made.
    """
    try:
        from ..gui.window.app import run as run_app
    except ImportError as exc:
        raise FoldsimError(f"the desktop app needs the gui extra (pip install 'foldsim[gui]'): {exc}") from None
    if built is None:
        return run_app(path, argv=[sys.argv[0]])
    return run_app(path, argv=[sys.argv[0]], built=built)
