"""Gear bodies against everything they are not meant to touch, and thick panels
against each other (`panel_clashes`), over the whole motion.

The sweep covers every gear body (and rod) against every prism and every other
gear body carried by another panel, except the contacts that are allowed by
design (`allowed_contact`):

- a gear against its own mate (the two gears of one coupling, and their rods);
- a gear against its own hinge's other panel, the carrier (its axle sits in it).

Bodies on one panel are one rigid part and are not tested. Gears are grown to
their tip circles (one module beyond the pitch surface), so the sweep sees the
teeth's full reach.

**Guarantee** (conservative advancement; Mirtich, PhD thesis, Berkeley 1996; Tang,
Kim & Manocha, "C2A", ICRA 2009): the distance d(t) between two rigid bodies
changes by at most ``L`` per unit t, with ``L`` the two bodies' speed bounds in
the frame of their panels' common ancestor in the hinge tree
(`kinematics.speed_profile`, with each panel's reach taken out to the farthest
point of its bodies). On ``[t0, t1]`` therefore ``d >= (d(t0) + d(t1) - L (t1 -
t0)) / 2``. Intervals whose bound lies below the least distance found so far,
less ``RESOLUTION * mech.size`` (1/1000 of the model's size), are halved until
none is left (or shorter than ``tol.t_resolution / 1000``), so the reported
``min_clearance`` is a distance the bodies really reach, and the true least
distance over the range is at most ``RESOLUTION * mech.size`` below it. Where
only pass or fail matters (``enough``), a stretch whose bound already reaches that
distance is left alone; every row says the bound it did prove
(``guaranteed_min``).
Between samples a sphere around each solid gives a cheap lower bound; the
exact distance is computed only where that bound could matter. Distances are exact between the triangle meshes (`triangles.triangle_distance`),
and a body inside another counts as distance 0 (winding number).
"""

import numpy as np

from ..analysis.triangles import triangle_distance
from ..gearing import fold_schedule
from ..kinematics import common_depth, poses_at, speed_profile
from ..tolerances import DEFAULT
from .gears import gear_pairs, gear_solids
from .prisms import panel_solids

INITIAL_STEPS = 32
CHUNK = 64
RESOLUTION = 1e-3
"""Distance resolution of the sweep, relative to the model size."""


def allowed_contact(a, b, carrier):
    """Whether two solids may touch by design.

    Parameters
    ----------
    a, b : Solid
    carrier : dict
        Coupling -> carrier face.

    Returns
    -------
    bool
    """
    if a.kind != "panel" and b.kind != "panel" and a.coupling == b.coupling:
        return True  # a gear and its mate
    for g, other in ((a, b), (b, a)):
        if g.kind != "panel" and other.kind == "panel" and other.face == carrier[g.coupling]:
            return True  # a gear and its own hinge's other panel
    return False


def body_pairs(solids, carrier):
    """(n, 2) int: every pair of solids the sweep tests (a gear body first)."""
    out = []
    for i, a in enumerate(solids):
        if a.kind == "panel":
            continue
        for j, b in enumerate(solids):
            if j == i or a.face == b.face or (b.kind != "panel" and j < i):
                continue
            if not allowed_contact(a, b, carrier):
                out.append((i, j))
    return np.array(out, dtype=np.int64).reshape(-1, 2)


def body_speed_profile(mech, rates, solids):
    """Speed bounds of every solid, split like `kinematics.speed_profile`.

    Returns
    -------
    (S, D + 1) float
        ``out[s, d]``: how fast any point of solid s moves per unit t in the frame
        of its panel's ancestor at depth d.
    """
    profile = speed_profile(mech, rates)
    mids = mech.axes.mean(axis=1)
    depth = profile.shape[1]
    out = np.zeros((len(solids), depth))
    for s, solid in enumerate(solids):
        f = solid.face
        out[s] = profile[f]
        h = mech.face_hinge[f]
        if h < 0:
            continue
        chain = []
        g = f
        while mech.face_hinge[g] >= 0:
            chain.append(mech.face_hinge[g])
            g = mech.parent[mech.face_hinge[g]]
        chain = chain[::-1]
        far_face = np.linalg.norm(mech.flat_faces[f] - mids[h], axis=1).max()
        far_body = np.linalg.norm(solid.triangles.reshape(-1, 3) - mids[h], axis=1).max()
        extra = max(0.0, far_body - far_face)
        tail = np.cumsum(np.abs(rates[chain])[::-1])[::-1]
        out[s, :len(tail)] += extra * tail
    return out


def _corners(solid):
    """(n, 3) float: the solid's distinct corners."""
    return np.unique(solid.triangles.reshape(-1, 3), axis=0)


