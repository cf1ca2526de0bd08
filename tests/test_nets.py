"""Tests of net counting, listing and symmetry detection, and of the `nets` command.

Reference values come from the literature listed in ../shared/REFERENCES.md (cited
beside each check). Where a test computes the reference side itself it does so
independently of foldsim: spanning trees by brute force over edge subsets with a
union-find written here, graph automorphisms with networkx's isomorphism matcher,
distances with networkx. The face adjacency used on the reference side comes from
`helpers.face_adjacency` (built from the face lists alone).
"""

import itertools
import json
from collections import Counter

import networkx as nx
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from foldsim.analysis.collision import flat_overlaps
from foldsim.cli import main
from foldsim.commands import nets as nets_command
from foldsim.errors import ModelError
from foldsim.io.mechanism_json import load
from foldsim.model import build_mechanism
from foldsim.netcount import (
    enumerate_spanning_trees, fixed_spanning_trees, nets_up_to_symmetry, number_of_nets,
    number_of_spanning_trees, tree_pairs,
)
from foldsim.nets import central_face, distances, face_graph, face_pairs, hinges_from, min_diameter_net, tree_diameter
from foldsim.solids import builtin, polyhedron_from_points
from foldsim.symmetry import symmetry_group

from helpers import face_adjacency, moved

# Listing all 5,184,000 trees of the two large solids takes seconds; it runs in
# the normal suite, marked so it can be deselected with -m "not slow".
SLOW = pytest.mark.slow


def square_prism(height):
    """Right prism on a unit square with the given height (a cube only for height 1)."""
    base = [(x, y) for x in (0.0, 1.0) for y in (0.0, 1.0)]
    return polyhedron_from_points([(x, y, z) for x, y in base for z in (0.0, height)], f"box 1x1x{height}")


def box(a, b, c):
    """Axis-aligned box with edges a, b, c."""
    return polyhedron_from_points(list(itertools.product((0.0, a), (0.0, b), (0.0, c))), f"box {a}x{b}x{c}")


# ---------------------------------------------------------------- independent reference side

def _root(link, v):
    while link[v] != v:
        v = link[v]
    return v


def brute_force_trees(graph):
    """Every spanning tree of a graph as a frozenset of sorted node pairs.

    Tries every subset of n - 1 edges and keeps the acyclic ones (a union-find).
    """
    nodes = list(graph.nodes)
    edges = sorted(tuple(sorted(e)) for e in graph.edges())
    trees = []
    for subset in itertools.combinations(edges, len(nodes) - 1):
        link = {v: v for v in nodes}
        for a, b in subset:
            ra, rb = _root(link, a), _root(link, b)
            if ra == rb:
                break
            link[ra] = rb
        else:
            trees.append(frozenset(subset))
    return trees


def area_preserving_automorphisms(poly):
    """Face permutations that keep adjacency and every face's area (networkx matcher).

    For the solids tested here (Platonic solids and right prisms) these are exactly
    the geometric symmetries (elementary; common practice).
    """
    graph = face_adjacency(poly)
    areas = []
    for face in poly.faces:
        p = np.asarray(poly.vertices)[face]
        area = 0.5 * np.linalg.norm(np.cross(p - p[0], np.roll(p, -1, axis=0) - p[0]).sum(axis=0))
        areas.append(round(float(area), 9))
    nx.set_node_attributes(graph, dict(enumerate(areas)), "area")
    matcher = nx.algorithms.isomorphism.GraphMatcher(
        graph, graph, node_match=lambda x, y: x["area"] == y["area"])
    return [tuple(m[f] for f in range(len(poly.faces))) for m in matcher.isomorphisms_iter()]


def orbit_diameters(poly):
    """Longest hinge chain of one tree per orbit, via brute force and networkx only."""
    graph = face_adjacency(poly)
    autos = area_preserving_automorphisms(poly)
    seen, diameters = set(), []
    for tree in brute_force_trees(graph):
        key = min(tuple(sorted(tuple(sorted((p[a], p[b]))) for a, b in tree)) for p in autos)
        if key not in seen:
            seen.add(key)
            diameters.append(nx.diameter(nx.Graph(list(tree))))
    return diameters


