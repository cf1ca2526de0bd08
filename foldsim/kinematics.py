"""Forward kinematics over the hinge tree, batched over drive values.

A face's pose is the product of the rotations about the hinge lines on its path
from the root, each line taken in the flat frame (belcastro & Hull 2002; Tachi,
"Simulation of rigid origami", Origami 4, 2009). The tree is walked one depth level
at a time, so the Python loop runs over levels, never over faces or drive values.
"""

import weakref

import numpy as np

from . import geometry
from .gearing import fold_angles, hinge_angles


_TERMS = weakref.WeakKeyDictionary()


def _rodrigues_terms(mech):
    """The parts of every hinge's rotation that do not depend on its angle (kept per mechanism).

    Rotation x -> R (x - a) + a about each hinge line (Rodrigues' formula, as
    `geometry.line_rotations`), kept as its 3 x 4 part [R | a - R a] =
    T0 + cos(angle) T1 + sin(angle) T2, with a a point of the line, u its unit
    direction, T0 = [u u^T | a - u u^T a], T1 = [I - u u^T | -(I - u u^T) a] and
    T2 = [[u]x | -[u]x a]: three (H, 3, 4) arrays, rows in the order of the tree
    walk (`_walk`), so a walk over every hinge reads them in place.
    """
    terms = _TERMS.get(mech)
    if terms is None:
        order = _walk(mech)[0]
        a = mech.axes[order, 0]
        u = geometry.unit(mech.axes[order, 1] - a)
        skew = np.zeros((len(u), 3, 3))
        skew[:, 0, 1], skew[:, 0, 2], skew[:, 1, 2] = -u[:, 2], u[:, 1], -u[:, 0]
        skew -= skew.transpose(0, 2, 1)
        outer = u[:, :, None] * u[:, None, :]
        across = np.eye(3) - outer
        terms = tuple(np.concatenate([m, shift[..., None]], axis=2)
                      for m, shift in ((outer, a - (outer @ a[..., None])[..., 0]),
                                       (across, -(across @ a[..., None])[..., 0]),
                                       (skew, -(skew @ a[..., None])[..., 0])))
        _TERMS[mech] = terms
    return terms


