"""Forward kinematics over the hinge tree, batched over drive values.

A face's pose is the product of the rotations about the hinge lines on its path
from the root, each line taken in the flat frame (belcastro & Hull 2002; Tachi,
"Simulation of rigid origami", Origami 4, 2009). The tree is walked one depth level
at a time, so the Python loop runs over levels, never over faces or drive values.
"""

import numpy as np

from . import geometry
from .gearing import fold_angles


def face_poses(mech, angles):
    """Pose of every face for many sets of fold angles.

    Parameters
    ----------
    mech : Mechanism
    angles : (T, H) float
        Fold angle of every hinge, radians.

    Returns
    -------
    (T, F, 4, 4) float
        Transforms taking each face's flat coordinates to its posed position.

    Examples
    --------
    >>> from foldsim.model import build_mechanism
    >>> square = [[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0], [2, 0, 0], [2, 1, 0]]
    >>> m = build_mechanism(square, [[0, 1, 2, 3], [1, 4, 5, 2]], [[0, 1]],
    ...                     state="flat", closed_angles=[np.pi / 2])
    >>> p = face_poses(m, np.array([[np.pi / 2]]))
    >>> np.round(geometry.transform_points(p[0, 1], [2.0, 0, 0]), 12).tolist()
    [1.0, 0.0, -1.0]
    """
    angles = np.asarray(angles, dtype=float)
    n_t = angles.shape[0]
    poses = np.broadcast_to(np.eye(4), (n_t, mech.n_faces, 4, 4)).copy()
    rotations = geometry.line_rotations(mech.axes[None], angles)
    for level in mech.levels:
        poses[:, mech.child[level]] = poses[:, mech.parent[level]] @ rotations[:, level]
    return poses


def poses_at(mech, schedule, t):
    """Face poses at drive values t.

    Parameters
    ----------
    mech : Mechanism
    schedule : Schedule
    t : (T,) float

    Returns
    -------
    (T, F, 4, 4) float
    """
    return face_poses(mech, fold_angles(schedule, np.atleast_1d(t)))


def posed_faces(mech, poses):
    """Vertices of every face at one pose set.

    Parameters
    ----------
    mech : Mechanism
    poses : (F, 4, 4) float

    Returns
    -------
    list of (k, 3) float
    """
    return [geometry.transform_points(poses[f], p) for f, p in enumerate(mech.flat_faces)]


def speed_profile(mech, rates):
    """Speed bounds of every face split by how far up its chain they reach.

    A point of face f moves with velocity ``sum_h w_h x (p - a_h)`` over the hinges
    h on its path from the root, ``|w_h| = |rates[h]|``. The distance from a point
    of hinge h's line to p is bounded by the length of the path from the hinge's
    midpoint through the midpoints of the later hinges on the chain to the farthest
    vertex of f; every leg of that path lies in one rigid face, so the bound holds
    at every t.

    Parameters
    ----------
    mech : Mechanism
    rates : (H,) float
        Fold angle reached per unit t by each hinge (radians).

    Returns
    -------
    (F, D + 1) float
        ``out[f, d]``: the part of f's bound from the hinges more than d steps
        below the root (D is the tree's depth). ``out[:, 0]`` bounds each face's
        speed in the root's frame; ``out[f, d]`` bounds it in the frame of f's
        ancestor at depth d.
    """
    mids = mech.axes.mean(axis=1)
    depth = len(mech.levels)
    out = np.zeros((mech.n_faces, depth + 1))
    # lever[f]: path length from each chain hinge's midpoint to f's entry hinge
    # midpoint, in chain order; walked root-first so a parent is done before a child.
    lever = {mech.root: np.zeros(0)}
    chain = {mech.root: np.zeros(0, np.int64)}
    for level in mech.levels:
        for h in level:
            p, c = mech.parent[h], mech.child[h]
            entry = mech.face_hinge[p]
            step = np.linalg.norm(mids[h] - mids[entry]) if entry >= 0 else 0.0
            lever[c] = np.append(lever[p] + step, 0.0)
            chain[c] = np.append(chain[p], h)
            far = np.linalg.norm(mech.flat_faces[c] - mids[h], axis=1).max()
            part = np.abs(rates[chain[c]]) * (lever[c] + far)
            tail = np.cumsum(part[::-1])[::-1]
            out[c, :len(tail)] = tail
    return out


def speed_bounds(mech, rates):
    """Upper bound on how fast any point of each face moves, per unit of t.

    See `speed_profile` for the bound.

    Parameters
    ----------
    mech : Mechanism
    rates : (H,) float
        Fold angle reached per unit t by each hinge (radians).

    Returns
    -------
    (F,) float
        Length per unit t, in the root's frame.
    """
    return speed_profile(mech, rates)[:, 0]


def common_depth(mech, pairs):
    """Depth of the lowest common ancestor of face pairs in the hinge tree.

    Parameters
    ----------
    mech : Mechanism
    pairs : (n, 2) int

    Returns
    -------
    (n,) int
        Number of hinges between the root and the pair's common ancestor.
    """
    chain = np.zeros((mech.n_faces, mech.n_hinges), bool)
    for level in mech.levels:
        chain[mech.child[level]] = chain[mech.parent[level]]
        chain[mech.child[level], level] = True
    bits = np.packbits(chain, axis=1)
    ones = np.unpackbits(np.arange(256, dtype=np.uint8)[:, None], axis=1).sum(axis=1)
    out = np.empty(len(pairs), np.int64)
    for k in range(0, len(pairs), 4096):
        sub = pairs[k:k + 4096]
        out[k:k + 4096] = ones[bits[sub[:, 0]] & bits[sub[:, 1]]].sum(axis=1)
    return out


def relative_speed_bounds(mech, rates, pairs):
    """Bound on how fast the distance between two faces can change, per unit t.

    Hinges above the pair's common ancestor move both faces together, so only
    the hinges below it count (`speed_profile` in the ancestor's frame).

    Parameters
    ----------
    mech : Mechanism
    rates : (H,) float
    pairs : (n, 2) int

    Returns
    -------
    (n,) float
    """
    profile = speed_profile(mech, rates)
    depth = common_depth(mech, pairs)
    return profile[pairs[:, 0], depth] + profile[pairs[:, 1], depth]
