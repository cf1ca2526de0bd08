"""Solids as items of the collision sweep: thick panels and gear bodies carried by faces.

`body_panels` packs a list of `Solid` into the `analysis.panels.Panels` form that
`analysis.sweep.collision_intervals` sweeps (``owner``: the face carrying each
solid), with the pairs the build checks leave out; `body_speed_profile` gives the
solids' speed bounds, split like `kinematics.speed_profile`. The build sweeps
(`foldsim.build.sweep`) then get the thin panels' broad phase, lazy distances and
bounded memory for solids of any number of triangles.
"""

import numpy as np

from ..analysis.panels import Panels, _keys, oriented_boxes
from ..kinematics import speed_profile


def body_panels(mech, solids, skip=(), passive=None):
    """The sweep's view of a list of solids.

    Parameters
    ----------
    mech : Mechanism
    solids : list of Solid
    skip : (n, 2) int, optional
        Solid pairs never tested. Solids carried by one face are one rigid part and
        are always skipped.
    passive : (S,) bool, optional
        Solids tested only against solids that are not passive.

    Returns
    -------
    Panels
        One item per solid, ``owner`` its face; no touching or pivoting pairs.
    """
    count = np.array([len(s.triangles) for s in solids], np.int64)
    start = np.concatenate([[0], np.cumsum(count)[:-1]]).astype(np.int64)
    tri_points = np.concatenate([s.triangles for s in solids]).astype(float)
    tri_item = np.repeat(np.arange(len(solids)), count)
    owner = np.array([s.face for s in solids], np.int64)
    centre = np.array([s.triangles.reshape(-1, 3).mean(axis=0) for s in solids])
    radius = np.array([np.linalg.norm(s.triangles.reshape(-1, 3) - c, axis=1).max()
                       for s, c in zip(solids, centre)])
    same = []
    order = np.argsort(owner, kind="stable")
    for run in np.split(order, np.flatnonzero(np.diff(owner[order])) + 1):
        if len(run) > 1:
            a, b = np.triu_indices(len(run), 1)
            same.append(np.column_stack([run[a], run[b]]))
    pairs = np.concatenate(same + [np.asarray(skip, np.int64).reshape(-1, 2)])
    n = len(solids)
    box_centre, box_axes, box_half = oriented_boxes(tri_points, start)
    return Panels(
        tri_face=tri_item, tri_points=tri_points, start=start, count=count,
        skip_keys=np.unique(_keys(pairs, n)), touch_keys=np.zeros(0, np.int64),
        pivot_keys=np.zeros(0, np.int64), pivot_dirs=np.zeros((0, 2, 2, 3)),
        pivot_path=np.zeros((0, mech.n_hinges), bool), centre=centre, radius=radius, owner=owner,
        passive=None if passive is None else np.asarray(passive, bool),
        box_centre=box_centre, box_axes=box_axes, box_half=box_half)


def body_speed_profile(mech, rates, solids):
    """Speed bounds of every solid, split like `kinematics.speed_profile`.

    A solid reaching farther from its face's entry hinge than the face does moves
    faster by that extra reach times the rates of the hinges on its chain.

    Returns
    -------
    (S, D + 1) float
        ``out[s, d]``: how fast any point of solid s moves per unit t in the frame
        of its panel's ancestor at depth d.
    """
    profile = speed_profile(mech, rates)
    mids = mech.axes.mean(axis=1)
    out = np.zeros((len(solids), profile.shape[1]))
    tails = {}
    for s, solid in enumerate(solids):
        f = solid.face
        out[s] = profile[f]
        h = mech.face_hinge[f]
        if h < 0:
            continue
        if f not in tails:
            chain = []
            g = f
            while mech.face_hinge[g] >= 0:
                chain.append(mech.face_hinge[g])
                g = mech.parent[mech.face_hinge[g]]
            chain = np.array(chain[::-1], np.int64)
            far_face = np.linalg.norm(mech.flat_faces[f] - mids[h], axis=1).max()
            tails[f] = (far_face, np.cumsum(np.abs(rates[chain])[::-1])[::-1])
        far_face, tail = tails[f]
        far_body = np.linalg.norm(solid.triangles.reshape(-1, 3) - mids[h], axis=1).max()
        out[s, :len(tail)] += max(0.0, far_body - far_face) * tail
    return out
