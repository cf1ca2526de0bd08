"""Solids as items of the collision sweep: thick panels and gear bodies carried by faces.

`body_panels` packs a list of `Solid` into the `analysis.panels.Panels` form that
`analysis.sweep.collision_intervals` sweeps (``owner``: the face carrying each
solid), with the pairs the build checks leave out; `body_speed_profile` gives the
solids' speed bounds, split like `kinematics.speed_profile`. The build sweeps
(`foldsim.build.sweep`) then get the thin panels' broad phase, lazy distances and
bounded memory for solids of any number of triangles.
"""

import numpy as np

from ..analysis.hulls import convex_items, plane_offsets
from ..analysis.panels import Panels, _keys, convex_faces, oriented_boxes
from ..analysis.spatialhash import later_in_run
from ..analysis.triangles import point_triangle_distance
from ..kinematics import speed_profile, turn_profile


def body_panels(mech, solids, skip=(), passive=None, pivots=None, cone_solids=None):
    """The sweep's view of a list of solids.

    Parameters
    ----------
    mech : Mechanism
    solids : list of Solid
    skip : (n, 2) int, optional
        Solid pairs never tested. Solids carried by one face are one rigid part and
        are always skipped.
    passive : (S,) bool, optional
        Solids tested only against solids that are not passive.
    pivots : Panels, optional
        The thin panels (`analysis.panels.panels`). Solids carried by two faces
        that pivot about a shared vertex (every hinge between them runs through
        it) then pivot too: their relative motion is a turn about that point, so
        their separation is measured as an angle about it (``pivot_reach``,
        ``pivot_cones``), which settles such neighbours, close all along the
        motion near their shared corner, in a few steps instead of hundreds.
        Convex prisms also get their thin panel as a core (``core``,
        ``core_reach``; `_cores`), a cheap bound on their distance.
    cone_solids : list of Solid, optional
        Solids that hold ``solids`` one for one and have their corners at the
        pivot points (the prisms before `panel_clashes` shrinks them, or
        ``solids`` themselves): their corner cones hold the solids too
        (``pivot_cones``, used without a clearance). None: no cones.

    Returns
    -------
    Panels
        One item per solid, ``owner`` its face; no touching pairs.
    """
    count = np.array([len(s.triangles) for s in solids], np.int64)
    start = np.concatenate([[0], np.cumsum(count)[:-1]]).astype(np.int64)
    tri_points = np.concatenate([s.triangles for s in solids]).astype(float)
    tri_item = np.repeat(np.arange(len(solids)), count)
    owner = np.array([s.face for s in solids], np.int64)
    n = len(solids)
    centre, radius = item_spheres(tri_points, start, count)
    # Solids of one face: every item paired with the later items of its face's run.
    order = np.argsort(owner, kind="stable")
    i, j = later_in_run(np.searchsorted(owner[order], owner[order], side="right"))
    pairs = np.concatenate([np.column_stack([order[i], order[j]]), np.asarray(skip, np.int64).reshape(-1, 2)])
    box_centre, box_axes, box_half = oriented_boxes(tri_points, start)
    skip_keys = np.unique(_keys(pairs, n))
    keys, paths, points = _pivot_items(mech, owner, skip_keys, pivots)
    # The reach from the pivot, bounded by the solid's sphere (a longer reach only
    # makes the measure more cautious).
    a, b = keys // n, keys % n
    reach = np.minimum(np.linalg.norm(centre[a] - points, axis=1) + radius[a],
                       np.linalg.norm(centre[b] - points, axis=1) + radius[b])
    cones = (_corner_cones(cone_solids, keys, points, 1e-9 * mech.size)
             if len(keys) and cone_solids is not None else None)
    hull_points, hull_normals, hull_ok = convex_items(tri_points, start, count)
    core, core_reach = (_cores(mech, solids, pivots, hull_ok, hull_points) if pivots is not None
                        else (None, None))
    return Panels(
        tri_face=tri_item, tri_points=tri_points, start=start, count=count,
        skip_keys=skip_keys, touch_keys=np.zeros(0, np.int64),
        pivot_keys=keys, pivot_dirs=np.zeros((len(keys), 2, 2, 3)),
        pivot_path=paths, pivot_points=points, pivot_reach=reach, pivot_cones=cones, centre=centre, radius=radius, owner=owner,
        passive=None if passive is None else np.asarray(passive, bool),
        box_centre=box_centre, box_axes=box_axes, box_half=box_half,
        hull_points=hull_points, hull_normals=hull_normals, hull_ok=hull_ok,
        hull_offsets=plane_offsets(hull_points, hull_normals), core=core, core_reach=core_reach)


