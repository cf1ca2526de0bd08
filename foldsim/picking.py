"""Which panel a ray hits, and where two crossing panels cut each other.

Both answers are for drawing: the desktop app turns a mouse click into a ray and
asks `pick_face` which panel is under it, and draws the lines along which
colliding panels pass through each other with `intersection_segments`. Panels are
the zero-thickness triangles of `foldsim.analysis.collision.panels`; they are hit
from either side.
"""

import numpy as np

from .analysis import triangles
from .geometry import transform_points
from .tolerances import DEFAULT


def _face_triangles(mech, pan):
    """Flat-frame triangles (K, 3, 3) and their faces (K,), from ``pan`` if given."""
    if pan is not None:
        return pan.tri_points, pan.tri_face
    tris, owner = [], []
    for f, poly in enumerate(mech.flat_faces):
        idx = triangles.triangulate(poly)
        tris.append(poly[idx])
        owner.append(np.full(len(idx), f))
    return np.concatenate(tris), np.concatenate(owner)


def ray_triangle_distances(origin, direction, tris, tol=DEFAULT):
    """Distance along a ray to each of many triangles (Möller–Trumbore).

    Parameters
    ----------
    origin : (3,) float
        Start of the ray.
    direction : (3,) float
        Direction of the ray, any non-zero length.
    tris : (K, 3, 3) float
        Triangles; both sides count.
    tol : Tolerances
        A ray within ``tol.coincident`` (relative) of a triangle's plane misses it.

    Returns
    -------
    (K,) float
        Distance from ``origin`` to the hit point, in the units of the points;
        ``inf`` where the ray misses (or the triangle lies behind the origin).
        A hit on a triangle's edge or corner counts.

    Examples
    --------
    >>> tri = np.array([[[0.0, 0, 0], [1, 0, 0], [0, 1, 0]]])
    >>> ray_triangle_distances([0.25, 0.25, 2.0], [0, 0, -3.0], tri).tolist()
    [2.0]
    """
    origin = np.asarray(origin, dtype=float)
    direction = np.asarray(direction, dtype=float)
    direction = direction / np.linalg.norm(direction)
    tris = np.asarray(tris, dtype=float).reshape(-1, 3, 3)
    e1 = tris[:, 1] - tris[:, 0]
    e2 = tris[:, 2] - tris[:, 0]
    p = np.cross(direction, e2)
    det = np.einsum("ij,ij->i", e1, p)
    # |det| = |d . (e1 x e2)|: twice the area times the cosine of the incidence.
    area2 = np.linalg.norm(np.cross(e1, e2), axis=1)
    usable = np.abs(det) > tol.coincident * area2
    inv = np.where(usable, 1.0 / np.where(usable, det, 1.0), 0.0)
    s = origin - tris[:, 0]
    u = np.einsum("ij,ij->i", s, p) * inv
    q = np.cross(s, e1)
    v = (q @ direction) * inv
    dist = np.einsum("ij,ij->i", e2, q) * inv
    hit = usable & (u >= 0.0) & (v >= 0.0) & (u + v <= 1.0) & (dist >= 0.0)
    return np.where(hit, dist, np.inf)


def pick_face(mech, poses, origin, direction, pan=None, tol=DEFAULT):
    """The first panel a ray hits.

    Parameters
    ----------
    mech : Mechanism
    poses : (F, 4, 4) float
        Pose of every face (as from `foldsim.kinematics.poses_at`, one drive value).
    origin : (3,) float
        Start of the ray, in the frame the poses map into.
    direction : (3,) float
        Direction of the ray, any non-zero length.
    pan : Panels, optional
        Reuse the triangulation of `foldsim.analysis.collision.panels`.
    tol : Tolerances

    Returns
    -------
    face : int
        The nearest face hit, or -1 when the ray hits none.
    distance : float
        Distance from ``origin`` to the hit along the ray, in model units; ``inf``
        for a miss.

    Examples
    --------
    Two unit squares side by side, flat; a ray straight down onto the second:

    >>> from foldsim.model import build_mechanism
    >>> pts = [[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0], [2, 0, 0], [2, 1, 0]]
    >>> m = build_mechanism(pts, [[0, 1, 2, 3], [1, 4, 5, 2]], [[0, 1]],
    ...                     state="flat", closed_angles=[np.pi / 2])
    >>> flat = np.broadcast_to(np.eye(4), (2, 4, 4))
    >>> pick_face(m, flat, [1.5, 0.5, 3.0], [0, 0, -1])
    (1, 3.0)
    >>> pick_face(m, flat, [5.0, 0.5, 3.0], [0, 0, -1])
    (-1, inf)
    """
    flat, owner = _face_triangles(mech, pan)
    posed = transform_points(np.asarray(poses, dtype=float)[owner][:, None], flat)
    dist = ray_triangle_distances(origin, direction, posed, tol)
    k = int(np.argmin(dist))
    if not np.isfinite(dist[k]):
        return -1, float("inf")
    return int(owner[k]), float(dist[k])


