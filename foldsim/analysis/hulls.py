"""Convex items and cheap bounds on their distance.

A solid that is convex (the prism of a convex panel, a gear body whose sector is
at most a half turn, a rod) is the convex hull of its corners, so its distance to
another convex solid is at least the gap between their projections on any axis
(the separating axis theorem; Gottschalk, Lin & Manocha, "OBBTree", SIGGRAPH 1996,
use it the same way for boxes).

- `hull_gap` tries each solid's face normals, the line between the nearest two
  corners and the line between the centroids: a few dozen dot products against the
  hundreds of triangle-pair tests an exact distance costs. It is exact when the
  nearest points are a corner and a face, or two corners.
- `hull_distance_bounds` runs Gilbert's algorithm (E. G. Gilbert, "An iterative
  procedure for computing the minimum of a quadratic form on a convex set", SIAM J.
  Control 4, 1966; the method GJK refines) on the two corner sets: each step gives
  a point of the difference set, whose length bounds the distance from above, and a
  support value along it, which bounds it from below. A few steps bring the two
  within a few per cent, with no branches, for every pair at once.

A lower bound is all a conservative-advancement step needs once it reaches what
the step wants, or once it is close to the distance (`narrowphase.pair_state`).
"""

import numpy as np

HULL_POINTS = 32
"""Most corners an item may have to take the separating-axis bound."""

HULL_PLANES = 24
"""Most distinct face planes an item may have to take the separating-axis bound."""


def convex_items(tri_points, start, count, rel=1e-9):
    """Corners and face normals of every item that is convex and small enough.

    Parameters
    ----------
    tri_points : (K, 3, 3) float
        Every item's triangles (flat frame), item i the run ``start[i]`` to
        ``start[i] + count[i]``; a closed, outward-wound mesh for a solid.
    start, count : (F,) int
    rel : float
        Convexity tolerance relative to each item's size.

    Returns
    -------
    points : (F, V, 3) float
        Corners, padded with the last (NaN for an item that does not qualify); V
        is the most corners of any item that qualifies.
    normals : (F, P, 3) float
        Outward unit face normals, padded with the last; P likewise.
    ok : (F,) bool
        Items that qualify: closed and convex (every corner on the inner side of
        every face plane), with at most `HULL_POINTS` corners and `HULL_PLANES`
        planes. A single triangle (a thin panel) does not.
    """
    n = len(start)
    start, count = np.asarray(start, np.int64), np.asarray(count, np.int64)
    found = []
    # Items of one triangle count at a time, all at once.
    for c in np.unique(count[count >= 4]).tolist():
        items = np.flatnonzero(count == c)
        tri = tri_points[start[items][:, None] + np.arange(c)]  # (m, c, 3, 3)
        corners, n_corners = _distinct_rows(tri.reshape(len(items), -1, 3))
        normal = np.cross(tri[:, :, 1] - tri[:, :, 0], tri[:, :, 2] - tri[:, :, 0])
        length = np.linalg.norm(normal, axis=2)
        centre = corners.mean(axis=1)  # padding repeats a corner: inside the hull all the same
        size = np.linalg.norm(corners - centre[:, None], axis=2).max(axis=1)
        keep = length > rel * (size * size)[:, None]
        unit_normal = normal / np.where(keep, length, 1.0)[..., None]
        offset = np.einsum("mcj,mcj->mc", unit_normal, tri[:, :, 0])
        side = unit_normal @ corners.swapaxes(1, 2) - offset[..., None]
        convex = ~((side > (rel * size)[:, None, None]) & keep[..., None]).any(axis=(1, 2))
        # Triangles too small to have a normal take the item's first one that has.
        first = np.argmax(keep, axis=1)
        rounded = np.where(keep[..., None], np.round(unit_normal, 9),
                           np.round(unit_normal[np.arange(len(items)), first], 9)[:, None])
        planes, n_planes = _distinct_rows(rounded)
        ok = keep.any(axis=1) & convex & (n_corners <= HULL_POINTS) & (n_planes <= HULL_PLANES)
        if ok.any():
            planes = planes[ok] / np.linalg.norm(planes[ok], axis=2, keepdims=True)
            found.append((items[ok], corners[ok], n_corners[ok], planes, n_planes[ok]))
    n_points = max([int(g[2].max()) for g in found], default=1)
    n_planes = max([int(g[4].max()) for g in found], default=1)
    points = np.full((n, n_points, 3), np.nan)
    normals = np.full((n, n_planes, 3), np.nan)
    ok = np.zeros(n, bool)
    for items, corners, n_c, planes, n_p in found:
        # Padded with each item's last corner and plane.
        rows = np.arange(len(items))[:, None]
        points[items] = corners[rows, np.minimum(np.arange(n_points)[None], n_c[:, None] - 1)]
        normals[items] = planes[rows, np.minimum(np.arange(n_planes)[None], n_p[:, None] - 1)]
        ok[items] = True
    return points, normals, ok


