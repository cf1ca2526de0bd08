"""Small geometric building blocks shared by the model and the kinematics.

Rigid folding is a product of rotations about fold lines (belcastro & Hull,
"Modelling the folding of paper into three dimensions using affine
transformations", Linear Algebra Appl. 348 (2002) 273-282). These functions build
those rotations, batched with numpy.
"""

import numpy as np


def newell_normals(polygons):
    """Area-weighted normals of planar polygons (Newell's method).

    Parameters
    ----------
    polygons : sequence of (k, 3) float
        Polygon vertices in order.

    Returns
    -------
    (n, 3) float
        Normal vectors whose length is the polygon's area.

    Examples
    --------
    >>> square = np.array([[0, 0, 0], [2, 0, 0], [2, 2, 0], [0, 2, 0]], float)
    >>> newell_normals([square]).tolist()
    [[0.0, 0.0, 4.0]]
    """
    if not len(polygons):
        return np.empty((0, 3))
    sizes = np.array([len(p) for p in polygons])
    pts = np.concatenate([np.asarray(p, dtype=float).reshape(-1, 3) for p in polygons])
    first = np.concatenate([[0], np.cumsum(sizes)[:-1]])
    local = np.arange(len(pts)) - np.repeat(first, sizes)
    nxt = np.repeat(first, sizes) + (local + 1) % np.repeat(sizes, sizes)
    return 0.5 * np.add.reduceat(cross(pts, pts[nxt]), first, axis=0)


def cross(a, b):
    """Cross products of (..., 3) arrays, broadcast like numpy's.

    The same values as ``numpy.cross`` for 3-vectors, without its axis handling,
    which dominates its cost on the small arrays of the collision sweep's rounds.

    Examples
    --------
    >>> cross([1.0, 0.0, 0.0], [0.0, 1.0, 0.0]).tolist()
    [0.0, 0.0, 1.0]
    >>> cross(np.ones((2, 1, 3)), np.eye(3)).shape
    (2, 3, 3)
    """
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    a0, a1, a2 = a[..., 0], a[..., 1], a[..., 2]
    b0, b1, b2 = b[..., 0], b[..., 1], b[..., 2]
    return np.stack([a1 * b2 - a2 * b1, a2 * b0 - a0 * b2, a0 * b1 - a1 * b0], axis=-1)


def unit(vectors):
    """Vectors scaled to unit length.

    Parameters
    ----------
    vectors : (..., 3) float

    Returns
    -------
    (..., 3) float
    """
    vectors = np.asarray(vectors, dtype=float)
    return vectors / np.linalg.norm(vectors, axis=-1, keepdims=True)


def line_rotations(points, angles):
    """Rigid transforms rotating about directed lines, batched.

    Parameters
    ----------
    points : (..., 2, 3) float
        Two points ``a, b`` on each line; the rotation is right-handed about
        ``b - a``.
    angles : (...) float
        Rotation angles in radians; broadcast against ``points[..., 0, 0]``.

    Returns
    -------
    (..., 4, 4) float
        Homogeneous transforms ``x -> R (x - a) + a``.

    Examples
    --------
    >>> z_axis = np.array([[0.0, 0, 0], [0, 0, 1]])
    >>> m = line_rotations(z_axis, np.pi / 2)
    >>> np.round(m[:3, :3] @ [1.0, 0, 0], 12).tolist()
    [0.0, 1.0, 0.0]
    """
    points = np.asarray(points, dtype=float)
    angles = np.asarray(angles, dtype=float)
    a = points[..., 0, :]
    u = unit(points[..., 1, :] - a)
    shape = np.broadcast_shapes(angles.shape, a.shape[:-1])
    a = np.broadcast_to(a, shape + (3,))
    u = np.broadcast_to(u, shape + (3,))
    angles = np.broadcast_to(angles, shape)
    c = np.cos(angles)[..., None, None]
    s = np.sin(angles)[..., None, None]
    k = np.zeros(shape + (3, 3))
    k[..., 0, 1], k[..., 0, 2] = -u[..., 2], u[..., 1]
    k[..., 1, 0], k[..., 1, 2] = u[..., 2], -u[..., 0]
    k[..., 2, 0], k[..., 2, 1] = -u[..., 1], u[..., 0]
    outer = u[..., :, None] * u[..., None, :]
    rot = c * np.eye(3) + s * k + (1.0 - c) * outer
    out = np.zeros(shape + (4, 4))
    out[..., :3, :3] = rot
    out[..., :3, 3] = a - np.einsum("...ij,...j->...i", rot, a)
    out[..., 3, 3] = 1.0
    return out


