"""Limits on what an input file may hold, the helpers that enforce them, and how much
work net counting, listing and the stack-up do by default.

Every input limit is far beyond what a real design meets (docs/format.md, "Limits"):
they exist so that a damaged or hostile file is refused with one line that names
the limit, instead of exhausting memory, time or the float range. The module loads
nothing heavy, so that the command line can show the defaults in its ``--help``
without loading numpy, scipy and networkx.
"""

import math

MAX_FILE_BYTES = 64 * 2**20
"""Largest mechanism file read (bytes); a 200,000-panel file is about 30 MiB."""
MAX_MESH_BYTES = 256 * 2**20
"""Largest mesh file read (bytes); 5 million binary-STL triangles."""
MAX_VERTICES = 1_000_000
MAX_FACES = 200_000
"""Most faces (panels) of a mechanism; hinges and couplings are limited alike."""
MAX_HINGES = MAX_FACES
MAX_COUPLINGS = MAX_FACES
MAX_FACE_VERTICES = 10_000
"""Most corners of one face."""
MAX_TRIANGLES = 2_000_000
"""Most triangles of a mesh file."""
MAX_DEPTH = 32
"""Deepest nesting of JSON arrays and objects (the format itself needs 5)."""
MAX_NUMBER_CHARS = 100
"""Longest number literal (a float64 needs at most 24 characters)."""
MAX_STRING_CHARS = 10_000
"""Longest string, keys included."""
MAX_COORDINATE = 1e50
"""Largest coordinate magnitude, in the file's units."""
MIN_SIZE = 1e-50
"""Smallest model size (bounding-box diagonal) of a model that is not a point."""
MAX_OFFSET = 1e6
"""Largest coordinate magnitude as a multiple of the model's size: beyond it float64
round-off reaches the engine's tolerances."""
MAX_RATIO = 1e6
"""Largest gear ratio either way: every ``|ratio|`` lies in [1 / MAX_RATIO, MAX_RATIO]."""
MAX_TEETH = 1_000_000
"""Most teeth of one gear."""
MAX_FOLD_TURNS = 16
"""Most full turns any hinge makes between t = 0 and t = 1 under the gearing."""
MIN_RATE_FACTOR = 1e-9
"""Smallest fold rate of a geared hinge, as a share of its component's start hinge's."""
MAX_FRAMES = 10_000
"""Most drive values an export samples (``--frames``)."""
MAX_FRAME_PANELS = 5_000_000
"""Most panel poses (frames x panels) an export computes: 640 MB of 4 x 4 transforms."""
MAX_SIDES = 200
"""Most sides of a built-in prism's or antiprism's base: from 836 sides neighbouring side
faces lie within the planarity tolerance of one plane and merge, and `foldsim new`
takes seconds per hundred sides."""
MAX_SOLID_SIZE = 1e40
"""Largest ``--size`` of a built-in solid (its coordinates must stay within `MAX_COORDINATE`)."""
QUOTE_CHARS = 40
"""Longest value quoted in an error message."""


DEFAULT_LIMIT = 10_000_000
"""Spanning trees `netcount` enumerates before it stops listing (the counts are exact either way)."""

DEFAULT_MAX_STATES = 1_000_000
"""Partial states one symmetry's fixed-tree count may visit."""

DEFAULT_SAMPLES = 10_000
"""Monte Carlo samples of the play stack-up."""

DEFAULT_TIMES = (0.25, 0.5, 0.75, 1.0)
"""Drive values the play stack-up analyses."""


def quote(value, width=QUOTE_CHARS):
    """A value as short JSON-like text for an error message, cut with an ellipsis.

    Parameters
    ----------
    value : object
        Anything a JSON document can hold (other objects are shown by type).
    width : int
        Longest result.

    Returns
    -------
    str

    Examples
    --------
    >>> quote([1, 2.5, "a"])
    '[1, 2.5, "a"]'
    >>> quote("x" * 100)
    '"xxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxx...'
    >>> quote(10**400)
    '<integer of 401 digits>'
    """
    text = _short(value, width + 1)
    return text if len(text) <= width else text[:width - 3] + "..."


