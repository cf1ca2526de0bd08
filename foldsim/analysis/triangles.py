"""Vectorised geometry of triangles: triangulation, crossing tests and distances.

Panels are zero-thickness planar polygons.  Each panel is split into triangles
once (`triangulate`); the narrow phase then works on batches of triangle pairs,
stored as arrays of shape (n, 3, 3): pair ``k`` is ``a[k]`` against ``b[k]``,
vertex ``i`` of a triangle is ``a[k, i]``.

Contact is not collision.  Two panels that share a hinge edge or a vertex, or
whose edge or corner rests on the other panel, touch; they collide only when
one passes through the other by more than a tolerance ``eps`` (a length).
`crossing_overlap` measures that, `triangle_distance` gives the exact gap.
"""

import numpy as np

from foldsim.geometry import cross
from foldsim.tolerances import DEFAULT as _DEFAULT_TOLERANCES

DEFAULT_EPS = _DEFAULT_TOLERANCES.contact
"""Default contact tolerance, an absolute length for models of unit size."""


def _dot(u, v):
    """Dot product over the last axis, broadcasting the others."""
    return np.einsum("...i,...i->...", u, v)


def _next(t):
    """Vertices shifted by one along axis -2: edge ``i`` runs ``t[i] -> t[i+1]``."""
    return np.roll(t, -1, axis=-2)


def newell_normal(polygon):
    """Area-weighted normal of a polygon (Newell's method).

    Parameters
    ----------
    polygon : (k, 3) float
        Vertices in order.

    Returns
    -------
    (3,) float
        Normal whose length is twice the polygon's area; the vertices run
        counter-clockwise about it.
    """
    p = np.asarray(polygon, dtype=float)
    return cross(p, _next(p)).sum(axis=0)


def triangulate(polygon, *, eps=DEFAULT_EPS):
    """Split a simple planar polygon into triangles by ear clipping.

    At each step the best-shaped ear (largest area over the sum of squared
    sides) is cut, so convex polygons do not turn into fans of slivers.

    Parameters
    ----------
    polygon : (k, 3) float
        Vertices of a simple (possibly non-convex) planar polygon, k >= 3.
    eps : float, optional
        Tolerance relative to the polygon's size: an ear is cut only if its
        area exceeds `eps` times the size squared, and a vertex within about
        `eps` times the size of a candidate ear blocks it.

    Returns
    -------
    (k - 2, 3) int
        Indices into `polygon`; every triangle runs counter-clockwise about the
        polygon's Newell normal.

    Raises
    ------
    ValueError
        If the polygon has fewer than 3 vertices, zero area, or no ear can be
        found (it is not simple).
    """
    p = np.asarray(polygon, dtype=float)
    if p.ndim != 2 or p.shape[1] != 3 or len(p) < 3:
        raise ValueError(f"polygon must have shape (k, 3) with k >= 3, got {p.shape}")
    normal = newell_normal(p)
    length = np.linalg.norm(normal)
    if length == 0.0:
        raise ValueError("polygon has zero area")
    u, v = _plane_basis(normal / length)
    centred = p - p.mean(axis=0)
    q = np.stack([centred @ u, centred @ v], axis=1)
    size = np.ptp(q, axis=0).max()
    turn_tol = eps * size * size

    remaining = list(range(len(p)))
    triangles = []
    while len(remaining) > 3:
        ring = np.array(remaining)
        prev, nxt = np.roll(ring, 1), np.roll(ring, -1)
        best, best_quality = None, 0.0
        for pos in range(len(ring)):
            i0, i1, i2 = prev[pos], ring[pos], nxt[pos]
            twice_area = _turn(q[i0], q[i1], q[i2])
            if twice_area <= turn_tol:
                continue
            others = q[np.setdiff1d(ring, (i0, i1, i2))]
            inside = (
                (_turn(q[i0], q[i1], others) >= -turn_tol)
                & (_turn(q[i1], q[i2], others) >= -turn_tol)
                & (_turn(q[i2], q[i0], others) >= -turn_tol)
            )
            if inside.any():
                continue
            sides = q[[i1, i2, i0]] - q[[i0, i1, i2]]
            quality = twice_area / (sides * sides).sum()
            if quality > best_quality:
                best, best_quality = pos, quality
        if best is None:
            raise ValueError("no ear found: the polygon is not simple")
        triangles.append((prev[best], ring[best], nxt[best]))
        del remaining[best]
    triangles.append(tuple(remaining))
    return np.array(triangles, dtype=int)


