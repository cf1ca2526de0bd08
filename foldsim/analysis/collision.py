"""Panels running into each other, at one pose and over the whole motion.

Panels are zero-thickness planar polygons, triangulated once in the flat frame.
Faces joined by a hinge are never tested. Touching along an edge or at a vertex is
contact; crossing, or overlapping while coplanar, is collision (see
`triangles.crossing_overlap`).

The sweep over t uses conservative advancement (Mirtich, PhD thesis, Berkeley 1996;
Tang, Kim & Manocha, "C2A", ICRA 2009): for every candidate pair it knows a
separation s(t) >= 0 and a bound L on how fast s can change per unit t, so an
interval [t0, t1] with s(t0) + s(t1) > L (t1 - t0) cannot hold a contact and is
skipped; any other interval is halved until it is shorter than half the reporting
resolution. The separation is

- for a pair that shares a point at every t (two panels around a vertex of the
  flat pattern whose hinges all pass through that vertex): the angle between the
  two panels' wedges at that vertex, with L the sum of the fold rates of the hinges
  between them (their relative rotation);
- for every other pair: the Euclidean distance between the panels (less the
  clearance), with L the sum of the two panels' speed bounds in the frame of
  their common ancestor in the hinge tree (`kinematics.speed_profile`).

Candidate pairs per interval come from a 3-axis spatial hash on boxes that contain
each panel's whole sweep over the interval (the boxes at both ends, grown by half the
distance the panel can travel in it, and by half the clearance).

This module is the public face; the work lives in topic modules:
`panels` (triangulation and pair classes), `spatialhash` (broad phase),
`narrowphase` (crossing test, distances, face-pair state), `sweep` (the sweep over
t). `reference` keeps the earlier, slower implementation that the tests compare
against.
"""

import weakref

import numpy as np

from ..tolerances import DEFAULT
from . import broadphase, narrowphase, spatialhash
from .narrowphase import pair_state
from .panels import Panels, _in_sorted, _keys, panels, triangle_pairs
from .sweep import collision_intervals as _sweep

__all__ = ["Panels", "panels", "triangle_pairs", "pair_state", "collision_intervals",
           "colliding_pairs", "flat_overlaps"]

FEW_FACES = 768
"""Up to this many faces, the per-frame broad phase is one-axis sweep and prune
(`broadphase`), which costs less than building the spatial hash on so few boxes."""


def collision_intervals(mech, schedule, t_from=0.0, t_to=1.0, clearance=0.0, tol=DEFAULT, pan=None,
                        progress=None, first_only=False, stats=None):
    """Every colliding face pair over the motion, with its first and last t.

    Parameters
    ----------
    mech : Mechanism
    schedule : Schedule
    t_from, t_to : float
        Range of the drive parameter swept.
    clearance : float
        Panels that are not in contact by design collide when nearer than this.
    tol : Tolerances
        ``t_resolution`` bounds the error of the reported ends.
    pan : Panels, optional
        Reuse a triangulation.
    progress : callable, optional
        Called as ``progress(fraction)`` after each refinement round, with the
        share in [0, 1] of the candidate stretches of t already settled. It may
        raise to abandon the sweep; the exception propagates to the caller.
    first_only : bool, optional
        Early exit for callers that need only the earliest collision: once one is
        found, every stretch of t that starts after the earliest collision found so
        far is dropped (it cannot hold an earlier one) and the rest is refined as in
        the full sweep. The result then holds the full sweep's earliest interval,
        with the same ``faces`` and ``first_t`` (``min(result, key=lambda c:
        (c["first_t"], c["faces"]))``); other entries and ``last_t`` may be cut
        short. Without any collision the whole sweep runs and the result is [].
    stats : dict, optional
        Filled with work counts: ``t_values`` (drive values posed), ``pair_tests``
        (exact face-pair tests), ``candidates`` (candidate stretches from the broad
        phase), ``grid_steps`` (steps of the start grid).

    Returns
    -------
    list of dict
        ``{"faces": [a, b], "first_t": float, "last_t": float}`` sorted by faces
        then first_t. A pair may appear more than once if it collides in separate
        stretches. A pair that collides only at exactly t = 0 is a flat-layout
        overlap and is left to `flat_overlaps`.
    """
    return _sweep(mech, schedule, t_from, t_to, clearance, tol, pan, progress, first_only, stats)


