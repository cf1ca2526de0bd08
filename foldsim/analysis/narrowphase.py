"""Narrow phase: the crossing test, exact distances and the state of face pairs.

The same answers as `triangles.crossing_overlap` and `triangles.triangle_distance`
(which stay the reference), computed with less work:

- `crossing_overlap` first rejects, with one plane-side test per triangle, the pairs
  in which some triangle lies strictly on one side of the other's plane (further
  than twice the contact tolerance); only the rest, usually a small share, go through
  the reference test, so every value it returns is the reference's value.
- `triangle_distance` evaluates each distinct candidate once: the 18 vertex-to-edge
  distances are shared between the 9 edge-edge and 6 vertex-face candidates (the
  reference computes 54), works in squared lengths, and runs in chunks of
  `CHUNK` pairs so that its temporaries stay in cache and memory stays bounded.

Arrays are (n, 3, 3) as in `triangles`: pair ``k`` is ``a[k]`` against ``b[k]``.
"""

import numpy as np

from ..geometry import cross, unit
from . import triangles
from .panels import _in_sorted, _keys, triangle_pairs

CHUNK = 4096
"""Triangle pairs per block of work."""

PIVOT_APART = 1e-6
"""Wedge separation (radians) beyond which a pivoting pair is known apart without triangle tests."""


def _dot(u, v):
    return u[0] * v[0] + u[1] * v[1] + u[2] * v[2]


def _sub(u, v):
    return (u[0] - v[0], u[1] - v[1], u[2] - v[2])


def _point_segment2(p, s0, d, dd):
    """Squared distance from points p to segments s0 + s d, s in [0, 1] (dd = d.d)."""
    w = _sub(p, s0)
    with np.errstate(divide="ignore", invalid="ignore"):
        s = np.where(dd > 0.0, _dot(w, d) / dd, 0.0)
    s = np.clip(s, 0.0, 1.0)
    x, y, z = w[0] - s * d[0], w[1] - s * d[1], w[2] - s * d[2]
    return x * x + y * y + z * z


def _inside(p, t0, v0, v1, d00, d01, d11, denom, ok):
    """Foot of p on the triangle plane (t0; v0, v1) and whether it lies inside.

    The same barycentric test as `triangles._barycentric_projection`.
    """
    w = _sub(p, t0)
    d20, d21 = _dot(w, v0), _dot(w, v1)
    with np.errstate(divide="ignore", invalid="ignore"):
        beta = (d11 * d20 - d01 * d21) / denom
        gamma = (d00 * d21 - d01 * d20) / denom
        inside = ok & (beta >= 0.0) & (gamma >= 0.0) & (beta + gamma <= 1.0)
    beta, gamma = np.where(inside, beta, 0.0), np.where(inside, gamma, 0.0)
    foot = tuple(t0[i] + beta * v0[i] + gamma * v1[i] for i in range(3))
    return foot, inside


def _soa(t):
    """Triangles (n, 3, 3) as 3 vertices of 3 coordinate arrays (n,)."""
    return [tuple(t[:, i, j] for j in range(3)) for i in range(3)]


