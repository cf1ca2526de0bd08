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

Candidate pairs per interval come from sweep-and-prune on boxes that contain each
panel's whole sweep over the interval (the boxes at both ends, grown by half the
distance the panel can travel in it, and by half the clearance).
"""

from dataclasses import dataclass

import numpy as np
from scipy.spatial import cKDTree

from ..geometry import transform_points, unit
from ..gearing import fold_angles
from ..kinematics import common_depth, face_poses, speed_profile
from ..tolerances import DEFAULT
from . import broadphase, triangles

POSE_CHUNK = 256


@dataclass(frozen=True)
class Panels:
    """Triangulated panels and the pair classes the collision tests need.

    Attributes
    ----------
    tri_face : (K,) int
        Face of each triangle.
    tri_points : (K, 3, 3) float
        Triangle corners in the flat frame.
    start, count : (F,) int
        Each face's run of triangles.
    skip_keys : (n,) int
        Sorted keys ``a * F + b`` (a < b) of pairs never tested: hinged faces and
        faces that share a whole edge at every t.
    touch_keys : (n,) int
        Sorted keys of pairs that share a point when flat or when ideally closed
        (the clearance does not apply to them).
    pivot_keys : (P,) int
        Sorted keys of convex pairs that share a point at every t.
    pivot_dirs : (P, 2, 2, 3) float
        Flat-frame directions of the two edges leaving the shared point, per face.
    pivot_path : (P, H) bool
        Hinges on the tree path between the pair's faces.
    centre, radius : (F, 3) float, (F,) float
        A sphere around each face (flat frame): vertex centroid and reach.
    """

    tri_face: np.ndarray
    tri_points: np.ndarray
    start: np.ndarray
    count: np.ndarray
    skip_keys: np.ndarray
    touch_keys: np.ndarray
    pivot_keys: np.ndarray
    pivot_dirs: np.ndarray
    pivot_path: np.ndarray
    centre: np.ndarray
    radius: np.ndarray


def _keys(pairs, n_faces):
    pairs = np.sort(np.asarray(pairs, np.int64).reshape(-1, 2), axis=1)
    return pairs[:, 0] * n_faces + pairs[:, 1]


def _is_convex(poly, normal):
    turn = np.cross(np.roll(poly, -1, 0) - poly, np.roll(poly, -2, 0) - np.roll(poly, -1, 0)) @ normal
    return bool((turn > -1e-12 * np.abs(turn).max()).all())


def _chains(mech):
    """(F, H) bool: the hinges on each face's path from the root."""
    chain = np.zeros((mech.n_faces, mech.n_hinges), bool)
    for level in mech.levels:
        chain[mech.child[level]] = chain[mech.parent[level]]
        chain[mech.child[level], level] = True
    return chain


def panels(mech, tol=DEFAULT):
    """Triangulate a mechanism's panels and classify its face pairs.

    Returns
    -------
    Panels
    """
    n = mech.n_faces
    tris, owner = [], []
    for f, poly in enumerate(mech.flat_faces):
        idx = triangles.triangulate(poly)
        tris.append(poly[idx])
        owner.append(np.full(len(idx), f))
    count = np.array([len(t) for t in tris])
    start = np.concatenate([[0], np.cumsum(count)[:-1]])
    eps = tol.coincident * mech.size
    closed = face_poses(mech, mech.closed_angles[None])[0]
    flat_pts = np.concatenate(mech.flat_faces)
    pt_face = np.concatenate([np.full(len(p), f) for f, p in enumerate(mech.flat_faces)])
    pt_local = np.concatenate([np.arange(len(p)) for p in mech.flat_faces])
    closed_pts = transform_points(closed[pt_face], flat_pts)
    touch = set()
    for pts in (flat_pts, closed_pts):
        for i, j in cKDTree(pts).query_pairs(eps):
            if pt_face[i] != pt_face[j]:
                touch.add((min(pt_face[i], pt_face[j]), max(pt_face[i], pt_face[j])))
    hinged = {tuple(sorted(p)) for p in mech.hinge_faces.tolist()}
    chain = _chains(mech)
    shared = {}
    for i, j in cKDTree(flat_pts).query_pairs(eps):
        a, b = pt_face[i], pt_face[j]
        if a == b or (min(a, b), max(a, b)) in hinged:
            continue
        if a > b:
            i, j, a, b = j, i, b, a
        path = chain[a] ^ chain[b]
        axes = mech.axes[path]
        d = np.cross(axes[:, 1] - axes[:, 0], flat_pts[i] - axes[:, 0])
        if (np.linalg.norm(d, axis=1) <= eps * np.linalg.norm(axes[:, 1] - axes[:, 0], axis=1)).all():
            shared.setdefault((a, b), []).append((pt_local[i], pt_local[j], path))
    skip = set(hinged)
    pivots = []
    normals = np.array([np.cross(p[1] - p[0], p[2] - p[0]) for p in mech.flat_faces])
    for (a, b), points in shared.items():
        if len(points) > 1:
            skip.add((a, b))
            continue
        la, lb, path = points[0]
        if not (_is_convex(mech.flat_faces[a], normals[a]) and _is_convex(mech.flat_faces[b], normals[b])):
            continue
        dirs = []
        for f, k in ((a, la), (b, lb)):
            poly = mech.flat_faces[f]
            dirs.append([poly[(k + 1) % len(poly)] - poly[k], poly[k - 1] - poly[k]])
        pivots.append(((a, b), dirs, path))
    pivots.sort(key=lambda p: p[0][0] * n + p[0][1])
    centre = np.array([p.mean(axis=0) for p in mech.flat_faces])
    radius = np.array([np.linalg.norm(p - c, axis=1).max() for p, c in zip(mech.flat_faces, centre)])
    return Panels(
        tri_face=np.concatenate(owner), tri_points=np.concatenate(tris), start=start, count=count,
        skip_keys=np.unique(_keys(list(skip), n)), touch_keys=np.unique(_keys(list(touch), n)),
        pivot_keys=_keys([p[0] for p in pivots], n),
        pivot_dirs=np.array([p[1] for p in pivots], float).reshape(-1, 2, 2, 3),
        pivot_path=np.array([p[2] for p in pivots], bool).reshape(-1, mech.n_hinges),
        centre=centre, radius=radius)