def colliding_pairs(mech, poses, clearance=0.0, tol=DEFAULT, pan=None):
    """Face pairs colliding at one pose set.

    Broad phase on faces, then on planes, then on triangles: a spatial hash of the
    faces' boxes (each grown by half the clearance) gives the face pairs; a pair in
    which one face's vertices all lie further than ``m = max(2 contact, clearance)``
    on one side of the other's plane is dropped (the smaller face is tested first,
    so a large polygon's vertices are only read for the pairs that pass); of the
    rest, only the triangles of each face that reach within ``m`` of the other's
    plane and whose boxes meet the other face's box are paired, and those pairs'
    boxes tested, before the exact test. With no clearance, a triangle that reaches
    the other's plane without straddling it or lying in it is dropped too (see
    `_may_meet`). Every pair dropped is one the exact test rejects (a triangle beyond
    ``m`` of a plane neither crosses the panel in it nor comes within the clearance),
    so the answer is that of testing every triangle pair; a large polygon is tested
    only near the other panel's plane. Panels not flat to `PLANAR` prune nothing.

    Parameters
    ----------
    mech : Mechanism
    poses : (F, 4, 4) float
    clearance : float
    tol : Tolerances
    pan : Panels, optional

    Returns
    -------
    (n, 2) int
        Colliding pairs, a < b, sorted.
    """
    pan = pan or panels(mech, tol)
    n = mech.n_faces
    poses = np.asarray(poses, float)
    eps = tol.contact * mech.size
    margin = max(2.0 * eps, clearance)
    turn = poses[pan.tri_face, :3, :3]
    posed = pan.tri_points @ turn.transpose(0, 2, 1) + poses[pan.tri_face, None, :3, 3]
    grow = clearance / 2
    tri_lo, tri_hi = posed.min(axis=1) - grow, posed.max(axis=1) + grow
    face_lo = np.minimum.reduceat(tri_lo, pan.start)
    face_hi = np.maximum.reduceat(tri_hi, pan.start)
    if n <= FEW_FACES:
        pairs = broadphase.overlapping_boxes(face_lo, face_hi)
    else:
        pairs = spatialhash.overlapping_boxes(face_lo, face_hi)
    pairs = pairs[~_in_sorted(pairs[:, 0] * n + pairs[:, 1], pan.skip_keys)[0]]
    if not len(pairs):
        return np.zeros((0, 2), dtype=int)
    flat = _flat_frame(mech, pan)
    sizes, first, planar = flat["sizes"], flat["first"], flat["planar"]
    turn = poses[:, :3, :3]
    normal = np.einsum("fij,fj->fi", turn, flat["normal"])
    offset = np.einsum("ij,ij->i", normal, np.einsum("fij,fj->fi", turn, pan.centre) + poses[:, :3, 3])
    strict = clearance == 0
    points = np.einsum("kij,kj->ki", turn[flat["owner"]], flat["points"]) + poses[flat["owner"], :3, 3]
    small = np.where(sizes[pairs[:, 0]] <= sizes[pairs[:, 1]], 0, 1)
    for flip in (0, 1):
        side = small ^ flip
        mover = pairs[np.arange(len(pairs)), side]
        plane = pairs[np.arange(len(pairs)), 1 - side]
        rows, k = _expand(first[mover], sizes[mover])
        height = np.einsum("ij,ij->i", points[k], normal[plane[rows]]) - offset[plane[rows]]
        bounds = np.concatenate([[0], np.cumsum(sizes[mover])[:-1]])
        top, bottom = np.maximum.reduceat(height, bounds), np.minimum.reduceat(height, bounds)
        keep = _may_meet(top, bottom, margin, eps, strict & (pan.count[mover] == 1)) | ~planar[plane]
        pairs, small = pairs[keep], small[keep]
        if not len(pairs):
            return np.zeros((0, 2), dtype=int)
    near = []
    for side in (0, 1):
        face, other = pairs[:, side], pairs[:, 1 - side]
        # A one-triangle face's triangle passed the tests above as the face did.
        many = pan.count[face] > 1
        rows, tri = _expand(pan.start[face], np.where(many, pan.count[face], 0))
        box = ((tri_lo[tri] <= face_hi[other[rows]]).all(axis=1) & (face_lo[other[rows]] <= tri_hi[tri]).all(axis=1))
        rows, tri = rows[box], tri[box]
        height = np.einsum("nkj,nj->nk", posed[tri], normal[other[rows]]) - offset[other[rows]][:, None]
        reach = _may_meet(height.max(axis=1), height.min(axis=1), margin, eps, strict) | ~planar[other[rows]]
        one = np.flatnonzero(~many)
        rows, tri = np.concatenate([rows[reach], one]), np.concatenate([tri[reach], pan.start[face[one]]])
        order = np.argsort(rows, kind="stable")
        near.append((rows[order], tri[order]))
    (ra, ta), (rb, tb) = near
    ca, cb = np.bincount(ra, minlength=len(pairs)), np.bincount(rb, minlength=len(pairs))
    sa, sb = np.concatenate([[0], np.cumsum(ca)[:-1]]), np.concatenate([[0], np.cumsum(cb)[:-1]])
    row, local = _expand(np.zeros(len(pairs), np.int64), ca * cb)
    ia = ta[sa[row] + local // cb[row]]
    ib = tb[sb[row] + local % cb[row]]
    meet = ((np.maximum(tri_lo[ia], tri_lo[ib]) <= np.minimum(tri_hi[ia], tri_hi[ib])).all(axis=1))
    ia, ib, row = ia[meet], ib[meet], row[meet]
    keys = pairs[row, 0] * n + pairs[row, 1]
    if not len(keys):
        return np.zeros((0, 2), dtype=int)
    ta_, tb_ = posed[ia], posed[ib]
    hit_keys = np.unique(keys[narrowphase.crossing_overlap(ta_, tb_, eps) > eps])
    if clearance > 0:
        touching, _ = _in_sorted(keys, pan.touch_keys)
        pivot, _ = _in_sorted(keys, pan.pivot_keys)
        close_ = ~touching & ~pivot & ~_in_sorted(keys, hit_keys)[0]
        if close_.any():
            close = narrowphase.triangle_distance(ta_[close_], tb_[close_]) < clearance
            hit_keys = np.union1d(hit_keys, keys[close_][close])
    return np.column_stack([hit_keys // n, hit_keys % n]).astype(int)


def _expand(start, count):
    """Rows (m,) and indices (m,): ``start[r], start[r] + 1, ... start[r] + count[r] - 1`` for each row r."""
    rows = np.repeat(np.arange(len(count)), count)
    local = np.arange(int(count.sum())) - np.repeat(np.cumsum(count) - count, count)
    return rows, np.repeat(start, count) + local


def _may_meet(top, bottom, margin, eps, strict):
    """Whether points with heights in [bottom, top] over a plane may meet a panel in it.

    Not when all lie beyond ``margin`` on one side. With ``strict`` (n,) bool, for a
    triangle whose corners these are and no clearance: not either when they do not
    straddle the plane beyond ``eps`` and some corner is off it by more than
    ``eps`` (`triangles.crossing_overlap` is then ``-inf`` against every triangle in
    the plane: such a triangle neither crosses it strictly nor lies in it). The
    tests keep a thousandth of ``eps`` in hand for round-off.
    """
    slack = 1e-3 * eps
    out = (top >= -margin) & (bottom <= margin)
    one_side = (top < eps - slack) | (bottom > -eps + slack)
    off = np.maximum(top, -bottom) > eps + slack
    return out & ~(strict & one_side & off)


PLANAR = 1e-12
"""Flatness (relative to the model's size) a panel needs for its plane to prune pairs."""


_FLAT = {}
"""`_flat_frame` results by ``id(pan)`` for the last few Panels, each with a weak reference to its Panels."""


def _flat_frame(mech, pan):
    """What `colliding_pairs` needs of the flat frame, computed once per Panels.

    Returns a dict: ``sizes`` (F,) vertex counts, ``first`` (F,) each face's first
    vertex in ``points`` (V, 3), the flat vertices, ``owner`` (V,) their faces,
    ``normal`` (F, 3) unit normals (the sum of the face's triangle normals, its area
    vector), and ``planar`` (F,): the face's triangle corners lie within `PLANAR`
    times the model's size of the plane through its vertex centroid. A face that is
    only nearly planar may have triangles whose own planes tilt away from that
    plane, so its plane prunes nothing.
    """
    entry = _FLAT.get(id(pan))
    if entry is not None and entry[0]() is pan:
        return entry[1]
    tri = pan.tri_points
    area = np.cross(tri[:, 1] - tri[:, 0], tri[:, 2] - tri[:, 0])
    normal = np.add.reduceat(area, pan.start)
    normal /= np.linalg.norm(normal, axis=1, keepdims=True)
    stray = np.abs(np.einsum("kvj,kj->kv", tri - pan.centre[pan.tri_face][:, None], normal[pan.tri_face]))
    sizes = np.array([len(p) for p in mech.flat_faces])
    out = {"sizes": sizes, "first": np.concatenate([[0], np.cumsum(sizes)[:-1]]),
           "points": np.concatenate(mech.flat_faces), "owner": np.repeat(np.arange(mech.n_faces), sizes),
           "normal": normal,
           "planar": np.maximum.reduceat(stray.max(axis=1), pan.start) <= PLANAR * mech.size}
    if len(_FLAT) >= 8:
        _FLAT.clear()
    _FLAT[id(pan)] = (weakref.ref(pan), out)
    return out


def flat_overlaps(mech, tol=DEFAULT, pan=None):
    """Face pairs that overlap in the flat layout (t = 0).

    Returns
    -------
    (n, 2) int
    """
    flat = np.broadcast_to(np.eye(4), (mech.n_faces, 4, 4))
    return colliding_pairs(mech, flat, tol=tol, pan=pan)
