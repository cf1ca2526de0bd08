"""`foldsim check`: fold a mechanism over its motion and report what holds."""

import json

from ..errors import FoldsimError


def register(sub):
    """Add the `check` subcommand to an argparse subparsers object."""
    check = sub.add_parser("check", help="check a mechanism over its whole motion",
                           description="Fold a mechanism from flat to closed and report degrees of "
                                       "freedom, closing angles, open cut edges and collisions.")
    check.add_argument("model", help="a .mech.json file")
    check.add_argument("--json", action="store_true", help="print the report as one JSON document")
    check.add_argument("--from", dest="t_from", type=float, default=0.0, metavar="T",
                       help="start of the swept drive range (default 0, flat)")
    check.add_argument("--to", dest="t_to", type=float, default=1.0, metavar="T",
                       help="end of the swept drive range (default 1, closed)")
    check.add_argument("--gap-tol", type=float, default=None, metavar="LEN",
                       help="largest closure gap that counts as meeting, in model units "
                            "(default 1e-4 of the model's size)")
    check.add_argument("--clearance", type=float, default=0.0, metavar="LEN",
                       help="panels not in contact by design collide when nearer than this")
    check.add_argument("--sheet", action="store_true",
                       help="the pattern is cut from one sheet: fail if the flat layout overlaps itself")
    check.set_defaults(run=run)


def _range(value, name, lo, hi):
    if not lo <= value <= hi:
        raise FoldsimError(f"{name}: must lie in [{lo}, {hi}], not {value}")


def _format_check(report):
    """Human-readable text of a check report."""
    units = report["units"]
    lines = [f"{report['model'] or 'mechanism'}: {report['faces']} faces, {report['hinges']} hinges, "
             f"root face {report['root']}, drive hinge {report['drive']} ({report['schedule']} schedule)",
             f"degrees of freedom: {report['dof']}"]
    if report["free_hinges"]:
        lines.append(f"free hinges (not reached from the drive): {report['free_hinges']}")
    for cycle in report["locked_cycles"]:
        lines.append(f"locked coupling cycle through hinges {cycle}")
    lines.append("")
    lines.append(" hinge  faces      closes at   reaches     couplings")
    for row in report["hinge_table"]:
        mark = "" if abs(row["closed_angle_deg"] - row["end_angle_deg"]) < 1e-6 else "  <- mismatch"
        faces = f"{row['faces'][0]}-{row['faces'][1]}"
        lines.append(f" {row['hinge']:>5}  {faces:<9}  {row['closed_angle_deg']:>9.4f}°  "
                     f"{row['end_angle_deg']:>9.4f}°  {row['couplings'] or '-'}{mark}")
    closure = report["closure"]
    lines.append("")
    lines.append(f"closure at t = 1: largest gap {closure['max_gap']:.4g} {units} "
                 f"(tolerance {closure['tolerance']:.4g}) -> {'meets' if closure['meets'] else 'OPEN'}")
    for edge in closure["edges"]:
        if not edge["meets"]:
            lines.append(f"  cut edge {edge['faces'][0]}-{edge['faces'][1]}: gap {edge['gap']:.4g} {units}")
    t0, t1 = report["t_range"]
    if report["collisions"]:
        lines.append(f"collisions over t in [{t0:g}, {t1:g}]:")
        for c in report["collisions"]:
            lines.append(f"  faces {c['faces'][0]} and {c['faces'][1]}: t = {c['first_t']:.4f} .. {c['last_t']:.4f}")
    else:
        lines.append(f"collisions over t in [{t0:g}, {t1:g}]: none")
    if report["flat_overlap"]:
        lines.append(f"flat layout overlaps itself: pairs {report['flat_overlap_pairs']}")
    else:
        lines.append("flat layout: no overlap")
    lines.append("")
    lines.append("OK" if report["ok"] else "PROBLEMS: " + "; ".join(report["problems"]))
    return "\n".join(lines)


def run(args):
    from ..analysis.report import check
    from ..io.mechanism_json import load

    for value, name in ((args.t_from, "--from"), (args.t_to, "--to")):
        _range(value, name, -1.0, 1.0)
    for value, name in ((args.gap_tol, "--gap-tol"), (args.clearance, "--clearance")):
        if value is not None and not value >= 0:
            raise FoldsimError(f"{name}: must be a non-negative length, not {value}")
    mech = load(args.model)
    report = check(mech, t_from=args.t_from, t_to=args.t_to, gap_tol=args.gap_tol,
                   clearance=args.clearance, sheet=args.sheet)
    print(json.dumps(report, indent=2) if args.json else _format_check(report))
    return 0 if report["ok"] else 1
