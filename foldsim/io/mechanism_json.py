"""Read and write mechanism files (`*.mech.json`, schema ``foldsim.mechanism/1``).

The format is documented in docs/format.md. Every problem raises `ModelError`
with one line naming the file, the field and the index.
"""

import json
import math
import os
import tempfile
from pathlib import Path

import numpy as np

from ..errors import ModelError
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
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        reason = exc.strerror if isinstance(exc, OSError) and exc.strerror else "not readable as UTF-8 text"
        raise ModelError(f"{path}: cannot read file: {reason}") from None
    return loads(text, source=str(path), tol=tol)


def loads(text, source="<string>", tol=DEFAULT):
    """Parse a mechanism document from JSON text; see `load`."""
    if not text.strip():
        raise ModelError(f"{source}: file is empty")
    try:
        doc = json.loads(text)
    except json.JSONDecodeError as exc:
        raise ModelError(f"{source}: invalid JSON at line {exc.lineno} column {exc.colno}: {exc.msg}") from None
    try:
        return from_document(doc, tol=tol)
    except ModelError as exc:
        raise ModelError(f"{source}: {exc}") from None


def _int(value, field, minimum=None):
    if isinstance(value, bool) or not isinstance(value, int):
        raise ModelError(f"{field}: must be an integer, not {json.dumps(value)}")
    if minimum is not None and value < minimum:
        raise ModelError(f"{field}: must be at least {minimum}, not {value}")
    return value


def _number(value, field):
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise ModelError(f"{field}: must be a finite number, not {json.dumps(value)}")
    return float(value)


def _list(doc, key, required=True):
    value = doc.get(key, None if required else [])
    if value is None:
        raise ModelError(f"{key}: missing")
    if not isinstance(value, list):
        raise ModelError(f"{key}: must be a list")
    return value


def from_document(doc, tol=DEFAULT):
    """Build a mechanism from a parsed JSON document (a dict).

    Returns
    -------
    Mechanism
    """
    if not isinstance(doc, dict):
        raise ModelError("the document must be a JSON object")
    schema = doc.get("schema")
    if schema != SCHEMA:
        raise ModelError(f"schema: expected {SCHEMA!r}, found {schema!r}")
    state = doc.get("state", "closed")
    if state not in ("closed", "flat"):
        raise ModelError(f"state: must be 'closed' or 'flat', not {json.dumps(state)}")
    vertices = []
    for i, v in enumerate(_list(doc, "vertices")):
        if not isinstance(v, list) or len(v) != 3:
            raise ModelError(f"vertices[{i}]: must be [x, y, z]")
        vertices.append([_number(x, f"vertices[{i}]") for x in v])
    faces = []
    for i, f in enumerate(_list(doc, "faces")):
        if not isinstance(f, list):
            raise ModelError(f"faces[{i}]: must be a list of vertex indices")
        faces.append([_int(v, f"faces[{i}]") for v in f])
    hinges, angles = [], []
    for i, h in enumerate(_list(doc, "hinges")):
        if not isinstance(h, dict) or not isinstance(h.get("faces"), list) or len(h["faces"]) != 2:
            raise ModelError(f"hinges[{i}]: must be an object with \"faces\": [a, b]")
        hinges.append([_int(f, f"hinges[{i}].faces") for f in h["faces"]])
        if state == "flat":
            if "closed_angle_deg" not in h:
                raise ModelError(f"hinges[{i}]: closed_angle_deg is required when state is flat")
            angles.append(math.radians(_number(h["closed_angle_deg"], f"hinges[{i}].closed_angle_deg")))
    couplings = [_coupling(c, i) for i, c in enumerate(_list(doc, "couplings", required=False))]
    root = _int(doc.get("root", 0), "root")
    drive = _int(doc.get("drive", 0), "drive")
    name = doc.get("name", "")
    units = doc.get("units", "mm")
    for key, value in (("name", name), ("units", units)):
        if not isinstance(value, str):
            raise ModelError(f"{key}: must be a string")
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


def _coupling(c, i):
    field = f"couplings[{i}]"
    if not isinstance(c, dict) or not isinstance(c.get("hinges"), list) or len(c["hinges"]) != 2:
        raise ModelError(f"{field}: must be an object with \"hinges\": [i, j]")
    pair = tuple(_int(h, f"{field}.hinges") for h in c["hinges"])
    if ("ratio" in c) == ("teeth" in c):
        raise ModelError(f"{field}: give exactly one of \"ratio\" or \"teeth\"")
    if "teeth" in c:
        teeth = c["teeth"]
        if (not isinstance(teeth, list) or len(teeth) != 2
                or any(isinstance(z, bool) or not isinstance(z, int) or z <= 0 for z in teeth)):
            raise ModelError(f"{field}.teeth: must be two positive integers, not {json.dumps(teeth)}")
        return Coupling(pair, teeth[0] / teeth[1], tuple(teeth))
    ratio = c["ratio"]
    if isinstance(ratio, bool) or not isinstance(ratio, (int, float)) or not math.isfinite(ratio) or ratio == 0:
        raise ModelError(f"{field}.ratio: must be a finite non-zero number, not {json.dumps(ratio)}")
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


def write_atomic(path, text):
    """Replace a file's contents atomically: the old file stays whole on failure."""
    path = Path(path)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent or ".")
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as out:
            out.write(text)
            out.flush()
            os.fsync(out.fileno())
        os.replace(tmp, path)
        tmp = None
    finally:
        if tmp is not None:
            os.unlink(tmp)
