"""Cut edges: how far the two copies of each edge are apart.

A cut edge joins two faces that are adjacent in the closed shell but not hinged;
each face carries its own copy of the edge. Its gap at a pose is the larger of the
distances between matching endpoints of the two copies.
"""

import numpy as np

from ..geometry import rotate_rows, transform_points


def cut_edge_gaps(mech, poses):
    """Gap of every cut edge at every pose set.

    Parameters
    ----------
    mech : Mechanism
    poses : (T, F, 4, 4) float

    Returns
    -------
    (T, E) float
        Lengths in the model's units.
    """
    a, b = mech.cut_faces[:, 0], mech.cut_faces[:, 1]
    pa = transform_points(poses[:, a, None], mech.cut_points[None, :, 0])
    pb = transform_points(poses[:, b, None], mech.cut_points[None, :, 1])
    return np.linalg.norm(pa - pb, axis=-1).max(axis=-1, initial=0.0)


def posed_cut_ends(mech, poses):
    """Both sides' ends of every cut edge at one pose set: a, b (E, 2, 3) float.

    ``a[e]`` are edge e's two points carried by its first face, ``b[e]`` by its
    second; the gap (`cut_edge_gaps`) is the larger of their distances.
    """
    out = []
    for side in (0, 1):
        m = poses[mech.cut_faces[:, side]]
        out.append(rotate_rows(m[:, :3, :3], mech.cut_points[:, side]) + m[:, None, :3, 3])
    return out


def closure_summary(mech, gaps_end, tolerance):
    """The closure part of a check report.

    Parameters
    ----------
    mech : Mechanism
    gaps_end : (E,) float
        Gaps at t = 1.
    tolerance : float
        Largest gap that counts as meeting.

    Returns
    -------
    dict
        ``max_gap``, ``meets``, ``tolerance`` and ``edges`` (``faces``, ``gap``,
        ``meets`` per cut edge, in the engine's cut-edge order).
    """
    edges = [{"faces": [int(a), int(b)], "gap": float(g), "meets": bool(g <= tolerance)}
             for (a, b), g in zip(mech.cut_faces.tolist(), gaps_end)]
    max_gap = float(np.max(gaps_end, initial=0.0))
    return {"max_gap": max_gap, "meets": bool(max_gap <= tolerance), "tolerance": float(tolerance),
            "edges": edges}
