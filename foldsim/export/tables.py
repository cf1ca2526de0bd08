"""Tables of the motion (.csv, .json): every hinge's fold angle and every cut
edge's closure gap at evenly spaced drive values.

CSV: one header row, then one row per drive value. Columns are ``t``, then
``hinge_H_deg`` for every hinge H (fold angle, degrees), then ``cut_E_gap_U`` for
every cut edge E (gap in the model's units U, see `closure.cut_edge_gaps`).
Numbers are written with full precision (Python's shortest round-trip form).

JSON: one object, schema ``foldsim.motion-table/1``, with the same numbers in
columns: ``t``, ``hinges`` (``hinge``, ``faces``, ``parent``, ``child``,
``angle_deg``) and ``cut_edges`` (``edge``, ``faces``, ``gap``).
"""

import json
import re

import numpy as np

from ..analysis.closure import cut_edge_gaps
from ..gearing import fold_angles, fold_schedule
from ..kinematics import face_poses
from . import common

SCHEMA = "foldsim.motion-table/1"


def motion_table(mech, t, schedule=None):
    """Fold angles and closure gaps at drive values t.

    Parameters
    ----------
    mech : Mechanism
    t : (T,) float
    schedule : Schedule, optional

    Returns
    -------
    angles_deg : (T, H) float
    gaps : (T, E) float
        Model units.
    """
    schedule = schedule or fold_schedule(mech)
    t = np.asarray(t, float)
    angles = fold_angles(schedule, t)
    gaps = cut_edge_gaps(mech, face_poses(mech, angles))
    return np.degrees(angles), gaps


def _unit_tag(units):
    tag = re.sub(r"[^A-Za-z0-9]+", "", units.replace("µ", "u"))
    return tag or "units"


def csv_text(mech, t, schedule=None):
    """The table as CSV text (see the module docstring)."""
    angles, gaps = motion_table(mech, t, schedule)
    tag = _unit_tag(mech.units)
    header = ["t"] + [f"hinge_{h}_deg" for h in range(mech.n_hinges)] + \
        [f"cut_{e}_gap_{tag}" for e in range(len(mech.cut_faces))]
    rows = [",".join(header)]
    for i, ti in enumerate(np.asarray(t, float)):
        rows.append(",".join(repr(float(x)) for x in [ti, *angles[i], *gaps[i]]))
    return "\n".join(rows) + "\n"


def json_text(mech, t, schedule=None):
    """The table as JSON text (see the module docstring)."""
    angles, gaps = motion_table(mech, t, schedule)
    doc = {
        "schema": SCHEMA,
        "model": mech.name,
        "units": mech.units,
        "drive": int(mech.drive),
        "t": [float(x) for x in t],
        "hinges": [{"hinge": h, "faces": [int(f) for f in mech.hinge_faces[h]], "parent": int(mech.parent[h]),
                    "child": int(mech.child[h]), "angle_deg": angles[:, h].tolist()}
                   for h in range(mech.n_hinges)],
        "cut_edges": [{"edge": e, "faces": [int(f) for f in mech.cut_faces[e]], "gap": gaps[:, e].tolist()}
                      for e in range(len(mech.cut_faces))],
    }
    return json.dumps(doc, indent=1) + "\n"


def write(mech, path, t, as_json, schedule=None):
    """Write the table atomically as CSV or JSON.

    Returns
    -------
    str
        One line saying what was written.
    """
    text = (json_text if as_json else csv_text)(mech, t, schedule)
    common.write_atomic_text(path, text)
    return f"{len(t)} drive values, {mech.n_hinges} hinges, {len(mech.cut_faces)} cut edges"