EARCUT_MIN = 16
"""Polygons with at least this many vertices go to the earcut library first."""


def polygon_area(polygon):
    """Area of a planar polygon (k, 3): half the length of its Newell normal (shoelace)."""
    return 0.5 * float(np.linalg.norm(newell_normal(polygon)))


def triangulate_polygon(polygon, *, eps=DEFAULT_EPS):
    """Split a simple planar polygon into k - 2 triangles, fast for large k.

    A triangle is returned as it is; polygons with fewer than `EARCUT_MIN` vertices
    go to `triangulate` (ear clipping, best-shaped ear first); larger strictly convex
    ones are split by halving their vertex range (`_halving`, O(k)); larger
    non-convex ones go to the mapbox earcut library (V. Agafonkin, github.com/mapbox/earcut, through the
    ``mapbox_earcut`` package; about O(k log k) with its z-order hashing). Earcut's
    answer is kept only if it has k - 2 triangles, each turning counter-clockwise,
    whose areas add up to the polygon's (shoelace) area; otherwise, or if the
    package is missing, ear clipping decides.

    Parameters and return value as for `triangulate`.
    """
    p = np.asarray(polygon, dtype=float)
    if p.ndim == 2 and p.shape == (3, 3):
        return np.array([[0, 1, 2]], dtype=int)
    if p.ndim == 2 and p.shape[1] == 3 and len(p) >= EARCUT_MIN:
        out = _halving(p) if _strictly_convex(p) else None
        if out is None:
            out = _earcut(p)
        if out is not None:
            return out
    return triangulate(p, eps=eps)


def _strictly_convex(p):
    """Whether every corner of polygon p (k, 3) turns the same way, none straight."""
    normal = newell_normal(p)
    edge = np.roll(p, -1, axis=0) - p
    turn = cross(edge, np.roll(edge, -1, axis=0)) @ normal
    return bool((turn > 1e-9 * np.abs(turn).max()).all())


def _halving(p):
    """Triangles of a strictly convex polygon by halving its vertex range: (i, m, j)
    with m midway between i and j, then each half. Any diagonal of a convex polygon
    lies inside it, so this is a triangulation, in O(k); unlike a fan or earcut's
    sequence of ears, its triangles shrink toward the rim instead of all reaching
    across the polygon, which keeps their bounding boxes small for the broad phase.
    """
    k = len(p)
    out = []
    stack = [(0, k - 1)]
    while stack:
        i, j = stack.pop()
        if j - i < 2:
            continue
        m = (i + j) // 2
        out.append((i, m, j))
        stack.append((i, m))
        stack.append((m, j))
    return np.array(out, dtype=int)


def _earcut(p):
    """Earcut's triangles of polygon p (k, 3) in the plane's basis, or None if unfit."""
    try:
        import mapbox_earcut
    except ImportError:  # pragma: no cover - the package is a dependency
        return None
    normal = newell_normal(p)
    length = np.linalg.norm(normal)
    if length == 0.0:
        return None
    u, v = _plane_basis(normal / length)
    centred = p - p.mean(axis=0)
    q = np.ascontiguousarray(np.stack([centred @ u, centred @ v], axis=1))
    idx = mapbox_earcut.triangulate_float64(q, np.array([len(q)], dtype=np.uint32))
    tri = np.asarray(idx, dtype=int).reshape(-1, 3)
    if len(tri) != len(p) - 2:
        return None
    twice = _turn(q[tri[:, 0]], q[tri[:, 1]], q[tri[:, 2]])
    if (twice < 0).sum() > len(tri) // 2:
        tri = tri[:, ::-1]
        twice = -twice
    area = 0.5 * twice.sum()
    if (twice <= 0).any() or abs(area - 0.5 * length) > 1e-9 * 0.5 * length:
        return None
    return tri