def _spheres(solids):
    """Centre (S, 3) and radius (S,) of a sphere holding every solid, flat frame."""
    centre = np.array([s.triangles.reshape(-1, 3).mean(axis=0) for s in solids])
    radius = np.array([np.linalg.norm(s.triangles.reshape(-1, 3) - c, axis=1).max() for s, c in zip(solids, centre)])
    return centre, radius


def _sphere_bounds(centre, radius, pair, faces, poses):
    """(T,) lower bound on the distance of a pair of solids from their spheres."""
    a, b = pair
    ca = np.einsum("tij,j->ti", poses[:, faces[a], :3, :3], centre[a]) + poses[:, faces[a], :3, 3]
    cb = np.einsum("tij,j->ti", poses[:, faces[b], :3, :3], centre[b]) + poses[:, faces[b], :3, 3]
    return np.maximum(np.linalg.norm(ca - cb, axis=1) - radius[a] - radius[b], 0.0)


def solid_distances(mech, solids, pair, poses):
    """Exact distance between two posed solids at many poses.

    Parameters
    ----------
    mech : Mechanism
    solids : list of Solid
    pair : (int, int)
    poses : (T, F, 4, 4) float

    Returns
    -------
    (T,) float
        0 where the meshes cross, touch or one holds the other.
    """
    a, b = solids[pair[0]], solids[pair[1]]
    pa = np.einsum("tij,nkj->tnki", poses[:, a.face, :3, :3], a.triangles) + poses[:, a.face, None, None, :3, 3]
    pb = np.einsum("tij,nkj->tnki", poses[:, b.face, :3, :3], b.triangles) + poses[:, b.face, None, None, :3, 3]
    ca, cb = pa.mean(axis=2), pb.mean(axis=2)
    ra = np.linalg.norm(a.triangles - a.triangles.mean(axis=1, keepdims=True), axis=2).max(axis=1)
    rb = np.linalg.norm(b.triangles - b.triangles.mean(axis=1, keepdims=True), axis=2).max(axis=1)
    va, vb = _corners(a), _corners(b)
    pva = np.einsum("tij,nj->tni", poses[:, a.face, :3, :3], va) + poses[:, a.face, None, :3, 3]
    pvb = np.einsum("tij,nj->tni", poses[:, b.face, :3, :3], vb) + poses[:, b.face, None, :3, 3]
    out = np.empty(len(poses))
    for start in range(0, len(poses), CHUNK):
        sl = slice(start, start + CHUNK)
        # Two corners' distance bounds the bodies' distance from above; a pair of
        # triangles whose spheres or boxes lie farther apart cannot be the nearest.
        bound = np.linalg.norm(pva[sl, :, None] - pvb[sl, None], axis=3).reshape(len(pva[sl]), -1).min(axis=1)
        centre = np.linalg.norm(ca[sl, :, None] - cb[sl, None], axis=3) - ra[None, :, None] - rb[None, None]
        lo_a, hi_a = pa[sl].min(axis=2), pa[sl].max(axis=2)
        lo_b, hi_b = pb[sl].min(axis=2), pb[sl].max(axis=2)
        gap = np.maximum(np.maximum(lo_a[:, :, None] - hi_b[:, None], lo_b[:, None] - hi_a[:, :, None]), 0.0)
        near = np.maximum(centre, np.linalg.norm(gap, axis=3)) <= bound[:, None, None]
        kt, ia, ib = np.nonzero(near)
        dist = triangle_distance(pa[sl][kt, ia], pb[sl][kt, ib])
        best = np.full(len(near), np.inf)
        np.minimum.at(best, kt, dist)
        out[sl] = best
    apart = np.flatnonzero(out > 0)
    if len(apart):
        inside = np.maximum(np.abs(_winding_batch(pa[apart, 0, 0], pb[apart])),
                            np.abs(_winding_batch(pb[apart, 0, 0], pa[apart])))
        out[apart[inside > 0.5]] = 0.0
    return out


def _winding_batch(points, tris):
    """(T,) winding number of points[k] (3,) about the closed mesh tris[k] (n, 3, 3)."""
    a, b, c = (tris[:, :, k] - points[:, None] for k in range(3))
    la, lb, lc = (np.linalg.norm(x, axis=-1) for x in (a, b, c))
    det = np.einsum("tij,tij->ti", a, np.cross(b, c))
    den = (la * lb * lc + np.einsum("tij,tij->ti", a, b) * lc + np.einsum("tij,tij->ti", b, c) * la
           + np.einsum("tij,tij->ti", c, a) * lb)
    return (2.0 * np.arctan2(det, den)).sum(axis=1) / (4.0 * np.pi)


