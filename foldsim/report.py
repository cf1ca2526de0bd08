"""The check report: everything `foldsim check` says about a mechanism.

The keys are an interface that scripts parse (docs/cli.md): keep them stable, add
rather than rename.
"""

import numpy as np

from .analysis.closure import closure_summary, cut_edge_gaps
from .analysis.collision import collision_intervals, flat_overlaps, panels
from .gearing import fold_schedule
from .kinematics import poses_at
from .parts import part_types
from .tolerances import DEFAULT


def hinge_table(mech, schedule):
    """One row per hinge, in file order (angles in degrees).

    Returns
    -------
    list of dict
        ``hinge``, ``faces`` (as given), ``parent``, ``child``,
        ``closed_angle_deg`` (needed to close), ``end_angle_deg`` (reached at
        t = 1), ``couplings`` (indices of the couplings it takes part in).
    """
    # One pass over the couplings, not one per hinge: O(H + K) rather than O(H * K).
    by_hinge = [[] for _ in range(mech.n_hinges)]
    for k, c in enumerate(mech.couplings):
        for h in dict.fromkeys(int(h) for h in c.hinges):
            by_hinge[h].append(k)
    rows = []
    for h in range(mech.n_hinges):
        rows.append({
            "hinge": h,
            "faces": [int(f) for f in mech.hinge_faces[h]],
            "parent": int(mech.parent[h]),
            "child": int(mech.child[h]),
            "closed_angle_deg": float(np.degrees(mech.closed_angles[h])),
            "end_angle_deg": float(np.degrees(schedule.rates[h])),
            "couplings": by_hinge[h],
        })
    return rows


def check(mech, t_from=0.0, t_to=1.0, gap_tol=None, clearance=0.0, sheet=False, tol=DEFAULT):
    """Run every check over the motion and gather the report.

    Parameters
    ----------
    mech : Mechanism
    t_from, t_to : float
        Range of the drive parameter swept for collisions.
    gap_tol : float, optional
        Largest closure gap that counts as meeting (model units); default
        ``tol.gap * mech.size``.
    clearance : float
        Minimum distance between panels not in contact by design.
    sheet : bool
        The pattern is cut from one sheet: a self-overlapping flat layout fails.
    tol : Tolerances

    Returns
    -------
    dict
        JSON-ready; see docs/cli.md for the keys.
    """
    schedule = fold_schedule(mech, tol)
    tolerance = tol.gap * mech.size if gap_tol is None else float(gap_tol)
    end = poses_at(mech, schedule, np.array([1.0]))
    closure = closure_summary(mech, cut_edge_gaps(mech, end)[0], tolerance)
    pan = panels(mech, tol)
    collisions = collision_intervals(mech, schedule, t_from, t_to, clearance, tol, pan=pan)
    overlap = flat_overlaps(mech, tol, pan=pan)
    problems = []
    if schedule.dof != 1:
        problems.append(f"the gearing leaves {schedule.dof} degrees of freedom, not 1")
    if schedule.locked_cycles:
        problems.append(f"{len(schedule.locked_cycles)} coupling cycle(s) lock the motion")
    if not closure["meets"]:
        n_open = sum(not e["meets"] for e in closure["edges"])
        problems.append(f"{n_open} cut edge(s) do not meet (largest gap {closure['max_gap']:.4g} {mech.units})")
    if collisions:
        problems.append(f"{len(collisions)} collision(s) between panels")
    if sheet and len(overlap):
        problems.append(f"the flat layout overlaps itself ({len(overlap)} pair(s))")
    built = _build_part(mech, schedule, t_from, t_to, problems, tol, tolerance, end, pan)
    return {
        "model": mech.name,
        "units": mech.units,
        "state": mech.state,
        "faces": mech.n_faces,
        "hinges": mech.n_hinges,
        "root": mech.root,
        "drive": mech.drive,
        "schedule": schedule.kind,
        "dof": schedule.dof,
        "free_hinges": list(schedule.free_hinges),
        "locked_cycles": [list(c) for c in schedule.locked_cycles],
        "hinge_table": hinge_table(mech, schedule),
        "closure": closure,
        "t_range": [float(t_from), float(t_to)],
        "clearance": float(clearance),
        "collisions": collisions,
        "flat_overlap": bool(len(overlap)),
        "flat_overlap_pairs": overlap.tolist(),
        "part_types": (types := part_types(mech, tol=tol)),
        "part_type_count": len(types),
        **built,
        "problems": problems,
        "ok": not problems,
    }