def _turn(o, s, t):
    """Twice the signed area of 2D triangles (o, s, t), points (..., 2) -> (...,)."""
    return (s[..., 0] - o[..., 0]) * (t[..., 1] - o[..., 1]) - (s[..., 1] - o[..., 1]) * (
        t[..., 0] - o[..., 0]
    )


def _plane_basis(normal):
    """Orthonormal (u, v) with u x v = normal, for a unit (3,) normal."""
    helper = np.zeros(3)
    helper[np.argmin(np.abs(normal))] = 1.0
    u = cross(helper, normal)
    u /= np.linalg.norm(u)
    return u, cross(normal, u)


def _unit_normals(t, eps):
    """Unit normals (n, 3) of triangles (n, 3, 3) and a (n,) bool degenerate flag.

    A triangle is degenerate when its smallest altitude is at most `eps`; its
    normal is then set to zero.
    """
    raw = cross(t[:, 1] - t[:, 0], t[:, 2] - t[:, 0])
    twice_area = np.linalg.norm(raw, axis=1)
    longest = np.linalg.norm(_next(t) - t, axis=2).max(axis=1)
    degenerate = ~(twice_area > eps * longest)
    safe = np.where(degenerate, 1.0, twice_area)
    return np.where(degenerate[:, None], 0.0, raw / safe[:, None]), degenerate


def _signed_distances(t, origin, normal, eps):
    """Distances (n, 3) of the vertices of `t` to planes (origin, normal); |d| <= eps -> 0."""
    d = _dot(t - origin[:, None, :], normal[:, None, :])
    return np.where(np.abs(d) <= eps, 0.0, d)


def _chord(t, d, origin, direction):
    """Interval (lo, hi), each (n,), of triangle `t` on the line where d = 0.

    The chord's end points are the edges' crossings of the other plane and the
    vertices lying on it, projected on the unit `direction` from `origin`.
    """
    d_next = np.roll(d, -1, axis=-1)
    t_next = _next(t)
    crosses = d * d_next < 0.0
    frac = np.where(crosses, d / np.where(crosses, d - d_next, 1.0), 0.0)
    points = np.concatenate([t + frac[..., None] * (t_next - t), t], axis=1)
    valid = np.concatenate([crosses, d == 0.0], axis=1)
    s = _dot(points - origin[:, None, :], direction[:, None, :])
    return np.where(valid, s, np.inf).min(axis=1), np.where(valid, s, -np.inf).max(axis=1)


def _coplanar_overlap(a, b, normal):
    """Smallest overlap of projections over the 6 in-plane edge normals, (n,)."""
    edges = np.concatenate([_next(a) - a, _next(b) - b], axis=1)
    axes = cross(normal[:, None, :], edges)
    axes /= np.linalg.norm(axes, axis=2, keepdims=True)
    origin = a[:, :1, :]
    pa = axes @ (a - origin).swapaxes(1, 2)
    pb = axes @ (b - origin).swapaxes(1, 2)
    overlap = np.minimum(pa.max(axis=2), pb.max(axis=2)) - np.maximum(
        pa.min(axis=2), pb.min(axis=2)
    )
    return overlap.min(axis=1)


