"""`foldsim open`, and `foldsim` alone: the desktop app.

Qt is imported only when the app starts, so the rest of the command line (and its
tests) never loads it.
"""

import sys

from ..errors import FoldsimError


def register(sub):
    """Add the `open` subcommand to an argparse subparsers object."""
    parser = sub.add_parser("open", help="open a mechanism in the desktop app",
                            description="Open a mechanism in the desktop app: scrub the drive from flat "
                                        "to closed and see collisions and open cut edges.")
    parser.add_argument("model", nargs="?", default=None,
                        help="a .mech.json file (default: the bundled demo)")
    parser.set_defaults(run=run)


def run(args):
    """Check that the file loads (a bad one fails like `foldsim check`), then open it."""
    if args.model is not None:
        from ..io.mechanism_json import load

        load(args.model)
    return launch(args.model)


def launch(path=None):
    """Start the desktop app on a file (the bundled demo if None); return its exit code."""
    try:
        from ..gui.app import run as run_app
    except ImportError as exc:
        raise FoldsimError(f"the desktop app needs the gui extra (pip install 'foldsim[gui]'): {exc}") from None
    return run_app(path, argv=[sys.argv[0]])
