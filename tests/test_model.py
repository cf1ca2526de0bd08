"""The mechanism model: closing angles, cut edges and the flat layout.

Closing angles are checked against the dihedral angles of the solids (fold =
180° − dihedral); counts against Euler's formula; the flat layout against the input
faces' own shapes and the root face's plane. The reference side is computed here
with numpy and networkx, never with foldsim.
"""

import json

import networkx as nx
import numpy as np
import pytest

import foldsim
from foldsim import solids
from foldsim.kinematics import face_poses

from helpers import (
    bfs_hinges, built_in_solids, face_adjacency, flat_document, mechanism_from_solid,
    pairwise_distances, plane_of,
)

SOLIDS = built_in_solids()


def folds_deg(mech):
    return np.degrees(mech.closed_angles)


def size_of(poly):
    return float(np.linalg.norm(np.ptp(poly.vertices, axis=0)))


def newell(points):
    """Area vector (3,) of a polygon (k, 3), written out here independently."""
    q = np.roll(points, -1, axis=0)
    return 0.5 * np.cross(points, q).sum(axis=0)


# ---------------------------------------------------------------- closing angles

PLATONIC = [
    # solid, Schläfli {p, q}, dihedral by its closed form, dihedral as tabulated (degrees)
    ("tetrahedron", 3, 3, np.arccos(1 / 3), 70.528779),
    ("cube", 4, 3, np.pi / 2, 90.0),
    ("octahedron", 3, 4, np.arccos(-1 / 3), 109.471221),
    ("dodecahedron", 5, 3, np.arccos(-1 / np.sqrt(5)), 116.565051),
    ("icosahedron", 3, 5, np.arccos(-np.sqrt(5) / 3), 138.189685),
]


@pytest.mark.parametrize("name, p, q, closed_form, table_deg", PLATONIC, ids=[r[0] for r in PLATONIC])
def test_platonic_closing_angles(name, p, q, closed_form, table_deg):
    mech = mechanism_from_solid(SOLIDS[name](), couplings="none")
    assert mech.n_hinges == len(mech.faces) - 1  # a spanning tree (hand check)
    folds = folds_deg(mech)
    # Coxeter, Regular Polytopes, Table I (memory); ../shared/REFERENCES.md, closed forms
    np.testing.assert_allclose(folds, 180.0 - np.degrees(closed_form), rtol=0, atol=1e-9)
    # the same table's decimals, given to 6 places
    np.testing.assert_allclose(folds, 180.0 - table_deg, rtol=0, atol=1e-6)
    # sin(θ/2) = cos(π/q) / sin(π/p) for {p, q} (Coxeter, Regular Polytopes, memory)
    general = 2 * np.degrees(np.arcsin(np.cos(np.pi / q) / np.sin(np.pi / p)))
    np.testing.assert_allclose(folds, 180.0 - general, rtol=0, atol=1e-9)


def test_icosahedron_closes_at_about_42_degrees():
    mech = mechanism_from_solid(solids.icosahedron(), couplings="none")
    # about 42° (common practice, no source)
    np.testing.assert_allclose(folds_deg(mech), 42.0, rtol=0, atol=0.5)


def split_by_face_sizes(mech):
    """Closing angles (deg) keyed by the sorted vertex counts of the two hinged faces."""
    groups = {}
    for (a, b), fold in zip(mech.hinge_faces.tolist(), folds_deg(mech)):
        key = tuple(sorted((len(mech.faces[a]), len(mech.faces[b]))))
        groups.setdefault(key, []).append(fold)
    return {k: np.array(v) for k, v in groups.items()}


