"""Gear sizing: per pair, the largest gears the motion leaves room for.

Bigger gears give less play (an angular backlash is the linear backlash over the
pitch radius), but their size is limited by the point of the motion where they
must pass other gears and panels. With the module fixed, a cone pair's size grows
with its teeth: ``k`` times the pair's smallest tooth counts in its ratio. For
every bevel and remote pair `size_gears` finds, in two passes in coupling order,
the ``k`` whose gear bodies keep ``clearance`` from every body they may not touch
over the whole motion (`foldsim.build.sweep.gear_clearance`). The first puts
every pair at its smallest size that passes; a pair too near at its smallest
(typically to the gear another pair keeps on the same hinge, at the same corner)
tries larger sizes, each half as large again. The second grows each pair in turn
to the largest ``k`` the others, as they then stand, leave room for (the sweep is
monotone enough in ``k`` for a bisection), and reports the neighbour that stopped
the next larger size. Clearance is symmetric, so a pair that passes keeps passing
as the others settle and grow, and no pair grows into room another needed to get
out of a corner (a single greedy pass let that happen). A size passes when the
sweep proves every distance over the motion above the clearance and above the
distance resolution of `check` (its ``guaranteed_min``), so that what is written
also passes the check. A spur
pair's size is fixed by the distance between its hinges (module ``2 a / (z_i +
z_j)``); it is checked, not sized.
"""

import json
import math
from dataclasses import replace

from ..errors import ModelError
from ..tolerances import DEFAULT
from .gears import spur_common_length
from .spec import build_spec
from .sweep import RESOLUTION, gear_clearance

MIN_TEETH = 12
"""Fewest teeth on a sized gear (common practice for 20-degree gears with some profile shift)."""


def _base_teeth(coupling):
    from ..layout import teeth_pairs

    zi, zj = coupling.teeth if coupling.teeth is not None else teeth_pairs(abs(coupling.ratio), 1, 60)[:2]
    g = math.gcd(int(zi), int(zj))
    return int(zi) // g, int(zj) // g


def _with_build(mech, build):
    return replace(mech, extras={**mech.extras, "build": build})


def _clearance_of(mech, build, coupling, tol, cache):
    """The ``gear_clearance`` row of one coupling, or None when the build does not fit at all.

    ``cache`` (dict) keeps what every trial shares: the schedule, the prisms (the
    thickness does not change between trials) and the thin panels.
    """
    from ..analysis.panels import panels
    from ..gearing import fold_schedule
    from .gears import gear_pairs
    from .prisms import panel_solids

    trial = _with_build(mech, build)

    try:
        spec = build_spec(trial, tol=tol, validate=False)
        if "prisms" not in cache:
            cache["prisms"] = panel_solids(trial, spec, tol=tol)
            cache["schedule"] = fold_schedule(trial, tol)
            cache["thin"] = panels(trial, tol)
        pairs = []
        for k, doc in enumerate(spec.gears):
            key = (doc.coupling, json.dumps(build["gears"][k], sort_keys=True))
            if key not in cache:
                # Each entry resolves on its own (`gear_pairs` reads one entry at a time).
                cache[key] = gear_pairs(trial, replace(spec, gears=(doc,)), tol)[0]
            pairs.append(cache[key])
    except ModelError as exc:
        return {"min_clearance": -1.0, "with": str(exc).split(": ", 1)[-1], "at_t": None, "unbuildable": True}
    # Pass or fail is all sizing asks (`size_gears`'s ``passes``): a stretch is
    # refined until its bound clears the clearance and the check's resolution by
    # one resolution more, or until a distance the bodies really reach is within
    # one resolution of it. With a coarser resolution than that, a pair clear by
    # less than the resolution could never be proved clear.
    floor = RESOLUTION * trial.size
    enough = max(spec.clearance, floor) + floor
    rows = gear_clearance(trial, spec, cache["schedule"], tol=tol, pairs=pairs, only=[coupling],
                          resolution=RESOLUTION, enough=enough, solids=cache["prisms"], thin=cache["thin"])
    return next(r for r in rows if r["coupling"] == coupling)


