"""`foldsim check`: fold a mechanism over its motion and report what holds."""

import json
import math

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
    check.add_argument("--play-p95-limit", type=float, default=None, metavar="LEN",
                       help="also run the play stack-up (foldsim stackup) and fail when the 95th-percentile "
                            "closure gap of any cut edge exceeds LEN (model units)")
    check.add_argument("--process", default=None, metavar="NAME",
                       help="process preset for the play check: sintered-nylon, filament or machined-metal "
                            "(replaces the one the file names)")
    check.add_argument("--samples", type=int, default=None, metavar="N",
                       help="Monte Carlo samples for the play check (default 10,000)")
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
    if "build" in report:
        lines.extend(_format_build(report))
    if "play" in report:
        play = report["play"]
        lines.append(f"play stack-up ({play['process'] or 'file values'}, {play['samples']} samples): "
                     f"p95 closure gap {play['p95_gap']:.4g} {units} (limit {play['limit']:.4g}) -> "
                     f"{'within' if play['ok'] else 'OVER'}")
    lines.append("")
    lines += _problem_lines(report)
    return "\n".join(lines)


SHOWN_PROBLEMS = 20
"""Problems the text report lists one by one; `--json` has them all."""


def _problem_lines(report):
    """``OK``, or the problems: on one line when there are a few, else one a line, the first `SHOWN_PROBLEMS`.

    Examples
    --------
    >>> _problem_lines({"ok": False, "problems": ["a", "b"]})
    ['PROBLEMS: a; b']
    >>> _problem_lines({"ok": False, "problems": list("abcdef")})[:2]
    ['PROBLEMS (6):', '  - a']
    """
    problems = report["problems"]
    if report["ok"]:
        return ["OK"]
    if len(problems) <= 3:
        return ["PROBLEMS: " + "; ".join(problems)]
    out = [f"PROBLEMS ({len(problems)}):"] + [f"  - {p}" for p in problems[:SHOWN_PROBLEMS]]
    if len(problems) > SHOWN_PROBLEMS:
        out.append(f"  ... and {len(problems) - SHOWN_PROBLEMS} more (`foldsim check --json` lists them all)")
    return out


def _format_build(report):
    """The build's lines of the text report (docs/build.md)."""
    units = report["units"]
    build = report["build"]
    thick = sorted(set(build.get("thickness") or []))
    lines = [f"build: panels {', '.join(f'{x:g}' for x in thick)} {units} thick, "
             f"{len(build.get('gear_bodies') or [])} gear pair(s) as solids"]
    passed = [s for s in report["stops"] if s["overrun_deg"] > 0]
    lines.append("stops: every hinge stays short of its stop" if not passed else
                 "stops: " + "; ".join(f"hinge {s['hinge']} passes {s['stop_deg']:.2f}° by "
                                       f"{s['overrun_deg']:.3g}° from t = {s['at_t']:.4g}" for s in passed))
    if report["sector_coverage"]:
        lines.append("sector coverage (contact ratio along t):")
    for row in report["sector_coverage"]:
        out = row["runs_out_at_t"]
        lines.append(f"  coupling {row['coupling']}: contact ratio down to {row['min_contact_ratio']:.3g}"
                     + (f", a sector runs out from t = {out:.4g}" if out is not None else ", teeth in mesh all along"))
    if report["gear_clearance"]:
        lines.append("gear clearance (nearest approach of each pair's gear bodies):")
    for row in report["gear_clearance"]:
        if row["min_clearance"] is not None:
            lines.append(f"  coupling {row['coupling']}: nearest {row['min_clearance']:.4g} {units} "
                         f"({row['body']} to {row['with']}, t = {row['at_t']:.4g})")
        elif row.get("guaranteed_min") is not None:
            lines.append(f"  coupling {row['coupling']}: nothing within {row['guaranteed_min']:.4g} {units}")
    clashes = report.get("panel_clashes", [])
    lines.append("thick panels: none run into another over the motion" if not clashes else
                 "thick panels run into each other: " + "; ".join(
                     f"faces {c['faces'][0]} and {c['faces'][1]} from t = {c['first_t']:.4g}" for c in clashes))
    outer = report["outer_closure"]
    lines.append(f"outer surface at t = 1: largest gap {outer['max_gap']:.4g} {units} -> "
                 f"{'meets' if outer['meets'] else 'OPEN'}")
    return lines


def run(args):
    from ..report import check
    from ..io.mechanism_json import load

    for value, name in ((args.t_from, "--from"), (args.t_to, "--to")):
        _range(value, name, -1.0, 1.0)
    for value, name in ((args.gap_tol, "--gap-tol"), (args.clearance, "--clearance")):
        if value is not None and not 0 <= value < math.inf:
            raise FoldsimError(f"{name}: must be a finite non-negative length, not {value}")
    _check_play_options(args)
    mech = load(args.model)
    report = check(mech, t_from=args.t_from, t_to=args.t_to, gap_tol=args.gap_tol,
                   clearance=args.clearance, sheet=args.sheet)
    if args.play_p95_limit is not None:
        _play_check(mech, report, args)
    print(json.dumps(report, indent=2) if args.json else _format_check(report))
    return 0 if report["ok"] else 1


def _check_play_options(args):
    from .stackup import check_options

    if args.play_p95_limit is None:
        for value, name in ((args.process, "--process"), (args.samples, "--samples")):
            if value is not None:
                raise FoldsimError(f"{name}: only used by the play check; give --play-p95-limit too")
        return
    if not 0 <= args.play_p95_limit < math.inf:
        raise FoldsimError(f"--play-p95-limit: must be a non-negative length, not {args.play_p95_limit}")
    check_options(10_000 if args.samples is None else args.samples, args.process)


def _play_check(mech, report, args):
    """Run the stack-up at closure; add ``play`` to the report and a problem when over the limit."""
    from ..stackup import DEFAULT_SAMPLES, stackup

    samples = DEFAULT_SAMPLES if args.samples is None else args.samples
    limit = args.play_p95_limit
    result = stackup(mech, process=args.process, samples=samples, seed=0, times=(1.0,))
    p95 = result.mc.gap_p95[result.closure]
    worst = int(p95.argmax()) if len(p95) else None
    ok = result.p95_gap <= limit
    report["play"] = {
        "limit": float(limit), "p95_gap": result.p95_gap, "ok": bool(ok),
        "worst_edge": mech.cut_faces[worst].tolist() if worst is not None else None,
        "process": result.spec.process, "samples": samples, "seed": 0, "dist": "uniform",
        "contributors": result.contributors(top=3),
    }
    if not ok:
        a, b = report["play"]["worst_edge"]
        report["problems"].append(f"with play the 95th-percentile closure gap reaches {result.p95_gap:.4g} "
                                  f"{mech.units} at cut edge {a}-{b} (limit {limit:.4g})")
        report["ok"] = False