def absolute_center_bound(graph):
    """Twice the absolute radius of an unweighted graph: every node and edge midpoint tried.

    Hassin & Tamir, "On the minimum diameter spanning tree problem", IPL 1995 (memory).
    """
    d = dict(nx.all_pairs_shortest_path_length(graph))
    best = min(2 * max(d[v].values()) for v in graph)
    for a, b in graph.edges():
        best = min(best, 2 * max(min(d[a][v], d[b][v]) for v in graph) + 1)
    return best


# ---------------------------------------------------------------- spanning trees

TREES = [("tetrahedron", 16), ("cube", 384), ("octahedron", 384),
         ("dodecahedron", 5_184_000), ("icosahedron", 5_184_000)]


@pytest.mark.parametrize("spec, expected", TREES)
def test_spanning_trees_of_platonic_solids(spec, expected):
    poly = builtin(spec)
    # Matrix-tree counts as listed in REFERENCES.md ("Counting nets"); networkx cross-check.
    assert number_of_spanning_trees(face_graph(poly.faces)) == expected
    assert round(nx.number_of_spanning_trees(face_adjacency(poly))) == expected


@pytest.mark.parametrize("n", [1, 2, 3, 5, 8, 12])
def test_spanning_trees_of_complete_graphs(n):
    # Cayley's formula n**(n - 2) (common practice); exact beyond float precision for n = 12.
    assert number_of_spanning_trees(nx.complete_graph(n)) == n ** (n - 2)


def test_spanning_trees_of_disconnected_and_multigraphs():
    assert number_of_spanning_trees(nx.Graph([(0, 1), (2, 3)])) == 0
    isolated = nx.Graph()
    isolated.add_nodes_from([0, 1, 2, 3])  # node 1 alone: the first pivot of the minor is 0
    isolated.add_edges_from([(0, 2), (2, 3)])
    assert number_of_spanning_trees(isolated) == 0
    # Two nodes joined by three parallel edges: three trees (one edge each).
    assert number_of_spanning_trees(nx.MultiGraph([(0, 1), (0, 1), (0, 1)])) == 3
    with pytest.raises(ModelError, match="graph"):
        number_of_spanning_trees(nx.Graph())


random_graphs = st.builds(
    lambda n, p, seed: nx.gnp_random_graph(n, p, seed=seed),
    st.integers(2, 7), st.floats(0.3, 1.0), st.integers(0, 10_000))


@settings(derandomize=True, max_examples=50, deadline=None)
@given(random_graphs)
def test_count_and_listing_agree_with_brute_force(graph):
    reference = brute_force_trees(graph)
    assert number_of_spanning_trees(graph) == len(reference)
    if nx.is_connected(graph):
        assert number_of_spanning_trees(graph) == round(nx.number_of_spanning_trees(graph))
    pairs = face_pairs(graph)
    listed = [frozenset(tree_pairs(t, pairs)) for t in enumerate_spanning_trees(graph)]
    assert len(listed) == len(set(listed))
    assert set(listed) == set(reference)


@pytest.mark.parametrize("spec", ["tetrahedron", "cube", "octahedron", "prism:3", "prism:5", "prism:6"])
def test_listing_matches_brute_force_on_solids(spec):
    poly = builtin(spec)
    pairs = face_pairs(face_graph(poly.faces))
    listed = [frozenset(tree_pairs(t, pairs)) for t in enumerate_spanning_trees(face_graph(poly.faces))]
    reference = brute_force_trees(face_adjacency(poly))
    assert len(listed) == len(set(listed)) == len(reference)
    assert set(listed) == set(reference)


def test_listing_refuses_more_trees_than_the_limit():
    graph = face_graph(builtin("cube").faces)
    with pytest.raises(ModelError, match=r"^limit: .*384"):
        next(enumerate_spanning_trees(graph, limit=383))
    assert sum(1 for _ in enumerate_spanning_trees(graph, limit=384)) == 384