def crossing_overlap(a, b, eps=DEFAULT_EPS):
    """Signed measure of how far triangles pass through each other.

    Parameters
    ----------
    a, b : (n, 3, 3) float
        Pairs of triangles.
    eps : float, optional
        Contact tolerance (a length).  Vertices within `eps` of the other
        triangle's plane count as lying on it.

    Returns
    -------
    (n,) float
        Positive values above `eps` mean collision.  For triangles in distinct
        planes, each crossing the other's plane strictly, it is the length
        common to both chords on the planes' intersection line (negative: the
        gap between the chords).  For coplanar triangles (every vertex within
        `eps` of the other plane) it is the smallest overlap of projections on
        the six in-plane edge normals (negative: a separation).  It is ``-inf``
        when either triangle is degenerate (smallest altitude <= `eps`) or does
        not strictly cross the other's plane, which covers hinges, shared
        vertices and panels resting on each other.
    """
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    if a.shape != b.shape or a.shape[1:] != (3, 3):
        raise ValueError(f"a and b must both have shape (n, 3, 3), got {a.shape}, {b.shape}")
    na, degenerate_a = _unit_normals(a, eps)
    nb, degenerate_b = _unit_normals(b, eps)
    da = _signed_distances(a, b[:, 0], nb, eps)
    db = _signed_distances(b, a[:, 0], na, eps)
    usable = ~(degenerate_a | degenerate_b)
    crossing = usable & _strictly_crosses(da) & _strictly_crosses(db)
    coplanar = usable & (da == 0.0).all(axis=1) & (db == 0.0).all(axis=1)

    out = np.full(len(a), -np.inf)
    if crossing.any():
        line = cross(na[crossing], nb[crossing])
        length = np.linalg.norm(line, axis=1, keepdims=True)
        line = np.where(length > 0.0, line / np.where(length > 0.0, length, 1.0), 0.0)
        origin = a[crossing, 0]
        lo_a, hi_a = _chord(a[crossing], da[crossing], origin, line)
        lo_b, hi_b = _chord(b[crossing], db[crossing], origin, line)
        out[crossing] = np.minimum(hi_a, hi_b) - np.maximum(lo_a, lo_b)
    if coplanar.any():
        out[coplanar] = _coplanar_overlap(a[coplanar], b[coplanar], na[coplanar])
    return out


def _strictly_crosses(d):
    """(n,) bool: some distance in each row of (n, 3) `d` is positive and some negative."""
    return (d > 0.0).any(axis=1) & (d < 0.0).any(axis=1)


def triangles_collide(a, b, eps=DEFAULT_EPS):
    """Whether triangles pass through each other by more than `eps`.

    Parameters
    ----------
    a, b : (n, 3, 3) float
        Pairs of triangles.
    eps : float, optional
        Contact tolerance (a length), see `crossing_overlap`.

    Returns
    -------
    (n,) bool
    """
    return crossing_overlap(a, b, eps) > eps


def point_segment_distance(p, s0, s1):
    """Distance from points to closed segments.

    Parameters
    ----------
    p, s0, s1 : (n, 3) float
        Points and segment end points (leading axes broadcast).

    Returns
    -------
    (n,) float
    """
    d = s1 - s0
    length2 = _dot(d, d)
    with np.errstate(divide="ignore", invalid="ignore"):
        s = np.where(length2 > 0.0, _dot(p - s0, d) / length2, 0.0)
    s = np.clip(s, 0.0, 1.0)
    return np.linalg.norm(s0 + s[..., None] * d - p, axis=-1)


def segment_segment_distance(p0, p1, q0, q1):
    """Distance between closed segments p0-p1 and q0-q1.

    The minimum lies either at a pair of interior points (segments not
    parallel) or at an end point of one of them, so it is the least of the
    interior candidate, when valid, and the four end point distances.  Every
    candidate is a true pair of points, which keeps parallel and nearly
    parallel segments exact.

    Parameters
    ----------
    p0, p1, q0, q1 : (n, 3) float
        End points (leading axes broadcast).

    Returns
    -------
    (n,) float
    """
    d1, d2, r = p1 - p0, q1 - q0, p0 - q0
    a, e, b = _dot(d1, d1), _dot(d2, d2), _dot(d1, d2)
    c, f = _dot(d1, r), _dot(d2, r)
    denom = a * e - b * b
    with np.errstate(divide="ignore", invalid="ignore"):
        s = (b * f - c * e) / denom
        t = (a * f - b * c) / denom
    interior = (denom > 0.0) & (s > 0.0) & (s < 1.0) & (t > 0.0) & (t < 1.0)
    s, t = np.where(interior, s, 0.0), np.where(interior, t, 0.0)
    gap = np.linalg.norm(r + s[..., None] * d1 - t[..., None] * d2, axis=-1)
    candidates = [
        np.where(interior, gap, np.inf),
        point_segment_distance(p0, q0, q1),
        point_segment_distance(p1, q0, q1),
        point_segment_distance(q0, p0, p1),
        point_segment_distance(q1, p0, p1),
    ]
    return np.minimum.reduce(candidates)


