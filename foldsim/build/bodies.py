"""Solids as items of the collision sweep: thick panels and gear bodies carried by faces.

`body_panels` packs a list of `Solid` into the `analysis.panels.Panels` form that
`analysis.sweep.collision_intervals` sweeps (``owner``: the face carrying each
solid), with the pairs the build checks leave out; `body_speed_profile` gives the
solids' speed bounds, split like `kinematics.speed_profile`. The build sweeps
(`foldsim.build.sweep`) then get the thin panels' broad phase, lazy distances and
bounded memory for solids of any number of triangles.
"""

import numpy as np

from ..analysis.hulls import convex_items
from ..analysis.panels import Panels, _is_convex, _keys, oriented_boxes
from ..analysis.triangles import newell_normal, point_triangle_distance
from ..kinematics import speed_profile


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
    centre = np.array([s.triangles.reshape(-1, 3).mean(axis=0) for s in solids])
    radius = np.array([np.linalg.norm(s.triangles.reshape(-1, 3) - c, axis=1).max()
                       for s, c in zip(solids, centre)])
    same = []
    order = np.argsort(owner, kind="stable")
    for run in np.split(order, np.flatnonzero(np.diff(owner[order])) + 1):
        if len(run) > 1:
            a, b = np.triu_indices(len(run), 1)
            same.append(np.column_stack([run[a], run[b]]))
    pairs = np.concatenate(same + [np.asarray(skip, np.int64).reshape(-1, 2)])
    n = len(solids)
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
        hull_points=hull_points, hull_normals=hull_normals, hull_ok=hull_ok, core=core, core_reach=core_reach)


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
    runs = []
    for i, s in enumerate(solids):
        f = s.face
        poly = mech.flat_faces[f]
        if s.kind != "panel" or not convex[i] or not _is_convex(poly, newell_normal(poly)):
            runs.append(np.zeros((0, 3, 3)))
            continue
        tri = thin.tri_points[thin.start[f]:thin.start[f] + thin.count[f]]
        points = corners[i]
        reach[i] = float(point_triangle_distance(points[:, None], tri[None]).min(axis=1).max())
        runs.append(tri)
    count = np.array([len(r) for r in runs], np.int64)
    start = np.concatenate([[0], np.cumsum(count)[:-1]]).astype(np.int64)
    points = np.concatenate(runs) if count.sum() else np.zeros((0, 3, 3))
    owners = np.array([s.face for s in solids], np.int64)
    empty = np.zeros(0, np.int64)
    core = Panels(tri_face=np.repeat(np.arange(n), count), tri_points=points, start=start, count=count,
                  skip_keys=empty, touch_keys=empty, pivot_keys=empty, pivot_dirs=np.zeros((0, 2, 2, 3)),
                  pivot_path=np.zeros((0, mech.n_hinges), bool), centre=thin.centre[owners],
                  radius=thin.radius[owners])
    return core, reach


def _pivot_items(mech, owner, skip_keys, pivots):
    """Sorted keys, hinge paths and pivot points of the item pairs whose faces pivot."""
    empty = (np.zeros(0, np.int64), np.zeros((0, mech.n_hinges), bool), np.zeros((0, 3)))
    if pivots is None or not len(pivots.pivot_keys):
        return empty
    n_faces = mech.n_faces
    items = {}
    for i, f in enumerate(owner.tolist()):
        items.setdefault(f, []).append(i)
    rows = []
    for key, path in zip(pivots.pivot_keys.tolist(), pivots.pivot_path):
        a, b = divmod(key, n_faces)
        pa, pb = mech.flat_faces[a], mech.flat_faces[b]
        d = np.linalg.norm(pa[:, None] - pb[None], axis=2)
        point = pa[np.unravel_index(np.argmin(d), d.shape)[0]]
        for i in items.get(a, []):
            for j in items.get(b, []):
                rows.append((min(i, j) * len(owner) + max(i, j), path, point))
    if not rows:
        return empty
    keys = np.array([r[0] for r in rows], np.int64)
    order = np.argsort(keys)
    keep = ~np.isin(keys[order], skip_keys)
    order = order[keep]
    return (keys[order], np.array([rows[k][1] for k in order], bool).reshape(-1, mech.n_hinges),
            np.array([rows[k][2] for k in order], float).reshape(-1, 3))


CONE_GENERATORS = 8
"""Most edge directions kept per corner cone (`_corner_cones`)."""