def test_listing_beyond_64_edges():
    # A 70-cycle: 70 trees, each leaving out one edge (bitmasks wider than one word).
    graph = nx.cycle_graph(70)
    trees = list(enumerate_spanning_trees(graph))
    full = (1 << 70) - 1
    assert sorted(trees) == sorted(full ^ (1 << e) for e in range(70))


# ---------------------------------------------------------------- symmetry groups

ORDERS = [("tetrahedron", 24), ("cube", 48), ("octahedron", 48), ("dodecahedron", 120), ("icosahedron", 120),
          ("prism:3", 12), ("prism:5", 20), ("prism:6", 24), ("prism:7", 28),
          ("antiprism:4", 16), ("antiprism:5", 20), ("antiprism:6", 24)]


@pytest.mark.parametrize("spec, order", ORDERS)
def test_symmetry_orders(spec, order):
    # Platonic orders 24/48/48/120/120: REFERENCES.md ("Counting nets"). Prisms and
    # antiprisms on an n-gon (n != 4, resp. n != 3): D_nh and D_nd, order 4n (common practice).
    group = symmetry_group(builtin(spec))
    assert group.order == order
    assert int(group.rotations.sum()) == order // 2


@pytest.mark.parametrize("spec", ["tetrahedron", "cube", "dodecahedron", "prism:5", "antiprism:4"])
def test_symmetries_map_the_solid_onto_itself(spec):
    poly = builtin(spec)
    group = symmetry_group(poly)
    x = np.asarray(poly.vertices)
    assert group.vertices[0].tolist() == list(range(len(x)))
    for m, vperm, fperm, eperm in zip(group.matrices, group.vertices, group.faces, group.edges):
        np.testing.assert_allclose(m @ m.T, np.eye(3), atol=1e-12)
        np.testing.assert_allclose((x - group.centre) @ m.T + group.centre, x[vperm], atol=1e-9)
        for f, face in enumerate(poly.faces):
            assert set(vperm[face].tolist()) == set(np.asarray(poly.faces[fperm[f]]).tolist())
        pairs = face_pairs(face_graph(poly.faces))
        mapped = np.sort(fperm[pairs], axis=1)
        np.testing.assert_array_equal(mapped, pairs[eperm])


@pytest.mark.parametrize("poly", [builtin("cube"), builtin("icosahedron"), builtin("prism:6"),
                                  square_prism(2.0), box(1.0, 2.0, 3.0)], ids=lambda p: p.name)
def test_symmetries_are_the_area_preserving_automorphisms(poly):
    expected = set(area_preserving_automorphisms(poly))
    found = {tuple(p) for p in symmetry_group(poly).faces.tolist()}
    assert found == expected


def test_less_symmetric_boxes():
    # A square prism that is not a cube: D_4h, order 16; a box with three different
    # edges: D_2h, order 8 (common practice).
    assert symmetry_group(square_prism(2.0)).order == 16
    assert symmetry_group(box(1.0, 2.0, 3.0)).order == 8


@settings(derandomize=True, max_examples=8, deadline=None)
@given(st.sampled_from(["cube", "prism:5", "tetrahedron"]), st.integers(0, 2**31 - 1))
def test_symmetry_and_counts_are_invariant_under_rigid_motion(spec, seed):
    poly = builtin(spec)
    shifted = moved(poly, seed, shift=(3.0, -1.0, 7.5))
    assert symmetry_group(shifted).order == symmetry_group(poly).order
    assert number_of_nets(shifted) == number_of_nets(poly)


def test_symmetry_survives_rounded_coordinates():
    # A rotated cube written with 6 decimals, as mesh files do.
    shifted = moved(builtin("cube", size=10.0), 5, shift=(1.0, 2.0, 3.0))
    shifted.vertices = np.round(shifted.vertices, 6)
    assert symmetry_group(shifted).order == 48


# ---------------------------------------------------------------- nets up to symmetry

NETS = [("tetrahedron", 2), ("cube", 11), ("octahedron", 11), ("dodecahedron", 43_380), ("icosahedron", 43_380)]
PRISM_NETS = [(3, 9), (5, 99), (6, 354)]


