"""Write the demo mechanisms (`*.mech.json`) by computing them with foldsim's own API.

    python scripts/make_demos.py            # into assets/
    python scripts/make_demos.py --out DIR  # anywhere else

Every model is built with `build_mechanism` and written with `save`, so a file that
this script writes has passed the same validation as a file that `foldsim check`
loads. The output is deterministic: running the script again gives byte-identical
files (tests/test_demos.py holds the committed ones to that).

Gearing. Gears sit only between two hinges that share a face, and that face
carries both gears. The couplings form a spanning tree of the graph whose nodes are
the hinges and whose edges join hinges sharing a face, grown breadth-first from the
drive, so the gearing leaves exactly one degree of freedom. The drive is a hinge at
the centre of that graph (smallest eccentricity, then smallest index). Each ratio is
``closed_angle[j] / closed_angle[i]``, so every hinge reaches its closing angle at
the same moment, t = 1.

The demos and the verdicts `python -m foldsim check assets/<file>` gives:

gift-box.mech.json -- OK, exit 0.
    A closed-state cuboid box, 120 x 80 x 60 mm. Faces: 0 bottom (root), 1 front
    (y = 0), 2 right (x = 120), 3 back (y = 80), 4 left (x = 0), 5 lid. The four
    walls hinge on the bottom, the lid on the top edge of the back (long) wall.
    Every closing angle is 90 degrees, so every ratio is 1. The drive is the
    bottom-back hinge (it shares the bottom with the three other wall hinges and
    the back wall with the lid hinge). 7 cut edges, all meeting at t = 1, no
    collisions.

lantern.mech.json -- OK, exit 0.
    A closed-state right hexagonal prism, side 40 mm, height 90 mm. Faces: 0 base
    (root), 1-6 sides, 7 top. Sides 1, 3, 5 hinge on the base, sides 2, 4, 6 on the
    side before them, and the top on side 1: no hinge chain is longer than two.
    Base-side and side-top hinges close at 90 degrees, side-side hinges at 60
    degrees (180 minus the hexagon's 120-degree interior angle). The gears are given
    as tooth counts: 24:24 between 90-degree hinges, 24:36 from a 90-degree hinge to
    a 60-degree one. Drive: the base-side 1 hinge. 11 cut edges meet, no collisions.

tray.mech.json -- OK, exit 0.
    A flat-state serving tray (open, no lid): base 240 x 160 mm, faces CCW seen from
    below (the outside), so positive folds raise the walls. Faces: 0 base (root),
    1 front wall, 2 right wall, 3 back wall, 4 left wall (all 30 mm high), 5-8 square
    30 x 30 mm corner flaps on the ends of the front and back walls. The side walls
    are 30 mm shorter at each end than the base edge, so at t = 1 each flap turns
    90 degrees about its wall's end and fills the corner, in the plane of the side
    wall: its outer edge meets the side wall's end and its lower edge meets the
    base (8 cut edges). All hinges close at 90 degrees, all ratios 1, drive the
    base-front hinge. While the walls rise, a flap and the side wall next to it
    cross each other's planes only where the flap lies short of the side wall's
    end (y < 30 mm), so they never collide.

tray-overfold.mech.json -- PROBLEMS, exit 1.
    The tray with one wrong gear: the base-front to base-back coupling has ratio 1.2
    instead of 1, so the back wall reaches 108 degrees at t = 1 and so do its two
    flaps (geared 1:1 to it). Once the back wall passes vertical (108 t = 90, t =
    5/6) it leans into the tray and its flaps' lower edges dip below the base: the
    back corner flaps (faces 7 and 8) collide with the base (face 0) from t = 5/6 to
    1. At t = 1 the back flaps have left the corners: their cut edges with the base
    and with the side walls are open.
"""

import argparse
import math
import sys
from fractions import Fraction
from pathlib import Path

import networkx as nx
import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from foldsim.io.mechanism_json import save  # noqa: E402
from foldsim.model import Coupling, build_mechanism  # noqa: E402

