"""Tests of symmetry detection, shortest hinge chains, and of the `nets` command.

Counting and listing themselves are tested in test_netcount.py.

Reference values come from the literature listed in ../shared/REFERENCES.md (cited
beside each check). Where a test computes the reference side itself it does so
independently of foldsim: spanning trees by brute force over edge subsets with a
union-find written here, graph automorphisms with networkx's isomorphism matcher,
distances with networkx. The face adjacency used on the reference side comes from
`helpers.face_adjacency` (built from the face lists alone).
"""

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
from foldsim.io.mechanism_json import load
from foldsim.model import build_mechanism
from foldsim.netcount import enumerate_spanning_trees, nets_up_to_symmetry, number_of_nets, tree_pairs
from foldsim.nets import central_face, distances, face_graph, face_pairs, hinges_from, min_diameter_net, tree_diameter
from foldsim.solids import builtin
from foldsim.symmetry import symmetry_group

from helpers import face_adjacency, moved
from net_reference import area_preserving_automorphisms, box, brute_force_trees, square_prism

# Listing all 5,184,000 trees of the two large solids takes seconds; it runs in
# the normal suite, marked so it can be deselected with -m "not slow".
SLOW = pytest.mark.slow


# ---------------------------------------------------------------- independent reference side

def absolute_center_bound(graph):
    """Twice the absolute radius of an unweighted graph: every node and edge midpoint tried.

    Hassin & Tamir, "On the minimum diameter spanning tree problem", IPL 1995 (memory).
    """
    d = dict(nx.all_pairs_shortest_path_length(graph))
    best = min(2 * max(d[v].values()) for v in graph)
    for a, b in graph.edges():
        best = min(best, 2 * max(min(d[a][v], d[b][v]) for v in graph) + 1)
    return best


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


def test_cheap_part_counts_agree_with_built_mechanisms():
    # The cheap ranking must give the part types of foldsim.parts on every listed net;
    # the reference side builds each net's mechanism (common practice: two routes agree).
    from foldsim.netcount.ranking import NetScorer
    from foldsim.parts import part_types

    for spec in ("cube", "octahedron", "prism:5"):
        poly = builtin(spec)
        census = nets_up_to_symmetry(poly)
        scorer = NetScorer(poly)
        for tree in census.representatives:
            hinges = tree_pairs(tree, census.pairs)
            root = central_face(census.faces, hinges)
            mech = build_mechanism(poly.vertices, poly.faces, hinges_from(root, hinges), root=root)
            assert scorer.part_count(hinges) == len(part_types(mech))


def test_cli_best_builds_only_the_printed_nets(capsys, monkeypatch):
    built = []
    real = nets_command._part_counter

    def counting(poly, mechanism):
        cheap, full, what = real(poly, lambda h: built.append(h) or mechanism(h))
        return cheap, full, what

    monkeypatch.setattr(nets_command, "_part_counter", counting)
    code, out, err = run_cli(capsys, "prism:5", "--best", "3", "--json")
    assert code == 0, err
    report = json.loads(out)
    assert len(report["best"]) == 3
    assert len(built) == 3  # 99 nets (OEIS A103535), only the 3 shown are built
    for net in report["best"]:
        hinges = [tuple(sorted(h)) for h in net["hinges"]]
        assert net["part_types"] == len(part_types_of(builtin("prism:5"), hinges))


def part_types_of(poly, hinges):
    from foldsim.parts import part_types

    root = central_face(len(poly.faces), hinges)
    return part_types(build_mechanism(poly.vertices, poly.faces, hinges_from(root, hinges), root=root))


@pytest.mark.parametrize("argv, faces", [(["geodesic:4"], "5,120"), (["prism:150", "--max-faces", "100"], "152"),
                                         (["geodesic:2", "--max-faces", "100"], "320")])
def test_cli_refuses_too_many_faces_at_once(capsys, argv, faces):
    # Face counts: prism n + 2, geodesic:K 20 * 4**K (Euler's formula; common practice).
    code, out, err = run_cli(capsys, *argv)
    assert code == 2
    assert err.startswith("foldsim: --max-faces: ") and f"{faces} faces" in err
    assert len(err.strip().splitlines()) == 1 and out == ""