def _block(av, bv, eps, distance=True):
    """Squared distance and whether the reference crossing test must look, for one block.

    ``av``, ``bv``: triangles as `_soa` gives them. Returns ``(dist2, maybe)``:
    ``dist2`` (n,) squared distances (None without ``distance``); ``maybe`` (n,)
    bool, False where some triangle lies beyond ``2 eps`` on one side of the
    other's plane, so that `triangles.crossing_overlap` is ``-inf`` there.
    """
    n = len(av[0][0])
    maybe = np.ones(n, bool)
    planes = []
    for p_tri, t_tri in ((av, bv), (bv, av)):
        t0 = t_tri[0]
        v0, v1 = _sub(t_tri[1], t0), _sub(t_tri[2], t0)
        normal = (v0[1] * v1[2] - v0[2] * v1[1], v0[2] * v1[0] - v0[0] * v1[2],
                  v0[0] * v1[1] - v0[1] * v1[0])
        height = [_dot(_sub(p, t0), normal) for p in p_tri]
        limit = 2.0 * eps * np.sqrt(_dot(normal, normal))
        maybe &= ~(((height[0] > limit) & (height[1] > limit) & (height[2] > limit))
                   | ((height[0] < -limit) & (height[1] < -limit) & (height[2] < -limit)))
        planes.append((p_tri, t0, v0, v1, height))
    if not distance:
        return None, maybe
    best = np.full(n, np.inf)
    meet = np.zeros(n, bool)
    edges = {}
    for name, tri in (("a", av), ("b", bv)):
        dirs = [_sub(tri[(i + 1) % 3], tri[i]) for i in range(3)]
        edges[name] = [(tri[i], dirs[i], _dot(dirs[i], dirs[i])) for i in range(3)]
    # Vertex to edge (18 distinct), shared by the edge-edge and vertex-face candidates.
    for p_tri, e_name in ((av, "b"), (bv, "a")):
        for p in p_tri:
            for s0, d, dd in edges[e_name]:
                np.minimum(best, _point_segment2(p, s0, d, dd), out=best)
    # Edge-edge interior candidates (9).
    for p0, d1, a_ in edges["a"]:
        for q0, d2, e_ in edges["b"]:
            r = _sub(p0, q0)
            b_ = _dot(d1, d2)
            c, f = _dot(d1, r), _dot(d2, r)
            denom = a_ * e_ - b_ * b_
            with np.errstate(divide="ignore", invalid="ignore"):
                s = (b_ * f - c * e_) / denom
                t = (a_ * f - b_ * c) / denom
            interior = (denom > 0.0) & (s > 0.0) & (s < 1.0) & (t > 0.0) & (t < 1.0)
            if not interior.any():
                continue
            s, t = np.where(interior, s, 0.0), np.where(interior, t, 0.0)
            x = r[0] + s * d1[0] - t * d2[0]
            y = r[1] + s * d1[1] - t * d2[1]
            z = r[2] + s * d1[2] - t * d2[2]
            np.minimum(best, np.where(interior, x * x + y * y + z * z, np.inf), out=best)
    # Vertex over the other face (6) and edges meeting the other face (6).
    for p_tri, t0, v0, v1, height in planes:
        d00, d01, d11 = _dot(v0, v0), _dot(v0, v1), _dot(v1, v1)
        denom = d00 * d11 - d01 * d01
        ok = denom > 1e-12 * d00 * d11
        for i, p in enumerate(p_tri):
            foot, inside = _inside(p, t0, v0, v1, d00, d01, d11, denom, ok)
            if inside.any():
                gap = _sub(p, foot)
                np.minimum(best, np.where(inside, _dot(gap, gap), np.inf), out=best)
            # The edge from p to the next vertex meeting the face (as
            # `triangles._edges_meet_triangle`).
            d, dn = height[i], height[(i + 1) % 3]
            meets = (np.minimum(d, dn) <= 0.0) & (np.maximum(d, dn) >= 0.0) & (d != dn)
            if not meets.any():
                continue
            q = p_tri[(i + 1) % 3]
            frac = np.where(meets, d / np.where(meets, d - dn, 1.0), 0.0)
            point = tuple(p[j] + frac * (q[j] - p[j]) for j in range(3))
            _, hit = _inside(point, t0, v0, v1, d00, d01, d11, denom, ok)
            meet |= meets & hit
    best[meet] = 0.0
    return best, maybe


def _check(a, b):
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    if a.shape != b.shape or a.ndim != 3 or a.shape[1:] != (3, 3):
        raise ValueError(f"a and b must both have shape (n, 3, 3), got {a.shape}, {b.shape}")
    return a, b


def crossing_overlap(a, b, eps=triangles.DEFAULT_EPS):
    """`triangles.crossing_overlap` with a cheap rejection first (same values).

    Pairs in which a triangle lies beyond ``2 eps`` on one side of the other's plane
    get ``-inf`` at once, which is the reference's value for them: such a triangle
    neither strictly crosses the other's plane nor is coplanar with it. The rest go
    through the reference.
    """
    a, b = _check(a, b)
    out = np.full(len(a), -np.inf)
    for k in range(0, len(a), CHUNK):
        ca, cb = a[k:k + CHUNK], b[k:k + CHUNK]
        _, maybe = _block(_soa(ca), _soa(cb), eps, distance=False)
        if maybe.any():
            rows = np.flatnonzero(maybe)
            out[k + rows] = triangles.crossing_overlap(ca[rows], cb[rows], eps)
    return out


def triangle_distance(a, b):
    """Exact Euclidean distance between solid triangles, as `triangles.triangle_distance`.

    Parameters
    ----------
    a, b : (n, 3, 3) float
        Pairs of triangles.

    Returns
    -------
    (n,) float
        Zero where the triangles intersect or touch, otherwise the least of the
        vertex-face and edge-edge distances.
    """
    a, b = _check(a, b)
    out = np.empty(len(a))
    for k in range(0, len(a), CHUNK):
        out[k:k + CHUNK], _ = _block(_soa(a[k:k + CHUNK]), _soa(b[k:k + CHUNK]), 0.0)
    return np.sqrt(out)