def _spur_lanes(mech, spurs):
    """Per spur coupling that shares a hinge with another spur coupling: its lanes, first choice first.

    Gears of two spur pairs on one hinge are coaxial, and bands centred on their
    hinges' common length (the default) would lie on top of each other. The spur
    couplings that share hinges are coloured so that no two sharing a hinge get the
    same colour (greedy, in breadth-first order: a chain of parallel hinges takes
    two), and colour c of n puts the band's centre at (c + 1) / (n + 1) of the
    common length, measured along the coupling's first hinge. The other lanes
    follow as fallbacks (a chain can run its hinges either way).

    Returns
    -------
    dict
        coupling -> tuple of fractions of the common length.
    """
    import networkx as nx

    graph = nx.Graph()
    by_hinge = {}
    for k in spurs:
        for h in mech.couplings[k].hinges:
            by_hinge.setdefault(int(h), []).append(k)
    for ks in by_hinge.values():
        graph.add_edges_from((a, b) for x, a in enumerate(ks) for b in ks[x + 1:])
    out = {}
    for part in nx.connected_components(graph):
        colour = nx.greedy_color(graph.subgraph(sorted(part)), strategy="connected_sequential_bfs")
        n = max(colour.values()) + 1
        for k, c in colour.items():
            out[k] = tuple((x + 1) / (n + 1) for x in [c] + [y for y in range(n) if y != c])
    return out


