"""The earlier collision implementation, kept as the reference the fast path is tested against.

Sweep-and-prune on one axis (`broadphase`), every candidate pair's triangles tested
with `triangles.crossing_overlap` and `triangles.triangle_distance`, and the sweep's
start grid of the method's original spacing. It gives the same answers as
`foldsim.analysis.collision`, more slowly; `tests/test_collision_fast.py` holds the
two side by side.
"""

import numpy as np

from ..geometry import transform_points
from ..gearing import fold_angles
from ..kinematics import common_depth, face_poses, speed_profile
from ..tolerances import DEFAULT
from . import broadphase, triangles
from .narrowphase import pivot_wedges
from .panels import _face_boxes, _in_sorted, _keys, _posed_triangles, panels, triangle_pairs

POSE_CHUNK = 256


class _Evaluator:
    """Separation and collision state of face pairs at drive values, with reuse."""

    def __init__(self, mech, schedule, pan, clearance, tol):
        self.mech, self.schedule, self.pan = mech, schedule, pan
        self.clearance = clearance
        self.eps = tol.contact * mech.size
        self.profile = speed_profile(mech, schedule.rates)
        self.speed = self.profile[:, 0]
        self.pivot_rate = pan.pivot_path.astype(float) @ np.abs(schedule.rates)

    def poses(self, t):
        """(T, F, 4, 4) poses, computed in chunks to bound memory."""
        out = np.empty((len(t), self.mech.n_faces, 4, 4))
        for k in range(0, len(t), POSE_CHUNK):
            out[k:k + POSE_CHUNK] = face_poses(self.mech, fold_angles(self.schedule, t[k:k + POSE_CHUNK]))
        return out

    def rates(self, pairs):
        """(n,) bound on d(separation)/dt for face pairs (n, 2)."""
        keys, first, back = np.unique(_keys(pairs, self.mech.n_faces), return_index=True,
                                      return_inverse=True)
        unique_pairs = np.sort(pairs[first], axis=1)
        depth = common_depth(self.mech, unique_pairs)
        linear = (self.profile[unique_pairs[:, 0], depth] + self.profile[unique_pairs[:, 1], depth])[back]
        is_pivot, pos = _in_sorted(keys[back], self.pan.pivot_keys)
        if not is_pivot.any():
            return linear
        return np.where(is_pivot, self.pivot_rate[pos], linear)

    def evaluate(self, t, pairs, need):
        """Separation (n,) and collision flag (n,) of face pairs (n, 2) at t (n,).

        Where the panels' bounding spheres are already ``need`` (n,) apart, that
        gap is returned as the separation (a lower bound is all the advancement
        needs) and the exact test is skipped.
        """
        times, t_index = np.unique(t, return_inverse=True)
        sep = np.empty(len(pairs))
        hit = np.zeros(len(pairs), bool)
        for k in range(0, len(times), POSE_CHUNK):
            rows = np.flatnonzero((t_index >= k) & (t_index < k + POSE_CHUNK))
            poses = self.poses(times[k:k + POSE_CHUNK])
            frame = t_index[rows] - k
            centre = transform_points(poses[frame[:, None], pairs[rows]], self.pan.centre[pairs[rows]])
            gap = (np.linalg.norm(centre[:, 0] - centre[:, 1], axis=1)
                   - self.pan.radius[pairs[rows]].sum(axis=1) - self.clearance)
            far = gap >= need[rows]
            sep[rows[far]] = gap[far]
            near = rows[~far]
            sep[near], hit[near] = pair_state(self.mech, self.pan, poses, frame[~far], pairs[near],
                                              self.clearance, self.eps)
        return sep, hit


def pair_state(mech, pan, poses, frame, pairs, clearance, eps, separation=True):
    """Separation and collision flag of face pairs.

    Parameters
    ----------
    mech : Mechanism
    pan : Panels
    poses : (T, F, 4, 4) float
    frame : (n,) int
        Which pose set each pair is taken at.
    pairs : (n, 2) int
    clearance, eps : float
        Clearance between panels not in contact by design; contact tolerance.
    separation : bool
        Compute ``sep``; without it (and with no clearance) only ``hit`` is
        meaningful and ``sep`` is all inf.

    Returns
    -------
    sep : (n,) float
        Distance (less the clearance), or wedge angle for pairs pivoting about a
        shared point; 0 where colliding.
    hit : (n,) bool
    """
    ia, ib, row = triangle_pairs(pan, pairs)
    if len(poses) * len(pan.tri_face) < len(row):
        posed = _posed_triangles(pan, poses)
        ta, tb = posed[frame[row], ia], posed[frame[row], ib]
    else:
        ta = transform_points(poses[frame[row], pan.tri_face[ia]][:, None], pan.tri_points[ia])
        tb = transform_points(poses[frame[row], pan.tri_face[ib]][:, None], pan.tri_points[ib])
    overlap = triangles.crossing_overlap(ta, tb, eps)
    hit = np.zeros(len(pairs), bool)
    np.logical_or.at(hit, row, overlap > eps)
    keys = _keys(pairs, mech.n_faces)
    is_pivot, pos = _in_sorted(keys, pan.pivot_keys)
    sep = np.full(len(pairs), np.inf)
    if not (separation or clearance > 0):
        return sep, hit
    measured = ~is_pivot[row] & ~hit[row]
    np.minimum.at(sep, row[measured], triangles.triangle_distance(ta[measured], tb[measured]))
    if clearance > 0:
        touching, _ = _in_sorted(keys, pan.touch_keys)
        hit |= ~touching & ~is_pivot & (sep < clearance)
        sep = np.where(touching, sep, np.maximum(sep - clearance, 0.0))
    if is_pivot.any():
        rows = np.flatnonzero(is_pivot)
        sep[rows] = pivot_wedges(pan, poses, frame[rows], pairs[rows], pos[rows])
    sep[hit] = 0.0
    return sep, hit


