"""Read and write mechanism files (`*.mech.json`, schema ``foldsim.mechanism/1``).

The format is documented in docs/format.md. Every problem raises `ModelError`
with one line naming the file, the field and the index.
"""

import json
import math
import os
import re
import tempfile
import time
from pathlib import Path

import numpy as np

from .. import limits
from ..errors import ModelError
from ..limits import as_float, check_count, check_text, quote
from ..model import Coupling, build_mechanism
from ..tolerances import DEFAULT

SCHEMA = "foldsim.mechanism/1"


def load(path, tol=DEFAULT):
    """Load a mechanism file.

    Parameters
    ----------
    path : str or Path
    tol : Tolerances

    Returns
    -------
    Mechanism

    Raises
    ------
    ModelError
        ``"<file>: <field>[<index>]: <what is wrong>"``.
    """
    path = Path(path)
    try:
        if path.is_file() and path.stat().st_size > limits.MAX_FILE_BYTES:
            raise ModelError(f"{path}: the file is {_mib(path.stat().st_size)}, larger than the limit of "
                             f"{_mib(limits.MAX_FILE_BYTES)} (docs/format.md, Limits)")
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        reason = exc.strerror if isinstance(exc, OSError) and exc.strerror else "not readable as UTF-8 text"
        raise ModelError(f"{path}: cannot read file: {reason}") from None
    return loads(text, source=str(path), tol=tol)


def _mib(n):
    return f"{n / 2**20:,.1f} MiB" if n < 2**30 else f"{n / 2**30:,.1f} GiB"


class _LongNumber(Exception):
    """A number literal longer than `limits.MAX_NUMBER_CHARS` (raised by the parser hooks)."""


def _parse_number(kind):
    def parse(literal):
        if len(literal) > limits.MAX_NUMBER_CHARS:
            raise _LongNumber(literal)
        return kind(literal)
    return parse


_PARSE = {"parse_int": _parse_number(int), "parse_float": _parse_number(float)}


def loads(text, source="<string>", tol=DEFAULT):
    """Parse a mechanism document from JSON text; see `load`."""
    if not text.strip():
        raise ModelError(f"{source}: file is empty")
    if len(text) > limits.MAX_FILE_BYTES:
        raise ModelError(f"{source}: the text has {len(text):,} characters, more than the limit of "
                         f"{limits.MAX_FILE_BYTES:,} (docs/format.md, Limits)")
    try:
        doc = json.loads(text, **_PARSE)
    except json.JSONDecodeError as exc:
        raise ModelError(f"{source}: invalid JSON at line {exc.lineno} column {exc.colno}: {exc.msg}") from None
    except _LongNumber as exc:
        literal = str(exc)
        line = text.count("\n", 0, max(text.find(literal), 0)) + 1
        raise ModelError(f"{source}: line {line}: a number of {len(literal):,} characters "
                         f"({quote(literal[:20] + '...')}), longer than the limit of "
                         f"{limits.MAX_NUMBER_CHARS} (docs/format.md, Limits)") from None
    except RecursionError:
        raise ModelError(f"{source}: arrays or objects nested deeper than the limit of "
                         f"{limits.MAX_DEPTH} levels (docs/format.md, Limits)") from None
    try:
        return from_document(doc, tol=tol)
    except ModelError as exc:
        raise ModelError(f"{source}: {exc}") from None


def _check_structure(doc):
    """Nesting depth and string lengths of every top-level value, without recursion."""
    for key, value in doc.items():
        field = quote(key) if len(key) > limits.QUOTE_CHARS else key
        check_text(key, "keys")
        stack = [(value, 1)]
        while stack:
            item, depth = stack.pop()
            if isinstance(item, str):
                if len(item) > limits.MAX_STRING_CHARS:
                    raise ModelError(f"{field}: a string of {len(item):,} characters, longer than the "
                                     f"limit of {limits.MAX_STRING_CHARS:,} (docs/format.md, Limits)")
            elif isinstance(item, (list, dict)):
                if depth >= limits.MAX_DEPTH:
                    raise ModelError(f"{field}: arrays or objects nested deeper than the limit of "
                                     f"{limits.MAX_DEPTH} levels (docs/format.md, Limits)")
                if isinstance(item, dict):
                    for k in item:
                        if len(k) > limits.MAX_STRING_CHARS:
                            raise ModelError(f"{field}: a key of {len(k):,} characters, longer than the "
                                             f"limit of {limits.MAX_STRING_CHARS:,} (docs/format.md, Limits)")
                    item = item.values()
                stack.extend((x, depth + 1) for x in item)


def _int(value, field, minimum=None, count=None, what=None):
    """An integer; with ``count``, an index in 0..count-1 of a ``what``."""
    if isinstance(value, bool) or not isinstance(value, int):
        raise ModelError(f"{field}: must be an integer, not {quote(value)}")
    if minimum is not None and value < minimum:
        raise ModelError(f"{field}: must be at least {minimum}, not {quote(value)}")
    if count is not None and not 0 <= value < count:
        raise ModelError(f"{field}: {what} {quote(value)} out of range (0..{count - 1})")
    return value