def build_checks(mech, schedule=None, t_from=0.0, t_to=1.0, gap_tol=None, tol=DEFAULT):
    """The build's checks alone (docs/build.md), as `check` reports them.

    Parameters
    ----------
    mech : Mechanism
    schedule : Schedule, optional
    t_from, t_to : float
        Range of the drive swept for stops, sector coverage and gear clearance.
    gap_tol : float, optional
        As for `check`.
    tol : Tolerances

    Returns
    -------
    keys : dict
        ``build``, ``stops``, ``sector_coverage``, ``gear_clearance``,
        ``gear_contacts``, ``panel_clashes`` and ``outer_closure``; empty for a file
        without a ``build`` object.
    problems : list of str
        One sentence per failure.
    """
    schedule = fold_schedule(mech, tol) if schedule is None else schedule
    tolerance = tol.gap * mech.size if gap_tol is None else float(gap_tol)
    end = poses_at(mech, schedule, np.array([1.0]))
    problems = []
    keys = _build_part(mech, schedule, t_from, t_to, problems, tol, tolerance, end)
    return keys, problems


def _build_part(mech, schedule, t_from, t_to, problems, tol, tolerance, end, thin=None):
    """The build keys (`build_checks`), for a file with a ``build`` object (docs/build.md).

    ``thin``: the thin panels (`analysis.panels.panels`) when the caller has them;
    every sweep here takes its pivoting pairs from them.
    """
    from dataclasses import replace

    from .build.gears import gear_pairs
    from .build.prisms import outer_surface_points
    from .build.sectors import sector_coverage
    from .build.spec import build_spec
    from .build.stops import stop_overruns
    from .build.sweep import RESOLUTION, gear_clearance, gear_contacts, near_bodies, panel_clashes

    spec = build_spec(mech, tol=tol)
    if spec is None:
        return {}
    thin = panels(mech, tol) if thin is None else thin
    stops = stop_overruns(spec, schedule, t_from, t_to)
    passed = [row for row in stops if row["overrun_deg"] > 0]
    if passed:
        worst = max(passed, key=lambda row: row["overrun_deg"])
        problems.append(f"{len(passed)} hinge(s) pass their stop (hinge {worst['hinge']} by "
                        f"{worst['overrun_deg']:.4g}° from t = {worst['at_t']:.4g})")
    pairs = gear_pairs(mech, spec, tol)
    coverage = sector_coverage(mech, spec, schedule, t_from, t_to, pairs=pairs, tol=tol)
    for row in coverage:
        if row["runs_out_at_t"] is not None:
            problems.append(f"coupling {row['coupling']}: a gear sector runs out of teeth from t = "
                            f"{row['runs_out_at_t']:.4g} (contact ratio down to {row['min_contact_ratio']:.3g})")
    floor = RESOLUTION * mech.size
    enough = max(2.0 * spec.clearance, spec.clearance + 2.0 * floor)
    # One screen serves both: the contacts lie among the pairs that come within `enough`.
    screened = near_bodies(mech, spec, schedule, t_from, t_to, pairs=pairs, enough=enough, tol=tol, thin=thin)
    clearance = gear_clearance(mech, spec, schedule, t_from, t_to, pairs=pairs, enough=enough, tol=tol,
                               near=screened, thin=thin)
    near = []
    for row in clearance:
        d = row["min_clearance"]
        if d is not None and (d < spec.clearance or d <= floor):
            near.append(row["coupling"])
            problems.append(f"coupling {row['coupling']}: its {row['body'].split(' ', 2)[2]} comes within "
                            f"{d:.4g} {mech.units} of {row['with']} at t = {row['at_t']:.4g} "
                            f"(clearance {spec.clearance:g})")
    contacts = (gear_contacts(mech, spec, schedule, t_from, t_to, couplings=near, pairs=pairs, tol=tol,
                              near=screened, thin=thin) if near else [])
    clashes = panel_clashes(mech, spec, schedule, t_from, t_to, tol=tol, thin=thin)
    if clashes:
        first = clashes[0]
        problems.append(f"{len(clashes)} pair(s) of thick panels run into each other (first faces "
                        f"{first['faces'][0]} and {first['faces'][1]} from t = {first['first_t']:.4g})")
    outer = replace(mech, cut_points=outer_surface_points(mech, spec))
    outer_closure = closure_summary(mech, cut_edge_gaps(outer, end)[0], tolerance)
    if not outer_closure["meets"]:
        n_open = sum(not e["meets"] for e in outer_closure["edges"])
        problems.append(f"{n_open} cut edge(s) do not meet on the outer surface of the thick panels "
                        f"(largest gap {outer_closure['max_gap']:.4g} {mech.units})")
    report = spec.report()
    report["gear_bodies"] = [p.report() for p in pairs]
    return {"build": report, "stops": stops, "sector_coverage": coverage, "gear_clearance": clearance,
            "gear_contacts": contacts, "panel_clashes": clashes, "outer_closure": outer_closure}