def _swept_candidates(mech, pan, ev, grid, poses):
    """Candidate (interval, a, b) rows from sweep-and-prune on swept boxes.

    Each box is grown by half the clearance as well, so two panels nearer than the
    clearance are candidates even when their boxes do not overlap.
    """
    lo, hi = _face_boxes(pan, poses)
    n = mech.n_faces
    grow = (ev.speed[None, :] * np.diff(grid)[:, None] / 2 + ev.clearance / 2)[..., None]
    swept_lo = np.minimum(lo[:-1], lo[1:]) - grow
    swept_hi = np.maximum(hi[:-1], hi[1:]) + grow
    rows = broadphase.box_pairs_batched(swept_lo, swept_hi)
    skip, _ = _in_sorted(_keys(rows[:, 1:], n), pan.skip_keys)
    return rows[~skip]


def collision_intervals(mech, schedule, t_from=0.0, t_to=1.0, clearance=0.0, tol=DEFAULT, pan=None,
                        progress=None):
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

    Returns
    -------
    list of dict
        ``{"faces": [a, b], "first_t": float, "last_t": float}`` sorted by faces
        then first_t. A pair may appear more than once if it collides in separate
        stretches. A pair that collides only at exactly t = 0 is a flat-layout
        overlap and is left to `flat_overlaps`.
    """
    pan = pan or panels(mech, tol)
    ev = _Evaluator(mech, schedule, pan, clearance, tol)
    lo_t, hi_t = sorted((float(t_from), float(t_to)))
    span = hi_t - lo_t
    if span == 0:
        return []
    n_steps = int(np.clip(np.ceil(span * ev.speed.max() / (0.25 * mech.size)), 16, 1024))
    grid = np.unique(np.concatenate([np.linspace(lo_t, hi_t, n_steps + 1),
                                     [x for x in (-1.0, 0.0, 1.0) if lo_t < x < hi_t]]))
    poses = ev.poses(grid)
    cand = _swept_candidates(mech, pan, ev, grid, poses)
    pairs = cand[:, 1:]
    t0, t1 = grid[cand[:, 0]], grid[cand[:, 0] + 1]
    rate = ev.rates(pairs)
    sep0, hit0 = ev.evaluate(t0, pairs, rate * (t1 - t0))
    sep1, hit1 = ev.evaluate(t1, pairs, rate * (t1 - t0))
    found = []
    resolution = tol.t_resolution / 2
    total = float((t1 - t0).sum()) or 1.0
    while len(pairs):
        both = hit0 & hit1
        found.append(np.column_stack([pairs[both], t0[both], t1[both]]))
        for hit, t in ((hit0 & ~hit1, t0), (hit1 & ~hit0, t1)):
            found.append(np.column_stack([pairs[hit], t[hit], t[hit]]))
        open_ = ~both & (sep0 + sep1 <= rate * (t1 - t0)) & (t1 - t0 > resolution)
        pairs, t0, t1, rate = pairs[open_], t0[open_], t1[open_], rate[open_]
        sep0, hit0, sep1, hit1 = sep0[open_], hit0[open_], sep1[open_], hit1[open_]
        if progress is not None:
            progress(1.0 - float((t1 - t0).sum()) / total)
        mid = 0.5 * (t0 + t1)
        sep_m, hit_m = ev.evaluate(mid, pairs, rate * (mid - t0))
        pairs, rate = np.concatenate([pairs, pairs]), np.concatenate([rate, rate])
        t0, t1 = np.concatenate([t0, mid]), np.concatenate([mid, t1])
        sep0, sep1 = np.concatenate([sep0, sep_m]), np.concatenate([sep_m, sep1])
        hit0, hit1 = np.concatenate([hit0, hit_m]), np.concatenate([hit_m, hit1])
    if progress is not None:
        progress(1.0)
    return _merge(np.concatenate(found) if found else np.zeros((0, 4)))


def _merge(rows):
    """Merge (a, b, first, last) rows of one pair that touch into intervals."""
    out = []
    rows = rows[np.lexsort((rows[:, 2], rows[:, 1], rows[:, 0]))]
    for row in rows:
        a, b, first, last = int(row[0]), int(row[1]), float(row[2]), float(row[3])
        if out and out[-1]["faces"] == [a, b] and first <= out[-1]["last_t"] + 1e-12:
            out[-1]["last_t"] = max(out[-1]["last_t"], last)
        else:
            out.append({"faces": [a, b], "first_t": first, "last_t": last})
    return [c for c in out if not (c["first_t"] == 0.0 and c["last_t"] == 0.0)]


def colliding_pairs(mech, poses, clearance=0.0, tol=DEFAULT, pan=None):
    """Face pairs colliding at one pose set.

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
    lo, hi = _face_boxes(pan, poses[None])
    n = mech.n_faces
    pairs = broadphase.overlapping_boxes(lo[0] - clearance, hi[0] + clearance)
    pairs = pairs[~_in_sorted(_keys(pairs, n), pan.skip_keys)[0]]
    if not len(pairs):
        return pairs.reshape(0, 2)
    _, hit = pair_state(mech, pan, poses[None], np.zeros(len(pairs), np.int64), pairs, clearance,
                        tol.contact * mech.size, separation=False)
    return pairs[hit]


def flat_overlaps(mech, tol=DEFAULT, pan=None):
    """Face pairs that overlap in the flat layout (t = 0).

    Returns
    -------
    (n, 2) int
    """
    flat = np.broadcast_to(np.eye(4), (mech.n_faces, 4, 4))
    return colliding_pairs(mech, flat, tol=tol, pan=pan)