def face_poses(mech, angles, faces=None):
    """Pose of every face for many sets of fold angles.

    Parameters
    ----------
    mech : Mechanism
    angles : (T, H) float
        Fold angle of every hinge, radians.
    faces : (k,) int, optional
        Only these faces: the walk then covers only their chains to the root, which
        for a few faces of a large model is a small share of the work.

    Returns
    -------
    (T, F, 4, 4) float
        Transforms taking each face's flat coordinates to its posed position
        ((T, k, 4, 4) with ``faces``, in their order).

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
    order, parent_at, face_at, spans = _walk(mech)
    if faces is None:
        steps = order
    else:
        on = np.zeros(mech.n_hinges, bool)
        on[_chains(mech, faces)[0]] = True
        steps = order[on[order]]
        # The chains' steps, level by level (as the whole walk's spans).
        at = _step_of(mech)[steps]
        spans = [(lo, hi) for lo, hi in zip(np.searchsorted(at, [lo for lo, _ in spans]),
                                            np.searchsorted(at, [hi for _, hi in spans])) if hi > lo]
    # R = u u^T + cos(angle) (I - u u^T) + sin(angle) [u]x, and R a from the same
    # three terms; elementwise, so each drive value's poses do not depend on which
    # others are computed with it. Row k of rot is hinge ``steps[k]``.
    fixed, along_cos, along_sin = (term if faces is None else term[at] for term in _rodrigues_terms(mech))
    turn = angles[:, steps].T[..., None, None]
    rot = np.zeros((len(steps), n_t, 4, 4))
    rot[..., :3, :] = fixed[:, None] + np.cos(turn) * along_cos[:, None] + np.sin(turn) * along_sin[:, None]
    rot[..., 3, 3] = 1.0
    # Face-major while walking the tree, in the walk's face order: the root, then
    # the child of each step; a level's children are consecutive rows, so each
    # level is one gather of its parents and one product of 4 x 4 matrices.
    work = np.empty((mech.n_faces, n_t, 4, 4))
    work[0] = np.eye(4)
    if faces is None:
        for lo, hi in spans:
            np.matmul(work[parent_at[lo:hi]], rot[lo:hi], out=work[1 + lo:1 + hi])
        rows = face_at
    else:
        for lo, hi in spans:
            work[at[lo:hi] + 1] = np.matmul(work[parent_at[at[lo:hi]]], rot[lo:hi])
        rows = face_at[np.asarray(faces, np.int64)]
    return np.ascontiguousarray(work[rows].transpose(1, 0, 2, 3))


def row_poses(mech, schedule, faces, t, start=None):
    """Pose of one face at one drive value per row: face ``faces[r]`` at ``t[r]``.

    The same transforms as `poses_at` (each the product of its chain's hinge
    rotations from the root down, from the same Rodrigues terms), for rows whose
    faces and drive values both vary: every row's chain rotations are made at once
    and multiplied down the chains for all rows together, so the cost is the rows
    times the tree's depth, where `poses_at` on the rows' drive values would
    pose every chain at every one of them.

    Parameters
    ----------
    mech : Mechanism
    schedule : Schedule
    faces : (n,) int
    t : (n,) float
    start : (n,) int, optional
        Leave out each row's first ``start[r]`` hinges from the root: the pose
        relative to the face's ancestor at that depth. Two faces posed from their
        common ancestor (`common_depth`) keep their relative placement, which is all
        a distance needs, for the hinges between them only.

    Returns
    -------
    (n, 4, 4) float
    """
    faces = np.asarray(faces, np.int64).ravel()
    t = np.asarray(t, float).ravel()
    table = _ancestry(mech)
    if start is not None:
        # Shift each row's chain left by its start, -1 past its end.
        at = np.arange(table.shape[1])[None, :] + np.asarray(start, np.int64).ravel()[:, None]
        rows = table[faces]
        table = np.where(at < table.shape[1], np.take_along_axis(rows, np.minimum(at, table.shape[1] - 1), 1), -1)
        faces = np.arange(len(faces))
    out = np.empty((len(faces), 4, 4))
    step = max(1, ROW_BUDGET // max(1, table.shape[1]))
    for lo in range(0, len(faces), step):
        out[lo:lo + step] = _chain_products(mech, schedule, table[faces[lo:lo + step]], t[lo:lo + step])
    return out


ROW_BUDGET = 250_000
"""Chain rotations (4 x 4 each) `row_poses` holds at once."""


def _chain_products(mech, schedule, chain, t):
    """(n, 4, 4): the product, root end first, of each row's hinge rotations ``chain`` (n, D), -1 for none.

    Rows go deepest first, so at every depth the rows whose chains reach it are a
    leading block: all rotations are made at once, then one product per depth.
    """
    n = len(chain)
    depth = (chain >= 0).sum(axis=1)
    order = np.argsort(-depth, kind="stable")
    chain, t = chain[order], t[order]
    # live[d]: how many rows have a hinge at depth d.
    live = np.searchsorted(-depth[order], -np.arange(chain.shape[1]), side="left")
    live = live[live > 0]
    # Every live (depth, row) rotation at once, depth by depth: depth d's are rows
    # 0 .. live[d] - 1, at offset first[d].
    first = np.cumsum(live) - live
    row = np.arange(int(live.sum())) - np.repeat(first, live)
    h = chain[row, np.repeat(np.arange(len(live)), live)]
    k = _step_of(mech)[h]
    fixed, along_cos, along_sin = _rodrigues_terms(mech)
    turn = hinge_angles(schedule, t[row], h)[:, None, None]
    rot = np.zeros((len(h), 4, 4))
    rot[:, :3, :] = fixed[k] + np.cos(turn) * along_cos[k] + np.sin(turn) * along_sin[k]
    rot[:, 3, 3] = 1.0
    work = np.broadcast_to(np.eye(4), (n, 4, 4)).copy()
    for at, m in zip(first.tolist(), live.tolist()):
        work[:m] = work[:m] @ rot[at:at + m]
    out = np.empty_like(work)
    out[order] = work
    return out


def _step_of(mech):
    """(H,) int: each hinge's row in the tree walk (`_walk`)."""
    order = _walk(mech)[0]
    step_of = np.empty(mech.n_hinges, np.int64)
    step_of[order] = np.arange(len(order))
    return step_of


_ANCESTRY = weakref.WeakKeyDictionary()


