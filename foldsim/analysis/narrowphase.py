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

from ..geometry import cross, rotate_rows, unit
from . import triangles
from .hulls import hull_distance_bounds, hull_gap, nearest_corners, sphere_plane_gap
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
    """`triangles.crossing_overlap` with a cheap rejection first (the same values, to rounding).

    Pairs in which a triangle lies beyond ``2 eps`` on one side of the other's plane
    get ``-inf`` at once, which is the reference's value for them: such a triangle
    neither strictly crosses the other's plane nor is coplanar with it. The rest go
    through `_crossing`, the reference's steps on coordinate arrays; coplanar pairs
    through the reference itself.
    """
    a, b = _check(a, b)
    out = np.full(len(a), -np.inf)
    for k in range(0, len(a), CHUNK):
        ca, cb = a[k:k + CHUNK], b[k:k + CHUNK]
        _, maybe = _block(_soa(ca), _soa(cb), eps, distance=False)
        if maybe.any():
            rows = np.flatnonzero(maybe)
            out[k + rows] = _crossing(ca[rows], cb[rows], eps)
    return out


def _unit_normal(t, eps):
    """Unit normal (3 arrays) of `_soa` triangles and whether each is degenerate (as the reference)."""
    v0, v1 = _sub(t[1], t[0]), _sub(t[2], t[0])
    raw = (v0[1] * v1[2] - v0[2] * v1[1], v0[2] * v1[0] - v0[0] * v1[2], v0[0] * v1[1] - v0[1] * v1[0])
    twice = np.sqrt(_dot(raw, raw))
    longest = np.sqrt(np.maximum.reduce([_dot(e, e) for e in (v0, _sub(t[2], t[1]), v1)]))
    degenerate = ~(twice > eps * longest)
    safe = np.where(degenerate, 1.0, twice)
    return tuple(np.where(degenerate, 0.0, c / safe) for c in raw), degenerate


def _heights(t, origin, normal, eps):
    """Signed distances of the 3 vertices to planes (origin, normal); |d| <= eps -> 0."""
    out = []
    for p in t:
        d = _dot(_sub(p, origin), normal)
        out.append(np.where(np.abs(d) <= eps, 0.0, d))
    return out


def _chord_soa(t, d, origin, line):
    """Interval (lo, hi) of triangle t on the line where d = 0 (`triangles._chord`)."""
    lo = np.full(len(d[0]), np.inf)
    hi = np.full(len(d[0]), -np.inf)
    for i in range(3):
        p, q, dp, dq = t[i], t[(i + 1) % 3], d[i], d[(i + 1) % 3]
        crosses = dp * dq < 0.0
        frac = np.where(crosses, dp / np.where(crosses, dp - dq, 1.0), 0.0)
        s = _dot(tuple(p[j] + frac * (q[j] - p[j]) - origin[j] for j in range(3)), line)
        lo = np.where(crosses, np.minimum(lo, s), lo)
        hi = np.where(crosses, np.maximum(hi, s), hi)
        on = dp == 0.0
        s = _dot(_sub(p, origin), line)
        lo = np.where(on, np.minimum(lo, s), lo)
        hi = np.where(on, np.maximum(hi, s), hi)
    return lo, hi


def _crossing(a, b, eps):
    """`triangles.crossing_overlap` of (n, 3, 3) pairs, in coordinate arrays (coplanar pairs by the reference)."""
    av, bv = _soa(a), _soa(b)
    na, deg_a = _unit_normal(av, eps)
    nb, deg_b = _unit_normal(bv, eps)
    da = _heights(av, bv[0], nb, eps)
    db = _heights(bv, av[0], na, eps)
    usable = ~(deg_a | deg_b)

    def strictly(d):
        return (np.maximum.reduce(d) > 0.0) & (np.minimum.reduce(d) < 0.0)

    crossing = usable & strictly(da) & strictly(db)
    coplanar = usable & (da[0] == 0.0) & (da[1] == 0.0) & (da[2] == 0.0) & (db[0] == 0.0) & (
        db[1] == 0.0) & (db[2] == 0.0)
    out = np.full(len(a), -np.inf)
    if crossing.any():
        rows = np.flatnonzero(crossing)
        pick = [tuple(c[rows] for c in v) for v in av], [tuple(c[rows] for c in v) for v in bv]
        u, w = tuple(c[rows] for c in na), tuple(c[rows] for c in nb)
        line = (u[1] * w[2] - u[2] * w[1], u[2] * w[0] - u[0] * w[2], u[0] * w[1] - u[1] * w[0])
        length = np.sqrt(_dot(line, line))
        safe = np.where(length > 0.0, length, 1.0)
        line = tuple(np.where(length > 0.0, c / safe, 0.0) for c in line)
        origin = pick[0][0]
        lo_a, hi_a = _chord_soa(pick[0], [d[rows] for d in da], origin, line)
        lo_b, hi_b = _chord_soa(pick[1], [d[rows] for d in db], origin, line)
        out[rows] = np.minimum(hi_a, hi_b) - np.maximum(lo_a, lo_b)
    if coplanar.any():
        out[coplanar] = triangles.crossing_overlap(a[coplanar], b[coplanar], eps)
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