def item_spheres(tri_points, start, count):
    """Centre (S, 3), the mean of each item's triangle corners, and the radius (S,) that holds them."""
    points = tri_points.reshape(-1, 3)
    first = 3 * start
    centre = np.add.reduceat(points, first, axis=0) / (3 * count)[:, None]
    far = np.linalg.norm(points - np.repeat(centre, 3 * count, axis=0), axis=1)
    return centre, np.maximum.reduceat(far, first)


def _cores(mech, solids, thin, convex, corners):
    """The thin panel inside each convex thick panel, and how far the solid reaches beyond it.

    A convex solid lies within distance r of a convex polygon (the set of such
    points is convex) as soon as its corners do, so r is the farthest corner's
    distance to the polygon. Gear bodies and solids or panels that are not convex
    get no core (an empty run, reach inf).

    Returns
    -------
    core : Panels
        ``tri_face`` the item; per-item runs of the thin triangles.
    reach : (S,) float
    """
    n = len(solids)
    reach = np.full(n, np.inf)
    faces = np.array([s.face for s in solids], np.int64)
    flat_convex = convex_faces(mech)
    cored = np.array([s.kind == "panel" for s in solids], bool) & np.asarray(convex, bool) & flat_convex[faces]
    count = np.where(cored, thin.count[faces], 0)
    for c in np.unique(count[cored]).tolist():
        rows = np.flatnonzero(cored & (count == c))
        tri = thin.tri_points[thin.start[faces[rows]][:, None] + np.arange(c)]  # (m, c, 3, 3)
        dist = point_triangle_distance(corners[rows][:, :, None], tri[:, None])  # (m, V, c)
        reach[rows] = dist.min(axis=2).max(axis=1)
    runs = [thin.tri_points[thin.start[f]:thin.start[f] + c] for f, c in zip(faces.tolist(), count.tolist())]
    start = np.concatenate([[0], np.cumsum(count)[:-1]]).astype(np.int64)
    points = np.concatenate(runs) if count.sum() else np.zeros((0, 3, 3))
    empty = np.zeros(0, np.int64)
    core = Panels(tri_face=np.repeat(np.arange(n), count), tri_points=points, start=start, count=count,
                  skip_keys=empty, touch_keys=empty, pivot_keys=empty, pivot_dirs=np.zeros((0, 2, 2, 3)),
                  pivot_path=np.zeros((0, mech.n_hinges), bool), centre=thin.centre[faces],
                  radius=thin.radius[faces])
    return core, reach