@pytest.mark.parametrize("spec, expected", NETS)
def test_nets_of_platonic_solids(spec, expected):
    # Buekenhout & Parker, Discrete Math. 186 (1998) 69-94.
    assert number_of_nets(builtin(spec)) == expected


@pytest.mark.parametrize("n, expected", PRISM_NETS)
def test_nets_of_prisms(n, expected):
    # OEIS A103535, nets of the right n-gonal prism.
    assert number_of_nets(builtin(f"prism:{n}")) == expected


def test_nets_of_a_square_prism_that_is_not_a_cube():
    # OEIS A103535, n = 4 (a square prism with height != side): 29.
    assert number_of_nets(square_prism(2.0)) == 29


def test_icosahedron_fixed_trees():
    poly = builtin("icosahedron")
    fixed = fixed_spanning_trees(face_graph(poly.faces), symmetry_group(poly).edges)
    # REFERENCES.md: the non-identity symmetries together fix 21,600 trees; the identity all 5,184,000.
    assert fixed[0] == 5_184_000
    assert sum(fixed[1:]) == 21_600


SMALL = ["tetrahedron", "cube", "octahedron", "prism:3", "prism:5", "prism:6"]


@pytest.mark.parametrize("poly", [builtin(s) for s in SMALL] + [square_prism(2.0)], ids=lambda p: p.name)
def test_listing_matches_orbits_found_by_brute_force(poly):
    census = nets_up_to_symmetry(poly)
    reference = orbit_diameters(poly)
    assert census.enumerated
    assert len(census.representatives) == census.nets == len(reference)
    assert census.histogram == dict(sorted(Counter(reference).items()))


@pytest.mark.parametrize("poly, expected", [(builtin("tetrahedron"), 2), (builtin("cube"), 11),
                                            (builtin("octahedron"), 11), (builtin("prism:3"), 9),
                                            (builtin("prism:5"), 99), (builtin("prism:6"), 354),
                                            (square_prism(2.0), 29)], ids=lambda p: getattr(p, "name", p))
def test_listing_agrees_with_published_counts(poly, expected):
    # Buekenhout & Parker 1998 (Platonic); OEIS A103535 (prisms).
    census = nets_up_to_symmetry(poly)
    assert census.nets == len(census.representatives) == expected


def test_census_above_the_limit_keeps_the_counts():
    census = nets_up_to_symmetry(builtin("dodecahedron"), limit=1000)
    assert not census.enumerated
    assert census.representatives is None and census.histogram is None
    assert (census.spanning_trees, census.nets) == (5_184_000, 43_380)  # matrix-tree; Buekenhout & Parker


def test_counts_give_up_beyond_the_work_limit():
    icosahedron = builtin("icosahedron")
    with pytest.raises(ModelError, match="^max_states: .*icosahedron"):
        number_of_nets(icosahedron, max_states=10)
    census = nets_up_to_symmetry(icosahedron, limit=1000, max_states=10)
    assert census.nets is None and census.nets_up_to_rotation is None
    assert census.spanning_trees == 5_184_000  # matrix-tree, REFERENCES.md
    # Listed trees still give the count of distinct nets (Buekenhout & Parker: 11).
    census = nets_up_to_symmetry(builtin("cube"), max_states=1)
    assert census.nets == len(census.representatives) == 11
    assert census.nets_up_to_rotation is None


def test_progress_reports_every_tree():
    calls = []
    census = nets_up_to_symmetry(builtin("prism:6"), progress=lambda done, total: calls.append((done, total)))
    assert calls[-1] == (8100, 8100)  # matrix-tree count of the hexagonal prism's face graph (networkx below)
    assert round(nx.number_of_spanning_trees(face_adjacency(builtin("prism:6")))) == 8100
    assert census.nets == 354


# ---------------------------------------------------------------- shortest hinge chains

