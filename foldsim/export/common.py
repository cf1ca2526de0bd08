"""Pieces every exporter shares: units, the drive samples, poses, atomic writes.

Lengths in a mechanism are in its own ``units``. Formats that carry a physical
size (glTF: metres; SVG: millimetres on paper; STL/OBJ: millimetres) convert
with `unit_scale`, which knows a short list of length units and refuses any
other rather than guess.
"""

import os
import tempfile
from pathlib import Path

import numpy as np

from ..errors import FoldsimError, ModelError
from ..gearing import fold_angles, fold_schedule
from ..kinematics import face_poses

#: Metres per unit for the length units an export understands.
METRES_PER_UNIT = {
    "um": 1e-6, "µm": 1e-6, "micron": 1e-6,
    "mm": 1e-3, "millimetre": 1e-3, "millimeter": 1e-3,
    "cm": 1e-2, "centimetre": 1e-2, "centimeter": 1e-2,
    "m": 1.0, "metre": 1.0, "meter": 1.0,
    "in": 0.0254, "inch": 0.0254,
    "ft": 0.3048, "foot": 0.3048,
}


def unit_scale(units, target="m"):
    """How many ``target`` units one model unit is.

    Parameters
    ----------
    units : str
        The model's ``units`` (case and surrounding blanks are ignored).
    target : str
        A unit from `METRES_PER_UNIT`.

    Returns
    -------
    float

    Raises
    ------
    ModelError
        For a unit not in `METRES_PER_UNIT`: true scale cannot be written.

    Examples
    --------
    >>> unit_scale("mm")
    0.001
    >>> unit_scale("in", "mm")
    25.4
    """
    key = str(units).strip().lower()
    if key not in METRES_PER_UNIT:
        known = ", ".join(sorted({"um", "mm", "cm", "m", "in", "ft"}))
        raise ModelError(f"units: {units!r} is not a length unit export knows ({known}); "
                         "true scale cannot be written")
    factor = METRES_PER_UNIT[key] / METRES_PER_UNIT[target]
    return float(f"{factor:.12g}")


#: Model frame (Z up) to glTF frame (Y up): (x, y, z) -> (x, z, -y), a proper rotation.
Z_UP_TO_Y_UP = np.array([[1.0, 0.0, 0.0], [0.0, 0.0, 1.0], [0.0, -1.0, 0.0]])


def check_t(value, name):
    """Refuse a drive value outside [-1, 1].

    Raises
    ------
    FoldsimError
    """
    if not (np.isfinite(value) and -1.0 <= value <= 1.0):
        raise FoldsimError(f"{name}: must lie in [-1, 1], not {value}")
    return float(value)


def drive_samples(t_from, t_to, count):
    """``count`` evenly spaced drive values from ``t_from`` to ``t_to`` inclusive.

    Examples
    --------
    >>> drive_samples(0.0, 1.0, 5).tolist()
    [0.0, 0.25, 0.5, 0.75, 1.0]
    """
    if count < 2:
        raise FoldsimError(f"--frames: need at least 2 samples, not {count}")
    return np.linspace(float(t_from), float(t_to), int(count))


def poses(mech, t, schedule=None):
    """Face poses (T, F, 4, 4) at drive values t, with the mechanism's gearing."""
    schedule = schedule or fold_schedule(mech)
    return face_poses(mech, fold_angles(schedule, np.atleast_1d(np.asarray(t, float))))


def face_normals(polygons):
    """Unit normals (F, 3) of planar polygons, right-handed about their vertex order."""
    out = []
    for p in polygons:
        p = np.asarray(p, float)
        n = np.cross(p, np.roll(p, -1, axis=0)).sum(axis=0)
        out.append(n / np.linalg.norm(n))
    return np.array(out).reshape(-1, 3)


def plane_frame(mech):
    """Origin and in-plane axes (u, v) of the flat pattern, seen from outside.

    The flat pattern lies in the root face's plane. ``u`` is the model's x axis
    projected into that plane (the y axis when x is nearly normal to it), and
    ``v = n x u`` with ``n`` the root's outside normal, so (u, v) is the pattern
    as seen from the side that ends up outside.

    Returns
    -------
    origin, u, v : (3,) float
    """
    n = face_normals([mech.flat_faces[mech.root]])[0]
    origin = mech.flat_faces[mech.root][0]
    for axis in (np.array([1.0, 0, 0]), np.array([0, 1.0, 0])):
        u = axis - (axis @ n) * n
        if np.linalg.norm(u) > 0.5:
            break
    u = u / np.linalg.norm(u)
    return origin, u, np.cross(n, u)


def flat_2d(mech):
    """Every face's flat vertices in pattern coordinates (model units, y up).

    Returns
    -------
    list of (k, 2) float
    """
    origin, u, v = plane_frame(mech)
    return [np.column_stack([(p - origin) @ u, (p - origin) @ v]) for p in mech.flat_faces]


def write_atomic_bytes(path, data):
    """Replace a file's contents atomically with bytes (temporary file renamed in).

    Parameters
    ----------
    path : str or Path
    data : bytes

    Raises
    ------
    FoldsimError
        When the file cannot be written; the old file, if any, stays whole.
    """
    from ..io.mechanism_json import remove_stale_temporaries, share_like_target

    path = Path(path)
    remove_stale_temporaries(path.parent)
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    except OSError as exc:
        raise FoldsimError(f"{path}: cannot write: {exc.strerror or exc}") from None
    try:
        share_like_target(tmp, path)
        with os.fdopen(fd, "wb") as out:
            out.write(data)
            out.flush()
            os.fsync(out.fileno())
        os.replace(tmp, path)
        tmp = None
    except OSError as exc:
        raise FoldsimError(f"{path}: cannot write: {exc.strerror or exc}") from None
    finally:
        if tmp is not None:
            os.unlink(tmp)


def write_atomic_text(path, text):
    """`write_atomic_bytes` for UTF-8 text."""
    write_atomic_bytes(path, text.encode("utf-8"))


def fmt(x, digits=6):
    """A short decimal for SVG/HTML attributes: no exponent, no trailing zeros.

    Examples
    --------
    >>> fmt(1.50000), fmt(-0.0), fmt(2e-9)
    ('1.5', '0', '0')
    """
    s = f"{float(x):.{digits}f}".rstrip("0").rstrip(".")
    return "0" if s in ("", "-0") else s