def _corner_cones(solids, keys, points, eps):
    """(P, 2, G, 3) extreme edge directions leaving each pivot point, per item of each pair (NaN: no corner there).

    Only convex solids (the prisms of convex panels) are held by the cone their
    edges span at a corner; a gear body never has a corner at a panel's vertex,
    and a prism that is not convex gets NaN too.
    """
    n = len(solids)
    cache = {}
    found = []
    for k, (key, point) in enumerate(zip(keys.tolist(), points)):
        for side, item in enumerate(divmod(key, n)):
            token = (item, tuple(np.round(point, 9)))
            if token not in cache:
                cache[token] = _cone_at(solids[item], point, eps)
            found.append(cache[token])
    # As many generators as the largest cone has (repeats pad the others).
    width = max([len(d) for d in found if d is not None], default=1)
    out = np.full((len(keys) * 2, width, 3), np.nan)
    for row, dirs in enumerate(found):
        if dirs is not None:
            out[row] = dirs[np.minimum(np.arange(width), len(dirs) - 1)]
    return out.reshape(len(keys), 2, width, 3)


def _extreme(dirs, eps=1e-9):
    """The generators (m, 3) of a pointed convex cone that no two others span (unit rows in, unit rows out).

    A mesh edge that splits a flat face (a triangulation's diagonal) lies in the
    plane of two of the face's edges, between them, and generates nothing more.
    """
    m = len(dirs)
    normal = np.cross(dirs[:, None], dirs[None])  # (i, j, 3)
    ok = np.linalg.norm(normal, axis=2) > eps
    plane = np.abs(np.einsum("ijx,kx->kij", normal, dirs)) <= eps
    left = np.einsum("ikx,ijx->kij", np.cross(dirs[:, None], dirs[None]), normal) >= 0
    right = np.einsum("kjx,ijx->kij", np.cross(dirs[:, None], dirs[None]), normal) >= 0
    k, i, j = np.ogrid[:m, :m, :m]
    spans = ok[None] & plane & left & right & (i != k) & (j != k) & (i != j)
    return dirs[~spans.reshape(m, -1).any(axis=1)]


def _cone_at(solid, point, eps):
    """Unit directions of a convex solid's mesh edges leaving ``point``, or None."""
    if solid.kind != "panel":
        return None
    tri = solid.triangles
    at = np.linalg.norm(tri - point, axis=2) <= eps  # (n, 3)
    if not at.any():
        return None
    corners = tri.reshape(-1, 3)
    centre = corners.mean(axis=0)
    # Convex: every corner lies on the inner side of every face plane.
    normal = np.cross(tri[:, 1] - tri[:, 0], tri[:, 2] - tri[:, 0])
    side = np.einsum("fj,kj->fk", normal, corners) - np.einsum("fj,fj->f", normal, tri[:, 0])[:, None]
    scale = np.linalg.norm(normal, axis=1)[:, None] * np.linalg.norm(corners - centre, axis=1).max()
    if (side > 1e-9 * np.maximum(scale, 1e-300)).any():
        return None
    rows = np.flatnonzero(at.any(axis=1))
    others = tri[rows][~at[rows]]
    d = others - point
    d = d[np.linalg.norm(d, axis=1) > eps]
    d = np.unique(np.round(d / np.linalg.norm(d, axis=1, keepdims=True), 12), axis=0)
    d = _extreme(d / np.linalg.norm(d, axis=1, keepdims=True))
    if len(d) > CONE_GENERATORS or len(d) < 2:
        return None
    return d


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
    mids = mech.axes.mean(axis=1)
    out = np.zeros((len(solids), profile.shape[1]))
    tails = {}
    for s, solid in enumerate(solids):
        f = solid.face
        out[s] = profile[f]
        h = mech.face_hinge[f]
        if h < 0:
            continue
        if f not in tails:
            chain = []
            g = f
            while mech.face_hinge[g] >= 0:
                chain.append(mech.face_hinge[g])
                g = mech.parent[mech.face_hinge[g]]
            chain = np.array(chain[::-1], np.int64)
            far_face = np.linalg.norm(mech.flat_faces[f] - mids[h], axis=1).max()
            tails[f] = (far_face, np.cumsum(np.abs(rates[chain])[::-1])[::-1])
        far_face, tail = tails[f]
        far_body = np.linalg.norm(solid.triangles.reshape(-1, 3) - mids[h], axis=1).max()
        out[s, :len(tail)] += max(0.0, far_body - far_face) * tail
    return out