def corner_bounds(points):
    """Lower and upper corners (..., 3) of the boxes around stacks of points (..., V, 3).

    The same values as ``points.min(axis=-2), points.max(axis=-2)``; an elementwise
    minimum over the V points runs several times faster than numpy's reduction over
    a middle axis of few entries (the sweep's boxes: 3 to a few dozen corners).

    Examples
    --------
    >>> import numpy as np
    >>> lo, hi = corner_bounds(np.array([[0.0, 2.0, 1.0], [1.0, -1.0, 3.0]]))
    >>> lo.tolist(), hi.tolist()
    ([0.0, -1.0, 1.0], [1.0, 2.0, 3.0])
    """
    points = np.asarray(points)
    lo = points[..., 0, :].copy()
    hi = lo.copy()
    for v in range(1, points.shape[-2]):
        np.minimum(lo, points[..., v, :], out=lo)
        np.maximum(hi, points[..., v, :], out=hi)
    return lo, hi


def rotate_rows(rot, points):
    """Rotate stacks of points: ``points[..., v, :]`` by ``rot[...]``.

    Parameters
    ----------
    rot : (..., 3, 3) float
    points : (..., V, 3) float
        Leading shapes broadcast against each other.

    Returns
    -------
    (..., V, 3) float

    Examples
    --------
    >>> import numpy as np
    >>> quarter = np.array([[0.0, -1.0, 0.0], [1.0, 0.0, 0.0], [0.0, 0.0, 1.0]])
    >>> rotate_rows(quarter, np.array([[1.0, 0.0, 0.0], [0.0, 1.0, 0.0]])).round(12).tolist()
    [[0.0, 1.0, 0.0], [-1.0, 0.0, 0.0]]
    """
    # One matmul against the transposed rotation: five to ten times as fast as the
    # equivalent einsum ("...ij,...vj->...vi"), which loops over the points in C.
    return np.asarray(points, dtype=float) @ np.swapaxes(rot, -1, -2)


def transform_points(transforms, points):
    """Apply rigid transforms to points.

    Parameters
    ----------
    transforms : (..., 4, 4) float
    points : (..., 3) float
        Broadcast against the transforms' leading shape.

    Returns
    -------
    (..., 3) float
    """
    # matmul over a trailing unit axis: twice as fast as the equivalent einsum on small stacks.
    points = np.asarray(points, dtype=float)
    return (transforms[..., :3, :3] @ points[..., None])[..., 0] + transforms[..., :3, 3]


def signed_angle(u, v, axis):
    """Signed angle from vector u to vector v, right-handed about axis.

    Parameters
    ----------
    u, v, axis : (..., 3) float
        ``axis`` need not be unit length; u and v are taken perpendicular to it.

    Returns
    -------
    (...) float
        Radians in (-pi, pi].

    Examples
    --------
    >>> float(np.degrees(signed_angle([1, 0, 0], [0, 1, 0], [0, 0, 1])))
    90.0
    """
    axis = unit(axis)
    return np.arctan2(np.einsum("...i,...i", axis, cross(u, v)), np.einsum("...i,...i", u, v))


