"""Gear bodies against everything they are not meant to touch, and thick panels
against each other (`panel_clashes`), over the whole motion.

The sweep covers every gear body (and rod) against every prism and every other
gear body carried by another panel, except the contacts that are allowed by
design (`allowed_pairs`):

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

from ..analysis import spatialhash
from ..analysis.narrowphase import pair_state, triangle_distance
from ..analysis.panels import _face_boxes, _in_sorted, _keys, panels
from ..analysis.sweep import collision_intervals
from ..gearing import fold_schedule
from ..geometry import corner_bounds, cross, rotate_rows
from ..kinematics import common_depth, poses_at, row_poses
from ..tolerances import DEFAULT
from .bodies import body_panels, body_speed_profile, item_spheres
from .gears import gear_pairs, gear_solids
from .prisms import panel_solids

INITIAL_STEPS = 32
RESOLUTION = 1e-3
"""Distance resolution of the sweep, relative to the model size."""


def allowed_pairs(solids, carrier):
    """(n, 2) int: the solid pairs that may touch by design.

    A gear and its own mate (the bodies of one coupling, rods included), and a gear
    and its own hinge's other panel, the carrier (its axle sits in it), given as
    ``carrier`` (coupling -> carrier face).
    """
    gears = [i for i, s in enumerate(solids) if s.kind != "panel"]
    panel_of = {s.face: i for i, s in enumerate(solids) if s.kind == "panel"}
    by_coupling = {}
    for i in gears:
        by_coupling.setdefault(solids[i].coupling, []).append(i)
    out = []
    for members in by_coupling.values():
        out += [(a, b) for k, a in enumerate(members) for b in members[k + 1:]]
    for i in gears:
        j = panel_of.get(carrier.get(solids[i].coupling, -1))
        if j is not None:
            out.append((i, j))
    return np.array(out, dtype=np.int64).reshape(-1, 2)


def body_pairs(solids, carrier):
    """(n, 2) int: every pair of solids the sweep tests (a gear body first)."""
    faces = np.array([s.face for s in solids])
    gear = np.array([s.kind != "panel" for s in solids])
    i, j = np.nonzero((faces[:, None] != faces[None, :]) & gear[:, None])
    keep = ~gear[j] | (j > i)
    i, j = i[keep], j[keep]
    allowed = np.unique(_keys(allowed_pairs(solids, carrier), len(solids)))
    out = np.column_stack([i, j])
    return out[~_in_sorted(_keys(out, len(solids)), allowed)[0]]


def _spheres(solids):
    """Centre (S, 3) and radius (S,) of a sphere holding every solid, flat frame."""
    count = np.array([len(s.triangles) for s in solids], np.int64)
    return item_spheres(np.concatenate([s.triangles for s in solids]), np.cumsum(count) - count, count)


def _sphere_bounds(centre, radius, pairs, poses):
    """(n,) lower bound on the distance of solid pairs (n, 2) from their spheres; poses (n, 2, 4, 4) of their faces."""
    a, b = pairs[:, 0], pairs[:, 1]
    ca = np.einsum("nij,nj->ni", poses[:, 0, :3, :3], centre[a]) + poses[:, 0, :3, 3]
    cb = np.einsum("nij,nj->ni", poses[:, 1, :3, :3], centre[b]) + poses[:, 1, :3, 3]
    return np.maximum(np.sqrt(((ca - cb) ** 2).sum(axis=1)) - radius[a] - radius[b], 0.0)


def _pair_poses(mech, schedule, faces, t):
    """(n, 2, 4, 4): face pairs ``faces`` (n, 2) at drive values t (n,), each pair posed from its common ancestor.

    Both faces of a row are moved by the same rigid motion (the inverse of their
    common ancestor's pose), so every distance between what they carry is as in
    the posed model, for the product of only the hinges between them
    (`kinematics.row_poses` with ``start``).
    """
    faces = np.asarray(faces, np.int64).reshape(-1, 2)
    start = np.repeat(common_depth(mech, faces), 2)
    return row_poses(mech, schedule, faces.ravel(), np.repeat(t, 2), start=start).reshape(-1, 2, 4, 4)


TIE = 1e-12
"""Distances within this share of the model's size are one (`gear_clearance` reports the earliest t)."""

PAIR_BUDGET = 200_000
"""Triangle pairs `row_distances` holds at once."""


def row_distances(solids, pairs, poses):
    """Exact distance between two posed solids, one pair and pose per row.

    Every triangle of one solid against every triangle of the other, with the
    triangle pairs that cannot be the nearest left out: the two triangles whose
    centroids are nearest are measured first, and a triangle pair whose bounding
    spheres or boxes lie farther apart than that distance (the solids are no
    farther apart) does not hold the least one. Rows whose solids have the same
    triangle counts go together, in blocks of `PAIR_BUDGET` triangle pairs.

    Parameters
    ----------
    solids : list of Solid
    pairs : (n, 2) int
        The two solids of each row.
    poses : (n, 2, 4, 4) float
        Their faces' poses at that row.

    Returns
    -------
    (n,) float
        0 where the meshes cross, touch or one holds the other (the winding number
        of a corner of each about the other).
    """
    pairs = np.asarray(pairs, np.int64).reshape(-1, 2)
    out = np.full(len(pairs), np.inf)
    if not len(pairs):
        return out
    sizes = np.array([[len(solids[a].triangles), len(solids[b].triangles)] for a, b in pairs.tolist()], np.int64)
    for na, nb in np.unique(sizes, axis=0).tolist():
        rows = np.flatnonzero((sizes[:, 0] == na) & (sizes[:, 1] == nb))
        for block in np.array_split(rows, max(1, len(rows) * na * nb // PAIR_BUDGET + 1)):
            out[block] = _same_size_distances(solids, pairs[block], poses[block])
    return out


def _same_size_distances(solids, pairs, poses):
    """`row_distances` for rows whose first solids have one triangle count, and second solids another."""
    side = []
    for k in (0, 1):
        tri = np.stack([solids[i].triangles for i in pairs[:, k].tolist()])  # (m, c, 3, 3)
        m = poses[:, k]
        tri = rotate_rows(m[:, None, :3, :3], tri) + m[:, None, None, :3, 3]
        mid = tri.mean(axis=2)
        reach = np.sqrt(((tri - mid[:, :, None]) ** 2).sum(axis=3)).max(axis=2)
        side.append((tri, mid, reach) + corner_bounds(tri))
    (ta, ma, ra, lo_a, hi_a), (tb, mb, rb, lo_b, hi_b) = side
    rows = np.arange(len(pairs))
    gap = np.sqrt(((ma[:, :, None] - mb[:, None]) ** 2).sum(axis=3))  # (m, ca, cb)
    first = gap.reshape(len(pairs), -1).argmin(axis=1)
    i0, j0 = np.divmod(first, gap.shape[2])
    bound = triangle_distance(ta[rows, i0], tb[rows, j0])
    box = np.maximum(np.maximum(lo_a[:, :, None] - hi_b[:, None], lo_b[:, None] - hi_a[:, :, None]), 0.0)
    low = np.maximum(gap - ra[:, :, None] - rb[:, None], np.sqrt((box * box).sum(axis=3)))
    near = low <= bound[:, None, None]
    near[rows, i0, j0] = False
    r, i, j = np.nonzero(near)
    best = bound.copy()
    if len(r):
        np.minimum.at(best, r, triangle_distance(ta[r, i], tb[r, j]))
    apart = np.flatnonzero(best > 0)
    if len(apart):
        inside = np.maximum(np.abs(_winding_batch(ta[apart, 0, 0], tb[apart])),
                            np.abs(_winding_batch(tb[apart, 0, 0], ta[apart])))
        best[apart[inside > 0.5]] = 0.0
    return best


def _solid_angles(points, tris):
    """(...,) solid angle of triangles tris (..., 3, 3) seen from points (..., 3) (Van Oosterom & Strackee 1983)."""
    a, b, c = (tris[..., k, :] - points for k in range(3))
    la, lb, lc = (np.sqrt((x * x).sum(axis=-1)) for x in (a, b, c))
    det = (a * cross(b, c)).sum(axis=-1)
    den = la * lb * lc + (a * b).sum(axis=-1) * lc + (b * c).sum(axis=-1) * la + (c * a).sum(axis=-1) * lb
    return 2.0 * np.arctan2(det, den)


def _winding_batch(points, tris):
    """(T,) winding number of points[k] (3,) about the closed mesh tris[k] (n, 3, 3)."""
    return _solid_angles(points[:, None], tris).sum(axis=1) / (4.0 * np.pi)


def near_bodies(mech, spec, schedule=None, t_from=0.0, t_to=1.0, pairs=None, only=None, enough=np.inf,
                tol=DEFAULT, solids=None, thin=None):
    """The gear screen: pairs of solids that come within ``enough`` of each other, and when.

    The collision sweep of `foldsim.analysis.sweep` on the prisms and the coarse
    gear bodies (`gear_solids`'s ``coarse``: they hold the fine ones), with
    ``enough`` as its clearance, over every pair `gear_clearance` tests; plus any
    pair within it, or one inside the other, at ``t_from``. With that sweep's
    guarantee every pair of the fine bodies that comes within ``enough`` is here.

    ``solids`` (the prisms) and ``thin`` (`analysis.panels.panels`) save
    rebuilding them when the caller has them.

    Returns
    -------
    dict
        ``(a, b) -> (first_t, last_t)``, indices into the prisms followed by
        `gear_solids` (``tip=True``), as `gear_clearance` lists them.
    """
    schedule = schedule or fold_schedule(mech, tol)
    pairs = gear_pairs(mech, spec, tol) if pairs is None else pairs
    prisms = panel_solids(mech, spec, tol=tol) if solids is None else list(solids)
    screen = prisms + gear_solids(mech, spec, pairs, tip=True, tol=tol, coarse=True)
    lo_t, hi_t = sorted((float(t_from), float(t_to)))
    active = np.array([s.kind != "panel" and (only is None or s.coupling in only) for s in screen], bool)
    if lo_t == hi_t or not active.any():
        return {}
    profile = body_speed_profile(mech, schedule.rates, screen)
    keep = np.arange(len(screen))
    if active.sum() <= FEW_BODIES and np.isfinite(enough):
        # A few bodies (a sizing trial): only the solids that may come near them.
        keep = np.flatnonzero(_may_come_near(mech, schedule, screen, profile, active, lo_t, hi_t, enough))
        screen, active, profile = [screen[i] for i in keep], active[keep], profile[keep]
    allowed = allowed_pairs(screen, {p.coupling: p.carrier for p in pairs})
    pan = body_panels(mech, screen, allowed, passive=~active, pivots=panels(mech, tol) if thin is None else thin)
    near = _near_pairs(mech, schedule, pan, profile, lo_t, hi_t, enough, tol)
    return {(int(keep[a]), int(keep[b])): span for (a, b), span in near.items()}


FEW_BODIES = 64
"""With at most this many bodies tested, the screen first drops the solids that cannot come near them (`_may_come_near`)."""

REACH_STEPS = 16
"""Steps of t over which `_may_come_near` bounds the solids' distances."""


def _may_come_near(mech, schedule, solids, profile, active, lo_t, hi_t, enough):
    """(S,) bool: the active solids and every solid that may come within ``enough`` of one of them.

    Conservative advancement on bounding spheres: on each of `REACH_STEPS` steps of
    t the gap between two solids' spheres changes at most by their speed bound in
    their panels' common ancestor's frame (``profile``), so it stays above
    ``(g0 + g1 - L dt) / 2``; a solid whose bound stays above ``enough`` from every
    active one over the whole range never comes that near.
    """
    centre, radius = _spheres(solids)
    faces = np.array([s.face for s in solids], np.int64)
    t = np.linspace(lo_t, hi_t, REACH_STEPS + 1)
    poses = poses_at(mech, schedule, t)[:, faces]
    world = np.einsum("tsij,sj->tsi", poses[..., :3, :3], centre) + poses[..., :3, 3]
    out = active.copy()
    for a in np.flatnonzero(active).tolist():
        gap = np.maximum(np.linalg.norm(world - world[:, a:a + 1], axis=2) - radius[a] - radius, 0.0)
        depth = common_depth(mech, np.column_stack([np.full(len(solids), faces[a]), faces]))
        rate = profile[a, depth] + profile[np.arange(len(solids)), depth]
        low = np.maximum(0.5 * (gap[:-1] + gap[1:] - rate * np.diff(t)[:, None]), 0.0).min(axis=0)
        out |= low <= enough
    return out


def gear_clearance(mech, spec, schedule=None, t_from=0.0, t_to=1.0, pairs=None, only=None,
                   resolution=RESOLUTION, enough=np.inf, tol=DEFAULT, solids=None, near=None, thin=None):
    """Least distance of every coupling's gear bodies to what they must not touch (the ``gear_clearance`` key).

    With a finite ``enough`` the sweep runs in two stages. The first is the
    screen (`near_bodies`): it finds, with the collision sweep's guarantee, every
    pair of bodies that comes within ``enough`` of each other, and when. Only those
    pairs go to the second stage, the exact refinement below, over the stretch of t
    where they are near. Without ``enough`` every pair goes to the second stage over
    the whole range.

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
    solids : list of Solid, optional
        The prisms (`prisms.panel_solids`), when the caller already has them.
    near : dict, optional
        The screen's answer (`near_bodies` with the same ``enough``, ``only`` and
        range), when the caller already has it.
    thin : Panels, optional
        The thin panels (`analysis.panels.panels`) for the screen, likewise.

    Returns
    -------
    list of dict
        Per coupling with gears: ``coupling``, ``min_clearance`` (None when no
        body is tested against them, or, with a finite ``enough``, when nothing
        comes within ``enough`` of them), ``at_t``, ``body`` and ``with`` (labels
        of the nearest two solids), ``guaranteed_min`` (no distance over the range
        is smaller: at least ``min(min_clearance - resolution * size, enough)``).
    """
    schedule = schedule or fold_schedule(mech, tol)
    pairs = gear_pairs(mech, spec, tol) if pairs is None else pairs
    prisms = panel_solids(mech, spec, tol=tol) if solids is None else list(solids)
    solids = prisms + gear_solids(mech, spec, pairs, tip=True, tol=tol)
    carrier = {p.coupling: p.carrier for p in pairs}
    rows = {p.coupling: {"coupling": p.coupling, "min_clearance": None, "at_t": None, "body": None, "with": None,
                         "guaranteed_min": None} for p in pairs if only is None or p.coupling in only}
    lo_t, hi_t = sorted((float(t_from), float(t_to)))
    if not rows or lo_t == hi_t:
        return list(rows.values())
    active = np.array([s.kind != "panel" and (only is None or s.coupling in only) for s in solids], bool)
    allowed = allowed_pairs(solids, carrier)
    tested = _tested_couplings(solids, active, allowed)
    for c in tested:
        if c in rows and np.isfinite(enough):
            rows[c]["guaranteed_min"] = float(enough)
    profile = body_speed_profile(mech, schedule.rates, solids)
    if np.isfinite(enough):
        if near is None:
            near = near_bodies(mech, spec, schedule, lo_t, hi_t, pairs, only, enough, tol, prisms, thin)
    else:
        near = {tuple(p): (lo_t, hi_t) for p in body_pairs(solids, carrier).tolist()
                if active[p[0]] or active[p[1]]}
    if not near:
        return list(rows.values())
    keys = sorted(near)
    work = np.array(keys, np.int64).reshape(-1, 2)
    faces = np.array([s.face for s in solids])
    depth = common_depth(mech, faces[work])
    rate = profile[work[:, 0], depth] + profile[work[:, 1], depth]
    eps = resolution * mech.size
    shortest = tol.t_resolution * 1e-3
    centre, radius = _spheres(solids)
    couplings = [[solids[i].coupling for i in pair if solids[i].kind != "panel"] for pair in work]
    spans = [near[k] for k in keys]
    # A pair near only at one drive value (the first pose) is measured there.
    grids = [np.linspace(max(lo_t, a), min(hi_t, b), INITIAL_STEPS + 1) if b > a else np.array([a])
             for a, b in spans]
    # Every pair's start grid at once, each row posing only its pair's two faces.
    sizes = np.array([len(g) for g in grids], np.int64)
    owner = np.repeat(np.arange(len(work)), sizes)
    at = np.concatenate(grids)
    low = _sphere_bounds(centre, radius, work[owner], _pair_poses(mech, schedule, faces[work[owner]], at))
    first = np.split(low, np.cumsum(sizes)[:-1])
    # Each pair is first measured where its bound is least: that distance often
    # settles the rest (bodies in contact, a clear nearest pose). Every pair near
    # enough to be here is measured once at least (also over a range shorter than
    # the resolution, or at one t); all pairs' first measurements go together.
    seed = np.array([int(np.argmin(f)) for f in first], np.int64)
    seed_t = at[np.cumsum(sizes) - sizes + seed]
    seed_d = row_distances(solids, work, _pair_poses(mech, schedule, faces[work], seed_t))
    best = {}
    for n, d in enumerate(seed_d.tolist()):
        for c in couplings[n]:
            best[c] = min(best.get(c, np.inf), d)
    for n in np.argsort([f.min() for f in first]):
        pair, lip = work[n], rate[n]
        ts, lows = grids[n].copy(), first[n].copy()
        exact = np.zeros(len(ts), bool)
        lows[seed[n]], exact[seed[n]] = seed_d[n], True
        while True:
            goal = max(best.get(c, np.inf) for c in couplings[n])
            order = np.argsort(ts)
            ts, lows, exact = ts[order], lows[order], exact[order]
            span = np.diff(ts)
            bound = np.maximum(0.5 * (lows[:-1] + lows[1:] - lip * span), 0.0)
            active_ = (bound < goal - eps) & (bound < enough) & (span > shortest)
            ends = np.zeros(len(ts), bool)
            ends[:-1] |= active_
            ends[1:] |= active_
            todo = np.flatnonzero(ends & ~exact & (lows < goal))
            if len(todo):
                d = row_distances(solids, np.tile(pair, (len(todo), 1)),
                                  _pair_poses(mech, schedule, np.tile(faces[pair], (len(todo), 1)), ts[todo]))
                lows[todo], exact[todo] = d, True
                for c in couplings[n]:
                    best[c] = min(best.get(c, np.inf), float(d.min()))
                continue
            if not active_.any():
                break
            mid = 0.5 * (ts[:-1][active_] + ts[1:][active_])
            ts = np.concatenate([ts, mid])
            lows = np.concatenate([lows, _sphere_bounds(centre, radius, np.tile(pair, (len(mid), 1)),
                                                        _pair_poses(mech, schedule,
                                                                    np.tile(faces[pair], (len(mid), 1)), mid))])
            exact = np.concatenate([exact, np.zeros(len(mid), bool)])
        floor = float(bound.min()) if len(bound) else float(lows.min())
        for c in couplings[n]:
            if c in rows:
                known = rows[c]["guaranteed_min"]
                rows[c]["guaranteed_min"] = floor if known is None else min(known, floor)
        if not exact.any():
            continue
        # The earliest t at the least distance: bodies that turn about one axis
        # keep their distance, and round-off alone should not pick the t.
        measured = np.flatnonzero(exact)
        least = lows[measured].min()
        k = int(measured[lows[measured] <= least + TIE * mech.size][0])
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


def gear_contacts(mech, spec, schedule=None, t_from=0.0, t_to=1.0, couplings=None, pairs=None, tol=DEFAULT,
                  near=None, thin=None):
    """When gear bodies come nearer than ``spec.clearance`` to what they must not touch.

    The collision sweep of `foldsim.analysis.sweep` on the prisms and the gear
    bodies grown to their tip circles, with the build's clearance, over the given
    couplings' bodies only (the report runs it for the couplings `gear_clearance`
    found too near). Without a clearance the sweep's distance resolution stands in
    for it (``RESOLUTION * mech.size``, as `gear_clearance` counts a body that near
    as touching): bodies that only touch are in contact too, and their stretches are
    found at once, where a crossing test would refine along all of them.

    With ``near``, the screen's answer (`near_bodies` over the same range, with a
    distance of at least the clearance), only the solids of its pairs are swept:
    any other pair stays farther apart than that distance all along. ``thin``: the
    thin panels (`analysis.panels.panels`), when the caller has them.

    Returns
    -------
    list of dict
        ``{"faces": [a, b], "first_t", "last_t", "coupling", "body", "with"}``: the
        faces carrying the gear body and the other solid, the stretch of t, and the
        two solids' labels; sorted by ``first_t``.
    """
    schedule = schedule or fold_schedule(mech, tol)
    pairs = gear_pairs(mech, spec, tol) if pairs is None else pairs
    lo_t, hi_t = sorted((float(t_from), float(t_to)))
    solids = panel_solids(mech, spec, tol=tol) + gear_solids(mech, spec, pairs, tip=True, tol=tol)
    active = np.array([s.kind != "panel" and (couplings is None or s.coupling in couplings) for s in solids], bool)
    if lo_t == hi_t or not active.any():
        return []
    keep = np.arange(len(solids))
    if near is not None:
        # Only the screen's pairs with a body of these couplings can come that near.
        keep = np.unique([i for pair in near for i in pair if active[pair[0]] or active[pair[1]]]).astype(np.int64)
        if not len(keep):
            return []
    solids, active = [solids[i] for i in keep], active[keep]
    carrier = {p.coupling: p.carrier for p in pairs}
    pan = body_panels(mech, solids, allowed_pairs(solids, carrier), passive=~active,
                      pivots=panels(mech, tol) if thin is None else thin)
    clearance = spec.clearance if spec.clearance > 0 else RESOLUTION * mech.size
    found = collision_intervals(mech, schedule, lo_t, hi_t, clearance=clearance, tol=tol, pan=pan,
                                profile=body_speed_profile(mech, schedule.rates, solids))
    out = []
    for row in found:
        a, b = (solids[i] for i in row["faces"])
        gear, other = (a, b) if a.kind != "panel" else (b, a)
        out.append({"faces": [gear.face, other.face], "first_t": row["first_t"], "last_t": row["last_t"],
                    "coupling": gear.coupling, "body": gear.label, "with": other.label})
    return sorted(out, key=lambda row: (row["first_t"], row["faces"]))


def _tested_couplings(solids, active, allowed):
    """Couplings with at least one body that some solid is tested against."""
    n = len(solids)
    faces = np.array([s.face for s in solids])
    on_face = np.bincount(faces)[faces]
    skipped = np.bincount(allowed.ravel(), minlength=n)
    return {solids[i].coupling for i in np.flatnonzero(active) if n - on_face[i] - skipped[i] > 0}


def _near_pairs(mech, schedule, pan, profile, lo_t, hi_t, enough, tol):
    """Solid pairs that come within ``enough`` of each other, and the stretch of t where they do.

    Returns
    -------
    dict
        ``(a, b) -> (first_t, last_t)``.
    """
    found = collision_intervals(mech, schedule, lo_t, hi_t, clearance=enough, tol=tol, pan=pan, profile=profile)
    near = {}
    for row in found:
        key = tuple(row["faces"])
        a, b = near.get(key, (row["first_t"], row["last_t"]))
        near[key] = (min(a, row["first_t"]), max(b, row["last_t"]))
    # The sweep leaves out what holds only at its first t (a flat-layout contact);
    # the first pose is checked here, containment included: after it, a body can
    # only get inside another through its surface, which the sweep sees.
    poses = poses_at(mech, schedule, np.array([lo_t]))[:, pan.owner]
    lo, hi = _face_boxes(pan, poses)
    pairs = spatialhash.overlapping_boxes(lo[0] - enough / 2, hi[0] + enough / 2)
    pairs = np.sort(pairs, axis=1)
    keep = ~_in_sorted(_keys(pairs, pan.n), pan.skip_keys)[0]
    if pan.passive is not None:
        keep &= ~(pan.passive[pairs[:, 0]] & pan.passive[pairs[:, 1]])
    pairs = pairs[keep]
    if not len(pairs):
        return near
    # Only the flags are wanted: any separation settles a pair (need 0).
    _, hit = pair_state(mech, pan, poses, np.zeros(len(pairs), np.int64), pairs, enough, tol.contact * mech.size,
                        need=np.zeros(len(pairs)))
    inside = _contained(pan, poses[0], pairs)
    for a, b in pairs[hit | inside].tolist():
        first, last = near.get((a, b), (lo_t, lo_t))
        near[(a, b)] = (lo_t, max(last, lo_t))
    return near


def _contained(pan, poses, pairs):
    """(n,) bool: for item pairs whose boxes overlap, whether one item holds a corner of the other.

    ``poses`` (F, 4, 4) per item; the winding number of the other item's first
    corner about each item's mesh, for all pairs of a triangle count at once.
    """
    out = np.zeros(len(pairs), bool)
    for side in (0, 1):
        holder, guest = pairs[:, side], pairs[:, 1 - side]
        m = poses[guest]
        point = np.einsum("nij,nj->ni", m[:, :3, :3], pan.tri_points[pan.start[guest], 0]) + m[:, :3, 3]
        count = pan.count[holder]
        for c in np.unique(count).tolist():
            for rows in np.array_split(np.flatnonzero(count == c), max(1, int(np.sum(count == c)) * c // 65536 + 1)):
                h = poses[holder[rows]]
                tri = pan.tri_points[pan.start[holder[rows]][:, None] + np.arange(c)]
                tri = rotate_rows(h[:, None, :3, :3], tri) + h[:, None, None, :3, 3]
                out[rows] |= np.abs(_winding_batch(point[rows], tri)) > 0.5
    return out


ERODE = 1e-4
"""Prisms are shrunk by this share of the model's size before the clash sweep, so
panels that only touch by design (flush bevels at closure, corners shared when
flat) are apart and only real overlaps count."""


def panel_clashes(mech, spec, schedule=None, t_from=0.0, t_to=1.0, tol=DEFAULT, solids=None, thin=None):
    """Thick panels that run into each other over the motion (the ``panel_clashes`` key).

    Every pair of prisms is swept except a hinge's own two panels: the tapered
    bevels make those clear each other for fold angles between flat and closing
    (Tachi 2011; module `foldsim.build.prisms`), and a hinge past closing is the
    stop check's to report. The prisms are first shrunk by ``ERODE * mech.size``
    (`panel_solid`'s ``erode``), so contact by design is not a clash. The sweep is
    the thin panels' (`foldsim.analysis.sweep.collision_intervals`, conservative
    advancement on exact mesh distances) with the prisms as its items: a clash
    lasting longer than ``tol.t_resolution`` is found, with its first and last t to
    that resolution.

    Parameters
    ----------
    solids : list of Solid, optional
        The shrunk prisms, when the caller already has them.
    thin : Panels, optional
        The thin panels (`analysis.panels.panels`), likewise.

    Returns
    -------
    list of dict
        ``{"faces": [a, b], "first_t": float, "last_t": float}`` per clash, sorted
        by ``first_t``.
    """
    schedule = schedule or fold_schedule(mech, tol)
    lo_t, hi_t = sorted((float(t_from), float(t_to)))
    if hi_t == lo_t or mech.n_faces < 2:
        return []
    solids = panel_solids(mech, spec, erode=ERODE * mech.size, tol=tol) if solids is None else solids
    pan = body_panels(mech, solids, skip=mech.hinge_faces, pivots=panels(mech, tol) if thin is None else thin,
                      cone_solids=panel_solids(mech, spec, tol=tol))
    profile = body_speed_profile(mech, schedule.rates, solids)
    found = collision_intervals(mech, schedule, lo_t, hi_t, tol=tol, pan=pan, profile=profile)
    out = [{"faces": [solids[a].face, solids[b].face], "first_t": row["first_t"], "last_t": row["last_t"]}
           for row in found for a, b in [row["faces"]]]
    return sorted(out, key=lambda row: (row["first_t"], row["faces"]))