def _short(value, budget):
    """JSON-like text of ``value``, stopping soon after ``budget`` characters."""
    if isinstance(value, bool) or value is None:
        return {True: "true", False: "false", None: "null"}[value]
    if isinstance(value, int):
        if abs(value) >= 10**30:
            return f"<integer of {_digits(value)} digits>"
        return str(value)
    if isinstance(value, float):
        return {math.inf: "Infinity", -math.inf: "-Infinity"}.get(value, "NaN" if value != value else repr(value))
    if isinstance(value, str):
        cut = value[:budget]
        return '"' + cut.encode("ascii", "backslashreplace").decode("ascii").replace('"', '\\"') + \
            ('"' if len(cut) == len(value) else "")
    if isinstance(value, (list, tuple, dict)):
        items = value.items() if isinstance(value, dict) else value
        opening, closing = ("{", "}") if isinstance(value, dict) else ("[", "]")
        out, used = [], 1
        for item in items:
            if used > budget:
                return opening + ", ".join(out) + ", ..."
            if isinstance(value, dict):
                text = _short(str(item[0]), budget - used) + ": " + _short(item[1], budget - used)
            else:
                text = _short(item, budget - used)
            out.append(text)
            used += len(text) + 2
        return opening + ", ".join(out) + closing
    return f"<{type(value).__name__}>"


def _digits(value):
    """Decimal digits of a (possibly huge) integer, without converting it to text."""
    n = abs(value)
    estimate = int(n.bit_length() * math.log10(2)) + 1
    return estimate if n >= 10 ** (estimate - 1) else estimate - 1


def as_float(value):
    """``float(value)``, with integers beyond the float range becoming infinity.

    Examples
    --------
    >>> as_float(10**400)
    inf
    """
    try:
        return float(value)
    except OverflowError:
        return math.inf if value > 0 else -math.inf


def check_count(n, limit, field, what):
    """Raise `ModelError` if a list holds more than ``limit`` entries."""
    from .errors import ModelError

    if n > limit:
        raise ModelError(f"{field}: {n:,} {what}, more than the limit of {limit:,} (docs/format.md, Limits)")


def check_text(value, field):
    """A string field shown in reports: a string, not too long, valid Unicode.

    Raises
    ------
    ModelError
        For a non-string, a string over `MAX_STRING_CHARS`, or a lone surrogate
        (JSON text can spell one with a ``\\ud800`` escape; no encoding can print it).
    """
    from .errors import ModelError

    if not isinstance(value, str):
        raise ModelError(f"{field}: must be a string")
    if len(value) > MAX_STRING_CHARS:
        raise ModelError(f"{field}: a string of {len(value):,} characters, longer than the limit of "
                         f"{MAX_STRING_CHARS:,}")
    try:
        value.encode("utf-8")
    except UnicodeEncodeError as exc:
        raise ModelError(f"{field}: not valid Unicode text (a lone surrogate "
                         f"{value[exc.start].encode('unicode_escape').decode('ascii')} at character {exc.start})") from None
    return value


def unknown_key(value, field, allowed):
    """The first (sorted) key of a JSON object that is not allowed, or None.

    Parameters
    ----------
    value : object
        The parsed JSON value, which must be an object.
    field : str
        Its place in the document, for the message.
    allowed : set of str

    Raises
    ------
    ModelError
        When ``value`` is not an object.

    Examples
    --------
    >>> unknown_key({"a": 1, "z": 2, "b": 3}, "x", {"a"})
    'b'
    """
    from .errors import ModelError

    if not isinstance(value, dict):
        raise ModelError(f"{field}: must be an object")
    unknown = sorted(set(value) - set(allowed))
    return unknown[0] if unknown else None

