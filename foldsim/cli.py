"""The `foldsim` command line.

Each subcommand lives in its own module under `foldsim.commands` and registers its
parser there. Exit codes: 0 everything holds, 1 a check found a problem, 2 bad
input (one line on stderr naming the file, the field and the index), 130
interrupted (Ctrl-C).
"""

import argparse
import os
import sys

from . import __version__
from .commands import app, check, export, nets, new, record, stackup, study
from .commands.options import print_notes
from .errors import FoldsimError

COMMANDS = (check, new, nets, stackup, study, export, record, app)


def _parser():
    parser = argparse.ArgumentParser(
        prog="foldsim",
        description="Kinematics and checks for gear-coupled rigid folding mechanisms.")
    parser.add_argument("--version", action="version", version=f"foldsim {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for command in COMMANDS:
        command.register(sub)
    return parser


def main(argv=None):
    """Run the command line; return the exit code."""
    parser = _parser()
    args = parser.parse_args(argv)
    try:
        if args.command is None:
            from .commands.app import launch

            return launch()
        code = args.run(args)
        print_notes()
        return code
    except FoldsimError as exc:
        print_notes(show=False)
        print(f"foldsim: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("foldsim: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        # The reader (say, `| head`) stopped early: not an error of ours.
        sys.stdout = open(os.devnull, "w")
        return 0


if __name__ == "__main__":
    sys.exit(main())