@pytest.mark.parametrize("spec, expected", [("tetrahedron", 2), ("cube", 3), ("octahedron", 5)])
def test_min_diameter_by_brute_force(spec, expected):
    # REFERENCES.md, "Shortest hinge chains": minimum net diameters 2, 3, 5.
    poly = builtin(spec)
    reference = min(nx.diameter(nx.Graph(list(t))) for t in brute_force_trees(face_adjacency(poly)))
    assert reference == expected
    assert nets_up_to_symmetry(poly).diameters.min() == expected
    assert min_diameter_net(face_graph(poly.faces)).diameter == expected


@pytest.mark.parametrize("spec", ["prism:5", "prism:6"])
def test_min_diameter_of_prisms_by_brute_force(spec):
    poly = builtin(spec)
    reference = min(nx.diameter(nx.Graph(list(t))) for t in brute_force_trees(face_adjacency(poly)))
    assert nets_up_to_symmetry(poly).diameters.min() == reference
    assert min_diameter_net(face_graph(poly.faces)).lower_bound == reference


@pytest.mark.parametrize("spec, expected", [("dodecahedron", 5), ("icosahedron", 9)])
def test_min_diameter_bound_on_large_solids(spec, expected):
    poly = builtin(spec)
    choice = min_diameter_net(face_graph(poly.faces))
    # REFERENCES.md: minimum net diameters 5 and 9; Hassin & Tamir's bound computed with networkx.
    assert absolute_center_bound(face_adjacency(poly)) == expected
    assert choice.lower_bound == expected
    assert choice.diameter == expected


@pytest.mark.parametrize("spec, graph, profile", [
    ("icosahedron", nx.dodecahedral_graph(), [1, 3, 6, 6, 3, 1]),
    ("dodecahedron", nx.icosahedral_graph(), [1, 5, 5, 1]),
])
def test_face_graph_distances(spec, graph, profile):
    # REFERENCES.md: dodecahedral graph diameter 5, distances 1, 3, 6, 6, 3, 1;
    # icosahedral graph diameter 3, distances 1, 5, 5, 1 (checked against networkx's graphs).
    ours = face_graph(builtin(spec).faces)
    assert nx.is_isomorphic(ours, graph)
    assert nx.diameter(graph) == len(profile) - 1
    reference = Counter(nx.single_source_shortest_path_length(graph, 0).values())
    assert [reference[k] for k in range(len(profile))] == profile
    d = distances(ours)
    for f in range(ours.number_of_nodes()):
        assert np.bincount(d[f].astype(int)).tolist() == profile


@SLOW
@pytest.mark.parametrize("spec, expected_min", [("dodecahedron", 5), ("icosahedron", 9)])
def test_full_listing_of_large_solids(spec, expected_min):
    poly = builtin(spec)
    graph = face_graph(poly.faces)
    trees = set(enumerate_spanning_trees(graph, limit=None))
    assert len(trees) == 5_184_000  # matrix-tree count, REFERENCES.md
    census = nets_up_to_symmetry(poly, limit=None)
    assert len(census.representatives) == census.nets == 43_380  # Buekenhout & Parker 1998
    assert sum(census.histogram.values()) == 43_380
    assert census.diameters.min() == expected_min  # REFERENCES.md, shortest hinge chains


# ---------------------------------------------------------------- flat layouts of Platonic nets

def net_mechanism(poly, hinges):
    root = central_face(len(poly.faces), hinges)
    return build_mechanism(poly.vertices, poly.faces, hinges_from(root, hinges), root=root)


@pytest.mark.parametrize("spec, count", [("tetrahedron", 2), ("cube", 11), ("octahedron", 11)])
def test_no_platonic_net_overlaps(spec, count):
    # Horiyama & Shoji, "Edge unfoldings of Platonic solids never overlap", CCCG 2011.
    poly = builtin(spec)
    census = nets_up_to_symmetry(poly)
    assert len(census.representatives) == count  # Buekenhout & Parker 1998
    for tree in census.representatives:
        mech = net_mechanism(poly, tree_pairs(tree, census.pairs))
        assert flat_overlaps(mech).tolist() == []


