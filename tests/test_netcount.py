"""Tests of spanning-tree counts, listing and nets up to symmetry (foldsim.netcount).

Reference values come from the literature listed in ../shared/REFERENCES.md (cited
beside each check). The reference side computed here is independent of foldsim
(tests/net_reference.py): spanning trees by brute force over edge subsets with a
union-find, graph automorphisms with networkx's isomorphism matcher.
"""

from collections import Counter

import networkx as nx
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from foldsim.errors import ModelError
from foldsim.netcount import (
    enumerate_spanning_trees, fixed_spanning_trees, nets_up_to_symmetry, number_of_nets,
    number_of_spanning_trees, tree_pairs,
)
from foldsim.nets import face_graph, face_pairs
from foldsim.solids import builtin
from foldsim.symmetry import symmetry_group

from helpers import face_adjacency
from net_reference import brute_force_trees, orbit_diameters, square_prism


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
