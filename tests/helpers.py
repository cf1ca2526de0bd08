"""Builders of small valid mechanism documents shared by the tests.

Each builder returns a fresh plain dict in the ``foldsim.mechanism/1`` schema, so a
test can break one field and write it with `write_doc`.
"""

import copy
import json

_CUBE = {
    "schema": "foldsim.mechanism/1",
    "name": "unit cube",
    "units": "mm",
    "state": "closed",
    "vertices": [
        [0.0, 0.0, 0.0], [1.0, 0.0, 0.0], [1.0, 1.0, 0.0], [0.0, 1.0, 0.0],
        [0.0, 0.0, 1.0], [1.0, 0.0, 1.0], [1.0, 1.0, 1.0], [0.0, 1.0, 1.0],
    ],
    # Counter-clockwise seen from outside: bottom, front, right, back, left, top.
    "faces": [
        [0, 3, 2, 1], [0, 1, 5, 4], [1, 2, 6, 5], [3, 7, 6, 2], [0, 4, 7, 3], [4, 5, 6, 7],
    ],
    "root": 0,
    # A cross-shaped net: four sides on the bottom, the top on the back.
    "hinges": [
        {"faces": [0, 1]}, {"faces": [0, 2]}, {"faces": [0, 3]}, {"faces": [0, 4]},
        {"faces": [3, 5]},
    ],
    "couplings": [],
    "drive": 0,
}

_STRIP = {
    "schema": "foldsim.mechanism/1",
    "name": "three-panel strip",
    "state": "flat",
    # Three unit squares in a row in the plane z = 0, seen from +z (the outside).
    "vertices": [
        [0.0, 0.0, 0.0], [1.0, 0.0, 0.0], [2.0, 0.0, 0.0], [3.0, 0.0, 0.0],
        [0.0, 1.0, 0.0], [1.0, 1.0, 0.0], [2.0, 1.0, 0.0], [3.0, 1.0, 0.0],
    ],
    "faces": [[0, 1, 5, 4], [1, 2, 6, 5], [2, 3, 7, 6]],
    "hinges": [
        {"faces": [0, 1], "closed_angle_deg": 90.0},
        {"faces": [1, 2], "closed_angle_deg": 90.0},
    ],
}


def cube_document():
    """A closed-state unit cube: 8 vertices, 6 faces, 5 hinges in a tree, root 0.

    Faces are bottom, front, right, back, left, top; hinges join the bottom to
    the four sides and the back to the top, so every closing angle is +90 degrees
    and the 7 remaining shared edges are cut edges.
    """
    return copy.deepcopy(_CUBE)


def strip_document():
    """A flat-state strip of three unit squares that folds into a U (2 hinges at 90°)."""
    return copy.deepcopy(_STRIP)


def write_doc(tmp_path, doc, name="model.mech.json"):
    """Write a document as JSON into tmp_path and return the file's path."""
    path = tmp_path / name
    path.write_text(json.dumps(doc), encoding="utf-8")
    return path


# ---------------------------------------------------------------- mechanisms from solids
# Builders for the kinematics tests. The hinge tree and the adjacency come from
# networkx here, not from the engine; the engine is only asked for closing angles
# when gear ratios have to be set, never for a value a test compares against.

import networkx as nx
import numpy as np
from scipy.spatial.transform import Rotation

from foldsim.model import Coupling, build_mechanism


class Shape:
    """A bare polyhedron: ``vertices`` (V, 3) float and ``faces`` tuple of (k,) int."""

    def __init__(self, vertices, faces, name=""):
        self.vertices = np.asarray(vertices, dtype=float)
        self.faces = tuple(np.asarray(f, dtype=np.int64) for f in faces)
        self.name = name


def moved(poly, seed, shift=(0.0, 0.0, 0.0)):
    """The polyhedron under a rigid motion: a seeded random rotation, then ``shift``."""
    rotation = Rotation.random(random_state=seed)
    vertices = np.array(poly.vertices, dtype=float)  # a writable copy for scipy
    return Shape(rotation.apply(vertices) + np.asarray(shift, float), poly.faces,
                 getattr(poly, "name", ""))


