"""Options shared by the subcommands, and the old spellings they still take.

Across subcommands ``-o/--output`` names the file (or folder) written and
``--from``/``--to`` the drive values at either end of a range of t. Spellings
from before that rule still work for one release, with a note on stderr.
"""

import argparse
import sys

_NOTES = []


def deprecated(old, new, why=""):
    """Note that an old option spelling still works but will go; `print_notes` shows it.

    The note goes to stderr once the command has run: refused input still gets
    its one line alone.
    """
    tail = f" ({why})" if why else ""
    _NOTES.append(f"foldsim: note: {old} is deprecated and will be removed in the next release; use {new}{tail}")


def print_notes(stream=None, show=True):
    """Write the deprecation notes gathered so far to stderr (with ``show``) and forget them.

    Examples
    --------
    >>> import io
    >>> deprecated("nets --out DIR", "-o/--output DIR")
    >>> err = io.StringIO()
    >>> print_notes(err)
    >>> err.getvalue()
    'foldsim: note: nets --out DIR is deprecated and will be removed in the next release; use -o/--output DIR\\n'
    """
    stream = sys.stderr if stream is None else stream
    notes = list(_NOTES)
    _NOTES.clear()
    if show:
        for note in notes:
            print(note, file=stream)


def is_number(text):
    """Whether an option's text reads as a number (so ``--to`` means a drive value, not a file).

    Examples
    --------
    >>> is_number("0.5"), is_number("-1"), is_number("box.glb"), is_number("nan")
    (True, True, False, True)
    """
    try:
        float(text)
    except (TypeError, ValueError):
        return False
    return True


def drive_value(text, flag):
    """An option's text as a drive value; argparse-style refusal if it is not a number."""
    try:
        return float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{flag}: must be a number, not {text!r}") from None