def _ancestry(mech):
    """(F, D) int: the hinges on each face's path from the root, root end first, -1 past its depth."""
    table = _ANCESTRY.get(mech)
    if table is None:
        table = np.full((mech.n_faces, len(mech.levels)), -1, np.int64)
        for d, level in enumerate(mech.levels):
            level = np.asarray(level, np.int64)
            table[mech.child[level]] = table[mech.parent[level]]
            table[mech.child[level], d] = level
        _ANCESTRY[mech] = table
    return table


_WALKS = weakref.WeakKeyDictionary()


def _walk(mech):
    """The tree walk `face_poses` follows (kept per mechanism).

    Returns the hinges level by level (H,) int, each one's parent face's row in
    the walk (H,) int (the root is row 0, the child of hinge ``order[k]`` row
    k + 1), each face's row (F,) int, and each level's (lo, hi) stretch of the order.
    """
    walk = _WALKS.get(mech)
    if walk is None:
        order = np.concatenate([np.asarray(level, np.int64) for level in mech.levels]) if mech.levels \
            else np.zeros(0, np.int64)
        face_at = np.zeros(mech.n_faces, np.int64)
        face_at[mech.root] = 0
        face_at[mech.child[order]] = np.arange(1, len(order) + 1)
        ends = np.cumsum([len(level) for level in mech.levels]).tolist()
        spans = list(zip([0] + ends[:-1], ends))
        walk = (order, face_at[mech.parent[order]], face_at, spans)
        _WALKS[mech] = walk
    return walk


def _chains(mech, faces):
    """Sorted hinges on the given faces' paths to the root, and the tree's levels cut down to them."""
    on = np.zeros(mech.n_hinges, bool)
    cur = np.unique(np.asarray(faces, np.int64))
    while len(cur):
        h = mech.face_hinge[cur]
        h = h[h >= 0]
        h = h[~on[h]]
        on[h] = True
        cur = mech.parent[h]
    return np.flatnonzero(on), [level[on[level]] for level in mech.levels]


def face_twists(mech, poses, rates):
    """Velocity of every face per unit t, as a twist in the root's frame.

    Face f's points move with ``v(x) = omega[f] x x + lin[f]`` (x in the root's
    frame): each hinge h adds ``rates[h] u_h`` to its child's angular velocity and
    ``rates[h] a_h x u_h`` to its linear part, with ``a_h`` a point of the hinge's
    line and ``u_h`` its unit direction, both posed by the parent (fold angles
    linear in t, as `gearing.fold_angles`).

    Parameters
    ----------
    mech : Mechanism
    poses : (T, F, 4, 4) float
        Face poses at T drive values.
    rates : (H,) float
        Fold angle reached per unit t by each hinge (radians).

    Returns
    -------
    omega, lin : (T, F, 3) float

    Examples
    --------
    >>> from foldsim.model import build_mechanism
    >>> square = [[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0], [2, 0, 0], [2, 1, 0]]
    >>> m = build_mechanism(square, [[0, 1, 2, 3], [1, 4, 5, 2]], [[0, 1]],
    ...                     state="flat", closed_angles=[np.pi / 2])
    >>> omega, lin = face_twists(m, face_poses(m, np.zeros((1, 1))), np.array([2.0]))
    >>> p = np.array([2.0, 0, 0])  # a corner of face 1, 1 from the hinge line x = 1
    >>> np.round(np.cross(omega[0, 1], p) + lin[0, 1], 12).tolist()
    [0.0, 0.0, -2.0]
    """
    poses = np.asarray(poses, dtype=float)
    rates = np.asarray(rates, dtype=float)
    n_t = poses.shape[0]
    # Every hinge's contribution at once: its line posed by its parent, times its rate.
    axis = np.stack([geometry.unit(mech.axes[:, 1] - mech.axes[:, 0]), mech.axes[:, 0]], axis=2)
    parent = poses[:, mech.parent, :3]
    moved = parent[..., :3] @ axis
    u, a = moved[..., 0], moved[..., 1] + parent[..., 3]
    spin = (rates[None, :, None] * u).transpose(1, 0, 2)
    shift = (rates[None, :, None] * geometry.cross(a, u)).transpose(1, 0, 2)
    # Summed down the tree, face-major so each level gathers whole rows.
    omega = np.zeros((mech.n_faces, n_t, 3))
    lin = np.zeros((mech.n_faces, n_t, 3))
    for level in mech.levels:
        omega[mech.child[level]] = omega[mech.parent[level]] + spin[level]
        lin[mech.child[level]] = lin[mech.parent[level]] + shift[level]
    return omega.transpose(1, 0, 2), lin.transpose(1, 0, 2)