def face_adjacency(poly):
    """Graph over faces; edge (a, b) carries ``edge``: the shared vertex pair as it runs in a.

    Built from the face lists alone: two faces are adjacent when one lists (u, v)
    consecutively and the other lists (v, u).
    """
    graph = nx.Graph()
    graph.add_nodes_from(range(len(poly.faces)))
    owner = {}
    for f, face in enumerate(poly.faces):
        for k in range(len(face)):
            owner[(int(face[k]), int(face[(k + 1) % len(face)]))] = f
    for (u, v), f in owner.items():
        g = owner.get((v, u))
        if g is not None and not graph.has_edge(f, g):
            graph.add_edge(f, g)
            graph.edges[f, g]["runs"] = {f: (u, v), g: (v, u)}
    return graph


def shared_edge(graph, a, b):
    """Vertex pair (u, v) shared by faces a and b, in the direction it runs in face a."""
    return graph.edges[a, b]["runs"][a]


def bfs_hinges(poly, root=0):
    """Breadth-first spanning tree of the face adjacency, as (parent, child) pairs."""
    return [(int(a), int(b)) for a, b in nx.bfs_edges(face_adjacency(poly), root)]


def chain_couplings(hinges, closed_angles, root=0):
    """Couplings that tie every hinge to a hinge sharing a face with it.

    Hinge k (parent p, child c) is coupled to the hinge that brought p into the tree,
    or to hinge 0 when p is the root; ratio ``closed[k] / closed[i]``, so the gearing
    reaches every closing angle at once.
    """
    entry = {child: k for k, (_, child) in enumerate(hinges)}
    out = []
    for k, (parent, _) in enumerate(hinges):
        if k == 0:
            continue
        i = 0 if parent == root else entry[parent]
        out.append(Coupling((i, k), float(closed_angles[k] / closed_angles[i])))
    return out


def mechanism_from_solid(poly, root=0, couplings="chain", hinges=None):
    """A closed-state mechanism on a solid, with a BFS hinge tree from ``root``.

    Parameters
    ----------
    poly : object with ``vertices`` (V, 3) and ``faces``
    root : int
    couplings : {"chain", "none"}
        "chain": gear every hinge to a neighbour with the ratio of their closing
        angles (consistent, one degree of freedom); "none": the ideal schedule.
    hinges : list of (a, b), optional
        Use this hinge tree instead of the BFS one.
    """
    hinges = bfs_hinges(poly, root) if hinges is None else hinges
    mech = build_mechanism(poly.vertices, poly.faces, hinges, root=root, name=getattr(poly, "name", ""))
    if couplings == "none":
        return mech
    if couplings != "chain":
        raise ValueError(f"couplings must be 'chain' or 'none', not {couplings!r}")
    return build_mechanism(poly.vertices, poly.faces, hinges, root=root,
                           couplings=chain_couplings(hinges, mech.closed_angles, root),
                           name=getattr(poly, "name", ""))


def flat_document(mech):
    """A flat-state ``foldsim.mechanism/1`` document of a closed mechanism's net.

    Vertices are the engine's flat face positions; two face corners become one
    vertex exactly when a hinge joins them (union over the hinges' shared
    endpoints), so cut edges are left open in the flat sheet.
    """
    corners = {}  # (face, closed vertex id) -> class id
    link = []

    def find(x):
        while link[x] != x:
            link[x] = link[link[x]]
            x = link[x]
        return x

    for f, face in enumerate(mech.faces):
        for v in face:
            corners[(f, int(v))] = len(link)
            link.append(len(link))
    for a, b in mech.hinge_faces.tolist():
        for v in set(mech.faces[a].tolist()) & set(mech.faces[b].tolist()):
            link[find(corners[(a, v)])] = find(corners[(b, v)])
    index, vertices, faces = {}, [], []
    for f, face in enumerate(mech.faces):
        row = []
        for k, v in enumerate(face):
            c = find(corners[(f, int(v))])
            if c not in index:
                index[c] = len(vertices)
                vertices.append([float(x) for x in mech.flat_faces[f][k]])
            row.append(index[c])
        faces.append(row)
    return {
        "schema": "foldsim.mechanism/1",
        "name": f"{mech.name} (flat)",
        "state": "flat",
        "vertices": vertices,
        "faces": faces,
        "root": int(mech.root),
        "drive": int(mech.drive),
        "hinges": [{"faces": [int(a), int(b)], "closed_angle_deg": float(np.degrees(angle))}
                   for (a, b), angle in zip(mech.hinge_faces.tolist(), mech.closed_angles)],
        "couplings": [{"hinges": list(c.hinges), "ratio": c.ratio} for c in mech.couplings],
    }