@pytest.mark.parametrize("n", [3, 5, 6])
def test_prism_closing_angles(n):
    poly = solids.prism(n)
    side = next(f for f, face in enumerate(poly.faces) if len(face) == 4)
    # Rooted at a side face, the BFS tree holds side-side and base-side hinges.
    groups = split_by_face_sizes(mechanism_from_solid(poly, root=side, couplings="none"))
    assert sorted(groups) == sorted([(4, 4), tuple(sorted((4, n)))])
    # n-gonal right prism: side-side dihedral (n-2)·180°/n, base-side 90°
    # (elementary geometry; ../shared/REFERENCES.md)
    np.testing.assert_allclose(groups[(4, 4)], 180.0 - (n - 2) * 180.0 / n, rtol=0, atol=1e-9)
    np.testing.assert_allclose(groups[tuple(sorted((4, n)))], 90.0, rtol=0, atol=1e-9)


def test_truncated_tetrahedron_closing_angles():
    groups = split_by_face_sizes(mechanism_from_solid(solids.truncated_tetrahedron(), couplings="none"))
    assert sorted(groups) == [(3, 6), (6, 6)]
    # ../shared/REFERENCES.md table: tri-hex 109.4712°, hex-hex 70.5288° (4 places)
    np.testing.assert_allclose(groups[(3, 6)], 180.0 - 109.4712, rtol=0, atol=1e-4)
    np.testing.assert_allclose(groups[(6, 6)], 180.0 - 70.5288, rtol=0, atol=1e-4)


def test_cuboctahedron_closing_angles():
    folds = folds_deg(mechanism_from_solid(solids.cuboctahedron(), couplings="none"))
    # ../shared/REFERENCES.md table: 125.264390° = arccos(-1/√3)
    np.testing.assert_allclose(folds, 180.0 - np.degrees(np.arccos(-1 / np.sqrt(3))), rtol=0, atol=1e-9)
    np.testing.assert_allclose(folds, 180.0 - 125.264390, rtol=0, atol=1e-6)


def test_closing_angles_do_not_depend_on_the_net():
    """Every spanning tree sees the same dihedral at a given edge (hand check)."""
    poly = solids.cube()
    folds = [folds_deg(mechanism_from_solid(poly, root=r, couplings="none")) for r in range(6)]
    np.testing.assert_allclose(np.concatenate(folds), 90.0, rtol=0, atol=1e-9)


# ---------------------------------------------------------------- cut edges

@pytest.mark.parametrize("name", list(SOLIDS))
def test_cut_edge_count_is_edges_minus_hinges(name):
    poly = SOLIDS[name]()
    mech = mechanism_from_solid(poly, couplings="none")
    n_vertices, n_faces = len(np.unique(np.concatenate(poly.faces))), len(poly.faces)
    n_edges = n_vertices + n_faces - 2  # Euler, V - E + F = 2
    assert len(mech.cut_faces) == n_edges - mech.n_hinges
    # Which pairs: face adjacencies (networkx, from the face lists) minus hinges.
    adjacency = face_adjacency(poly)
    assert adjacency.number_of_edges() == n_edges  # Euler again, independent count
    hinged = {frozenset(h) for h in mech.hinge_faces.tolist()}
    expected = {frozenset(e) for e in adjacency.edges} - hinged
    assert {frozenset(c) for c in mech.cut_faces.tolist()} == expected


@pytest.mark.parametrize("name", ["cube", "dodecahedron", "truncated-tetrahedron"])
def test_cut_points_are_the_shared_edge_in_each_face(name):
    """Each side of a cut edge is its face's copy of the shared edge, endpoints matched."""
    poly = SOLIDS[name]()
    mech = mechanism_from_solid(poly, couplings="none")
    adjacency = face_adjacency(poly)
    for (a, b), points in zip(mech.cut_faces.tolist(), mech.cut_points):
        named = []
        for side, f in enumerate((a, b)):
            # which corner of face f each endpoint is (nearest flat corner, at distance 0)
            dist = np.linalg.norm(points[side][:, None] - mech.flat_faces[f][None], axis=-1)
            np.testing.assert_allclose(dist.min(axis=1), 0.0, rtol=0, atol=1e-12)
            named.append([int(poly.faces[f][j]) for j in dist.argmin(axis=1)])
        # both sides list the same two closed vertices, in the same order (hand check)
        assert named[0] == named[1]
        assert set(named[0]) == set(adjacency.edges[a, b]["runs"][a])