def _posed_soa(poses, frame, face, points):
    """Flat-frame triangles ``points`` (n, 3, 3) moved by ``poses[frame, face]``, as `_soa`."""
    m = poses[frame, face]
    r = [[m[:, i, j] for j in range(4)] for i in range(3)]
    out = []
    for v in range(3):
        x, y, z = points[:, v, 0], points[:, v, 1], points[:, v, 2]
        out.append(tuple(r[i][0] * x + r[i][1] * y + r[i][2] * z + r[i][3] for i in range(3)))
    return out


def _stack(tri, rows):
    """(m, 3, 3) array of the `_soa` triangles at ``rows``."""
    return np.stack([np.stack([c[rows] for c in v], axis=1) for v in tri], axis=1)


def triangle_states(pan, poses, frame, ia, ib, eps, distance, enough=None):
    """Crossing overlap and distance of triangle pairs ia, ib (n,) at ``poses[frame]``.

    Parameters
    ----------
    enough : (n,) float, optional
        Lazy distances: where the two triangles' bounding spheres are at least this
        far apart, the gap between the spheres is returned as the distance (a lower
        bound) and neither test runs; spheres apart also rule out crossing.

    Returns
    -------
    overlap : (n,) float
        `triangles.crossing_overlap` of each pair (``-inf`` where ruled out cheaply).
    dist : (n,) float or None
        Distances (exact, or a lower bound of at least ``enough``); None without
        ``distance``.
    """
    n = len(ia)
    overlap = np.full(n, -np.inf)
    dist = np.empty(n) if distance else None
    for k in range(0, n, CHUNK):
        sl = slice(k, k + CHUNK)
        av = _posed_soa(poses, frame[sl], pan.tri_face[ia[sl]], pan.tri_points[ia[sl]])
        bv = _posed_soa(poses, frame[sl], pan.tri_face[ib[sl]], pan.tri_points[ib[sl]])
        if enough is not None:
            gap = _sphere_gap(av, bv)
            work = np.flatnonzero(~(gap >= np.maximum(enough[sl], 0.0)) | ~(gap > 0))
            if distance:
                dist[sl] = gap
            if not len(work):
                continue
            if len(work) < len(gap):
                av = [tuple(c[work] for c in v) for v in av]
                bv = [tuple(c[work] for c in v) for v in bv]
        else:
            work = np.arange(len(av[0][0]))
        d2, maybe = _block(av, bv, eps, distance)
        if distance:
            dist[k + work] = np.sqrt(d2)
        if maybe.any():
            rows = np.flatnonzero(maybe)
            overlap[k + work[rows]] = triangles.crossing_overlap(_stack(av, rows), _stack(bv, rows), eps)
    return overlap, dist


def _sphere_gap(av, bv):
    """Gap (n,) between spheres about the triangles' centroids through their farthest corners."""
    out = []
    for tri in (av, bv):
        c = tuple((tri[0][j] + tri[1][j] + tri[2][j]) / 3.0 for j in range(3))
        r2 = np.maximum.reduce([_dot(_sub(v, c), _sub(v, c)) for v in tri])
        out.append((c, np.sqrt(r2)))
    (ca, ra), (cb, rb) = out
    d = _sub(ca, cb)
    return np.sqrt(_dot(d, d)) - ra - rb


def _arc_distance(p, a1, a2):
    """Angle from unit vectors p (n, 3) to the great-circle arcs a1-a2 (n, 3)."""
    nrm = unit(cross(a1, a2))
    h = np.einsum("ij,ij->i", p, nrm)
    foot = p - h[:, None] * nrm
    inside = (np.einsum("ij,ij->i", cross(a1, foot), nrm) >= 0) & (
        np.einsum("ij,ij->i", cross(foot, a2), nrm) >= 0)
    ends = np.minimum(_angle(p, a1), _angle(p, a2))
    return np.where(inside, np.arcsin(np.clip(np.abs(h), 0, 1)), ends)


def _angle(u, v):
    return np.arctan2(np.linalg.norm(cross(u, v), axis=1), np.einsum("ij,ij->i", u, v))


def _wedge_separation(a, b):
    """Angular distance between wedges a, b (n, 2, 3) of unit edge directions."""
    na, nb = cross(a[:, 0], a[:, 1]), cross(b[:, 0], b[:, 1])
    sa = np.einsum("nkj,nj->nk", a, nb)
    sb = np.einsum("nkj,nj->nk", b, na)
    line = cross(na, nb)
    length = np.linalg.norm(line, axis=1)
    skew = length > 1e-12 * np.linalg.norm(na, axis=1) * np.linalg.norm(nb, axis=1)
    x = line / np.where(skew, length, 1.0)[:, None]
    x = np.where((np.einsum("ij,ij->i", x, a.sum(axis=1)) < 0)[:, None], -x, x)
    # Coplanar wedges (skew False) overlap exactly when an end of one lies in the
    # other, which the end-to-arc distances below already give as 0.
    crossed = skew & (sa[:, 0] * sa[:, 1] <= 0) & (sb[:, 0] * sb[:, 1] <= 0) & (
        np.einsum("ij,ij->i", x, b.sum(axis=1)) >= 0)
    d = np.minimum.reduce([_arc_distance(a[:, 0], b[:, 0], b[:, 1]), _arc_distance(a[:, 1], b[:, 0], b[:, 1]),
                           _arc_distance(b[:, 0], a[:, 0], a[:, 1]), _arc_distance(b[:, 1], a[:, 0], a[:, 1])])
    return np.where(crossed, 0.0, d)



