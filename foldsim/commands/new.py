"""`foldsim new`: make a geared mechanism from a built-in solid or a mesh file."""

import json
from collections import Counter
from pathlib import Path

import numpy as np

from ..errors import ModelError

NETS = ("min-diameter", "bfs")
GEARS = ("auto", "simple", "none")


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
    new.add_argument("--json", action="store_true", help="print the report as one JSON document")
    new.set_defaults(run=run)


def _pairs(text):
    """``"0-1,2-3"`` -> [(0, 1), (2, 3)]."""
    out = []
    for item in text.split(","):
        a, sep, b = item.strip().partition("-")
        if not sep or not a.strip().isdigit() or not b.strip().isdigit():
            raise ModelError(f"--cut: expected face pairs like 0-1,2-3, not {text!r}")
        out.append((int(a), int(b)))
    return out


def _teeth(text):
    lo, sep, hi = text.partition(":")
    if not sep or not lo.strip().isdigit() or not hi.strip().isdigit():
        raise ModelError(f"--teeth: expected MIN:MAX tooth counts like 12:60, not {text!r}")
    lo, hi = int(lo), int(hi)
    if not 1 <= lo <= hi:
        raise ModelError(f"--teeth: need 1 <= MIN <= MAX, not {text!r}")
    return lo, hi


def _shape(args):
    from ..io.mesh import FORMATS, load_mesh
    from ..solids import builtin

    path = Path(args.shape)
    if path.suffix.lower().lstrip(".") in FORMATS or path.is_file():
        if args.size is not None:
            raise ModelError("--size: applies to built-in solids only; a mesh file keeps its own size")
        return load_mesh(path)
    return builtin(args.shape, args.size)


def _net(args, graph):
    """Hinges (face pairs), root face and the method's name."""
    from ..nets import bfs_net, min_diameter_net, net_from_cuts

    n = graph.number_of_nodes()
    if args.root is not None and not 0 <= args.root < n:
        raise ModelError(f"--root: face {args.root} out of range (0..{n - 1})")
    if args.cut is not None:
        if args.net is not None:
            raise ModelError("--cut: choose the net either by --net or by --cut, not both")
        return net_from_cuts(graph, _pairs(args.cut)), args.root or 0, "cut"
    if args.net == "bfs":
        root = args.root or 0
        return bfs_net(graph, root), root, "bfs"
    choice = min_diameter_net(graph)
    return choice.hinges, choice.root if args.root is None else args.root, "min-diameter"


def _deg(x):
    return None if x is None else float(np.degrees(x))


def _pitch_radii(pair, ratio):
    """Pitch radii of a spur pair on hinge i and hinge j, or None (an idler is needed)."""
    a, r = pair.centre_distance, abs(ratio)
    if pair.mesh == "external":
        return [a * r / (1 + r), a / (1 + r)]
    if np.isclose(r, 1.0):
        return None
    return [a * r / abs(r - 1), a / abs(r - 1)]


def _coupling_rows(mech, layout, toothed):
    from ..layout import closure_gap

    rows = []
    for k, pair in enumerate(layout.pairs):
        row = {"hinges": list(pair.hinges), "face": pair.face, "type": pair.kind, "ratio": pair.ratio,
               "teeth": None, "ratio_error": None, "closure_gap": None}
        teeth = None
        if toothed is not None:
            coupling, teeth, error = toothed[k]
            alone = list(layout.couplings())
            alone[k] = coupling
            row.update(teeth=list(teeth), ratio_error=error, closure_gap=closure_gap(mech, alone))
        if pair.shaft_angle is not None:
            cones = pair.cones(teeth)
            row.update(shaft_angle_deg=_deg(pair.shaft_angle),
                       cone_angles_deg=[_deg(cones.delta1), _deg(cones.delta2)],
                       apex_reach=pair.apex_reach)
        if pair.kind == "spur":
            ratio = teeth[0] / teeth[1] if teeth else pair.ratio
            row.update(centre_distance=pair.centre_distance, mesh=pair.mesh,
                       pitch_radii=_pitch_radii(pair, ratio))
        rows.append(row)
    return rows


def build(args):
    """Make the mechanism and its report (a JSON-ready dict); does not write."""
    from ..analysis.collision import flat_overlaps
    from ..gearing import fold_schedule
    from ..layout import closure_gap, gear_layout, toothed_couplings
    from ..model import build_mechanism
    from ..nets import face_graph, min_diameter_net, tree_diameter
    from ..parts import part_types

    teeth_range = _teeth(args.teeth) if args.teeth is not None else None
    if teeth_range is not None and args.gears == "none":
        raise ModelError("--teeth: there are no gears with --gears none")
    poly = _shape(args)
    graph = face_graph(poly.faces)
    hinges, root, method = _net(args, graph)
    bound = min_diameter_net(graph).lower_bound
    plain = build_mechanism(poly.vertices, poly.faces, hinges, root=root, name=poly.name, units=args.units)
    layout, rows, toothed = None, [], None
    if args.gears == "none":
        drive = int(np.flatnonzero(np.abs(plain.closed_angles) > 0)[0])
        couplings = ()
    else:
        layout = gear_layout(plain, kinds=args.gears)
        drive = layout.drive
        couplings = layout.couplings()
        if teeth_range is not None:
            toothed = toothed_couplings(layout, *teeth_range)
            couplings = tuple(c for c, _, _ in toothed)
    mech = build_mechanism(poly.vertices, poly.faces, hinges, root=root, drive=drive, couplings=couplings,
                           name=poly.name, units=args.units)
    if layout is not None:
        rows = _coupling_rows(mech, layout, toothed)
    schedule = fold_schedule(mech)
    overlap = flat_overlaps(mech)
    diameter = tree_diameter(mech.n_faces, [tuple(h) for h in mech.hinge_faces.tolist()])
    types = part_types(mech)
    report = {
        "model": mech.name,
        "output": str(args.output),
        "units": mech.units,
        "faces": mech.n_faces,
        "hinges": mech.n_hinges,
        "root": mech.root,
        "drive": mech.drive,
        "net": {"method": method, "hinges": [list(h) for h in mech.hinge_faces.tolist()],
                "diameter_hinges": diameter, "diameter_faces": diameter + 1, "lower_bound": bound},
        "flat_overlap": bool(len(overlap)),
        "flat_overlap_pairs": overlap.tolist(),
        "gears": args.gears,
        "schedule": schedule.kind,
        # The layout's count: a net with no gearable pair at all writes no couplings,
        # which the engine reads as the ideal schedule.
        "dof": layout.dof if layout else schedule.dof,
        "unreachable_hinges": list(layout.unreachable) if layout else [],
        "longest_gear_chain": layout.chain if layout else None,
        "candidate_pairs": dict(sorted(Counter(p.kind for p in layout.candidates).items())) if layout else {},
        "teeth_range": list(teeth_range) if teeth_range else None,
        "couplings": rows,
        "closure_gap": closure_gap(mech),
        "part_type_count": len(types),
        "part_types": types,
    }
    return mech, report


def _format(report):
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
        lines.append(" hinges   face  type          ratio      teeth    error      gap        geometry")
        for r in report["couplings"]:
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
    lines.append(f"part types: {report['part_type_count']}")
    return "\n".join(lines)


def run(args):
    from ..io.mechanism_json import save

    mech, report = build(args)
    try:
        save(mech, args.output)
    except OSError as exc:
        raise ModelError(f"{args.output}: cannot write file: {exc.strerror or exc}") from None
    print(json.dumps(report, indent=2) if args.json else _format(report))
    return 0 if report["dof"] == 1 else 1