def triangle_states(pan, poses, frame, ia, ib, eps, distance):
    """Crossing overlap and distance of triangle pairs ia, ib (n,) at ``poses[frame]``.

    Returns
    -------
    overlap : (n,) float
        `triangles.crossing_overlap` of each pair (``-inf`` where ruled out cheaply).
    dist : (n,) float or None
        Exact distances; None without ``distance``.
    """
    n = len(ia)
    overlap = np.full(n, -np.inf)
    dist = np.empty(n) if distance else None
    for k in range(0, n, CHUNK):
        sl = slice(k, k + CHUNK)
        av = _posed_soa(poses, frame[sl], pan.tri_face[ia[sl]], pan.tri_points[ia[sl]])
        bv = _posed_soa(poses, frame[sl], pan.tri_face[ib[sl]], pan.tri_points[ib[sl]])
        _block_states(av, bv, eps, distance, overlap[sl], None if dist is None else dist[sl])
    return overlap, dist


def _block_states(av, bv, eps, distance, overlap, dist):
    """Fill one block's crossing overlaps and (with ``distance``) distances, `_soa` triangles."""
    d2, maybe = _block(av, bv, eps, distance)
    if distance:
        dist[:] = np.sqrt(d2)
    if maybe.any():
        rows = np.flatnonzero(maybe)
        overlap[rows] = _crossing(_stack(av, rows), _stack(bv, rows), eps)


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



PAIR_BLOCK = 1_000_000
"""Triangle pairs expanded at once by `_many_triangles`."""


def _posed_items(pan, poses, frame, items):
    """Every triangle of item ``items[k]`` at ``poses[frame[k]]``, the items' runs back to back.

    Returns
    -------
    tris : (m, 3, 3) float
    offset : (n,) int
        Where each item's run starts in ``tris``.
    """
    count = pan.count[items]
    offset = np.concatenate([[0], np.cumsum(count)[:-1]]).astype(np.int64)
    which = np.repeat(np.arange(len(items)), count)
    tri = pan.start[items][which] + np.arange(count.sum()) - offset[which]
    m = poses[frame[which], items[which]]
    pts = pan.tri_points[tri]
    return rotate_rows(m[:, :3, :3], pts) + m[:, None, :3, 3], offset


def _states_posed(a, b, eps, distance):
    """`triangle_states` of posed triangle pairs a, b (n, 3, 3)."""
    n = len(a)
    overlap = np.full(n, -np.inf)
    dist = np.empty(n) if distance else None
    for k in range(0, n, CHUNK):
        sl = slice(k, k + CHUNK)
        _block_states(_soa(a[sl]), _soa(b[sl]), eps, distance, overlap[sl], None if dist is None else dist[sl])
    return overlap, dist


