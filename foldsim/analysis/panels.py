"""Panels as triangles, and the classes of face pairs the collision tests need.

Panels are zero-thickness planar polygons, triangulated once in the flat frame
(`triangles.triangulate_polygon`: the mapbox earcut library for large polygons, ear
clipping for small ones and as the fallback). Faces joined by a hinge, or sharing a
whole edge at every t, are never tested; pairs that share a point when flat or when
closed touch by design (the clearance does not apply to them); convex pairs that
share a point at every t pivot about it (their separation is an angle, see
`narrowphase.pair_state`).
"""

from dataclasses import dataclass

import numpy as np
from scipy.spatial import cKDTree

from ..geometry import corner_bounds, rotate_rows, transform_points
from ..kinematics import face_poses
from ..tolerances import DEFAULT
from . import triangles


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
    owner : (F,) int, optional
        For items that are not the mechanism's faces but rigid bodies carried by
        them (thick panels, gear bodies; `foldsim.build.bodies`): the face that
        carries each item. None: item f is face f. Every per-face array above is
        then per item, and F is the number of items.
    passive : (F,) bool, optional
        Items that are only tested against items that are not passive (panels that
        only gear bodies are swept against). None: every pair not skipped is tested.
    box_centre, box_axes, box_half : (F, 3), (F, 3, 3), (F, 3) float, optional
        An oriented box around each item (flat frame; rows of ``box_axes`` are its
        unit axes, ``box_half`` its half extents). Where given, the narrow phase
        rules out pairs and triangles far from another item's box before testing
        triangle pairs (`narrowphase._many_triangles`).
    pivot_points : (P, 3) float, optional
        The flat-frame point each pivoting pair turns about (a vertex both faces
        share, on every hinge between them; for items, both carrying faces).
    pivot_reach : (P,) float, optional
        With ``pivot_points``: the nearer of the two items' farthest corners from
        that point. Under a turn about it at angular speed w, every point of either
        item moves at most w times its (fixed) distance from it, so the pair's
        separation, as for the thin panels' wedges a measure that changes at most
        w, is the distance (less the clearance) over this reach
        (`narrowphase.pair_state`).
    pivot_cones : (P, 2, G, 3) float, optional
        With ``pivot_points``: for each item of the pair that has a corner at the
        pivot point, unit directions (flat frame) of its mesh edges leaving that
        corner, which generate the convex cone that holds a convex item; NaN rows
        where an item has no corner there (`narrowphase._cone_separation`).
    hull_points, hull_normals, hull_ok : (F, V, 3), (F, P, 3) float, (F,) bool, optional
        For items that are convex solids (``hull_ok``): their corners and outward
        face normals (flat frame, `hulls.convex_items`). Pairs of such items that
        the cheap bounds (`narrowphase._cheap_separations`: separating axes,
        Gilbert's algorithm) already settle skip the triangle tests.
    hull_offsets : (F, P) float, optional
        With ``hull_normals``: each face plane's offset (`hulls.plane_offsets`), for
        the cheapest of those bounds, each item's sphere against the other's planes.
    core : Panels, optional
        For items that hold a thin panel (thick panels): that panel's triangles, one
        run per item (``core.tri_face`` the item), posed with the item. Items without
        one have an empty run.
    core_reach : (F,) float, optional
        With ``core``: how far the item reaches beyond its core (every point of it
        lies within this distance of the core; inf without a core). Two such items
        are at least their cores' distance less both reaches apart
        (`narrowphase.pair_state`).
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
    owner: np.ndarray = None
    passive: np.ndarray = None
    box_centre: np.ndarray = None
    box_axes: np.ndarray = None
    box_half: np.ndarray = None
    pivot_points: np.ndarray = None
    pivot_reach: np.ndarray = None
    pivot_cones: np.ndarray = None
    hull_points: np.ndarray = None
    hull_normals: np.ndarray = None
    hull_ok: np.ndarray = None
    hull_offsets: np.ndarray = None
    core: "Panels" = None
    core_reach: np.ndarray = None

    @property
    def n(self):
        """Number of items (faces, or bodies when ``owner`` is set)."""
        return len(self.start)


def _keys(pairs, n_faces):
    pairs = np.sort(np.asarray(pairs, np.int64).reshape(-1, 2), axis=1)
    return pairs[:, 0] * n_faces + pairs[:, 1]


def convex_faces(mech):
    """(F,) bool: which flat faces are convex polygons (every turn on one side of the face's normal).

    The normal is the area-weighted one (Newell's, as ``sum p_i x p_(i+1)``); faces of
    one vertex count are tested together.
    """
    sizes = np.array([len(p) for p in mech.flat_faces])
    out = np.ones(len(sizes), bool)
    for k in np.unique(sizes[sizes > 3]).tolist():
        rows = np.flatnonzero(sizes == k)
        poly = np.array([mech.flat_faces[f] for f in rows], float)
        ahead = np.roll(poly, -1, axis=1)
        normal = np.cross(poly, ahead).sum(axis=1)
        turn = np.einsum("mkj,mj->mk", np.cross(ahead - poly, np.roll(poly, -2, axis=1) - ahead), normal)
        out[rows] = (turn > -1e-12 * np.abs(turn).max(axis=1, keepdims=True)).all(axis=1)
    return out


def _face_starts(mech):
    sizes = np.array([len(p) for p in mech.flat_faces])
    return np.concatenate([[0], np.cumsum(sizes)[:-1]])


def _paths_through(mech, fa, fb, point, eps):
    """Which face pairs' tree paths run only through hinges whose lines pass a point.

    Parameters
    ----------
    fa, fb : (n,) int
        Face pairs (different faces).
    point : (n, 3) float
        A flat-frame point per pair.
    eps : float
        Distance within which a hinge line passes the point.

    Returns
    -------
    ok : (n,) bool
        Every hinge on the path between fa and fb passes within eps of the point.
    steps : (rows, hinges)
        The path's hinges of the pairs that are ok, as two (m,) int arrays.
    """
    depth = np.zeros(mech.n_faces, np.int64)
    for d, level in enumerate(mech.levels, start=1):
        depth[mech.child[level]] = d
    up = np.arange(mech.n_faces)
    up[mech.child] = mech.parent
    ok = np.ones(len(fa), bool)
    x, y = np.asarray(fa, np.int64).copy(), np.asarray(fb, np.int64).copy()
    live = np.flatnonzero(x != y)
    rows, hinges = [], []
    while len(live):
        deeper = np.where(depth[x[live]] >= depth[y[live]], x[live], y[live])
        h = mech.face_hinge[deeper]
        u = mech.axes[h, 1] - mech.axes[h, 0]
        w = point[live] - mech.axes[h, 0]
        c = np.cross(u, w)
        ok[live] &= (c * c).sum(axis=1) <= eps * eps * (u * u).sum(axis=1)
        rows.append(live)
        hinges.append(h)
        move_x = depth[x[live]] >= depth[y[live]]
        x[live[move_x]] = up[x[live[move_x]]]
        y[live[~move_x]] = up[y[live[~move_x]]]
        live = live[(x[live] != y[live]) & ok[live]]
    rows = np.concatenate(rows) if rows else np.zeros(0, np.int64)
    hinges = np.concatenate(hinges) if hinges else np.zeros(0, np.int64)
    keep = ok[rows]
    return ok, (rows[keep].tolist(), hinges[keep].tolist())


def panels(mech, tol=DEFAULT):
    """Triangulate a mechanism's panels and classify its face pairs.

    Returns
    -------
    Panels
    """
    n = mech.n_faces
    tris, owner = [], []
    for f, poly in enumerate(mech.flat_faces):
        idx = triangles.triangulate_polygon(poly)
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
    touch = []
    for pts in (flat_pts, closed_pts):
        ij = cKDTree(pts).query_pairs(eps, output_type="ndarray")
        fa, fb = pt_face[ij[:, 0]], pt_face[ij[:, 1]]
        touch.append(_keys(np.column_stack([fa, fb])[fa != fb], n))
    hinged = {tuple(sorted(p)) for p in mech.hinge_faces.tolist()}
    hinged_keys = np.unique(_keys(mech.hinge_faces, n))
    shared = {}
    ij = cKDTree(flat_pts).query_pairs(eps, output_type="ndarray")
    fa, fb = pt_face[ij[:, 0]], pt_face[ij[:, 1]]
    ij = ij[(fa != fb) & ~_in_sorted(_keys(np.column_stack([fa, fb]), n), hinged_keys)[0]]
    swap = pt_face[ij[:, 0]] > pt_face[ij[:, 1]]
    ij[swap] = ij[swap, ::-1]
    ok, steps = _paths_through(mech, pt_face[ij[:, 0]], pt_face[ij[:, 1]], flat_pts[ij[:, 0]], eps)
    paths = {}
    for row, h in zip(*steps):
        paths.setdefault(row, []).append(h)
    for row in np.flatnonzero(ok).tolist():
        i, j = ij[row]
        shared.setdefault((int(pt_face[i]), int(pt_face[j])), []).append(
            (pt_local[i], pt_local[j], paths.get(row, [])))
    skip = set(hinged)
    pivots = []
    convex = convex_faces(mech)
    for (a, b), points in shared.items():
        if len(points) > 1:
            skip.add((a, b))
            continue
        la, lb, path = points[0]
        if not (convex[a] and convex[b]):
            continue
        dirs = []
        for f, k in ((a, la), (b, lb)):
            poly = mech.flat_faces[f]
            dirs.append([poly[(k + 1) % len(poly)] - poly[k], poly[k - 1] - poly[k]])
        row = np.zeros(mech.n_hinges, bool)
        row[path] = True
        pivots.append(((a, b), dirs, row, mech.flat_faces[a][la]))
    pivots.sort(key=lambda p: p[0][0] * n + p[0][1])
    centre = np.add.reduceat(flat_pts, _face_starts(mech)) / np.bincount(pt_face)[:, None]
    radius = np.maximum.reduceat(np.linalg.norm(flat_pts - centre[pt_face], axis=1), _face_starts(mech))
    return Panels(
        tri_face=np.concatenate(owner), tri_points=np.concatenate(tris), start=start, count=count,
        skip_keys=np.unique(_keys(list(skip), n)), touch_keys=np.unique(np.concatenate(touch)),
        pivot_keys=_keys([p[0] for p in pivots], n),
        pivot_dirs=np.array([p[1] for p in pivots], float).reshape(-1, 2, 2, 3),
        pivot_path=np.array([p[2] for p in pivots], bool).reshape(-1, mech.n_hinges),
        pivot_points=np.array([p[3] for p in pivots], float).reshape(-1, 3), centre=centre, radius=radius)


def oriented_boxes(tri_points, start):
    """An oriented box around each run of triangles (principal axes of its corners).

    Returns
    -------
    centre (F, 3), axes (F, 3, 3), half (F, 3) float
        As `Panels` keeps them.
    """
    start = np.asarray(start, np.int64)
    count = np.diff(np.append(start, len(tri_points)))
    centre, axes, half = np.zeros((len(start), 3)), np.zeros((len(start), 3, 3)), np.zeros((len(start), 3))
    # Runs of one length at a time, all at once.
    for c in np.unique(count).tolist():
        rows = np.flatnonzero(count == c)
        pts = tri_points[start[rows][:, None] + np.arange(c)].reshape(len(rows), -1, 3)
        mid = pts.mean(axis=1, keepdims=True)
        _, _, vt = np.linalg.svd(pts - mid, full_matrices=False)
        proj = (pts - mid) @ vt.transpose(0, 2, 1)
        lo, hi = proj.min(axis=1), proj.max(axis=1)
        centre[rows] = mid[:, 0] + ((0.5 * (lo + hi))[:, None] @ vt)[:, 0]
        axes[rows] = vt
        half[rows] = 0.5 * (hi - lo)
    return centre, axes, half


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


def _posed_triangles(pan, poses):
    """(T, K, 3, 3) every triangle at every pose set (T, F, 4, 4)."""
    return transform_points(poses[:, pan.tri_face][:, :, None], pan.tri_points[None])


BOX_CORNERS = 12
"""Most corners a convex item may have for the sweep's boxes to be taken from its corners (`_face_boxes`)."""


def corner_boxes(pan):
    """Whether `_face_boxes` takes every item's box from its corners (all convex, at most `BOX_CORNERS` each)."""
    return bool(pan.hull_ok is not None and len(pan.hull_ok) and pan.hull_ok.all()
                and pan.hull_points.shape[1] <= BOX_CORNERS)


def _corner_boxes(corners, poses, extra=None):
    """Boxes lo, hi (T, F, 3) of posed corner stacks (F, V, 3), and the posed ``extra`` points (T, F, 3).

    Item by item, one product of its corners (and its extra point) with all T
    rotations side by side: a few thousand products of (V, 3) by (3, 3T) matrices,
    where posing each item at each t apart is T times as many products of (V, 3)
    by (3, 3), which cost numpy about the same each.
    """
    n_t, n = poses.shape[:2]
    v = corners.shape[1]
    points = corners if extra is None else np.concatenate([corners, extra[:, None]], axis=1)
    # turned[f, j, 3 t + i] = poses[t, f, i, j]: the rotations' transposes side by side.
    turned = poses[..., :3, :3].transpose(1, 3, 0, 2).reshape(n, 3, 3 * n_t)
    moved = points @ turned  # (F, V [+ 1], 3T)
    lo = moved[:, 0].copy()
    hi = lo.copy()
    for k in range(1, v):
        np.minimum(lo, moved[:, k], out=lo)
        np.maximum(hi, moved[:, k], out=hi)
    move = poses[..., :3, 3]
    lo = lo.reshape(n, n_t, 3).transpose(1, 0, 2) + move
    hi = hi.reshape(n, n_t, 3).transpose(1, 0, 2) + move
    posed = None if extra is None else moved[:, v].reshape(n, n_t, 3).transpose(1, 0, 2) + move
    return lo, hi, posed


def _face_boxes(pan, poses):
    """Bounding boxes (T, F, 3) lo and hi of every face at every pose set (T, F, 4, 4).

    Items that are all convex solids with few corners (``pan.hull_ok``) take the
    box of their corners, the tight box from fewer points than their triangles'
    corners; other items with oriented boxes (``pan.box_axes``: solids) the
    axis-aligned box of their posed oriented box, a few operations per item
    whatever its mesh.
    """
    if corner_boxes(pan):
        return _corner_boxes(pan.hull_points, poses)[:2]
    if pan.box_axes is not None:
        rot, move = poses[..., :3, :3], poses[..., :3, 3]
        centre = np.einsum("tfij,fj->tfi", rot, pan.box_centre) + move
        # Half extents along the world axes: sum over the box's axes a_k of |R a_k| h_k.
        axes = rotate_rows(rot, pan.box_axes)
        reach = np.einsum("tfki,fk->tfi", np.abs(axes), pan.box_half)
        return centre - reach, centre + reach
    lo, hi = corner_bounds(_posed_triangles(pan, poses))
    lo = np.minimum.reduceat(lo, pan.start, axis=1)
    hi = np.maximum.reduceat(hi, pan.start, axis=1)
    return lo, hi