def size_gears(mech, thickness, module, clearance=0.0, max_teeth=200, tol=DEFAULT):
    """Fill in a ``build`` object with the largest gears that pass.

    Parameters
    ----------
    mech : Mechanism
        With couplings.
    thickness, module : float
        Panel thickness and the gears' module (model units).
    clearance : float
        Least distance every gear body must keep (written to ``build.clearance``).
    max_teeth : int
        Most teeth on either gear.

    Returns
    -------
    build : dict
        The ``build`` object (docs/build.md).
    rows : list of dict
        Per coupling: ``coupling``, ``kind``, ``teeth``, ``module``,
        ``min_clearance``, ``at_t``, ``limited_by`` (the solid the next larger
        size came too near, or what else stopped it).
    """
    from ..layout import pair_geometry

    build = {"thickness": float(thickness), "clearance": float(clearance), "gears": []}
    kinds, base, spurs = {}, {}, {}
    for k, c in enumerate(mech.couplings):
        i, j = c.hinges
        geo = pair_geometry(mech, i, j, ratio=c.ratio, tol=tol)
        if geo.kind not in ("spur", "bevel", "remote-bevel"):
            continue
        kinds[k] = geo.kind
        base[k] = _base_teeth(c)
        if geo.kind == "spur":
            spurs[k] = (geo.centre_distance, spur_common_length(mech, int(i), int(j), geo.face))
    lanes = _spur_lanes(mech, spurs)
    scale = {}
    for k, (zi, zj) in base.items():
        scale[k] = max(1, math.ceil(MIN_TEETH / min(zi, zj)))
    entries = {}
    cache = {}

    lane = {k: fractions[0] for k, fractions in lanes.items()}

    def entry(k, s):
        zi, zj = base[k]
        if kinds[k] == "spur":
            out = {"coupling": k, "teeth": [zi * s, zj * s]}
            if k in lane:
                # A band of its own along hinges another spur pair also uses.
                a, common = spurs[k]
                width = min(10.0 * 2.0 * a / ((zi + zj) * s), common / (2.0 * (len(lanes[k]) + 1)))
                out.update(corner_distance=lane[k] * common - width / 2.0, face_width=width)
            return out
        return {"coupling": k, "module": float(module), "teeth": [zi * s, zj * s]}

    for k in base:
        entries[k] = entry(k, scale[k])

    def trial(k, s):
        entries[k] = entry(k, s)
        build["gears"] = [entries[c] for c in sorted(entries)]
        return _clearance_of(mech, dict(build), k, tol, cache)

    # What `check` then reports as touching: nearer than its distance resolution.
    floor = RESOLUTION * mech.size

    def passes(row):
        # Proved, not only sampled: no distance over the motion is below the
        # clearance, nor within the check's resolution (the sweep's guaranteed_min).
        if row["min_clearance"] is None:
            return True
        least = row.get("guaranteed_min")
        return least is not None and least > max(clearance, floor)

    tops = {k: max(scale[k], max_teeth // max(base[k])) for k in base}
    # First every pair at the smallest size that passes, the others as they stand:
    # a pair too near at its smallest, often to the gear another pair keeps on the
    # same hinge at the same corner, tries larger sizes (a larger pair sits farther
    # out along the cone), half as many again each time. A pair's clearance to
    # another is the other's to it, so a pair that passes keeps passing as the
    # later ones settle, and none has grown yet into room another needs.
    size, first = {}, {}
    for k in base:
        s = scale[k]
        row = smallest = trial(k, s)
        if k in lanes and not passes(row):
            # A spur pair's size is fixed; its band may move to another lane.
            for fraction in lanes[k][1:]:
                lane[k] = fraction
                row = trial(k, s)
                if passes(row):
                    break
            else:
                lane[k], row = lanes[k][0], smallest
        if kinds[k] != "spur":
            while not passes(row) and s < tops[k]:
                s = min(tops[k], max(s + 1, (3 * s) // 2))
                row = trial(k, s)
            if not passes(row):
                if smallest.get("unbuildable"):
                    # No size can be built at all (a larger pair reaches farther):
                    # say so, not as a field of a build object nobody wrote.
                    zi, zj = entry(k, scale[k])["teeth"]
                    raise ModelError(f"gears of module {module:g} do not fit coupling {k} even at the fewest "
                                     f"teeth its ratio allows ({zi}:{zj}): {smallest['with']}")
                # None passes: back to the smallest (the others have not moved).
                s, row = scale[k], smallest
        size[k], first[k] = s, row
        entries[k] = entry(k, s)
    # Then each pair in turn grows as far as the others, as they stand, leave room
    # for (a bisection).
    rows = []
    for k in base:
        lo, row_lo = size[k], first[k]
        entries[k] = entry(k, lo)
        limited = None
        if kinds[k] != "spur" and passes(row_lo):
            row_lo = trial(k, lo)  # the pairs sized since
            hi = tops[k]
            row_hi = trial(k, hi) if hi > lo else row_lo
            if passes(row_hi):
                lo, row_lo, limited = hi, row_hi, f"at most {max_teeth} teeth"
            else:
                limited = row_hi["with"]
                while hi - lo > 1:
                    mid = (lo + hi) // 2
                    row = trial(k, mid)
                    if passes(row):
                        lo, row_lo = mid, row
                    else:
                        hi, limited = mid, row["with"]
        elif kinds[k] == "spur":
            limited = "the distance between its hinges"
        else:
            row_lo = trial(k, lo)
            limited = row_lo["with"]
        entries[k] = entry(k, lo)
        build["gears"] = [entries[c] for c in sorted(entries)]
        z = [base[k][0] * lo, base[k][1] * lo]
        spec_module = float(module) if kinds[k] != "spur" else None
        rows.append({"coupling": k, "kind": {"remote-bevel": "remote"}.get(kinds[k], kinds[k]), "teeth": z,
                     "module": spec_module, "min_clearance": row_lo["min_clearance"], "at_t": row_lo["at_t"],
                     "guaranteed_min": row_lo.get("guaranteed_min"),
                     "passes": passes(row_lo), "limited_by": limited})
    build["gears"] = [entries[c] for c in sorted(entries)]
    return build, rows