def _in_sorted(keys, table):
    if len(table) == 0:
        return np.zeros(len(keys), bool), np.zeros(len(keys), np.int64)
    pos = np.clip(np.searchsorted(table, keys), 0, len(table) - 1)
    return table[pos] == keys, pos


def triangle_pairs(pan, pairs):
    """Expand face pairs into the pairs of their triangles.

    Parameters
    ----------
    pan : Panels
    pairs : (n, 2) int
        Face pairs.

    Returns
    -------
    ia, ib, row : (m,) int
        Triangle indices into ``pan.tri_points`` and the face pair each came from.
    """
    ca, cb = pan.count[pairs[:, 0]], pan.count[pairs[:, 1]]
    per = ca * cb
    row = np.repeat(np.arange(len(pairs)), per)
    local = np.arange(per.sum()) - np.repeat(np.cumsum(per) - per, per)
    ia = pan.start[pairs[row, 0]] + local // cb[row]
    ib = pan.start[pairs[row, 1]] + local % cb[row]
    return ia, ib, row


def _arc_distance(p, a1, a2):
    """Angle from unit vectors p (n, 3) to the great-circle arcs a1-a2 (n, 3)."""
    nrm = unit(np.cross(a1, a2))
    h = np.einsum("ij,ij->i", p, nrm)
    foot = p - h[:, None] * nrm
    inside = (np.einsum("ij,ij->i", np.cross(a1, foot), nrm) >= 0) & (
        np.einsum("ij,ij->i", np.cross(foot, a2), nrm) >= 0)
    ends = np.minimum(_angle(p, a1), _angle(p, a2))
    return np.where(inside, np.arcsin(np.clip(np.abs(h), 0, 1)), ends)


def _angle(u, v):
    return np.arctan2(np.linalg.norm(np.cross(u, v), axis=1), np.einsum("ij,ij->i", u, v))


def _wedge_separation(a, b):
    """Angular distance between wedges a, b (n, 2, 3) of unit edge directions."""
    na, nb = np.cross(a[:, 0], a[:, 1]), np.cross(b[:, 0], b[:, 1])
    sa = np.einsum("nkj,nj->nk", a, nb)
    sb = np.einsum("nkj,nj->nk", b, na)
    line = np.cross(na, nb)
    length = np.linalg.norm(line, axis=1)
    skew = length > 1e-12 * np.linalg.norm(na, axis=1) * np.linalg.norm(nb, axis=1)
    x = line / np.where(skew, length, 1.0)[:, None]
    x = np.where((np.einsum("ij,ij->i", x, a.sum(axis=1)) < 0)[:, None], -x, x)
    # Coplanar wedges (skew False) overlap exactly when an end of one lies in the
    # other, which the end-to-arc distances below already give as 0.
    cross = skew & (sa[:, 0] * sa[:, 1] <= 0) & (sb[:, 0] * sb[:, 1] <= 0) & (
        np.einsum("ij,ij->i", x, b.sum(axis=1)) >= 0)
    d = np.minimum.reduce([_arc_distance(a[:, 0], b[:, 0], b[:, 1]), _arc_distance(a[:, 1], b[:, 0], b[:, 1]),
                           _arc_distance(b[:, 0], a[:, 0], a[:, 1]), _arc_distance(b[:, 1], a[:, 0], a[:, 1])])
    return np.where(cross, 0.0, d)


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
        dirs = pan.pivot_dirs[pos[rows]]
        rot_a = poses[frame[rows], pairs[rows, 0], :3, :3]
        rot_b = poses[frame[rows], pairs[rows, 1], :3, :3]
        wa = unit(np.einsum("nij,nkj->nki", rot_a, dirs[:, 0]))
        wb = unit(np.einsum("nij,nkj->nki", rot_b, dirs[:, 1]))
        sep[rows] = _wedge_separation(wa, wb)
    sep[hit] = 0.0
    return sep, hit


def _posed_triangles(pan, poses):
    """(T, K, 3, 3) every triangle at every pose set (T, F, 4, 4)."""
    return transform_points(poses[:, pan.tri_face][:, :, None], pan.tri_points[None])


def _face_boxes(pan, poses):
    """Bounding boxes (T, F, 3) lo and hi of every face at every pose set (T, F, 4, 4)."""
    pts = _posed_triangles(pan, poses)
    lo = np.minimum.reduceat(pts.min(axis=2), pan.start, axis=1)
    hi = np.maximum.reduceat(pts.max(axis=2), pan.start, axis=1)
    return lo, hi


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