def _number(value, field):
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(as_float(value)):
        raise ModelError(f"{field}: must be a finite number, not {quote(value)}")
    return float(value)


def _list(doc, key, required=True):
    value = doc.get(key, None if required else [])
    if value is None:
        raise ModelError(f"{key}: missing")
    if not isinstance(value, list):
        raise ModelError(f"{key}: must be a list")
    check_count(len(value), _LIMITS[key], key, "entries")
    return value


_LIMITS = {"vertices": limits.MAX_VERTICES, "faces": limits.MAX_FACES, "hinges": limits.MAX_HINGES,
           "couplings": limits.MAX_COUPLINGS}


def from_document(doc, tol=DEFAULT):
    """Build a mechanism from a parsed JSON document (a dict).

    Returns
    -------
    Mechanism
    """
    if not isinstance(doc, dict):
        raise ModelError("the document must be a JSON object")
    _check_structure(doc)
    schema = doc.get("schema")
    if schema != SCHEMA:
        shown = repr(schema) if isinstance(schema, str) and len(schema) <= limits.QUOTE_CHARS else quote(schema)
        raise ModelError(f"schema: expected {SCHEMA!r}, found {shown}")
    state = doc.get("state", "closed")
    if state not in ("closed", "flat"):
        raise ModelError(f"state: must be 'closed' or 'flat', not {quote(state)}")
    vertices = []
    for i, v in enumerate(_list(doc, "vertices")):
        if not isinstance(v, list) or len(v) != 3:
            raise ModelError(f"vertices[{i}]: must be [x, y, z]")
        vertices.append([_number(x, f"vertices[{i}]") for x in v])
    faces = []
    n_vertices = len(vertices)
    for i, f in enumerate(_list(doc, "faces")):
        if not isinstance(f, list):
            raise ModelError(f"faces[{i}]: must be a list of vertex indices")
        check_count(len(f), limits.MAX_FACE_VERTICES, f"faces[{i}]", "vertices")
        faces.append([_int(v, f"faces[{i}]", count=n_vertices, what="vertex index") for v in f])
    n_faces = len(faces)
    hinges, angles = [], []
    for i, h in enumerate(_list(doc, "hinges")):
        if not isinstance(h, dict) or not isinstance(h.get("faces"), list) or len(h["faces"]) != 2:
            raise ModelError(f"hinges[{i}]: must be an object with \"faces\": [a, b]")
        hinges.append([_int(f, f"hinges[{i}]", count=n_faces, what="face") for f in h["faces"]])
        if state == "flat":
            if "closed_angle_deg" not in h:
                raise ModelError(f"hinges[{i}]: closed_angle_deg is required when state is flat")
            angles.append(math.radians(_number(h["closed_angle_deg"], f"hinges[{i}].closed_angle_deg")))
    couplings = [_coupling(c, i, len(hinges)) for i, c in enumerate(_list(doc, "couplings", required=False))]
    root = _int(doc.get("root", 0), "root", count=max(n_faces, 1), what="face")
    drive = _int(doc.get("drive", 0), "drive", count=max(len(hinges), 1), what="hinge")
    name = check_text(doc.get("name", ""), "name")
    units = check_text(doc.get("units", "mm"), "units")
    known = {"schema", "name", "units", "state", "vertices", "faces", "root", "hinges", "couplings", "drive"}
    extras = {k: v for k, v in doc.items() if k not in known}
    if "tolerances" in extras:  # optional hinge play and gear backlash, docs/stackup.md
        from ..stackup import parse_tolerances

        parse_tolerances(extras["tolerances"], len(hinges), len(couplings))
    mech = build_mechanism(
        np.array(vertices, dtype=float).reshape(-1, 3), faces, np.array(hinges, np.int64).reshape(-1, 2),
        root=root, drive=drive, couplings=couplings, state=state,
        closed_angles=np.array(angles) if state == "flat" else None,
        name=name, units=units, extras=extras, tol=tol)
    if "build" in extras:  # optional thick panels, gears and stops, docs/build.md
        from ..build.spec import build_spec

        build_spec(mech, tol=tol)
    return mech


def _coupling(c, i, n_hinges):
    field = f"couplings[{i}]"
    if not isinstance(c, dict) or not isinstance(c.get("hinges"), list) or len(c["hinges"]) != 2:
        raise ModelError(f"{field}: must be an object with \"hinges\": [i, j]")
    pair = tuple(_int(h, field, count=n_hinges, what="hinge") for h in c["hinges"])
    if ("ratio" in c) == ("teeth" in c):
        raise ModelError(f"{field}: give exactly one of \"ratio\" or \"teeth\"")
    if "teeth" in c:
        teeth = c["teeth"]
        if (not isinstance(teeth, list) or len(teeth) != 2
                or any(isinstance(z, bool) or not isinstance(z, int) or z <= 0 for z in teeth)):
            raise ModelError(f"{field}.teeth: must be two positive integers, not {quote(teeth)}")
        if max(teeth) > limits.MAX_TEETH:
            raise ModelError(f"{field}.teeth: {quote(max(teeth))} teeth, more than the limit of "
                             f"{limits.MAX_TEETH:,} (docs/format.md, Limits)")
        return Coupling(pair, teeth[0] / teeth[1], tuple(teeth))
    ratio = c["ratio"]
    if (isinstance(ratio, bool) or not isinstance(ratio, (int, float)) or not math.isfinite(as_float(ratio))
            or ratio == 0):
        raise ModelError(f"{field}.ratio: must be a finite non-zero number, not {quote(ratio)}")
    return Coupling(pair, float(ratio))