DEMOS = ("gift-box", "lantern", "tray", "tray-overfold")


def hinge_graph(faces, hinges):
    """Graph over hinge indices; an edge joins two hinges that share a face."""
    graph = nx.Graph()
    graph.add_nodes_from(range(len(hinges)))
    for f in range(len(faces)):
        on_face = [h for h, pair in enumerate(hinges) if f in pair]
        graph.add_edges_from((a, b) for i, a in enumerate(on_face) for b in on_face[i + 1:])
    return graph


def central_hinge(graph):
    """A hinge in the middle of the hinge graph: least eccentricity, then least index."""
    ecc = nx.eccentricity(graph)
    return min(graph.nodes, key=lambda h: (ecc[h], h))


def _teeth(ratio, base=24):
    """Tooth counts (zi, zj) with zi / zj == ratio exactly, zi a multiple of ``base``."""
    frac = Fraction(ratio).limit_denominator(12)
    if abs(float(frac) - ratio) > 1e-7 * abs(ratio):
        raise ValueError(f"ratio {ratio} has no small gear pair")
    scale = base // math.gcd(base, frac.numerator) if frac.numerator < base else 1
    return frac.numerator * scale, frac.denominator * scale


def gear_train(faces, hinges, closed_angles, drive, teeth=False):
    """Couplings on a breadth-first spanning tree of the hinge graph from the drive.

    ``theta[j] = closed[j] / closed[i] * theta[i]`` for each tree edge (i, j), so all
    hinges close together.
    """
    graph = hinge_graph(faces, hinges)
    couplings = []
    for i, j in nx.bfs_edges(graph, drive, sort_neighbors=sorted):
        ratio = float(closed_angles[j] / closed_angles[i])
        if teeth:
            zi, zj = _teeth(ratio)
            couplings.append(Coupling((i, j), zi / zj, (zi, zj)))
        else:
            couplings.append(Coupling((i, j), ratio))
    return couplings


def geared_closed(name, vertices, faces, hinges, teeth=False):
    """A closed-state mechanism with its gear train laid out as described above."""
    drive = central_hinge(hinge_graph(faces, hinges))
    bare = build_mechanism(vertices, faces, hinges, root=0, drive=drive, name=name, units="mm")
    couplings = gear_train(faces, hinges, bare.closed_angles, drive, teeth)
    return build_mechanism(vertices, faces, hinges, root=0, drive=drive, couplings=couplings,
                           name=name, units="mm")


def gift_box(length=120.0, depth=80.0, height=60.0):
    """Closed cuboid box: four walls on the bottom, the lid on the back (long) wall."""
    x, y, z = length, depth, height
    vertices = [[0, 0, 0], [x, 0, 0], [x, y, 0], [0, y, 0],
                [0, 0, z], [x, 0, z], [x, y, z], [0, y, z]]
    # Counter-clockwise seen from outside: bottom, front, right, back, left, lid.
    faces = [[0, 3, 2, 1], [0, 1, 5, 4], [1, 2, 6, 5], [3, 7, 6, 2], [0, 4, 7, 3], [4, 5, 6, 7]]
    hinges = [[0, 1], [0, 2], [0, 3], [0, 4], [3, 5]]
    return geared_closed("gift box 120 x 80 x 60", np.array(vertices, float), faces, hinges)


def lantern(side=40.0, height=90.0, n=6):
    """Closed right hexagonal prism; base-side, side-side and side-top hinges."""
    radius = side / (2.0 * math.sin(math.pi / n))  # a regular n-gon's circumradius
    # Rounded to a nanometre so the file reads cleanly (+ 0.0 turns -0.0 into 0.0).
    ring = [[round(radius * math.cos(2 * math.pi * k / n), 9) + 0.0,
             round(radius * math.sin(2 * math.pi * k / n), 9) + 0.0] for k in range(n)]
    vertices = [[px, py, 0.0] for px, py in ring] + [[px, py, height] for px, py in ring]
    base = list(range(n))[::-1]  # seen from below
    sides = [[k, (k + 1) % n, n + (k + 1) % n, n + k] for k in range(n)]
    top = list(range(n, 2 * n))
    faces = [base] + sides + [top]
    # Odd sides (faces 1, 3, 5) on the base, each even side on the side before it,
    # the top on side 1.
    hinges = ([[0, 1 + k] for k in range(0, n, 2)] + [[1 + k, 2 + k] for k in range(0, n, 2)]
              + [[1, n + 1]])
    return geared_closed("hexagonal lantern, side 40, height 90", np.array(vertices, float),
                         faces, hinges, teeth=True)