def pair_state(mech, pan, poses, frame, pairs, clearance, eps, separation=True, need=None):
    """Separation and collision flag of face pairs (the fast kernels of this module).

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
    need : (n,) float, optional
        Separation each pair must reach to be of no further interest. Where given,
        triangle pairs whose bounding spheres are further apart than that are not
        tested, and ``sep`` is a lower bound where it is at least ``need`` (exact
        below it); ``hit`` stays exact.

    Returns
    -------
    sep : (n,) float
        Distance (less the clearance), or wedge angle for pairs pivoting about a
        shared point; 0 where colliding.
    hit : (n,) bool

    Notes
    -----
    A pivoting pair's panels are convex and lie in the wedges their two edges
    span at the shared point; wedges more than `PIVOT_APART` apart meet only at
    that point, so such a pair cannot collide and its triangles are not tested.
    """
    pairs = np.asarray(pairs, np.int64).reshape(-1, 2)
    frame = np.asarray(frame)
    is_pivot, pos = _in_sorted(_keys(pairs, mech.n_faces), pan.pivot_keys)
    wedge = np.full(len(pairs), np.inf)
    if is_pivot.any():
        rows = np.flatnonzero(is_pivot)
        dirs = pan.pivot_dirs[pos[rows]]
        rot_a = poses[frame[rows], pairs[rows, 0], :3, :3]
        rot_b = poses[frame[rows], pairs[rows, 1], :3, :3]
        wa = unit(np.einsum("nij,nkj->nki", rot_a, dirs[:, 0]))
        wb = unit(np.einsum("nij,nkj->nki", rot_b, dirs[:, 1]))
        wedge[rows] = _wedge_separation(wa, wb)
    apart = is_pivot & (wedge > PIVOT_APART)
    if not apart.any():
        return _pair_state(mech, pan, poses, frame, pairs, clearance, eps, separation, need, wedge)
    sep = np.where(apart, wedge, np.inf) if (separation or clearance > 0) else np.full(len(pairs), np.inf)
    hit = np.zeros(len(pairs), bool)
    rest = np.flatnonzero(~apart)
    if len(rest):
        sep[rest], hit[rest] = _pair_state(mech, pan, poses, frame[rest], pairs[rest], clearance, eps, separation,
                                           None if need is None else np.asarray(need, float)[rest], wedge[rest])
    return sep, hit


def _pair_state(mech, pan, poses, frame, pairs, clearance, eps, separation, need, wedge):
    """`pair_state` with the pivoting pairs' wedge separations ``wedge`` (n,) given."""
    ia, ib, row = triangle_pairs(pan, pairs)
    keys = _keys(pairs, mech.n_faces)
    is_pivot, _ = _in_sorted(keys, pan.pivot_keys)
    measure = separation or clearance > 0
    enough = None
    if need is not None and len(row) > len(pairs):
        # Pivoting pairs take their separation from the wedges: their triangles only
        # need the crossing test (spheres apart cannot cross).
        enough = np.where(is_pivot, 0.0, np.asarray(need, float) + clearance)[row]
    overlap, dist = triangle_states(pan, poses, frame[row], ia, ib, eps, measure, enough)
    single = len(row) == len(pairs)  # one triangle per face: row is 0, 1, 2, ...
    if single:
        hit = overlap > eps
    else:
        hit = np.zeros(len(pairs), bool)
        np.logical_or.at(hit, row, overlap > eps)
    sep = np.full(len(pairs), np.inf)
    if not measure:
        return sep, hit
    measured = ~is_pivot[row] & ~hit[row]
    if single:
        sep[measured] = dist[measured]
    else:
        np.minimum.at(sep, row[measured], dist[measured])
    if clearance > 0:
        touching, _ = _in_sorted(keys, pan.touch_keys)
        hit |= ~touching & ~is_pivot & (sep < clearance)
        sep = np.where(touching, sep, np.maximum(sep - clearance, 0.0))
    if is_pivot.any():
        sep[is_pivot] = wedge[is_pivot]
    sep[hit] = 0.0
    return sep, hit
