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

import numpy as np

from ..geometry import transform_points
from ..tolerances import DEFAULT
from . import narrowphase, spatialhash
from .narrowphase import pair_state
from .panels import Panels, _in_sorted, _keys, panels, triangle_pairs
from .sweep import collision_intervals as _sweep

__all__ = ["Panels", "panels", "triangle_pairs", "pair_state", "collision_intervals",
           "colliding_pairs", "flat_overlaps"]


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

    The broad phase works on triangles, not faces (a spatial hash of the posed
    triangles' boxes, each grown by half the clearance), so a large polygon is
    tested only where its triangles come near another panel's.

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
    posed = transform_points(np.asarray(poses, float)[pan.tri_face][:, None], pan.tri_points)
    grow = clearance / 2
    rows = spatialhash.overlapping_boxes(posed.min(axis=1) - grow, posed.max(axis=1) + grow)
    ia, ib = rows[:, 0], rows[:, 1]
    fa, fb = pan.tri_face[ia], pan.tri_face[ib]
    swap = fa > fb
    ia, ib = np.where(swap, ib, ia), np.where(swap, ia, ib)
    fa, fb = np.minimum(fa, fb), np.maximum(fa, fb)
    keys = fa * n + fb
    keep = (fa != fb) & ~_in_sorted(keys, pan.skip_keys)[0]
    ia, ib, keys = ia[keep], ib[keep], keys[keep]
    if not len(keys):
        return np.zeros((0, 2), dtype=int)
    eps = tol.contact * mech.size
    ta, tb = posed[ia], posed[ib]
    hit_keys = np.unique(keys[narrowphase.crossing_overlap(ta, tb, eps) > eps])
    if clearance > 0:
        touching, _ = _in_sorted(keys, pan.touch_keys)
        pivot, _ = _in_sorted(keys, pan.pivot_keys)
        near = ~touching & ~pivot & ~_in_sorted(keys, hit_keys)[0]
        if near.any():
            close = narrowphase.triangle_distance(ta[near], tb[near]) < clearance
            hit_keys = np.union1d(hit_keys, keys[near][close])
    return np.column_stack([hit_keys // n, hit_keys % n]).astype(int)


def flat_overlaps(mech, tol=DEFAULT, pan=None):
    """Face pairs that overlap in the flat layout (t = 0).

    Returns
    -------
    (n, 2) int
    """
    flat = np.broadcast_to(np.eye(4), (mech.n_faces, 4, 4))
    return colliding_pairs(mech, flat, tol=tol, pan=pan)
