"""Designs from shapes: a built-in solid or a mesh file, unfolded along a net and geared.

This is the design-side half of `foldsim new` and of opening a mesh in the desktop
app: both the command line (`foldsim.commands`) and the GUI (`foldsim.gui`) call it,
so it lives below both. Nothing here writes a file or prints. numpy and the
engine load only when a design is built, so the command line's ``--help`` stays light.
"""

import argparse
from collections import Counter
from pathlib import Path

from .errors import ModelError

NETS = ("min-diameter", "bfs")
"""How `build` may choose the net."""
GEARS = ("auto", "simple", "none")
"""Which gears `build` may place."""
MESH_SUFFIXES = (".obj", ".off", ".stl", ".ply")
"""Files that are turned into a mechanism the way `foldsim new` does."""


def shape_args(shape, size=None, units="mm", net=None, root=None, cut=None, gears="auto", teeth=None,
               thickness=None, module=None, gear_clearance=0.0):
    """The options of `foldsim new` as `build` takes them (nothing is written)."""
    return argparse.Namespace(shape=str(shape), size=size, units=units, net=net, root=root, cut=cut,
                              gears=gears, teeth=teeth, thickness=thickness, module=module,
                              gear_clearance=gear_clearance, output="(not saved)", json=False)


def _sized_build(mech, args):
    """The mechanism with a ``build`` object (docs/build.md) when --thickness is given, and the sizing rows."""
    from dataclasses import replace

    thickness = getattr(args, "thickness", None)
    module = getattr(args, "module", None)
    clearance = getattr(args, "gear_clearance", 0.0) or 0.0
    if thickness is None:
        if module is not None:
            raise ModelError("--module: sizes gears on thick panels; give --thickness too")
        return mech, None
    for name, value in (("--thickness", thickness), ("--module", module)):
        if value is not None and not (value > 0 and value < float("inf")):
            raise ModelError(f"{name}: must be a positive length, not {value:g}")
    if not clearance >= 0:
        raise ModelError(f"--gear-clearance: must be a length of at least 0, not {clearance:g}")
    if module is None or not mech.couplings:
        build, rows = {"thickness": float(thickness), "clearance": float(clearance)}, []
    else:
        from .build.sizing import size_gears

        try:
            build, rows = size_gears(mech, thickness, module, clearance)
        except ModelError as exc:
            raise ModelError(f"--module: {exc}; give a smaller --module, a larger --size, or a --teeth range "
                             f"with fewer teeth") from None
    out = replace(mech, extras={**mech.extras, "build": build})
    from .build.spec import build_spec

    build_spec(out)
    return out, rows


def is_mesh(path):
    """Whether a path names a mesh file by its suffix."""
    return Path(path).suffix.lower() in MESH_SUFFIXES


def _pairs(text):
    """``"0-1,2-3"`` -> [(0, 1), (2, 3)]."""
    out = []
    for item in text.split(","):
        a, sep, b = item.strip().partition("-")
        if not sep or not a.strip().isdigit() or not b.strip().isdigit():
            raise ModelError(f"--cut: expected face pairs like 0-1,2-3, not {text!r}")
        out.append((int(a), int(b)))
    return out


SIZED_TEETH = (12, 60)
"""Tooth counts `new --module` gives the couplings when --teeth does not (the sizing then scales them)."""


def _teeth(text):
    lo, sep, hi = text.partition(":")
    if not sep or not lo.strip().isdigit() or not hi.strip().isdigit():
        raise ModelError(f"--teeth: expected MIN:MAX tooth counts like 12:60, not {text!r}")
    lo, hi = int(lo), int(hi)
    if not 1 <= lo <= hi:
        raise ModelError(f"--teeth: need 1 <= MIN <= MAX, not {text!r}")
    return lo, hi


def _shape(args):
    from .io.mesh import FORMATS, load_mesh
    from .solids import builtin

    path = Path(args.shape)
    if path.suffix.lower().lstrip(".") in FORMATS or path.is_file():
        if args.size is not None:
            raise ModelError("--size: applies to built-in solids only; a mesh file keeps its own size")
        return load_mesh(path)
    return builtin(args.shape, args.size)


def _net(args, graph):
    """Hinges (face pairs), root face and the method's name."""
    from .nets import bfs_net, min_diameter_net, net_from_cuts

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
    import numpy as np

    return None if x is None else float(np.degrees(x))


def _pitch_radii(pair, ratio):
    """Pitch radii of a spur pair on hinge i and hinge j, or None (an idler is needed)."""
    import numpy as np

    a, r = pair.centre_distance, abs(ratio)
    if pair.mesh == "external":
        return [a * r / (1 + r), a / (1 + r)]
    if np.isclose(r, 1.0):
        return None
    return [a * r / abs(r - 1), a / abs(r - 1)]


def _coupling_rows(mech, layout, toothed):
    from .layout import closure_gap

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
    """Make the mechanism and its report (a JSON-ready dict); does not write.

    Parameters
    ----------
    args : argparse.Namespace
        The options of `foldsim new` (see `shape_args`).

    Returns
    -------
    mech : Mechanism
    report : dict
        JSON-ready; see docs/cli.md, `foldsim new`.
    """
    import numpy as np

    from .analysis.collision import flat_overlaps
    from .gearing import fold_schedule
    from .layout import closure_gap, gear_layout, toothed_couplings
    from .model import build_mechanism
    from .nets import face_graph, min_diameter_net, tree_diameter
    from .parts import part_types

    teeth_range = _teeth(args.teeth) if args.teeth is not None else None
    if teeth_range is not None and args.gears == "none":
        raise ModelError("--teeth: there are no gears with --gears none")
    if teeth_range is None and getattr(args, "module", None) is not None and args.gears != "none":
        # Gears of a module have whole teeth: every pair first gets the integer pair
        # nearest its ratio (the summary shows the closure gap that costs).
        teeth_range = SIZED_TEETH
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
    mech, sizing = _sized_build(mech, args)
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
    if sizing is not None:
        report["build"] = mech.extras["build"]
        report["gear_sizing"] = sizing
    return mech, report
