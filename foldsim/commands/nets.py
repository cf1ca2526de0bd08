"""`foldsim nets`: how many nets a solid has, how long their hinge chains are, the best few."""

import argparse
import json
import sys
from dataclasses import replace
from importlib.util import find_spec
from pathlib import Path

from ..errors import FoldsimError, ModelError
from ..limits import DEFAULT_LIMIT, DEFAULT_MAX_STATES
from ..tolerances import DEFAULT

MAX_FACES = 500  # exact counts beyond this take minutes on a small machine (docs/cli.md)


def register(sub):
    """Add the `nets` subcommand to an argparse subparsers object."""
    nets = sub.add_parser("nets", help="count a solid's nets and find the ones with the shortest hinge chains",
                          description="Count the spanning trees of a solid's face graph and the distinct nets "
                                      "up to its rotations and reflections, list the distinct nets by their "
                                      "longest hinge chain, and pick the best ones.")
    nets.add_argument("shape", metavar="SHAPE",
                      help="a built-in solid (cube, dodecahedron, prism:5, ...) or a mesh file")
    nets.add_argument("--json", action="store_true", help="print the result as one JSON document")
    nets.add_argument("--best", type=int, default=None, metavar="K",
                      help="show the K distinct nets with the shortest longest hinge chain, ties going to "
                           "the fewest part types")
    nets.add_argument("-o", "--output", dest="out", default=None, metavar="DIR",
                      help="write the best nets as DIR/net-1.mech.json, ... (closed state, no couplings; "
                           "one net unless --best says how many)")
    nets.add_argument("--out", dest="old_out", default=None, metavar="DIR", help=argparse.SUPPRESS)
    nets.add_argument("--limit", type=int, default=DEFAULT_LIMIT, metavar="N",
                      help="list the distinct nets only if the solid has at most N spanning trees "
                           f"(default {DEFAULT_LIMIT:,}; the counts are exact either way)")
    nets.add_argument("--symmetry-tol", type=float, default=None, metavar="REL",
                      help="a symmetry must carry every vertex within REL times the solid's size of a vertex "
                           "(default 1e-5); smaller values count nearly symmetric solids exactly")
    nets.add_argument("--max-faces", type=int, default=MAX_FACES, metavar="N",
                      help="refuse solids with more than N faces (default %(default)s): exact counting "
                           "grows as the cube of the face count, about half a minute at 400 faces")
    nets.add_argument("--progress", action="store_true",
                      help="show the listing's progress on stderr even when it is not a terminal")
    nets.set_defaults(run=run)