def _segment_distances(p, q, r, s):
    """Distances (...,) between 2D segments p-q and r-s (all (..., 2) float)."""
    def cross(a, b):
        return a[..., 0] * b[..., 1] - a[..., 1] * b[..., 0]

    def to_segment(x, a, b):
        ab = b - a
        length2 = np.einsum("...i,...i->...", ab, ab)
        u = np.clip(np.einsum("...i,...i->...", x - a, ab) / np.where(length2 > 0, length2, 1.0), 0.0, 1.0)
        return np.linalg.norm(x - (a + u[..., None] * ab), axis=-1)

    d1, d2 = cross(q - p, r - p), cross(q - p, s - p)
    d3, d4 = cross(s - r, p - r), cross(s - r, q - r)
    crossing = (np.sign(d1) * np.sign(d2) < 0) & (np.sign(d3) * np.sign(d4) < 0)
    ends = np.minimum(np.minimum(to_segment(p, r, s), to_segment(q, r, s)),
                      np.minimum(to_segment(r, p, q), to_segment(s, p, q)))
    return np.where(crossing, 0.0, ends)


def polygon_defects(polygons, normals, eps, chunk=500_000):
    """The first flaw that keeps each planar polygon from being simple.

    A polygon is simple when no edge is shorter than ``eps``, no two edges that do
    not share a corner come nearer than ``eps``, and no corner folds an edge back
    onto its neighbour (the next corner lies within ``eps`` of the edge before).

    Parameters
    ----------
    polygons : sequence of (k, 3) float
        Corners in order, each polygon roughly in one plane.
    normals : (n, 3) float
        Unit normal of each polygon.
    eps : float
        Distance at which two parts of the boundary meet.
    chunk : int
        Most edge pairs examined in one numpy step.

    Returns
    -------
    list of (int, str, int, int)
        ``(polygon, kind, a, b)`` for each polygon with a flaw, in order: kind
        ``"short"`` (edge a from corner a to corner b), ``"cross"`` (edges a and b
        meet) or ``"fold"`` (the boundary turns back at corner a).

    Examples
    --------
    >>> bow = np.array([[0, 0, 0], [1, 1, 0], [1, 0, 0], [0, 1, 0]], float)
    >>> polygon_defects([bow], np.array([[0.0, 0.0, 1.0]]), 1e-9)
    [(0, 'cross', 0, 2)]
    """
    normals = np.asarray(normals, dtype=float)
    sizes = np.array([len(p) for p in polygons])
    found = []
    for k in np.unique(sizes):
        which = np.flatnonzero(sizes == k)
        pts = np.array([polygons[i] for i in which], dtype=float)
        n = normals[which]
        helper = np.where(np.abs(n[:, :1]) < 0.9, [[1.0, 0.0, 0.0]], [[0.0, 1.0, 0.0]])
        u = unit(np.cross(n, helper))
        v = np.cross(n, u)
        centred = pts - pts.mean(axis=1, keepdims=True)
        flat = np.stack([np.einsum("pkd,pd->pk", centred, u), np.einsum("pkd,pd->pk", centred, v)], axis=-1)
        ahead = np.roll(flat, -1, axis=1)
        flaws = {}
        lengths = np.linalg.norm(ahead - flat, axis=-1)
        for p, e in zip(*np.nonzero(lengths <= eps)):
            flaws.setdefault(p, ("short", int(e), int((e + 1) % k)))
        after = np.roll(flat, -2, axis=1)
        fold = ((_segment_distances(after, after, flat, ahead) <= eps)
                | (_segment_distances(flat, flat, ahead, after) <= eps))
        for p, c in zip(*np.nonzero(fold)):
            flaws.setdefault(p, ("fold", int((c + 1) % k), int((c + 1) % k)))
        i, j = np.triu_indices(k, 2)
        keep = ~((i == 0) & (j == k - 1))
        i, j = i[keep], j[keep]
        step = max(1, chunk // len(which))
        for start in range(0, len(i), step):
            a, b = i[start:start + step], j[start:start + step]
            close = _segment_distances(flat[:, a], ahead[:, a], flat[:, b], ahead[:, b]) <= eps
            for p, m in zip(*np.nonzero(close)):
                flaws.setdefault(p, ("cross", int(a[m]), int(b[m])))
        found.extend((int(which[p]), *flaw) for p, flaw in flaws.items())
    return sorted(found)