def gear_clearance(mech, spec, schedule=None, t_from=0.0, t_to=1.0, pairs=None, only=None,
                   resolution=RESOLUTION, enough=np.inf, tol=DEFAULT):
    """Least distance of every coupling's gear bodies to what they must not touch (the ``gear_clearance`` key).

    Parameters
    ----------
    mech : Mechanism
    spec : BuildSpec
        With ``clearance`` not used here (the report compares against it).
    schedule : Schedule, optional
        Default: the mechanism's own.
    t_from, t_to : float
        The swept range.
    pairs : list of GearPair, optional
        From `gear_pairs`.
    only : list of int, optional
        Test only the bodies of these couplings (and report only them).
    resolution : float
        Distance resolution relative to the model's size (module docstring).
    enough : float
        A distance past which no more precision is wanted: a stretch of t whose
        bound reaches it is not refined further (`check` passes twice the
        clearance, and at least the clearance plus twice the resolution).

    Returns
    -------
    list of dict
        Per coupling with gears: ``coupling``, ``min_clearance`` (None when no
        body is tested against them), ``at_t``, ``body`` and ``with`` (labels of
        the nearest two solids), ``guaranteed_min`` (no distance over the range
        is smaller: at least ``min(min_clearance - resolution * size, enough)``).
    """
    schedule = schedule or fold_schedule(mech, tol)
    pairs = gear_pairs(mech, spec, tol) if pairs is None else pairs
    solids = panel_solids(mech, spec, tol=tol) + gear_solids(mech, spec, pairs, tip=True, tol=tol)
    carrier = {p.coupling: p.carrier for p in pairs}
    tested = body_pairs(solids, carrier)
    if only is not None:
        mask = [any(solids[i].kind != "panel" and solids[i].coupling in only for i in pair) for pair in tested]
        tested = tested[np.array(mask, bool).reshape(-1)]
    rows = {p.coupling: {"coupling": p.coupling, "min_clearance": None, "at_t": None, "body": None, "with": None,
                         "guaranteed_min": None} for p in pairs if only is None or p.coupling in only}
    if not len(tested) or t_from == t_to:
        return list(rows.values())
    profile = body_speed_profile(mech, schedule.rates, solids)
    faces = np.array([s.face for s in solids])
    depth = common_depth(mech, faces[tested])
    rate = profile[tested[:, 0], depth] + profile[tested[:, 1], depth]
    eps = resolution * mech.size
    lo_t, hi_t = sorted((float(t_from), float(t_to)))
    shortest = tol.t_resolution * 1e-3
    grid = np.linspace(lo_t, hi_t, INITIAL_STEPS + 1)
    grid_poses = poses_at(mech, schedule, grid)
    centre, radius = _spheres(solids)
    couplings = [[solids[i].coupling for i in pair if solids[i].kind != "panel"] for pair in tested]
    first = [_sphere_bounds(centre, radius, pair, faces, grid_poses) for pair in tested]
    best = {}
    for n in np.argsort([f.min() for f in first]):
        pair, lip = tested[n], rate[n]
        ts, lows = grid.copy(), first[n].copy()
        exact = np.zeros(len(ts), bool)
        while True:
            goal = max(best.get(c, np.inf) for c in couplings[n])
            order = np.argsort(ts)
            ts, lows, exact = ts[order], lows[order], exact[order]
            span = np.diff(ts)
            bound = np.maximum(0.5 * (lows[:-1] + lows[1:] - lip * span), 0.0)
            active = (bound < goal - eps) & (bound < enough) & (span > shortest)
            ends = np.zeros(len(ts), bool)
            ends[:-1] |= active
            ends[1:] |= active
            todo = np.flatnonzero(ends & ~exact & (lows < goal))
            if len(todo):
                d = solid_distances(mech, solids, pair, poses_at(mech, schedule, ts[todo]))
                lows[todo], exact[todo] = d, True
                for c in couplings[n]:
                    best[c] = min(best.get(c, np.inf), float(d.min()))
                continue
            if not active.any():
                break
            mid = 0.5 * (ts[:-1][active] + ts[1:][active])
            ts = np.concatenate([ts, mid])
            lows = np.concatenate([lows, _sphere_bounds(centre, radius, pair, faces, poses_at(mech, schedule, mid))])
            exact = np.concatenate([exact, np.zeros(len(mid), bool)])
        floor = float(bound.min()) if len(bound) else np.inf
        for c in couplings[n]:
            if c in rows:
                known = rows[c]["guaranteed_min"]
                rows[c]["guaranteed_min"] = floor if known is None else min(known, floor)
        if not exact.any():
            continue
        k = int(np.flatnonzero(exact)[np.argmin(lows[exact])])
        a, b = (solids[i] for i in pair)
        for s, other in ((a, b), (b, a)):
            if s.kind == "panel":
                continue
            row = rows.get(s.coupling)
            if row is None:
                continue
            if row["min_clearance"] is None or lows[k] < row["min_clearance"]:
                row.update(min_clearance=float(lows[k]), at_t=float(ts[k]), body=s.label,
                           **{"with": other.label})
    return list(rows.values())