def _distinct_rows(rows):
    """The distinct 3-vectors of each item (m, N, 3), sorted, padded with the first, and their numbers (m,)."""
    m, width = rows.shape[:2]
    order = np.lexsort((rows[..., 2], rows[..., 1], rows[..., 0]), axis=-1)
    ordered = np.take_along_axis(rows, order[..., None], axis=1)
    new = np.ones((m, width), bool)
    new[:, 1:] = (ordered[:, 1:] != ordered[:, :-1]).any(axis=2)
    number = new.sum(axis=1)
    rank = np.cumsum(new, axis=1) - 1
    out = np.repeat(ordered[:, :1], width, axis=1)
    r, k = np.nonzero(new)
    out[r, rank[r, k]] = ordered[r, k]
    return out[:, :max(1, int(number.max()))], number


def plane_offsets(points, normals):
    """(F, P) offset of each face plane of each item: ``normals[f, p] . x <= offset`` on the item.

    ``points`` (F, V, 3) and ``normals`` (F, P, 3) as `convex_items` gives them
    (NaN rows for items that do not qualify give NaN).
    """
    return (normals @ points.transpose(0, 2, 1)).max(axis=2)


def sphere_plane_gap(centre, radius, normals, offsets):
    """Lower bound (n,) on the distance from spheres to convex items; negative where they may meet.

    ``centre`` (n, 3), in each item's own frame, ``radius`` (n,); the item's face
    planes ``normals`` (n, P, 3), ``offsets`` (n, P) (`plane_offsets`). A point
    beyond one face plane of a convex solid by h is at least h from the solid, so
    the sphere is at least h less its radius from it; the largest over the planes.

    Examples
    --------
    A unit sphere centred 3 above the top of the unit cube is 2 from it:

    >>> import itertools
    >>> cube = np.array(list(itertools.product((0.0, 1.0), repeat=3)))[None]
    >>> faces = np.vstack([np.eye(3), -np.eye(3)])[None]
    >>> float(sphere_plane_gap(np.array([[0.5, 0.5, 4.0]]), np.ones(1), faces, plane_offsets(cube, faces))[0])
    2.0
    """
    return (np.einsum("npj,nj->np", normals, centre) - offsets).max(axis=1) - radius