@pytest.mark.parametrize("spec", ["dodecahedron", "icosahedron"])
def test_random_nets_of_large_platonic_solids_do_not_overlap(spec):
    # Horiyama & Shoji, CCCG 2011; the trees are drawn by networkx, not by foldsim.
    poly = builtin(spec)
    graph = face_adjacency(poly)
    for seed in range(6):
        tree = nx.random_spanning_tree(graph, seed=seed)
        mech = net_mechanism(poly, [tuple(sorted(e)) for e in tree.edges()])
        assert flat_overlaps(mech).tolist() == []


@pytest.mark.parametrize("seed", range(5))
def test_tree_helpers_against_networkx(seed):
    tree = nx.random_labeled_tree(30, seed=seed)
    hinges = list(tree.edges())
    assert tree_diameter(30, hinges) == nx.diameter(tree)
    eccentricity = nx.eccentricity(tree)
    assert central_face(30, hinges) == min(tree, key=lambda f: (eccentricity[f], f))


def test_central_face_and_orientation():
    # A path 0-1-2-3-4 plus a leaf 5 on face 3: eccentricities 4,3,2,2,3,3 -> face 2 (lowest).
    hinges = [(0, 1), (1, 2), (2, 3), (3, 4), (3, 5)]
    assert central_face(6, hinges) == 2
    oriented = hinges_from(2, hinges)
    assert sorted(tuple(sorted(h)) for h in oriented) == sorted(hinges)
    reached = {2}
    for parent, child in oriented:
        assert parent in reached and child not in reached
        reached.add(child)


# ---------------------------------------------------------------- the `nets` command

def run_cli(capsys, *argv):
    code = main(["nets", *argv])
    out, err = capsys.readouterr()
    return code, out, err


def test_cli_json_keys_and_values(capsys):
    code, out, err = run_cli(capsys, "cube", "--json")
    assert code == 0, err
    report = json.loads(out)
    for key in ("faces", "spanning_trees", "symmetry_order", "nets", "min_diameter_hinges",
                "diameter_histogram", "lower_bound_hinges", "enumerated", "note"):
        assert key in report
    # matrix-tree 384, order 48, 11 nets (Buekenhout & Parker), minimum diameter 3 (REFERENCES.md).
    assert (report["faces"], report["spanning_trees"], report["symmetry_order"], report["nets"]) == (6, 384, 48, 11)
    assert report["min_diameter_hinges"] == report["lower_bound_hinges"] == 3
    assert report["enumerated"] is True and report["note"] is None
    assert sum(report["diameter_histogram"].values()) == 11
    assert min(int(d) for d in report["diameter_histogram"]) == 3


def test_cli_too_large_to_list(capsys):
    code, out, err = run_cli(capsys, "icosahedron", "--json", "--limit", "1000")
    assert code == 0, err
    report = json.loads(out)
    assert report["enumerated"] is False and report["diameter_histogram"] is None
    assert "--limit" in report["note"]
    # Buekenhout & Parker 1998; REFERENCES.md minimum diameter 9.
    assert (report["nets"], report["min_diameter_hinges"], report["lower_bound_hinges"]) == (43_380, 9, 9)


def test_cli_text_output(capsys):
    code, out, err = run_cli(capsys, "prism:5")
    assert code == 0, err
    assert "99" in out  # OEIS A103535
    assert "distinct nets by longest hinge chain" in out
    assert err == ""  # no progress when stderr is not a terminal and --progress is not given


def test_cli_reads_mesh_files(capsys, tmp_path):
    pytest.importorskip("foldsim.io.mesh")
    trimesh = pytest.importorskip("trimesh")
    from scipy.spatial.transform import Rotation

    mesh = trimesh.creation.box(extents=(10.0, 10.0, 10.0))
    pose = np.eye(4)
    pose[:3, :3] = Rotation.random(random_state=3).as_matrix()
    pose[:3, 3] = (1.5, 2.0, 3.0)
    mesh.apply_transform(pose)
    path = tmp_path / "turned-cube.stl"  # binary STL: float32 coordinates
    mesh.export(path)
    code, out, err = run_cli(capsys, str(path), "--json")
    assert code == 0, err
    report = json.loads(out)
    # Buekenhout & Parker 1998: 11 cube nets; full octahedral group, order 48.
    assert (report["faces"], report["symmetry_order"], report["nets"]) == (6, 48, 11)
    code, out, err = run_cli(capsys, str(tmp_path / "missing.stl"))
    assert code == 2 and "missing.stl" in err


