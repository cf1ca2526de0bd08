"""`foldsim open`, and `foldsim` alone: the desktop app.

Qt is imported only when the app starts, so the rest of the command line (and its
tests) never loads it.
"""

import argparse
import sys
from pathlib import Path

from ..errors import FoldsimError

MESH_SUFFIXES = (".obj", ".off", ".stl", ".ply")
"""Files `open` turns into a mechanism the way `foldsim new` does."""


def register(sub):
    """Add the `open` subcommand to an argparse subparsers object."""
    from .new import GEARS, NETS

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


def shape_args(shape, size=None, units="mm", net=None, root=None, cut=None, gears="auto", teeth=None):
    """The options of `foldsim new` as its `build` takes them (nothing is written)."""
    return argparse.Namespace(shape=str(shape), size=size, units=units, net=net, root=root, cut=cut,
                              gears=gears, teeth=teeth, output="(not saved)", json=False)


def is_mesh(path):
    """Whether a path names a mesh file by its suffix."""
    return Path(path).suffix.lower() in MESH_SUFFIXES


def run(args):
    """Check that the file loads (a bad one fails like `foldsim check`), then open it."""
    built = None
    mesh_options = args.net is not None or args.root is not None or args.gears != "auto" or args.teeth
    if args.model is not None and is_mesh(args.model):
        from .new import build

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
        from ..gui.app import run as run_app
    except ImportError as exc:
        raise FoldsimError(f"the desktop app needs the gui extra (pip install 'foldsim[gui]'): {exc}") from None
    if built is None:
        return run_app(path, argv=[sys.argv[0]])
    return run_app(path, argv=[sys.argv[0]], built=built)
