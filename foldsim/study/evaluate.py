"""One net through the pipeline of `foldsim new` and `foldsim check`, as one table row.

The net is unfolded and geared as `foldsim.design.build` does it (root at the
net's centre face, `foldsim.layout.gear_layout`), then checked: degrees of
freedom, closure at t = 1, the collision sweep (with the early exit of
`foldsim.study.sweep`), the flat layout, part types (`foldsim.parts`), the longest
hinge and gear chains, and the play stack-up at closure (linearised worst case and
RSS, `foldsim.stackup.linear_stackup`; the Monte Carlo 95th percentile only when
asked). A net that cannot be evaluated gives a row with its ``error`` filled in and
the criteria empty; it never stops the study.
"""

from dataclasses import dataclass, replace
from functools import lru_cache

import numpy as np

COLUMNS = (
    # (name, type, meaning); the table's schema (`foldsim.study.table`) and docs/study.md.
    ("net", "int", "the net's number in the study, from 0"),
    ("tree", "str", "the spanning tree as a hexadecimal bitmask over the face pairs"),
    ("cuts", "str", "face pairs cut apart, 'a-b,c-d'"),
    ("root", "int", "the face that stays put (the net's centre face)"),
    ("error", "str", "why the net could not be evaluated; empty when it was"),
    ("diameter", "int", "longest hinge chain, in hinges"),
    ("dof", "int", "degrees of freedom left by the gears (1 is one drive)"),
    ("gear_count", "int", "gear pairs"),
    ("remote_bevels", "int", "gear pairs whose cone apex lies off the hinge edges"),
    ("gear_chain", "int", "longest gear chain from the drive, in meshes"),
    ("closure_gap", "float", "largest cut-edge gap at t = 1, model units"),
    ("closes", "bool", "every cut edge meets at t = 1 (within 1e-4 of the size)"),
    ("collision_free", "bool", "no two panels cross over the motion t in [0, 1]"),
    ("first_collision_t", "float", "drive value where the first collision starts (empty if none)"),
    ("first_collision_faces", "str", "the face pair of the first collision, 'a-b' (empty if none)"),
    ("flat_overlap", "bool", "the flat layout overlaps itself"),
    ("part_types", "int", "distinct parts to make (foldsim.parts)"),
    ("worst_case_gap", "float", "linearised worst-case closure gap with play, model units"),
    ("rss_gap", "float", "root-sum-square closure gap with play, model units"),
    ("p95_gap", "float", "Monte Carlo 95th-percentile closure gap (only with --mc)"),
    ("ok", "bool", "one drive, closes, no collision, flat layout clear"),
)
"""The columns of a study table, in order."""


@dataclass(frozen=True)
class StudySpec:
    """What every net of a study is built and checked with (picklable, for the workers).

    Attributes
    ----------
    shape : str
        A built-in solid or a mesh file's path, as `foldsim new` takes it.
    size : float or None
        Edge length of a built-in solid (None: 1).
    units : str
    gears : {"auto", "simple"}
    process : str
        The play preset of the stack-up (`foldsim.stackup.PROCESSES`).
    mc : int
        Monte Carlo samples of the stack-up; 0 for none.
    """

    shape: str
    size: float = None
    units: str = "mm"
    gears: str = "auto"
    process: str = "sintered-nylon"
    mc: int = 0


@dataclass(frozen=True, eq=False)
class _Shape:
    poly: object
    pairs: np.ndarray


@lru_cache(maxsize=4)
def shape_of(spec):
    """The solid and its face pairs, loaded once per process (workers keep it)."""
    from ..design import _shape, shape_args
    from ..nets import face_graph, face_pairs

    poly = _shape(shape_args(spec.shape, spec.size, spec.units))
    return _Shape(poly, face_pairs(face_graph(poly.faces)))


def _pairs_text(pairs):
    return ",".join(f"{a}-{b}" for a, b in pairs)