def nearest_corners(pa, pb):
    """(n, 3) the difference a - b of each pair's nearest two corners, a point of A - B."""
    sa, sb = (pa * pa).sum(axis=2), (pb * pb).sum(axis=2)
    # |a - b|^2 = |a|^2 + |b|^2 - 2 a.b, only to choose the pair.
    d2 = sa[:, :, None] + sb[:, None, :] - 2.0 * (pa @ pb.transpose(0, 2, 1))
    k = np.argmin(d2.reshape(len(pa), -1), axis=1)
    rows = np.arange(len(pa))
    return pa[rows, k // pb.shape[1]] - pb[rows, k % pb.shape[1]]


def hull_gap(pa, na, pb, nb, near=None):
    """Lower bound (n,) on the distance between posed convex items; negative where they may overlap.

    Parameters
    ----------
    pa, pb : (n, V, 3) float
        Posed corners of the two items of each pair (padding repeats a corner).
    na, nb : (n, P, 3) float
        Their posed outward unit face normals.
    near : (n, 3) float, optional
        `nearest_corners`, when the caller has it.

    Returns
    -------
    (n,) float
        The largest gap between the two projections over the axes tried (face
        normals of either item, the nearest corners' line, the centroids' line).
        Positive: the items are at least that far apart.

    Examples
    --------
    Two unit cubes, one 2 along x from the other, are 1 apart:

    >>> import itertools
    >>> cube = np.array(list(itertools.product((0.0, 1.0), repeat=3)))
    >>> faces = np.vstack([np.eye(3), -np.eye(3)])
    >>> float(hull_gap(cube[None], faces[None], cube[None] + [2.0, 0, 0], faces[None])[0])
    1.0
    """
    near = nearest_corners(pa, pb) if near is None else near
    mid = pa.mean(axis=1) - pb.mean(axis=1)
    extra = np.stack([near, mid], axis=1)
    length = np.sqrt((extra * extra).sum(axis=2, keepdims=True))
    extra = np.where(length > 0, extra / np.where(length > 0, length, 1.0), na[:, :1])
    # Axes pointing from b towards a: a's normals reversed, b's as they are.
    axes = np.concatenate([-na, nb, extra], axis=1)
    on_a = axes @ pa.transpose(0, 2, 1)
    on_b = axes @ pb.transpose(0, 2, 1)
    return (on_a.min(axis=2) - on_b.max(axis=2)).max(axis=1)


def hull_distance_bounds(pa, pb, low, need, slack, offset=0.0, steps=24, near=None):
    """Lower and upper bounds (n,) on the distance of convex corner sets, by Gilbert's algorithm.

    Parameters
    ----------
    pa, pb : (n, V, 3) float
        Posed corners of the two items of each pair (padding repeats a corner).
    low : (n,) float
        A lower bound already known (`hull_gap`), kept if larger.
    need : (n,) float
        A pair stops once its lower bound less ``offset`` reaches this.
    slack : float
        A pair also stops once its lower bound less ``offset`` is at least
        ``(1 - slack)`` times its upper bound less ``offset``.
    offset : float or (n,) float
        What the caller takes off the distance (a clearance).
    near : (n, 3) float, optional
        The start, `nearest_corners` (computed when not given).
    steps : int
        Most steps per pair.

    Returns
    -------
    lower, upper : (n,) float
        ``lower <= distance <= upper``; ``lower`` is at most 0 where the sets may
        overlap.

    Examples
    --------
    Two unit cubes offset by (2, 2, 0) are sqrt(2) apart, corner edge to edge:

    >>> import itertools
    >>> cube = np.array(list(itertools.product((0.0, 1.0), repeat=3)))
    >>> lo, hi = hull_distance_bounds(cube[None], cube[None] + [2.0, 2.0, 0.0], np.array([-np.inf]),
    ...                               np.array([np.inf]), 1e-9)
    >>> bool(lo[0] <= np.sqrt(2) <= hi[0]), bool(hi[0] - lo[0] < 1e-6)
    (True, True)
    """
    n = len(pa)
    # Start from the nearest two corners: a point of the difference set A - B.
    x = nearest_corners(pa, pb) if near is None else near
    lower = np.asarray(low, float).copy()
    upper = np.sqrt((x * x).sum(axis=1))
    rows = np.arange(n)
    offset = np.broadcast_to(np.asarray(offset, float), (n,))
    for _ in range(steps):
        lo, hi = lower[rows] - offset[rows], upper[rows] - offset[rows]
        live = (lo < need[rows]) & (lo < (1.0 - slack) * hi) & (hi > 0.0)
        rows, x = rows[live], x[live]
        if not len(rows):
            break
        # Support of A - B towards -x: the corner of A least along x less b's most.
        ua = np.einsum("nvj,nj->nv", pa[rows], x)
        ub = np.einsum("nvj,nj->nv", pb[rows], x)
        ia, ib = np.argmin(ua, axis=1), np.argmax(ub, axis=1)
        k = np.arange(len(rows))
        s = pa[rows, ia] - pb[rows, ib]
        length = upper[rows]
        # Every point v of A - B has v.x >= s.x, so the distance is at least s.x / |x|.
        np.maximum.at(lower, rows, (ua[k, ia] - ub[k, ib]) / length)
        # The nearest point to the origin on the segment from x to s.
        step = x - s
        dd = (step * step).sum(axis=1)
        with np.errstate(divide="ignore", invalid="ignore"):
            lam = np.clip(np.where(dd > 0, (x * step).sum(axis=1) / dd, 0.0), 0.0, 1.0)
        x = x - lam[:, None] * step
        upper[rows] = np.minimum(length, np.sqrt((x * x).sum(axis=1)))
    return lower, upper