def _many_triangles(pan, poses, frame, pairs, eps, measure, limit):
    """Collision flag and least triangle distance of item pairs with many triangles.

    Each item's triangles are posed once per pose set, with a sphere (centroid,
    farthest corner) and a box each. A triangle pair whose sphere or box gap
    exceeds the pair's upper bound (the least distance between two triangle
    centroids, points of the two items) cannot hold the nearest points, and one
    whose gap exceeds ``limit`` (n,) is of no interest (``limit`` 0: crossing
    only); neither is tested. With oriented boxes (``pan.box_axes``), a pair whose
    items lie farther than that from each other's box is settled at once, and a
    triangle farther than that from the other item's box is left out before any
    triangle pair is formed. The rest go through the exact tests.

    Returns
    -------
    hit : (n,) bool
    sep : (n,) float
        Least distance (exact below ``limit``, else a lower bound of at least it);
        inf without ``measure``.
    """
    n = len(pairs)
    hit = np.zeros(n, bool)
    sep = np.full(n, np.inf)
    boxes = pan.box_axes is not None
    if boxes:
        # Item level: each item's sphere against the other's oriented box.
        low = _item_box_gap(pan, poses, frame, pairs)
        far = low > np.maximum(limit, 0.0) + 2.0 * eps
        if measure:
            sep[far] = low[far]
        rest = np.flatnonzero(~far)
    else:
        rest = np.arange(n)
    per = pan.count[pairs[rest, 0]] * pan.count[pairs[rest, 1]]
    ends = np.concatenate([[0], np.cumsum(per)])
    cuts = np.unique(np.searchsorted(ends, np.arange(0, ends[-1] + PAIR_BLOCK, PAIR_BLOCK)).clip(0, len(rest)))
    if not len(cuts) or cuts[-1] != len(rest):
        cuts = np.append(cuts, len(rest))
    for s, e in zip(cuts[:-1], cuts[1:]):
        if s == e:
            continue
        idx = rest[s:e]
        sub, fr, lim = pairs[idx], frame[idx], limit[idx]
        m = len(idx)
        keys, inv = np.unique(np.concatenate([fr * pan.n + sub[:, 0], fr * pan.n + sub[:, 1]]),
                              return_inverse=True)
        tris, offset = _posed_items(pan, poses, keys // pan.n, keys % pan.n)
        centre = tris.mean(axis=1)
        radius = np.sqrt(((tris - centre[:, None]) ** 2).sum(axis=2).max(axis=1))
        lo, hi = tris.min(axis=1), tris.max(axis=1)
        if boxes:
            ta, la = _side_triangles(pan, sub[:, 0], offset[inv[:m]])
            tb, lb = _side_triangles(pan, sub[:, 1], offset[inv[m:]])
            ga = _tri_box_gap(pan, poses, fr[la], sub[la, 1], centre[ta], radius[ta])
            gb = _tri_box_gap(pan, poses, fr[lb], sub[lb, 0], centre[tb], radius[tb])
            # An upper bound: the centroids of the two triangles nearest the other's box.
            best_a = _row_argmin(ga, la, m)
            best_b = _row_argmin(gb, lb, m)
            d = centre[ta[best_a]] - centre[tb[best_b]]
            bound = np.sqrt((d * d).sum(axis=1))
            cap = np.maximum(np.minimum(bound, lim), 0.0) + 2.0 * eps
            ka, kb = ga <= cap[la], gb <= cap[lb]
            pa, pb, row = _survivor_pairs(ta[ka], la[ka], tb[kb], lb[kb], m)
        else:
            ia, ib, row = triangle_pairs(pan, sub)
            pa = offset[inv[:m]][row] + ia - pan.start[sub[row, 0]]
            pb = offset[inv[m:]][row] + ib - pan.start[sub[row, 1]]
            bound = None
        d = centre[pa] - centre[pb]
        upper = np.sqrt((d * d).sum(axis=1))
        box = np.maximum(np.maximum(lo[pa] - hi[pb], lo[pb] - hi[pa]), 0.0)
        lower = np.maximum(upper - radius[pa] - radius[pb], np.sqrt((box * box).sum(axis=1)))
        if bound is None:
            bound = np.full(m, np.inf)
        np.minimum.at(bound, row, upper)
        keep = lower <= np.maximum(np.minimum(bound, lim)[row], 0.0) + 2.0 * eps
        first = None
        if measure and keep.any():
            # The kept pair of least lower bound in each row first: its exact distance
            # is a bound as tight as any, and prunes the rest of the row again.
            k = np.flatnonzero(keep)
            first = k[_row_argmin(lower[k], row[k], m, present=False)]
            first = first[first >= 0]
            o1, d1 = _states_posed(tris[pa[first]], tris[pb[first]], eps, True)
            np.logical_or.at(hit, idx[row[first]], o1 > eps)
            np.minimum.at(bound, row[first], d1)
            keep = lower <= np.maximum(np.minimum(bound, lim)[row], 0.0) + 2.0 * eps
            keep[first] = False
        keep = np.flatnonzero(keep)
        if measure:
            # Pruned triangles and triangle pairs lie beyond the bound (so do not hold
            # the nearest points) or beyond the limit: the least distance is the kept
            # pairs' least, or else at least the limit (docstring).
            floor = np.full(m, np.inf)
            if boxes:
                for g, rows, kept in ((ga, la, ka), (gb, lb, kb)):
                    np.minimum.at(floor, rows[~kept], g[~kept])
            pruned = np.ones(len(row), bool)
            pruned[keep] = False
            if first is not None:
                pruned[first] = False
            np.minimum.at(floor, row[pruned], lower[pruned])
            sep[idx] = np.maximum(floor, 0.0)
            if first is not None:
                np.minimum.at(sep, idx[row[first]], d1)
        if not len(keep):
            continue
        overlap, dist = _states_posed(tris[pa[keep]], tris[pb[keep]], eps, measure)
        r = row[keep]
        np.logical_or.at(hit, idx[r], overlap > eps)
        if measure:
            np.minimum.at(sep, idx[r], dist)
    return hit, sep


def _posed_boxes(pan, poses, frame, items):
    """Centre (n, 3) and axes (n, 3, 3) (rows) of the items' oriented boxes at ``poses[frame]``."""
    m = poses[frame, items]
    rot, move = m[:, :3, :3], m[:, :3, 3]
    centre = np.einsum("nij,nj->ni", rot, pan.box_centre[items]) + move
    axes = rotate_rows(rot, pan.box_axes[items])
    return centre, axes


def _point_box_distance(points, centre, axes, half):
    """Distance (n,) from points (n, 3) to oriented boxes (0 inside)."""
    local = np.abs(np.einsum("nkj,nj->nk", axes, points - centre))
    out = np.maximum(local - half, 0.0)
    return np.sqrt((out * out).sum(axis=1))


def _item_box_gap(pan, poses, frame, pairs):
    """(n,) lower bound on item pair distances: each sphere against the other's box."""
    out = []
    for x, y in ((0, 1), (1, 0)):
        bx, by = pairs[:, x], pairs[:, y]
        centre, axes = _posed_boxes(pan, poses, frame, bx)
        m = poses[frame, by]
        sphere = np.einsum("nij,nj->ni", m[:, :3, :3], pan.centre[by]) + m[:, :3, 3]
        out.append(_point_box_distance(sphere, centre, axes, pan.box_half[bx]) - pan.radius[by])
    return np.maximum(out[0], out[1])


def _side_triangles(pan, items, offset):
    """Every triangle of one side of item pairs: its index into the posed run and its pair."""
    count = pan.count[items]
    row = np.repeat(np.arange(len(items)), count)
    local = np.arange(count.sum()) - np.repeat(np.cumsum(count) - count, count)
    return offset[row] + local, row


def _tri_box_gap(pan, poses, frame, other, centre, radius):
    """(n,) lower bound on the distance from triangles (spheres) to the other items' boxes."""
    box_centre, axes = _posed_boxes(pan, poses, frame, other)
    return _point_box_distance(centre, box_centre, axes, pan.box_half[other]) - radius


def _row_argmin(values, rows, n, present=True):
    """Index into ``values`` of each row's least value.

    ``present``: every row 0..n-1 has a value; otherwise rows without one get -1.
    """
    order = np.lexsort((values, rows))
    sorted_rows = rows[order]
    first = np.searchsorted(sorted_rows, np.arange(n))
    if present:
        return order[first]
    ok = (first < len(rows)) & (sorted_rows[np.minimum(first, len(rows) - 1)] == np.arange(n))
    return np.where(ok, order[np.minimum(first, len(rows) - 1)], -1)


def _survivor_pairs(ta, la, tb, lb, n):
    """All pairs of one row's surviving triangles, for every row (la, lb sorted).

    Returns pa, pb (indices into the posed triangles) and the row of each pair.
    """
    ca = np.bincount(la, minlength=n)
    cb = np.bincount(lb, minlength=n)
    sa = np.concatenate([[0], np.cumsum(ca)[:-1]])
    sb = np.concatenate([[0], np.cumsum(cb)[:-1]])
    per = ca * cb
    row = np.repeat(np.arange(n), per)
    local = np.arange(per.sum()) - np.repeat(np.cumsum(per) - per, per)
    return ta[sa[row] + local // cb[row]], tb[sb[row] + local % cb[row]], row


def pivot_wedges(pan, poses, frame, pairs, pos):
    """Wedge separation (n,) of pivoting face pairs (n, 2) at ``poses[frame]``.

    ``pos`` (n,): each pair's row in ``pan.pivot_keys``; its two edge directions
    leaving the shared point are posed with their faces (`_wedge_separation`).
    """
    dirs = pan.pivot_dirs[pos]
    rot_a = poses[frame, pairs[:, 0], :3, :3]
    rot_b = poses[frame, pairs[:, 1], :3, :3]
    wa = unit(rotate_rows(rot_a, dirs[:, 0]))
    wb = unit(rotate_rows(rot_b, dirs[:, 1]))
    return _wedge_separation(wa, wb)


CORE_SLACK = 0.5
"""Share of two thick items' core distance that their reaches may take for the
core bound to stand in for their exact distance (`_cheap_separations`)."""


def _cheap_separations(pan, poses, frame, pairs, clearance, eps, need):
    """Item pairs settled by a cheap lower bound on their distance (pivoting items: `pair_state` scales it).

    Two bounds, each far cheaper than the triangle tests of two solids:

    - the cores' (`Panels.core`): the thin panels' exact distance, less both items'
      ``core_reach``. It stands in for the separation where it is positive and
      reaches ``need`` or where the reaches take at most `CORE_SLACK` of the cores'
      distance, which is about the separation (a core lies in its solid, or just
      outside one shrunk a little): the advancement then steps about half as far
      as with the exact value or more;
    - for convex items the cores' bound does not settle: the separating axes
      (`hulls.hull_gap`), then Gilbert's algorithm on their corners
      (`hulls.hull_distance_bounds`), which also gives an upper bound, a distance
      two points of the solids really are apart. The lower bound stands in for the
      separation where it reaches ``need`` or is within `HULL_SLACK` of the upper
      one; an upper bound below the clearance is a collision.

    ``need`` None: only the collision flag is wanted, and any positive bound
    settles a pair.

    A bound within twice the contact tolerance ``eps`` of the clearance settles
    nothing: there the triangle tests decide.

    Returns
    -------
    clear : (n,) bool
        Pairs settled: apart (beyond the clearance), with ``bound`` their separation.
    bound : (n,) float
        A lower bound on the distance less the clearance (-inf where none).
    close : (n,) bool
        Pairs settled as colliding: nearer than the clearance.
    """
    n = len(pairs)
    bound = np.full(n, -np.inf)
    clear = np.zeros(n, bool)
    close = np.zeros(n, bool)
    if not n:
        return clear, bound, close
    room = np.where(_in_sorted(_keys(pairs, pan.n), pan.touch_keys)[0], 0.0, clearance)
    wanted = np.full(n, -np.inf) if need is None else need
    if pan.core is not None:
        rows = np.flatnonzero(np.isfinite(pan.core_reach[pairs]).all(axis=1))
        if len(rows):
            dist = _core_distances(pan.core, poses, frame[rows], pairs[rows], eps) - room[rows]
            low = dist - pan.core_reach[pairs[rows]].sum(axis=1)
            bound[rows] = low
            ok = (low > 2.0 * eps) & ((low >= wanted[rows]) | (low >= (1.0 - CORE_SLACK) * dist))
            clear[rows] = ok
    if pan.hull_ok is not None:
        todo = np.flatnonzero(~clear & pan.hull_ok[pairs].all(axis=1))
        if pan.hull_offsets is not None and len(todo):
            # Each item's sphere against the other's face planes: a few products a
            # pair, enough for most pairs the advancement asks about.
            low = _sphere_plane_bounds(pan, poses, frame[todo], pairs[todo]) - room[todo]
            done = (low > 2.0 * eps) & (low >= wanted[todo])
            bound[todo[done]], clear[todo[done]] = low[done], True
            todo = todo[~done]
        corners, planes = _hull_sizes(pan)
        width = np.stack([corners[pairs[todo]].max(axis=1), planes[pairs[todo]].max(axis=1)], axis=1)
        # Pairs of one size at a time, their padding cut to it (prisms against
        # prisms do not pay for the corners of a fine gear body).
        for v, p in np.unique(width, axis=0).tolist():
            rows = todo[(width[:, 0] == v) & (width[:, 1] == p)]
            pa, na, pb, nb = _posed_hulls(pan, poses, frame[rows], pairs[rows], v, p)
            # Start from the nearest two corners, or for solids of many corners from
            # the centroids (both points of A - B).
            near = nearest_corners(pa, pb) if v <= NEAREST_CORNERS else pa.mean(axis=1) - pb.mean(axis=1)
            low = np.maximum(hull_gap(pa, na, pb, nb, near), bound[rows] + room[rows])
            low, high = hull_distance_bounds(pa, pb, low, wanted[rows], HULL_SLACK, offset=room[rows], near=near)
            low, high = low - room[rows], high - room[rows]
            bound[rows] = low
            clear[rows] = (low > 2.0 * eps) & ((low >= wanted[rows]) | (low >= (1.0 - HULL_SLACK) * high))
            close[rows] = (room[rows] > 0.0) & (high < -2.0 * eps)
    return clear, bound, close


def _sphere_plane_bounds(pan, poses, frame, pairs):
    """(n,) lower bound on convex item pairs' distance: each one's sphere against the other's planes."""
    m = [poses[frame, pairs[:, side]] for side in (0, 1)]
    world = [np.einsum("nij,nj->ni", x[:, :3, :3], pan.centre[pairs[:, side]]) + x[:, :3, 3]
             for side, x in enumerate(m)]
    out = np.full(len(pairs), -np.inf)
    for side in (0, 1):
        other = 1 - side
        # The other item's centre in this item's frame: R^T (c - t).
        local = np.einsum("nji,nj->ni", m[side][:, :3, :3], world[other] - m[side][:, :3, 3])
        items = pairs[:, side]
        out = np.maximum(out, sphere_plane_gap(local, pan.radius[pairs[:, other]], pan.hull_normals[items],
                                               pan.hull_offsets[items]))
    return out


def _hull_sizes(pan):
    """(F,) corners and (F,) face planes of each item's hull (its arrays pad with the last)."""
    out = []
    for rows in (pan.hull_points, pan.hull_normals):
        last = (rows == rows[:, -1:]).all(axis=2)
        out.append(np.argmax(last, axis=1) + 1)
    return out


def _core_distances(core, poses, frame, pairs, eps):
    """(n,) exact distance (0 where crossing) between the cores of item pairs at ``poses[frame]``."""
    if core.count[pairs].max() == 1:
        ia, ib, row = triangle_pairs(core, pairs)
        overlap, dist = triangle_states(core, poses, frame[row], ia, ib, eps, True)
        return np.where(overlap > eps, 0.0, dist)
    hit, dist = _many_triangles(core, poses, frame, pairs, eps, True, np.full(len(pairs), np.inf))
    return np.where(hit, 0.0, dist)


NEAREST_CORNERS = 12
"""Most corners for Gilbert's algorithm to start from the nearest two (`_cheap_separations`)."""

HULL_SLACK = 0.25
"""Share of two convex items' distance that the lower bound from their corners
may fall short by for it to stand in for the exact distance (`_cheap_separations`)."""


def _posed_hulls(pan, poses, frame, pairs, corners=None, planes=None):
    """Posed corners and face normals of both items of each pair: pa, na, pb, nb (n, V or P, 3).

    ``corners``, ``planes``: keep only that many (the padding repeats the last).
    """
    out = []
    for side in (0, 1):
        m = poses[frame, pairs[:, side]]
        rot, move = m[:, :3, :3], m[:, :3, 3]
        out.append(rotate_rows(rot, pan.hull_points[pairs[:, side], :corners]) + move[:, None])
        out.append(rotate_rows(rot, pan.hull_normals[pairs[:, side], :planes]))
    return out


def _cone_separation(ga, gb, need=None):
    """Lower bound (n,) on the angle between convex cones with a common apex.

    ``ga``, ``gb`` (n, G, 3): unit directions generating each cone. A plane through
    the apex with unit normal u that has every generator of A at least alpha above
    it and every one of B at least beta below keeps every direction of A at least
    alpha + beta from every direction of B. The planes tried are the one normal to
    the difference of the cones' mean directions and those through two generators
    (of either cone), each both ways; 0 where none separates. With ``need`` (n,),
    pairs that the first plane already keeps ``need`` apart get that plane's angle
    (a lower bound that reaches it) and skip the others.
    """
    mean = (ga.mean(axis=1) - gb.mean(axis=1))[:, None]
    best = _plane_gaps(ga, gb, mean)
    rest = np.arange(len(ga)) if need is None else np.flatnonzero(best < need)
    if len(rest):
        dirs = np.concatenate([ga[rest], gb[rest]], axis=1)
        i, j = np.triu_indices(dirs.shape[1], 1)
        best[rest] = np.maximum(best[rest], _plane_gaps(ga[rest], gb[rest], cross(dirs[:, i], dirs[:, j])))
    return best


def _plane_gaps(ga, gb, normals):
    """(n,) the largest angle by which a plane through the apex, normal to one of ``normals`` (n, k, 3)
    either way, keeps cone A on one side and cone B on the other (`_cone_separation`); 0 where none."""
    length = np.linalg.norm(normals, axis=2, keepdims=True)
    normals = normals / np.where(length > 1e-12, length, np.inf)
    on_a, on_b = normals @ ga.swapaxes(1, 2), normals @ gb.swapaxes(1, 2)
    best = np.zeros(len(ga))
    for above, below in ((on_a.min(axis=2), -on_b.max(axis=2)), (-on_a.max(axis=2), on_b.min(axis=2))):
        ok = (above > 0) & (below > 0)
        gap = np.where(ok, np.arcsin(np.clip(above, 0, 1)) + np.arcsin(np.clip(below, 0, 1)), 0.0)
        best = np.maximum(best, gap.max(axis=1))
    return best


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
        Distance (less the clearance), or, for pairs pivoting about a shared point,
        the wedge angle (thin panels), or the corner cones' angle or the distance
        over the reach (items, ``pan.pivot_reach``); 0 where colliding.
    hit : (n,) bool

    Notes
    -----
    Thin panels: a pivoting pair's panels are convex and lie in the wedges their
    two edges span at the shared point; wedges more than `PIVOT_APART` apart meet
    only at that point, so such a pair cannot collide and its triangles are not
    tested. Items (solids) that pivot and both have a corner at the shared point
    (``pan.pivot_cones``) take the angle between their corner cones
    (`_cone_separation`) in the same way: convex items lie inside their cones, so a
    positive angle rules out contact, and where it already reaches ``need`` no
    triangle is tested (without a clearance only: the cones say nothing about
    distances). Items with cores or convex hulls first try cheap bounds on their
    distance (`_cheap_separations`); ``sep`` is then a lower bound below ``need``
    too, within `CORE_SLACK` or `HULL_SLACK` of the distance.
    """
    pairs = np.asarray(pairs, np.int64).reshape(-1, 2)
    frame = np.asarray(frame)
    n = len(pairs)
    is_pivot, pos = _in_sorted(_keys(pairs, pan.n), pan.pivot_keys)
    measure = separation or clearance > 0
    angle = np.zeros(n)
    if pan.pivot_reach is None:
        # Thin panels: the wedges.
        angle = np.full(n, np.inf)
        if is_pivot.any():
            rows = np.flatnonzero(is_pivot)
            angle[rows] = pivot_wedges(pan, poses, frame[rows], pairs[rows], pos[rows])
        apart = is_pivot & (angle > PIVOT_APART)
    elif pan.pivot_cones is not None and clearance == 0 and separation and is_pivot.any():
        rows = np.flatnonzero(is_pivot)
        cones = pan.pivot_cones[pos[rows]]
        ok = ~np.isnan(cones[:, :, 0, 0]).any(axis=1)
        rows, cones = rows[ok], cones[ok]
        if len(rows):
            rot_a = poses[frame[rows], pairs[rows, 0], :3, :3]
            rot_b = poses[frame[rows], pairs[rows, 1], :3, :3]
            angle[rows] = _cone_separation(rotate_rows(rot_a, cones[:, 0]), rotate_rows(rot_b, cones[:, 1]),
                                           None if need is None else np.asarray(need, float)[rows])
        apart = (angle > 0) & (angle >= (np.asarray(need, float) if need is not None else np.inf))
    else:
        apart = np.zeros(n, bool)
    sep = np.where(apart, angle, np.inf) if measure else np.full(n, np.inf)
    hit = np.zeros(n, bool)
    if (pan.core is not None or pan.hull_ok is not None) and (need is not None or not measure):
        # Items pivoting about a point measure their distance over the reach.
        turning = is_pivot & (pan.pivot_reach is not None)
        rows = np.flatnonzero(~apart & (~is_pivot | turning))
        scale = np.where(turning[rows], pan.pivot_reach[pos[rows]] if len(pan.pivot_keys) else 1.0, 1.0)
        clear, bound, close = _cheap_separations(pan, poses, frame[rows], pairs[rows], clearance, eps,
                                                 None if not measure else np.asarray(need, float)[rows] * scale)
        if measure:
            sep[rows[clear]] = np.where(turning[rows], np.maximum(bound / scale, angle[rows]), bound)[clear]
            sep[rows[close]] = 0.0
        apart[rows[clear | close]] = True
        hit[rows[close]] = True
    if not apart.any():
        return _pair_state(mech, pan, poses, frame, pairs, clearance, eps, separation, need, angle)
    rest = np.flatnonzero(~apart)
    if len(rest):
        sep[rest], hit[rest] = _pair_state(mech, pan, poses, frame[rest], pairs[rest], clearance, eps, separation,
                                           None if need is None else np.asarray(need, float)[rest], angle[rest])
    return sep, hit


def _pair_state(mech, pan, poses, frame, pairs, clearance, eps, separation, need, angle):
    """`pair_state` with the pivoting pairs' angles ``angle`` (n,) given.

    Thin panels: the wedge separations. Items: the corner cones' angles (0 where
    unknown), a lower bound on the separation besides the distance over the reach.
    """
    keys = _keys(pairs, pan.n)
    is_pivot, pos = _in_sorted(keys, pan.pivot_keys)
    measure = separation or clearance > 0
    if len(pairs) and pan.count[pairs].max() > 1:
        # Pivoting pairs take their separation from the wedges: their triangles only
        # need the crossing test (spheres apart cannot cross).
        limit = np.full(len(pairs), np.inf if measure else 0.0)
        if need is not None:
            limit = np.minimum(limit, np.asarray(need, float) + clearance)
        reach = None
        if pan.pivot_reach is not None and is_pivot.any() and measure:
            # Items turning about a shared point: the distance over the reach
            # (`Panels.pivot_reach`), clearance included; the distance is wanted up to
            # the needed measure times the reach.
            reach = np.where(is_pivot, pan.pivot_reach[pos] if len(pan.pivot_reach) else 1.0, 1.0)
            if need is not None:
                limit = np.where(is_pivot, np.asarray(need, float) * reach + clearance, limit)
        elif pan.pivot_reach is None:
            limit[is_pivot] = 0.0
        hit, sep = _many_triangles(pan, poses, frame, pairs, eps, measure, limit)
        if not measure:
            return np.full(len(pairs), np.inf), hit
        if reach is not None:
            hit |= is_pivot & (sep < clearance)
            weighted = np.where(is_pivot, np.maximum(np.maximum(sep - clearance, 0.0) / reach, angle), np.inf)
        sep[is_pivot | hit] = np.inf
    else:
        ia, ib, row = triangle_pairs(pan, pairs)
        overlap, dist = triangle_states(pan, poses, frame[row], ia, ib, eps, measure)
        hit = overlap > eps  # one triangle per face: row is 0, 1, 2, ...
        sep = np.full(len(pairs), np.inf)
        if not measure:
            return sep, hit
        measured = ~is_pivot & ~hit
        sep[measured] = dist[measured]
        if pan.pivot_reach is not None and is_pivot.any():
            reach = np.where(is_pivot, pan.pivot_reach[pos] if len(pan.pivot_reach) else 1.0, 1.0)
            hit |= is_pivot & (dist < clearance)
            weighted = np.where(is_pivot, np.maximum(np.maximum(dist - clearance, 0.0) / reach, angle), np.inf)
    if clearance > 0:
        touching, _ = _in_sorted(keys, pan.touch_keys)
        hit |= ~touching & ~is_pivot & (sep < clearance)
        sep = np.where(touching | is_pivot, sep, np.maximum(sep - clearance, 0.0))
    if pan.pivot_reach is not None:
        if is_pivot.any():
            sep = np.where(is_pivot, weighted, sep)
    elif is_pivot.any():
        sep[is_pivot] = angle[is_pivot]
    sep[hit] = 0.0
    return sep, hit