def net_mechanism(spec, tree):
    """(geared Mechanism, GearLayout, hinge pairs) of one tree bitmask."""
    from ..layout import gear_layout
    from ..model import build_mechanism
    from ..netcount import tree_pairs
    from ..nets import central_face, hinges_from

    shape = shape_of(spec)
    poly = shape.poly
    hinges = tree_pairs(tree, shape.pairs)
    root = central_face(len(poly.faces), hinges)
    plain = build_mechanism(poly.vertices, poly.faces, hinges_from(root, hinges), root=root, name=poly.name,
                            units=spec.units)
    layout = gear_layout(plain, kinds=spec.gears)
    # build_mechanism would only re-validate what the layout made.
    return replace(plain, drive=layout.drive, couplings=layout.couplings()), layout, hinges


def _criteria(spec, mech, layout, hinges):
    from ..analysis.closure import cut_edge_gaps
    from ..analysis.collision import flat_overlaps, panels
    from ..gearing import fold_schedule
    from ..kinematics import poses_at
    from ..nets import tree_diameter
    from ..parts import part_types
    from ..stackup import linear_stackup, play_spec, stackup
    from ..tolerances import DEFAULT
    from .sweep import first_collision

    schedule = fold_schedule(mech)
    gaps = cut_edge_gaps(mech, poses_at(mech, schedule, np.array([1.0])))[0]
    gap = float(gaps.max(initial=0.0))
    pan = panels(mech)
    hit = first_collision(mech, schedule, pan=pan)
    overlap = len(flat_overlaps(mech, pan=pan)) > 0
    play = play_spec(mech, spec.process)
    if spec.mc:
        result = stackup(mech, play, samples=spec.mc, seed=0, times=(1.0,))
        lin, p95 = result.linear, result.p95_gap
    else:
        lin, p95 = linear_stackup(mech, play, times=(1.0,), schedule=schedule), None
    closes = gap <= DEFAULT.gap * mech.size
    dof = int(layout.dof)
    return {
        "diameter": tree_diameter(mech.n_faces, hinges),
        "dof": dof,
        "gear_count": len(layout.pairs),
        "remote_bevels": sum(p.kind == "remote-bevel" for p in layout.pairs),
        "gear_chain": int(layout.chain),
        "closure_gap": gap,
        "closes": bool(closes),
        "collision_free": hit is None,
        "first_collision_t": None if hit is None else hit["first_t"],
        "first_collision_faces": None if hit is None else "-".join(map(str, hit["faces"])),
        "flat_overlap": bool(overlap),
        "part_types": len(part_types(mech)),
        "worst_case_gap": float(lin.gap_bound[0].max(initial=0.0)),
        "rss_gap": float(lin.gap_rss[0].max(initial=0.0)),
        "p95_gap": p95,
        "ok": bool(dof == 1 and closes and hit is None and not overlap),
    }


def evaluate(spec, index, tree):
    """One row of the study table (a dict over `COLUMNS`).

    Parameters
    ----------
    spec : StudySpec
    index : int
        The net's number in the study.
    tree : int
        Spanning-tree bitmask over the shape's face pairs.

    Returns
    -------
    dict
        Every column; on failure ``error`` says why and the criteria are None.
    """
    row = dict.fromkeys(name for name, _, _ in COLUMNS)
    row.update(net=int(index), tree=format(int(tree), "x"))
    try:
        shape = shape_of(spec)
        from ..netcount import tree_pairs

        kept = set(tree_pairs(tree, shape.pairs))
        row["cuts"] = _pairs_text(p for p in map(tuple, shape.pairs.tolist()) if p not in kept)
        mech, layout, hinges = net_mechanism(spec, tree)
        row["root"] = int(mech.root)
        row.update(_criteria(spec, mech, layout, hinges))
    except Exception as exc:  # noqa: BLE001 - a failing net is recorded, never stops the study
        for name, _, _ in COLUMNS[5:]:
            row[name] = None
        row["error"] = f"{type(exc).__name__}: {exc}".splitlines()[0][:500]
    return row


def evaluate_chunk(spec, start, trees):
    """Rows of consecutive nets ``start``, ``start + 1``, ... (the unit of work of a study)."""
    return [evaluate(spec, start + k, tree) for k, tree in enumerate(trees)]