def _barycentric_projection(p, t):
    """Foot of `p` (..., 3) on the plane of `t` (..., 3, 3) and whether it is inside.

    Returns the foot (..., 3) and a (...,) bool, False for degenerate triangles
    (a corner angle below about 1e-6 rad).
    """
    v0, v1, w = t[..., 1, :] - t[..., 0, :], t[..., 2, :] - t[..., 0, :], p - t[..., 0, :]
    d00, d01, d11 = _dot(v0, v0), _dot(v0, v1), _dot(v1, v1)
    d20, d21 = _dot(w, v0), _dot(w, v1)
    denom = d00 * d11 - d01 * d01
    with np.errstate(divide="ignore", invalid="ignore"):
        beta = (d11 * d20 - d01 * d21) / denom
        gamma = (d00 * d21 - d01 * d20) / denom
        # Slivers whose corner angle is below about 1e-6 rad count as degenerate:
        # their plane is round-off, and they act as their edges.
        inside = (denom > 1e-12 * d00 * d11) & (beta >= 0.0) & (gamma >= 0.0) & (beta + gamma <= 1.0)
    beta, gamma = np.where(inside, beta, 0.0), np.where(inside, gamma, 0.0)
    return t[..., 0, :] + beta[..., None] * v0 + gamma[..., None] * v1, inside


def point_triangle_distance(p, t):
    """Distance from points to solid triangles.

    Parameters
    ----------
    p : (n, 3) float
        Points (leading axes broadcast against those of `t`).
    t : (n, 3, 3) float
        Triangles; degenerate ones act as their edges.

    Returns
    -------
    (n,) float
    """
    foot, inside = _barycentric_projection(p, t)
    to_plane = np.where(inside, np.linalg.norm(p - foot, axis=-1), np.inf)
    t_next = _next(t)
    to_edges = point_segment_distance(p[..., None, :], t, t_next).min(axis=-1)
    return np.minimum(to_plane, to_edges)


def _edges_meet_triangle(a, b):
    """(n,) bool: some edge of `a` (n, 3, 3) crosses or touches the plane of `b` inside `b`."""
    normal = cross(b[:, 1] - b[:, 0], b[:, 2] - b[:, 0])
    d = _dot(a - b[:, None, 0], normal[:, None, :])
    d_next = np.roll(d, -1, axis=-1)
    meets = (np.minimum(d, d_next) <= 0.0) & (np.maximum(d, d_next) >= 0.0) & (d != d_next)
    frac = np.where(meets, d / np.where(meets, d - d_next, 1.0), 0.0)
    points = a + frac[..., None] * (_next(a) - a)
    _, inside = _barycentric_projection(points, b[:, None, :, :])
    return (meets & inside).any(axis=1)


def triangle_distance(a, b):
    """Exact Euclidean distance between solid triangles.

    Parameters
    ----------
    a, b : (n, 3, 3) float
        Pairs of triangles.

    Returns
    -------
    (n,) float
        Zero where the triangles intersect or touch, otherwise the least of the
        six vertex-triangle and nine edge-edge distances.
    """
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    if a.shape != b.shape or a.shape[1:] != (3, 3):
        raise ValueError(f"a and b must both have shape (n, 3, 3), got {a.shape}, {b.shape}")
    vertex_face = np.minimum(
        point_triangle_distance(a, b[:, None]).min(axis=1),
        point_triangle_distance(b, a[:, None]).min(axis=1),
    )
    ea0, ea1 = a[:, :, None, :], _next(a)[:, :, None, :]
    eb0, eb1 = b[:, None, :, :], _next(b)[:, None, :, :]
    edge_edge = segment_segment_distance(ea0, ea1, eb0, eb1).reshape(len(a), 9).min(axis=1)
    meet = _edges_meet_triangle(a, b) | _edges_meet_triangle(b, a)
    return np.where(meet, 0.0, np.minimum(vertex_face, edge_edge))