ERODE = 1e-4
"""Prisms are shrunk by this share of the model's size before the clash sweep, so
panels that only touch by design (flush bevels at closure, corners shared when
flat) are apart and only real overlaps count."""


def panel_clashes(mech, spec, schedule=None, t_from=0.0, t_to=1.0, tol=DEFAULT):
    """Thick panels that run into each other over the motion (the ``panel_clashes`` key).

    Every pair of prisms is swept except a hinge's own two panels: the tapered
    bevels make those clear each other for fold angles between flat and closing
    (Tachi 2011; module `foldsim.build.prisms`), and a hinge past closing is the
    stop check's to report. The prisms are first shrunk by ``ERODE * mech.size``
    (`panel_solid`'s ``erode``), so contact by design is not a clash. The sweep is
    conservative advancement on exact mesh distances, as for the gear bodies: a
    stretch of t is cleared once the bound from its end distances and the pair's
    speed bound stays above zero, and a clash lasting longer than
    ``tol.t_resolution`` is found, with its first t to that resolution.

    Returns
    -------
    list of dict
        ``{"faces": [a, b], "first_t": float}`` per clashing pair, sorted by
        ``first_t``.
    """
    schedule = schedule or fold_schedule(mech, tol)
    lo_t, hi_t = sorted((float(t_from), float(t_to)))
    if hi_t == lo_t or mech.n_faces < 2:
        return []
    solids = panel_solids(mech, spec, erode=ERODE * mech.size, tol=tol)
    n = mech.n_faces
    hinged = {tuple(sorted(h)) for h in mech.hinge_faces.tolist()}
    a, b = np.triu_indices(n, 1)
    keep = np.array([(int(x), int(y)) not in hinged for x, y in zip(a, b)], bool)
    pairs = np.column_stack([a[keep], b[keep]])
    if not len(pairs):
        return []
    profile = body_speed_profile(mech, schedule.rates, solids)
    depth = common_depth(mech, pairs)
    rate = profile[pairs[:, 0], depth] + profile[pairs[:, 1], depth]
    faces = np.arange(n)
    grid = np.linspace(lo_t, hi_t, INITIAL_STEPS + 1)
    grid_poses = poses_at(mech, schedule, grid)
    centre, radius = _spheres(solids)
    posed = np.einsum("tfij,fj->tfi", grid_poses[:, :, :3, :3], centre) + grid_poses[:, :, :3, 3]
    lows = np.maximum(np.linalg.norm(posed[:, pairs[:, 0]] - posed[:, pairs[:, 1]], axis=2)
                      - radius[pairs[:, 0]] - radius[pairs[:, 1]], 0.0).T      # (P, G)
    span = np.diff(grid)
    near = (0.5 * (lows[:, :-1] + lows[:, 1:] - rate[:, None] * span) <= 0).any(axis=1)
    shortest = tol.t_resolution
    found = []
    for k in np.flatnonzero(near):
        pair, lip = pairs[k], rate[k]
        ts, low = grid.copy(), lows[k].copy()
        exact = np.zeros(len(ts), bool)
        first = None
        while True:
            order = np.argsort(ts)
            ts, low, exact = ts[order], low[order], exact[order]
            gaps = np.diff(ts)
            bound = 0.5 * (low[:-1] + low[1:] - lip * gaps)
            active = (bound <= 0) & (gaps > shortest)
            if first is not None:
                active &= ts[:-1] < first
            ends = np.zeros(len(ts), bool)
            ends[:-1] |= active
            ends[1:] |= active
            todo = np.flatnonzero(ends & ~exact)
            if len(todo):
                d = solid_distances(mech, solids, pair, poses_at(mech, schedule, ts[todo]))
                low[todo], exact[todo] = d, True
                hit = ts[todo][d <= 0]
                if len(hit):
                    first = float(hit.min()) if first is None else min(first, float(hit.min()))
                continue
            if not active.any():
                break
            mid = 0.5 * (ts[:-1][active] + ts[1:][active])
            ts = np.concatenate([ts, mid])
            low = np.concatenate([low, _sphere_bounds(centre, radius, pair, faces, poses_at(mech, schedule, mid))])
            exact = np.concatenate([exact, np.zeros(len(mid), bool)])
        if first is not None:
            found.append({"faces": [int(pair[0]), int(pair[1])], "first_t": first})
    return sorted(found, key=lambda row: (row["first_t"], row["faces"]))
