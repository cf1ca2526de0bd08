"""Builders of small valid mechanism documents shared by the tests.

Each builder returns a fresh plain dict in the ``foldsim.mechanism/1`` schema, so a
test can break one field and write it with `write_doc`.
"""

import copy
import json

_CUBE = {
    "schema": "foldsim.mechanism/1",
    "name": "unit cube",
    "units": "mm",
    "state": "closed",
    "vertices": [
        [0.0, 0.0, 0.0], [1.0, 0.0, 0.0], [1.0, 1.0, 0.0], [0.0, 1.0, 0.0],
        [0.0, 0.0, 1.0], [1.0, 0.0, 1.0], [1.0, 1.0, 1.0], [0.0, 1.0, 1.0],
    ],
    # Counter-clockwise seen from outside: bottom, front, right, back, left, top.
    "faces": [
        [0, 3, 2, 1], [0, 1, 5, 4], [1, 2, 6, 5], [3, 7, 6, 2], [0, 4, 7, 3], [4, 5, 6, 7],
    ],
    "root": 0,
    # A cross-shaped net: four sides on the bottom, the top on the back.
    "hinges": [
        {"faces": [0, 1]}, {"faces": [0, 2]}, {"faces": [0, 3]}, {"faces": [0, 4]},
        {"faces": [3, 5]},
    ],
    "couplings": [],
    "drive": 0,
}

_STRIP = {
    "schema": "foldsim.mechanism/1",
    "name": "three-panel strip",
    "state": "flat",
    # Three unit squares in a row in the plane z = 0, seen from +z (the outside).
    "vertices": [
        [0.0, 0.0, 0.0], [1.0, 0.0, 0.0], [2.0, 0.0, 0.0], [3.0, 0.0, 0.0],
        [0.0, 1.0, 0.0], [1.0, 1.0, 0.0], [2.0, 1.0, 0.0], [3.0, 1.0, 0.0],
    ],
    "faces": [[0, 1, 5, 4], [1, 2, 6, 5], [2, 3, 7, 6]],
    "hinges": [
        {"faces": [0, 1], "closed_angle_deg": 90.0},
        {"faces": [1, 2], "closed_angle_deg": 90.0},
    ],
}


def cube_document():
    """A closed-state unit cube: 8 vertices, 6 faces, 5 hinges in a tree, root 0.

    Faces are bottom, front, right, back, left, top; hinges join the bottom to
    the four sides and the back to the top, so every closing angle is +90 degrees
    and the 7 remaining shared edges are cut edges.
    """
    return copy.deepcopy(_CUBE)


def strip_document():
    """A flat-state strip of three unit squares that folds into a U (2 hinges at 90°)."""
    return copy.deepcopy(_STRIP)


def write_doc(tmp_path, doc, name="model.mech.json"):
    """Write a document as JSON into tmp_path and return the file's path."""
    path = tmp_path / name
    path.write_text(json.dumps(doc), encoding="utf-8")
    return path
