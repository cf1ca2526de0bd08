"""`foldsim new`: make a geared mechanism from a built-in solid or a mesh file."""

import json
import math
from collections import Counter

from ..design import GEARS, NETS, build
from ..errors import ModelError


LIST_UP_TO = 24
"""Gear pairs listed one per line without --verbose; more get a summary."""


def register(sub):
    """Add the `new` subcommand to an argparse subparsers object."""
    new = sub.add_parser(
        "new", help="make a geared mechanism from a solid",
        description="Unfold a closed solid along a net, gear its hinges to one drive and write "
                    "a closed-state mechanism file.")
    new.add_argument("shape", help="a built-in solid (cube, prism:5, geodesic:1, ...) or an "
                                   "OBJ/OFF/STL/PLY file")
    new.add_argument("-o", "--output", required=True, metavar="OUT", help="the .mech.json file to write")
    new.add_argument("--size", type=float, default=None, metavar="S",
                     help="edge length of a built-in solid (circumradius for geodesic:K); default 1")
    new.add_argument("--units", default="mm", help="length unit written to the file (default mm)")
    new.add_argument("--net", choices=NETS, default=None,
                     help="how to choose the net: shortest longest hinge chain (default) or "
                          "breadth-first from the root")
    new.add_argument("--root", type=int, default=None, metavar="F",
                     help="the face that stays put (default: the net's center face, or face 0)")
    new.add_argument("--cut", default=None, metavar="A-B,C-D",
                     help="choose the net by the face pairs to cut apart")
    new.add_argument("--gears", choices=GEARS, default="auto",
                     help="auto: bevel and spur pairs, remote bevels only where needed; simple: bevel "
                          "and spur pairs only; none: no gears (ideal schedule)")
    new.add_argument("--teeth", default=None, metavar="MIN:MAX",
                     help="give every gear pair integer teeth in this range")
    new.add_argument("--clearance", type=float, default=0.0, metavar="C",
                     help="panels not in contact by design collide when nearer than this over the motion "
                          "(default 0), as for `foldsim check`")
    new.add_argument("--thickness", type=float, default=None, metavar="LEN",
                     help="panel thickness: write a build object (thick panels, docs/build.md)")
    new.add_argument("--module", type=float, default=None, metavar="M",
                     help="with --thickness: gear module; sizes every cone pair as large as the motion allows")
    new.add_argument("--gear-clearance", type=float, default=0.0, metavar="LEN",
                     help="with --module: least distance a gear body keeps from what it must not touch "
                          "(default 0)")
    new.add_argument("--json", action="store_true", help="print the report as one JSON document")
    new.add_argument("-v", "--verbose", action="store_true",
                     help=f"list every gear pair (models with more than {LIST_UP_TO} pairs get a summary)")
    new.set_defaults(run=run)


def _pair_summary(report, units):
    """The lines that stand for the gear-pair table of a large model."""
    pairs = report["couplings"]
    errors = [abs(r["ratio_error"]) for r in pairs if r["ratio_error"] is not None]
    gaps = [r["closure_gap"] for r in pairs if r["closure_gap"] is not None]
    line = f" {len(pairs)} gear pairs (list them with --verbose)"
    if errors:
        line += f"; largest ratio error {max(errors):.2e}"
    if gaps:
        line += f", largest closure gap from teeth {max(gaps):.3g} {units}"
    return [line]