def to_document(mech):
    """The mechanism as a JSON-ready dict in its source state.

    Returns
    -------
    dict
    """
    hinges = []
    for i, (a, b) in enumerate(mech.hinge_faces.tolist()):
        entry = {"faces": [a, b]}
        if mech.state == "flat":
            entry["closed_angle_deg"] = float(np.degrees(mech.closed_angles[i]))
        hinges.append(entry)
    couplings = [{"hinges": list(c.hinges), "teeth": list(c.teeth)} if c.teeth
                 else {"hinges": list(c.hinges), "ratio": c.ratio} for c in mech.couplings]
    doc = {"schema": SCHEMA, "name": mech.name, "units": mech.units, "state": mech.state,
           "vertices": mech.vertices.tolist(), "faces": [f.tolist() for f in mech.faces],
           "root": mech.root, "hinges": hinges, "couplings": couplings, "drive": mech.drive}
    doc.update(mech.extras)
    return doc


def save(mech, path):
    """Write a mechanism file atomically (a temporary file renamed into place).

    Parameters
    ----------
    mech : Mechanism
    path : str or Path
    """
    write_atomic(path, dumps(mech))


def dumps(mech):
    """The mechanism file's text: one vertex, face or hinge per line."""
    doc = to_document(mech)
    lines = ["{"]
    items = list(doc.items())
    for n, (key, value) in enumerate(items):
        comma = "," if n < len(items) - 1 else ""
        if isinstance(value, list) and value:
            rows = ",\n    ".join(json.dumps(v) for v in value)
            lines.append(f"  {json.dumps(key)}: [\n    {rows}\n  ]{comma}")
        else:
            lines.append(f"  {json.dumps(key)}: {json.dumps(value)}{comma}")
    lines.append("}")
    return "\n".join(lines) + "\n"


STALE_SECONDS = 3600
"""A temporary ``.NAME.XXXXXXXX.tmp`` file older than this is left from a killed save."""
_TEMP_NAME = re.compile(r"\..+\.[A-Za-z0-9_]{8}\.tmp")


def remove_stale_temporaries(folder, now=None):
    """Delete temporary files that killed saves left in ``folder``; return their names.

    Only files named like our temporaries (``.NAME.XXXXXXXX.tmp``) and last
    modified more than `STALE_SECONDS` ago are removed, so a save running at the
    same time keeps its file. Files that vanish or cannot be removed are skipped.
    """
    now = time.time() if now is None else now
    removed = []
    try:
        entries = list(os.scandir(folder))
    except OSError:
        return removed
    for entry in entries:
        try:
            if (_TEMP_NAME.fullmatch(entry.name) and entry.is_file(follow_symlinks=False)
                    and now - entry.stat(follow_symlinks=False).st_mtime > STALE_SECONDS):
                os.unlink(entry.path)
                removed.append(entry.name)
        except OSError:
            continue
    return removed


def current_umask():
    """The process's file-creation mask (int), read without changing it where the system allows."""
    try:
        with open("/proc/self/status", encoding="ascii") as status:
            for line in status:
                if line.startswith("Umask:"):
                    return int(line.split()[1], 8)
    except (OSError, ValueError, IndexError):
        pass
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def file_mode(path):
    """Permission bits for a file written at ``path`` (int).

    An existing file keeps its own mode; a new one gets ``0o666`` less the umask,
    as a file made with ``open(path, "w")`` would (common practice of editors).
    `tempfile.mkstemp` makes its files 0600, so an atomic save sets this mode on
    the temporary before renaming it into place.

    Examples
    --------
    >>> import os, tempfile
    >>> folder = tempfile.mkdtemp()
    >>> file_mode(os.path.join(folder, "new.json")) == 0o666 & ~current_umask()
    True
    """
    try:
        return os.stat(path).st_mode & 0o7777
    except OSError:
        return 0o666 & ~current_umask()


def share_like_target(tmp, path):
    """Give a temporary file the mode `file_mode` chooses for ``path`` (before renaming it there)."""
    os.chmod(tmp, file_mode(path))


def write_atomic(path, text):
    """Replace a file's contents atomically: the old file stays whole on failure.

    Stale temporaries of earlier killed saves in the same folder are removed first.
    The file gets the mode of the file it replaces, or the umask's for a new one
    (`file_mode`).
    """
    path = Path(path)
    remove_stale_temporaries(path.parent)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent or ".")
    try:
        share_like_target(tmp, path)
        with os.fdopen(fd, "w", encoding="utf-8") as out:
            out.write(text)
            out.flush()
            os.fsync(out.fileno())
        os.replace(tmp, path)
        tmp = None
    finally:
        if tmp is not None:
            os.unlink(tmp)