def _flat_model(polygons):
    """Vertices (z = 0) and faces from polygons given CCW seen from +z.

    Coincident corners become one vertex (hinged faces share their edge's vertices);
    each face is reversed so that it runs counter-clockwise seen from -z, the side
    that ends up outside.
    """
    index, vertices, faces = {}, [], []
    for poly in polygons:
        face = []
        for px, py in poly:
            key = (float(px), float(py))
            if key not in index:
                index[key] = len(vertices)
                vertices.append([key[0], key[1], 0.0])
            face.append(index[key])
        faces.append(face[::-1])
    return np.array(vertices, float), faces


def tray(overfold=None, length=240.0, width=160.0, wall=30.0, flap=30.0):
    """Flat tray: base, four walls, four corner flaps on the front and back walls.

    ``overfold`` replaces the ratio of the coupling that drives the back wall.
    """
    L, W, H, w = length, width, wall, flap
    polygons = [
        # 0 base: its left and right edges carry the side walls' hinge ends.
        [(0, 0), (L, 0), (L, w), (L, W - w), (L, W), (0, W), (0, W - w), (0, w)],
        [(0, -H), (L, -H), (L, 0), (0, 0)],              # 1 front wall
        [(L, w), (L + H, w), (L + H, W - w), (L, W - w)],  # 2 right wall
        [(0, W), (L, W), (L, W + H), (0, W + H)],        # 3 back wall
        [(-H, w), (0, w), (0, W - w), (-H, W - w)],      # 4 left wall
        [(L, -H), (L + w, -H), (L + w, 0), (L, 0)],      # 5 front-right flap
        [(-w, -H), (0, -H), (0, 0), (-w, 0)],            # 6 front-left flap
        [(L, W), (L + w, W), (L + w, W + H), (L, W + H)],  # 7 back-right flap
        [(-w, W), (0, W), (0, W + H), (-w, W + H)],      # 8 back-left flap
    ]
    vertices, faces = _flat_model(polygons)
    hinges = [[0, 1], [0, 2], [0, 3], [0, 4], [1, 5], [1, 6], [3, 7], [3, 8]]
    closed = np.radians(np.full(len(hinges), 90.0))
    drive = central_hinge(hinge_graph(faces, hinges))
    couplings = gear_train(faces, hinges, closed, drive)
    name = "serving tray 240 x 160, walls 30"
    if overfold is not None:
        back = hinges.index([0, 3])
        couplings = [Coupling(c.hinges, overfold) if c.hinges[1] == back else c for c in couplings]
        name += f", back wall geared {overfold:g}:1"
    return build_mechanism(vertices, faces, hinges, root=0, drive=drive, couplings=couplings,
                           state="flat", closed_angles=closed, name=name, units="mm")


def build_all():
    """The demo mechanisms by file stem."""
    return {"gift-box": gift_box(), "lantern": lantern(), "tray": tray(),
            "tray-overfold": tray(overfold=1.2)}


def main(argv=None):
    parser = argparse.ArgumentParser(description="Write the demo mechanisms.")
    parser.add_argument("--out", type=Path, default=ROOT / "assets",
                        help="directory to write the *.mech.json files into (default: assets/)")
    args = parser.parse_args(argv)
    args.out.mkdir(parents=True, exist_ok=True)
    for stem, mech in build_all().items():
        path = args.out / f"{stem}.mech.json"
        save(mech, path)
        print(path)
    return 0


if __name__ == "__main__":
    sys.exit(main())