def _format(report, verbose=False):
    units = report["units"]
    net = report["net"]
    lines = [(f"{report['model'] or 'mechanism'}: {report['faces']} faces, {report['hinges']} hinges, "
              f"root face {report['root']}, drive hinge {report['drive']} -> {report['output']}"),
             (f"net ({net['method']}): longest hinge chain {net['diameter_hinges']} hinges "
              f"({net['diameter_faces']} faces); no net has fewer than {net['lower_bound']}"),
             "flat layout: " + (f"overlaps itself, pairs {report['flat_overlap_pairs']}"
                                if report["flat_overlap"] else "no overlap")]
    if report["gears"] == "none":
        lines.append("gears: none (ideal schedule: every hinge moves as t times its closing angle)")
    else:
        counts = sorted(Counter(r["type"] for r in report["couplings"]).items())
        kinds = ", ".join(f"{n} {k}" for k, n in counts)
        lines.append(f"gears: {len(report['couplings'])} pairs ({kinds or 'none'}), longest gear chain "
                     f"{report['longest_gear_chain']} from the drive, degrees of freedom {report['dof']}")
        if report["unreachable_hinges"]:
            lines.append(f"no gear chain from the drive reaches hinges {report['unreachable_hinges']}")
        listed = verbose or len(report["couplings"]) <= LIST_UP_TO
        if listed:
            lines.append(" hinges   face  type          ratio      teeth    error      gap        geometry")
        else:
            lines.extend(_pair_summary(report, units))
        for r in (report["couplings"] if listed else []):
            teeth = f"{r['teeth'][0]}:{r['teeth'][1]}" if r["teeth"] else "-"
            error = f"{r['ratio_error']:+.2e}" if r["ratio_error"] is not None else "-"
            gap = f"{r['closure_gap']:.3g}" if r["closure_gap"] is not None else "-"
            if r["type"] == "spur":
                geometry = f"centre distance {r['centre_distance']:.4g} {units}, {r['mesh']} mesh"
            else:
                d1, d2 = r["cone_angles_deg"]
                geometry = f"shaft angle {r['shaft_angle_deg']:.3f}°, cones {d1:.3f}°/{d2:.3f}°"
                if r["type"] == "remote-bevel":
                    geometry += f", apex {r['apex_reach']:.4g} {units} off the edges"
            lines.append(f" {r['hinges'][0]:>3}->{r['hinges'][1]:<3} {r['face']:>4}  {r['type']:<12}  "
                         f"{r['ratio']:<9.6f}  {teeth:<7}  {error:<9}  {gap:<9}  {geometry}")
    lines.append(f"closure gap at t = 1: {report['closure_gap']:.3g} {units}")
    lines.append(_motion_line(report))
    lines.append(f"part types: {report['part_type_count']}")
    if "gear_sizing" in report:
        lines.append(f"thick panels: {report['build']['thickness']:g} {units}; gears sized "
                     f"(clearance {report['build']['clearance']:g} {units}):")
        for r in report["gear_sizing"]:
            clear = "-" if r["min_clearance"] is None else f"{r['min_clearance']:.3g} {units}"
            if r["min_clearance"] is None and r.get("guaranteed_min") is not None:
                clear = f"at least {r['guaranteed_min']:.3g} {units}"
            lines.append(f" coupling {r['coupling']} {r['kind']}: teeth {r['teeth'][0]}:{r['teeth'][1]}, "
                         f"clearance {clear}{'' if r['passes'] else ' (too near)'}, limited by {r['limited_by']}")
        near = sum(not r["passes"] for r in report["gear_sizing"])
        if near:
            lines.append(f"gear sizing: {near} of {len(report['gear_sizing'])} pairs too near at every size "
                         f"tried; `foldsim check` lists where (gear_contacts). A pair grows in whole multiples "
                         f"of its fewest teeth: a --teeth range with fewer teeth gives finer steps, for a "
                         f"larger ratio error")
    return "\n".join(lines)


def _motion_line(report):
    hits = report["collisions"]
    if not hits:
        return "motion: no collision from t = 0 to 1"
    first = min(hits, key=lambda c: c["first_t"])
    a, b = first["faces"]
    return (f"motion: {len(hits)} collision(s) between panels, the first between faces {a} and {b} "
            f"from t = {first['first_t']:.4g}; `foldsim check` lists them all")


def _sweep(mech, clearance):
    """The `check` sweep over the written design: its ``collisions`` list (docs/cli.md)."""
    from ..analysis.collision import collision_intervals
    from ..gearing import fold_schedule

    return collision_intervals(mech, fold_schedule(mech), 0.0, 1.0, clearance)


def run(args):
    from ..io.mechanism_json import save

    if not 0 <= args.clearance < math.inf:
        raise ModelError(f"--clearance: must be a finite non-negative length, not {args.clearance}")
    mech, report = build(args)
    report["clearance"] = float(args.clearance)
    report["collisions"] = _sweep(mech, args.clearance)
    report["collision_free"] = not report["collisions"]
    try:
        save(mech, args.output)
    except OSError as exc:
        raise ModelError(f"{args.output}: cannot write file: {exc.strerror or exc}") from None
    print(json.dumps(report, indent=2) if args.json else _format(report, args.verbose))
    gears_clear = all(r["passes"] for r in report.get("gear_sizing", ()))
    return 0 if report["dof"] == 1 and report["collision_free"] and gears_clear else 1