class _Progress:
    """Counts the trees listed so far and, when ``visible``, shows progress on a stream.

    On a terminal each report overwrites the last; elsewhere each is a line of its own.
    """

    def __init__(self, visible, stream):
        self.done = 0
        self.visible = visible
        self.stream = stream
        self.open_line = False

    def __call__(self, done, total):
        self.done = done
        if self.visible:
            self.show(f"listing trees: {done:,} / {total:,} ({100 * done // max(total, 1)}%)")

    def scoring(self, done, total):
        if self.visible and done % max(1, total // 20) == 0:
            self.show(f"counting part types of tied nets: {done:,} / {total:,}")

    def stage(self, text):
        """Name the next long step (on its own line, so listing reports stay on theirs)."""
        if self.visible:
            self.finish()
            print(text, file=self.stream, flush=True)

    def show(self, text):
        if self.stream.isatty():
            print(f"\r{text}\033[K", end="", file=self.stream, flush=True)
            self.open_line = True
        else:
            print(text, file=self.stream, flush=True)

    def finish(self):
        if self.open_line:
            print(file=self.stream, flush=True)
            self.open_line = False


_FACE_COUNTS = {"prism": lambda n: n + 2, "antiprism": lambda n: 2 * n + 2, "geodesic": lambda k: 20 * 4 ** k}


def _check_size(spec, max_faces):
    """Refuse a built-in family member with more than ``max_faces`` faces before building it.

    A member the solids themselves refuse (`foldsim.limits.MAX_SIDES`) is left to them,
    so that the message names the limit that cannot be raised.
    """
    from ..limits import MAX_SIDES

    kind, _, number = spec.strip().lower().partition(":")
    count = _FACE_COUNTS.get(kind)
    if not (count is not None and number.isdigit() and len(number) < 12):
        return
    if kind in ("prism", "antiprism") and int(number) > MAX_SIDES:
        return
    if count(int(number)) > max_faces:
        raise FoldsimError(f"--max-faces: {spec} has {count(int(number)):,} faces, more than the limit of "
                           f"{max_faces:,}; exact counting grows as the cube of the face count (minutes "
                           "at a thousand faces); raise --max-faces to run it anyway")


def _load_shape(spec):
    """The polyhedron named by SHAPE: a built-in spec, else a mesh file if meshes can be read.

    A SHAPE with a file extension, or naming a file, is a mesh path.
    """
    from ..solids import builtin

    try:
        return builtin(spec)
    except ModelError:
        if find_spec("foldsim.io.mesh") is None or not (Path(spec).suffix or Path(spec).is_file()):
            raise
    from ..io.mesh import load_mesh

    return load_mesh(spec)


def _panel_shapes(poly, hinged=()):
    """Number of distinct panels: congruent polygons with the same edges hinged.

    Parameters
    ----------
    poly : Polyhedron
    hinged : iterable of (int, int)
        Face pairs joined by hinges; with none, this counts distinct face shapes.

    A panel is the cyclic sequence (edge length, hinged?, corner angle) around its
    loop, compared up to rotation and reversal on a grid of ``DEFAULT.planar``
    (lengths relative to the solid's size, angles in radians).
    """
    import numpy as np

    from ..nets import face_graph

    graph = face_graph(poly.faces)
    hinged = {frozenset(p) for p in hinged}
    vertices = np.asarray(poly.vertices, dtype=float)
    step = DEFAULT.planar * float(np.linalg.norm(np.ptp(vertices, axis=0)))
    edge_faces = {frozenset(data["edge"]): {a, b} for a, b, data in graph.edges(data=True)}
    kinds = set()
    for f, face in enumerate(poly.faces):
        pts = vertices[face]
        ahead, behind = np.roll(pts, -1, axis=0) - pts, np.roll(pts, 1, axis=0) - pts
        lengths = np.linalg.norm(ahead, axis=1)
        cosines = np.einsum("ij,ij->i", ahead, behind) / (lengths * np.roll(lengths, 1))
        corners = np.arccos(np.clip(cosines, -1.0, 1.0))
        flags = [frozenset(edge_faces.get(frozenset((int(u), int(v))), ())) in hinged
                 for u, v in zip(face, np.roll(face, -1))]
        tokens = [(int(round(c / DEFAULT.planar)), int(round(s / step)), h)
                  for c, s, h in zip(corners, lengths, flags)]
        back = [(tokens[k][0], tokens[k - 1][1], tokens[k - 1][2]) for k in range(len(tokens))][::-1]
        kinds.add(min(tuple(seq[k:] + seq[:k]) for seq in (tokens, back) for k in range(len(seq))))
    return len(kinds)


def _part_counter(poly, mechanism):
    """(cheap(hinges) -> int or None, full(hinges) -> int, description of what is counted).

    ``mechanism(hinges)`` builds the net's mechanism, which `foldsim.parts` needs for
    the full count; the cheap one (`foldsim.netcount.ranking.NetScorer`) reads the
    same part types from the solid without building anything.
    """
    if find_spec("foldsim.parts") is not None:
        from ..netcount.ranking import NetScorer
        from ..parts import part_types

        scorer = NetScorer(poly)
        return scorer.part_count, (lambda hinges: len(part_types(mechanism(hinges)))), "part types"
    shapes = (lambda hinges: _panel_shapes(poly, hinges))
    return shapes, shapes, (
        "distinct panel shapes counting which edges are hinged (foldsim.parts is not available; "
        f"the faces alone give {_panel_shapes(poly)} shape(s) for every net)")


def _rank(candidates, k, cheap, full, progress):
    """The ``k`` best of (diameter, hinges) candidates by (diameter, part count, position).

    Every candidate gets the cheap count; the full count replaces it for the leaders,
    re-ranking until the first ``k`` are all fully counted, so mechanisms are built
    for about ``k`` nets however many tie.

    Returns
    -------
    list of (diameter, parts, hinges)
    """
    keys = []
    for i, (d, h) in enumerate(candidates):
        progress.scoring(i, len(candidates))
        keys.append([d, cheap(h), i])
    progress.finish()
    exact = set()
    while True:
        keys.sort()
        top = keys[:k]
        todo = [key for key in top if key[2] not in exact]
        if not todo:
            return [(d, parts, candidates[i][1]) for d, parts, i in top]
        for key in todo:
            key[1] = full(candidates[key[2]][1])
            exact.add(key[2])


def _best_nets(poly, census, choice, k, out_dir, progress):
    """The best ``k`` nets as report entries, writing their mechanism files into ``out_dir``."""
    from ..analysis.collision import flat_overlaps
    from ..io.mechanism_json import save
    from ..model import build_mechanism
    from ..netcount import tree_pairs
    from ..nets import central_face, hinges_from

    built = {}

    def mechanism(hinges):
        key = tuple(map(tuple, hinges))
        if key not in built:
            root = central_face(census.faces, hinges)
            built[key] = build_mechanism(poly.vertices, poly.faces, hinges_from(root, hinges), root=root,
                                         name=f"{poly.name} net")
        return built[key]

    cheap, full, what = _part_counter(poly, mechanism)
    if census.enumerated:
        boundary = census.diameters[min(k, census.nets) - 1]
        candidates = [(int(d), tree_pairs(t, census.pairs))
                      for t, d in zip(census.representatives, census.diameters) if d <= boundary]
        note = None
    else:
        candidates = [(choice.diameter, sorted(tuple(sorted(h)) for h in choice.hinges))]
        note = ("the nets were not listed (more than --limit spanning trees): this is the one net grown "
                "from the face graph's centre" + (", and its longest chain meets the lower bound"
                                                  if choice.diameter == choice.lower_bound else ""))
    scored = _rank(candidates, k, cheap, full, progress)
    entries = []
    for rank, (diameter, parts, hinges) in enumerate(scored, start=1):
        mech = mechanism(hinges)
        mech = replace(mech, name=f"{poly.name} net {rank}")
        overlaps = flat_overlaps(mech).tolist()
        path = None if out_dir is None else out_dir / f"net-{rank}.mech.json"
        if path is not None:
            try:
                out_dir.mkdir(parents=True, exist_ok=True)
                save(mech, path)
            except OSError as exc:
                raise FoldsimError(f"--out: cannot write {path}: {exc.strerror or exc}") from None
        kept = set(hinges)
        entries.append({
            "rank": rank, "diameter_hinges": diameter, "part_types": parts, "root": mech.root,
            "hinges": mech.hinge_faces.tolist(),
            "cuts": [list(p) for p in census.pairs.tolist() if tuple(p) not in kept],
            "flat_overlap": bool(overlaps), "flat_overlap_pairs": overlaps,
            "file": None if path is None else str(path)})
    return entries, what, note


def _count_text(report):
    """The distinct-net counts as a phrase."""
    if report["nets"] is None:
        return "not counted"
    chiral = report["nets_up_to_rotation"]
    return f"{report['nets']:,}" + ("" if chiral is None else f" ({chiral:,} if a mirror image counts as different)")


def _notes(census, limit):
    """What the report leaves out and why, as one line (None if nothing)."""
    notes = []
    if census.nets is None or census.nets_up_to_rotation is None:
        notes.append(f"counting the nets a symmetry leaves unchanged needs more than {DEFAULT_MAX_STATES:,} "
                     "partial states for this solid, so the counts up to symmetry are left out")
    if not census.enumerated:
        notes.append(f"the distinct nets were not listed: there are more spanning trees than --limit "
                     f"({limit:,}); the shortest chain shown is that of a net grown from the face graph's centre")
    return "; ".join(notes) or None


def _format(report):
    """Human-readable text of a nets report."""
    lines = [(f"{report['shape']}: {report['faces']} faces, {report['face_pairs']} shared edges, "
              f"{report['symmetry_order']} symmetries ({report['rotations']} rotations)"),
             f"spanning trees (cut patterns): {report['spanning_trees']:,}",
             "distinct nets up to rotation and reflection: " + _count_text(report),
             (f"shortest longest hinge chain: {report['min_diameter_hinges']} hinges "
              f"(no net can do better than {report['lower_bound_hinges']})")]
    if report["enumerated"]:
        lines.append("distinct nets by longest hinge chain:")
        for diameter, count in report["diameter_histogram"].items():
            lines.append(f"  {diameter:>3} hinges  {count:>9,}")
    if report["note"]:
        lines.append(report["note"])
    if "best" in report:
        lines.append("")
        lines.append(f"best {len(report['best'])} net(s), shortest longest chain first, ties to the fewest "
                     f"{report['part_types_counted']}:")
        if report.get("best_note"):
            lines.append(f"  ({report['best_note']})")
        for net in report["best"]:
            overlap = "overlaps itself: " + str(net["flat_overlap_pairs"]) if net["flat_overlap"] else "no overlap"
            lines.append(f"  net {net['rank']}: longest chain {net['diameter_hinges']} hinges, "
                         f"{net['part_types']} part type(s), root face {net['root']}, flat layout: {overlap}")
            lines.append("    cut: " + " ".join(f"{a}-{b}" for a, b in net["cuts"]))
            if net["file"]:
                lines.append(f"    written to {net['file']}")
    return "\n".join(lines)


def run(args):
    from ..netcount import nets_up_to_symmetry
    from ..nets import face_graph, min_diameter_net
    from .options import deprecated

    if args.old_out is not None:
        deprecated("nets --out DIR", "-o/--output DIR")
        if args.out is not None and args.out != args.old_out:
            raise FoldsimError("--out: the same as -o/--output DIR; give one of them")
        args.out = args.old_out

    if args.limit < 0:
        raise FoldsimError(f"--limit: must be a non-negative number of trees, not {args.limit}")
    if args.best is not None and args.best < 1:
        raise FoldsimError(f"--best: must be at least 1, not {args.best}")
    best = args.best if args.best is not None else (1 if args.out is not None else None)
    from ..symmetry import symmetry_tolerances

    symmetry_tol = symmetry_tolerances(args.symmetry_tol).planar
    if args.max_faces < 1:
        raise FoldsimError(f"--max-faces: must be at least 1, not {args.max_faces}")
    _check_size(args.shape, args.max_faces)
    poly = _load_shape(args.shape)
    if len(poly.faces) > args.max_faces:
        raise FoldsimError(f"--max-faces: {poly.name} has {len(poly.faces):,} faces, more than the limit of "
                           f"{args.max_faces:,}; exact counting grows as the cube of the face count (minutes "
                           "at a thousand faces); raise --max-faces to run it anyway")
    graph = face_graph(poly.faces)
    progress = _Progress(args.progress or sys.stderr.isatty(), sys.stderr)
    try:
        progress.stage(f"counting the spanning trees and symmetries of {len(poly.faces):,} faces")
        census = nets_up_to_symmetry(poly, limit=args.limit, progress=progress, symmetry_tol=symmetry_tol)
        progress.finish()
        choice = min_diameter_net(graph)
        report = {
            "shape": poly.name, "faces": census.faces, "face_pairs": len(census.pairs),
            "spanning_trees": census.spanning_trees, "symmetry_order": census.symmetry_order,
            "rotations": census.rotations, "symmetry_tolerance": symmetry_tol,
            "nets": census.nets, "nets_up_to_rotation": census.nets_up_to_rotation,
            "enumerated": census.enumerated,
            "min_diameter_hinges": int(census.diameters[0]) if census.enumerated else choice.diameter,
            "lower_bound_hinges": choice.lower_bound,
            "diameter_histogram": census.histogram,
            "note": _notes(census, args.limit),
        }
        if best is not None:
            out_dir = None if args.out is None else Path(args.out)
            report["best"], report["part_types_counted"], report["best_note"] = _best_nets(
                poly, census, choice, best, out_dir, progress)
    except KeyboardInterrupt:
        progress.finish()
        print(f"foldsim: interrupted after {progress.done} trees", file=sys.stderr)
        return 130
    print(json.dumps(report, indent=2) if args.json else _format(report))
    return 0