def turn_profile(mech, rates):
    """Sums of the hinges' fold rates along every face's chain, split by depth.

    Parameters
    ----------
    mech : Mechanism
    rates : (H,) float

    Returns
    -------
    (F, D + 1) float
        ``out[f, d]``: the sum of ``|rates[h]|`` over the hinges h on f's path from
        the root more than d steps below the root (as `speed_profile` splits its
        bound). ``out[a, d] + out[b, d]``, with d the depth of the pair's common
        ancestor (`common_depth`), bounds how fast faces a and b turn relative to
        each other.
    """
    depth = len(mech.levels)
    out = np.zeros((mech.n_faces, depth + 1))
    column = np.arange(depth + 1)
    for d, level in enumerate(mech.levels, start=1):
        step = np.abs(np.asarray(rates, float)[level])[:, None] * (column[None, :] < d)
        out[mech.child[level]] = out[mech.parent[level]] + step
    return out


def poses_at(mech, schedule, t, faces=None):
    """Face poses at drive values t.

    Parameters
    ----------
    mech : Mechanism
    schedule : Schedule
    t : (T,) float
    faces : (k,) int, optional
        Only these faces (`face_poses`).

    Returns
    -------
    (T, F, 4, 4) float
        (T, k, 4, 4) with ``faces``.
    """
    return face_poses(mech, fold_angles(schedule, np.atleast_1d(t)), faces)


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
    # lever[f, d]: path length from the midpoint of the hinge at depth d on f's chain
    # to f's entry hinge midpoint; rate[f, d] that hinge's |rate| (0 past the chain's
    # end). Walked a level at a time, root first, so parents are done before children.
    lever = np.zeros((mech.n_faces, depth))
    rate = np.zeros((mech.n_faces, depth))
    far = np.zeros(mech.n_faces)
    for d, level in enumerate(mech.levels):
        level = np.asarray(level, np.int64)
        p, c = mech.parent[level], mech.child[level]
        entry = mech.face_hinge[p]
        step = np.where(entry >= 0, np.linalg.norm(mids[level] - mids[np.maximum(entry, 0)], axis=1), 0.0)
        lever[c, :d] = lever[p, :d] + step[:, None]
        rate[c, :d] = rate[p, :d]
        rate[c, d] = np.abs(np.asarray(rates, float)[level])
        far[c] = [np.linalg.norm(mech.flat_faces[f] - mids[h], axis=1).max() for f, h in zip(c.tolist(), level)]
    part = rate * (lever + far[:, None])
    out[:, :depth] = np.cumsum(part[:, ::-1], axis=1)[:, ::-1]
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

    Binary lifting (Bender & Farach-Colton, "The LCA problem revisited", LATIN
    2000): both faces climb to the same depth, then climb together by halving
    jumps while their ancestors differ.

    Parameters
    ----------
    mech : Mechanism
    pairs : (n, 2) int

    Returns
    -------
    (n,) int
        Number of hinges between the root and the pair's common ancestor.
    """
    pairs = np.asarray(pairs, np.int64).reshape(-1, 2)
    depth = np.zeros(mech.n_faces, np.int64)
    parent = np.arange(mech.n_faces)
    for d, level in enumerate(mech.levels, start=1):
        depth[mech.child[level]] = d
        parent[mech.child[level]] = mech.parent[level]
    up = [parent]
    while (1 << len(up)) <= len(mech.levels):
        up.append(up[-1][up[-1]])
    a, b = pairs[:, 0].copy(), pairs[:, 1].copy()
    swap = depth[a] < depth[b]
    a[swap], b[swap] = b[swap], a[swap]
    lift = depth[a] - depth[b]
    for k, jump in enumerate(up):
        move = (lift >> k) & 1 == 1
        a[move] = jump[a[move]]
    for jump in reversed(up):
        differ = jump[a] != jump[b]
        a[differ], b[differ] = jump[a[differ]], jump[b[differ]]
    return np.where(a == b, depth[a], depth[a] - 1)


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