def test_cli_best_nets_written(capsys, tmp_path):
    code, out, err = run_cli(capsys, "cube", "--json", "--best", "3", "--out", str(tmp_path))
    assert code == 0, err
    report = json.loads(out)
    best = report["best"]
    assert [net["rank"] for net in best] == [1, 2, 3]
    keys = [(net["diameter_hinges"], net["part_types"]) for net in best]
    assert keys == sorted(keys)
    assert best[0]["diameter_hinges"] == 3  # REFERENCES.md, shortest hinge chain of a cube net
    graph = face_adjacency(builtin("cube"))
    all_pairs = {tuple(sorted(e)) for e in graph.edges()}
    for net in best:
        mech = load(tmp_path / f"net-{net['rank']}.mech.json")
        hinges = {tuple(sorted(h)) for h in mech.hinge_faces.tolist()}
        assert nx.is_tree(nx.Graph(list(hinges)))
        assert len(hinges) == 5 and mech.state == "closed" and mech.couplings == ()
        assert {tuple(c) for c in net["cuts"]} == all_pairs - hinges
        assert net["flat_overlap"] is False  # Horiyama & Shoji, CCCG 2011
        assert nx.eccentricity(nx.Graph(list(hinges)), mech.root) == (net["diameter_hinges"] + 1) // 2


def test_cli_best_without_parts_module(capsys, monkeypatch):
    real = nets_command.find_spec
    monkeypatch.setattr(nets_command, "find_spec", lambda name: None if name == "foldsim.parts" else real(name))
    code, out, err = run_cli(capsys, "cube", "--best", "2")
    assert code == 0, err
    assert "foldsim.parts is not available" in out
    assert "1 shape(s)" in out  # every face of a cube is the same square


def test_panel_shapes_fallback_counts():
    prism = builtin("prism:3")
    assert nets_command._panel_shapes(prism) == 2  # a triangle and a square (hand count)
    cube = builtin("cube")
    graph = face_adjacency(cube)
    centre = 0
    arms = sorted(graph.neighbors(centre))
    (far,) = set(graph) - set(arms) - {centre}
    cross = [(centre, a) for a in arms] + [(arms[0], far)]
    # Hand count for the cross-shaped net: the centre (4 hinged edges), the arm that
    # carries the far face (2 opposite hinged edges), and the other arms and the far
    # face (1 hinged edge each): 3 panels.
    assert nets_command._panel_shapes(cube, cross) == 3


@pytest.mark.parametrize("argv, field", [(["no-such-solid"], "unknown built-in solid"),
                                         (["cube", "--limit", "-1"], "--limit"),
                                         (["cube", "--best", "0"], "--best")])
def test_cli_bad_input(capsys, argv, field):
    code, out, err = run_cli(capsys, *argv)
    assert code == 2
    assert err.startswith("foldsim: ") and field in err and len(err.strip().splitlines()) == 1
    assert out == ""


def test_cli_progress_and_interrupt(capsys, monkeypatch):
    seen = []

    def interrupt(self, text):
        seen.append(self.done)
        raise KeyboardInterrupt

    monkeypatch.setattr(nets_command._Progress, "show", interrupt)
    code, out, err = run_cli(capsys, "dodecahedron", "--progress")
    assert code == 130
    assert seen and 0 < seen[0] < 5_184_000
    assert f"interrupted after {seen[0]} trees" in err
    assert out == ""


def test_cli_progress_lines(capsys):
    code, _, err = run_cli(capsys, "prism:5", "--progress")
    assert code == 0
    assert "listing trees: 1,805 / 1,805 (100%)" in err  # 1,805 = matrix-tree count (networkx below)
    assert round(nx.number_of_spanning_trees(face_adjacency(builtin("prism:5")))) == 1805