def intersection_segments(a, b, tol=DEFAULT):
    """The segment along which each pair of triangles cuts through each other.

    Parameters
    ----------
    a, b : (n, 3, 3) float
        Pairs of triangles: ``a[k]`` against ``b[k]``.
    tol : Tolerances
        A vertex within ``tol.coincident`` (relative to the pair's size) of the
        other triangle's plane lies on it; planes that meet at an angle below
        ``tol.coincident`` radians are parallel.

    Returns
    -------
    segments : (n, 2, 3) float
        End points of the common segment of each pair (zeros where there is none).
    hit : (n,) bool
        The pair meets along a segment or at a point. Coplanar and parallel pairs
        are never hit: their common part is an area or nothing, and the panels'
        warning colour already shows it.

    Examples
    --------
    A triangle in z = 0 and a vertical one in x = 0.5 that crosses it:

    >>> a = np.array([[[0.0, 0, 0], [2, 0, 0], [0, 2, 0]]])
    >>> b = np.array([[[0.5, -1, -1], [0.5, 3, -1], [0.5, 1, 1]]])
    >>> seg, hit = intersection_segments(a, b)
    >>> hit.tolist(), np.round(seg, 12).tolist()
    ([True], [[[0.5, 0.0, 0.0], [0.5, 1.5, 0.0]]])
    """
    a = np.asarray(a, dtype=float).reshape(-1, 3, 3)
    b = np.asarray(b, dtype=float).reshape(-1, 3, 3)
    if a.shape != b.shape:
        raise ValueError(f"a and b must have the same shape (n, 3, 3), got {a.shape} and {b.shape}")
    n = len(a)
    segments = np.zeros((n, 2, 3))
    if n == 0:
        return segments, np.zeros(0, bool)
    size = np.maximum(np.ptp(a, axis=1).max(axis=1), np.ptp(b, axis=1).max(axis=1))
    eps = tol.coincident * size
    na = np.cross(a[:, 1] - a[:, 0], a[:, 2] - a[:, 0])
    nb = np.cross(b[:, 1] - b[:, 0], b[:, 2] - b[:, 0])
    na /= np.maximum(np.linalg.norm(na, axis=1, keepdims=True), np.finfo(float).tiny)
    nb /= np.maximum(np.linalg.norm(nb, axis=1, keepdims=True), np.finfo(float).tiny)
    line = np.cross(na, nb)
    sine = np.linalg.norm(line, axis=1)
    usable = sine > tol.coincident
    line = line / np.where(usable, sine, 1.0)[:, None]
    da = _plane_distances(a, b[:, 0], nb, eps)
    db = _plane_distances(b, a[:, 0], na, eps)
    origin = a[:, 0]
    lo_a, hi_a = _chord(a, da, origin, line)
    lo_b, hi_b = _chord(b, db, origin, line)
    lo, hi = np.maximum(lo_a, lo_b), np.minimum(hi_a, hi_b)
    hit = usable & np.isfinite(lo) & np.isfinite(hi) & (lo <= hi)
    # Every chord point lies on both planes, so on the line through `origin`'s
    # foot; rebuild the ends from the parameters along the line.
    foot = _line_point(a, da, line)
    segments[hit, 0] = foot[hit] + lo[hit, None] * line[hit]
    segments[hit, 1] = foot[hit] + hi[hit, None] * line[hit]
    return segments, hit


def _plane_distances(t, point, normal, eps):
    """Signed distances (n, 3) of triangle vertices to planes; within ``eps`` -> 0."""
    d = np.einsum("nkj,nj->nk", t - point[:, None], normal)
    return np.where(np.abs(d) <= eps[:, None], 0.0, d)


def _crossings(t, d):
    """Points (n, 6, 3) where triangle edges meet the plane d = 0, and a (n, 6) mask."""
    t_next = np.roll(t, -1, axis=1)
    d_next = np.roll(d, -1, axis=1)
    crosses = d * d_next < 0.0
    frac = np.where(crosses, d / np.where(crosses, d - d_next, 1.0), 0.0)
    points = np.concatenate([t + frac[..., None] * (t_next - t), t], axis=1)
    return points, np.concatenate([crosses, d == 0.0], axis=1)


def _chord(t, d, origin, line):
    """Interval (lo, hi) of each triangle on its line, as parameters from ``origin``."""
    points, valid = _crossings(t, d)
    s = np.einsum("nkj,nj->nk", points - origin[:, None], line)
    return np.where(valid, s, np.inf).min(axis=1), np.where(valid, s, -np.inf).max(axis=1)


def _line_point(t, d, line):
    """The point of each intersection line whose parameter is 0 (the origin's foot).

    Any crossing point ``c`` of the triangle lies on the line, so the foot of
    ``t[:, 0]`` on it is ``c + ((t0 - c) . line) line``.
    """
    points, valid = _crossings(t, d)
    first = np.argmax(valid, axis=1)
    c = points[np.arange(len(t)), first]
    along = np.einsum("nj,nj->n", t[:, 0] - c, line)
    return c + along[:, None] * line