# ---------------------------------------------------------------- flat layout

@pytest.mark.parametrize("name", list(SOLIDS))
def test_flat_layout_lies_in_the_root_plane_and_keeps_face_shapes(name):
    poly = SOLIDS[name]()
    root = len(poly.faces) // 2
    mech = mechanism_from_solid(poly, root=root, couplings="none")
    size = size_of(poly)
    normal, centre = plane_of(poly.vertices[poly.faces[root]])
    outward = newell(poly.vertices[poly.faces[root]])
    for f, face in enumerate(poly.faces):
        flat = mech.flat_faces[f]
        # in the root face's plane (hand check: the root does not move)
        np.testing.assert_allclose((flat - centre) @ normal, 0.0, rtol=0, atol=1e-9 * size)
        # congruent to the closed face: same pairwise vertex distances
        np.testing.assert_allclose(pairwise_distances(flat), pairwise_distances(poly.vertices[face]),
                                   rtol=0, atol=1e-9 * size)
        # seen from the root's outside, every face is still counter-clockwise (a net
        # lies flat with its outside up: common practice)
        assert newell(flat) @ outward > 0
    np.testing.assert_allclose(mech.flat_faces[root], poly.vertices[poly.faces[root]], rtol=0, atol=1e-12)


@pytest.mark.parametrize("name", ["cube", "icosahedron", "prism:5"])
def test_flat_layout_keeps_hinge_edges_joined(name):
    poly = SOLIDS[name]()
    mech = mechanism_from_solid(poly, couplings="none")
    for a, b in mech.hinge_faces.tolist():
        shared = sorted(set(poly.faces[a].tolist()) & set(poly.faces[b].tolist()))
        assert len(shared) == 2
        pa = mech.flat_faces[a][[list(poly.faces[a]).index(v) for v in shared]]
        pb = mech.flat_faces[b][[list(poly.faces[b]).index(v) for v in shared]]
        np.testing.assert_allclose(pa, pb, rtol=0, atol=1e-9 * size_of(poly))


def test_bfs_tree_is_a_spanning_tree():
    """The helper's own hinge tree, checked with networkx (reference library)."""
    for name, make in SOLIDS.items():
        poly = make()
        tree = nx.Graph(bfs_hinges(poly))
        assert nx.is_tree(tree) and tree.number_of_nodes() == len(poly.faces), name


# ---------------------------------------------------------------- flat-state round trip

@pytest.mark.parametrize("name", list(SOLIDS))
def test_flat_file_round_trip_closes_to_the_same_shape(name):
    poly = SOLIDS[name]()
    closed = mechanism_from_solid(poly, couplings="chain")
    flat = foldsim.loads(json.dumps(flat_document(closed)))
    assert flat.state == "flat"
    poses = face_poses(flat, flat.closed_angles[None])[0]
    for f, face in enumerate(poly.faces):
        folded = flat.flat_faces[f] @ poses[f, :3, :3].T + poses[f, :3, 3]
        # back at the input's closed position (the input is the reference)
        np.testing.assert_allclose(folded, poly.vertices[face], rtol=0, atol=1e-9 * size_of(poly))
    # the same cut edges are found by matching free edges (Euler: E - H = V - 1)
    assert len(flat.cut_faces) == len(closed.cut_faces) == len(np.unique(np.concatenate(poly.faces))) - 1
    assert {frozenset(c) for c in flat.cut_faces.tolist()} == {frozenset(c) for c in closed.cut_faces.tolist()}


def test_flat_document_shares_only_hinge_corners():
    """The flat sheet of the cube's BFS net has 14 corners (hand count: 6·4 − 2·5)."""
    doc = flat_document(mechanism_from_solid(solids.cube(), couplings="none"))
    assert len(doc["vertices"]) == 6 * 4 - 2 * 5