def _pivot_items(mech, owner, skip_keys, pivots):
    """Sorted keys, hinge paths and pivot points of the item pairs whose faces pivot."""
    empty = (np.zeros(0, np.int64), np.zeros((0, mech.n_hinges), bool), np.zeros((0, 3)))
    if pivots is None or not len(pivots.pivot_keys):
        return empty
    n, n_faces = len(owner), mech.n_faces
    # Every item of one face against every item of the other, for all pivoting face pairs at once.
    fa, fb = pivots.pivot_keys // n_faces, pivots.pivot_keys % n_faces
    order = np.argsort(owner, kind="stable")
    first = np.searchsorted(owner[order], np.arange(n_faces))
    per_face = np.bincount(owner, minlength=n_faces)
    na, nb = per_face[fa], per_face[fb]
    per = na * nb
    row = np.repeat(np.arange(len(fa)), per)
    local = np.arange(per.sum()) - np.repeat(np.cumsum(per) - per, per)
    i = order[first[fa[row]] + local // nb[row]]
    j = order[first[fb[row]] + local % nb[row]]
    keys = np.minimum(i, j) * n + np.maximum(i, j)
    keep = ~np.isin(keys, skip_keys)
    keys, row = keys[keep], row[keep]
    sort = np.argsort(keys, kind="stable")
    if not len(sort):
        return empty
    return keys[sort], pivots.pivot_path[row[sort]], pivots.pivot_points[row[sort]]


CONE_GENERATORS = 8
"""Most edge directions kept per corner cone (`_corner_cones`)."""


def _corner_cones(solids, keys, points, eps):
    """(P, 2, G, 3) extreme directions leaving each pivot point, per item of each pair (NaN: no corner there).

    A convex solid with a corner at the point lies in the cone the directions to
    its other corners span there, whose extreme rays are its edges at that corner
    (`_extreme_rays`). Only convex solids (the prisms of convex panels) qualify; a
    gear body never has a corner at a panel's vertex.
    """
    n = len(solids)
    count = np.array([len(s.triangles) for s in solids], np.int64)
    start = np.concatenate([[0], np.cumsum(count)[:-1]]).astype(np.int64)
    corners, _, convex = convex_items(np.concatenate([s.triangles for s in solids]), start, count)
    panel = np.array([s.kind == "panel" for s in solids], bool)
    items = np.column_stack([keys // n, keys % n]).reshape(-1)
    apex_at = np.repeat(np.asarray(points, float).reshape(-1, 3), 2, axis=0)
    d = corners[items] - apex_at[:, None]
    length = np.linalg.norm(d, axis=2)
    apex = length <= eps
    has = convex[items] & panel[items] & apex.any(axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        dirs = d / length[..., None]
    valid = has[:, None] & ~apex & np.isfinite(dirs).all(axis=2)
    # The padding repeats a corner: only its first copy counts.
    same = (dirs[:, :, None] == dirs[:, None]).all(axis=3)
    valid &= ~np.tril(same, -1).any(axis=2)
    keep = _extreme_rays(np.where(valid[..., None], dirs, 0.0), valid, eps)
    number = keep.sum(axis=1)
    ok = has & (number >= 2) & (number <= CONE_GENERATORS)
    width = max(1, int(number[ok].max())) if ok.any() else 1
    out = np.full((len(items), width, 3), np.nan)
    rows = np.flatnonzero(ok)
    # Each row's kept directions in order, the last repeated to the width.
    kept = np.argsort(~keep[rows], axis=1, kind="stable")
    pick = np.take_along_axis(kept, np.minimum(np.arange(width)[None, :], number[rows, None] - 1), axis=1)
    out[rows] = dirs[rows[:, None], pick]
    return out.reshape(len(keys), 2, width, 3)


def _extreme_rays(dirs, valid, eps=1e-9):
    """(T, m) bool: which unit directions (T, m, 3) no two others (``valid`` ones) span.

    A direction in the plane of two others and between them (a triangulation's
    diagonal, a far corner of a side face) generates nothing more of the cone.
    """
    m = dirs.shape[1]
    normal = np.cross(dirs[:, :, None], dirs[:, None])  # (T, i, j, 3)
    ok = (np.linalg.norm(normal, axis=3) > eps) & valid[:, :, None] & valid[:, None, :]
    plane = np.abs(np.einsum("tijx,tkx->tkij", normal, dirs)) <= eps
    turn = np.cross(dirs[:, :, None], dirs[:, None])  # turn[t, a, b] = d_a x d_b
    left = np.einsum("tikx,tijx->tkij", turn, normal) >= 0
    right = np.einsum("tkjx,tijx->tkij", turn, normal) >= 0
    k, i, j = np.ogrid[:m, :m, :m]
    spans = ok[:, None] & plane & left & right & (i != k) & (j != k) & (i != j)
    return valid & ~spans.reshape(len(dirs), m, -1).any(axis=2)


def body_speed_profile(mech, rates, solids):
    """Speed bounds of every solid, split like `kinematics.speed_profile`.

    A solid reaching farther from its face's entry hinge than the face does moves
    faster by that extra reach times the rates of the hinges on its chain.

    Returns
    -------
    (S, D + 1) float
        ``out[s, d]``: how fast any point of solid s moves per unit t in the frame
        of its panel's ancestor at depth d.
    """
    profile = speed_profile(mech, rates)
    faces = np.array([s.face for s in solids], np.int64)
    out = profile[faces]
    entry = mech.face_hinge[faces]
    moved = np.flatnonzero(entry >= 0)
    if not len(moved):
        return out
    mids = mech.axes.mean(axis=1)
    # tail[f, d]: the |rates| of the hinges on f's chain more than d steps below the root.
    tail = turn_profile(mech, rates)
    # far_face[f]: how far face f's corners reach from the midpoint of its entry hinge.
    sizes = np.array([len(p) for p in mech.flat_faces], np.int64)
    corner_face = np.repeat(np.arange(mech.n_faces), sizes)
    reach = np.linalg.norm(np.concatenate(mech.flat_faces) - mids[np.maximum(mech.face_hinge, 0)][corner_face],
                           axis=1)
    far_face = np.where(mech.face_hinge >= 0, np.maximum.reduceat(reach, np.cumsum(sizes) - sizes), 0.0)
    count = np.array([s.triangles.size // 3 for s in solids], np.int64)
    points = np.concatenate([s.triangles.reshape(-1, 3) for s in solids])
    owner = np.repeat(np.arange(len(solids)), count)
    far_point = np.linalg.norm(points - mids[np.maximum(entry, 0)][owner], axis=1)
    far_body = np.maximum.reduceat(far_point, np.concatenate([[0], np.cumsum(count)[:-1]]))
    extra = np.where(entry >= 0, np.maximum(0.0, far_body - far_face[faces]), 0.0)
    out += extra[:, None] * tail[faces]
    return out