def pairwise_distances(points):
    """(k, k) matrix of distances between the rows of a (k, 3) array."""
    points = np.asarray(points, dtype=float)
    return np.linalg.norm(points[:, None, :] - points[None, :, :], axis=-1)


def plane_of(points):
    """Unit normal (3,) and a point (3,) of the best-fit plane of (k, 3) points (SVD)."""
    points = np.asarray(points, dtype=float)
    centre = points.mean(axis=0)
    return np.linalg.svd(points - centre)[2][-1], centre


def built_in_solids():
    """Name -> constructor of the solids the kinematics tests run over."""
    from foldsim import solids

    return {
        "tetrahedron": solids.tetrahedron, "cube": solids.cube, "octahedron": solids.octahedron,
        "dodecahedron": solids.dodecahedron, "icosahedron": solids.icosahedron,
        "prism:3": lambda: solids.prism(3), "prism:5": lambda: solids.prism(5),
        "prism:6": lambda: solids.prism(6), "antiprism:4": lambda: solids.antiprism(4),
        "truncated-tetrahedron": solids.truncated_tetrahedron,
        "cuboctahedron": solids.cuboctahedron, "geodesic:1": lambda: solids.geodesic(1),
    }


def turn_subtrees(start, faces, hinges, root, angles):
    """Face vertices after turning every hinge by an angle, one hinge at a time.

    Walking out from the root, each hinge (parent, child) turns the child and
    everything beyond it about the hinge's current line, right-handed about the
    shared edge as it runs in the parent face (a positive angle turns the child
    toward its back), using scipy's `Rotation.from_rotvec`.

    Parameters
    ----------
    start : sequence of (k, 3) float
        Each face's vertices before turning, in the face's own vertex order.
    faces : sequence of sequences of int
        Vertex ids of each face (used to find shared edges).
    hinges : sequence of (a, b)
        Hinge face pairs; ``angles[k]`` belongs to ``hinges[k]``.
    root : int
    angles : (H,) float
        Radians.

    Returns
    -------
    dict
        Face index -> (k, 3) float, the turned vertices.
    """
    graph = nx.Graph()
    graph.add_nodes_from(range(len(faces)))
    for k, (a, b) in enumerate(hinges):
        graph.add_edge(int(a), int(b), hinge=k)
    tree = nx.bfs_tree(graph, root)
    now = {f: np.array(p, dtype=float) for f, p in enumerate(start)}
    for parent, child in nx.bfs_edges(graph, root):
        ring = [int(v) for v in faces[parent]]
        other = {int(v) for v in faces[child]}
        k = next(i for i in range(len(ring)) if ring[i] in other and ring[(i + 1) % len(ring)] in other)
        a, b = now[parent][k], now[parent][(k + 1) % len(ring)]
        turn = Rotation.from_rotvec(angles[graph.edges[parent, child]["hinge"]] * (b - a) / np.linalg.norm(b - a))
        for f in {child} | nx.descendants(tree, child):
            now[f] = turn.apply(now[f] - a) + a
    return now


def fcl_object(fcl, triangles):
    """A python-fcl collision object holding a triangle soup (n, 3, 3), posed already."""
    tri = np.asarray(triangles, float)
    model = fcl.BVHModel()
    model.beginModel(3 * len(tri), len(tri))
    model.addSubModel(tri.reshape(-1, 3), np.arange(3 * len(tri)).reshape(-1, 3))
    model.endModel()
    return fcl.CollisionObject(model, fcl.Transform())
