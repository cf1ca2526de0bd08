"""The independent reference side of the net tests, shared by test_nets and test_netcount.

Spanning trees by brute force over edge subsets with a union-find written here,
graph automorphisms with networkx's isomorphism matcher, distances with networkx.
"""

import itertools

import networkx as nx
import numpy as np

from foldsim.solids import polyhedron_from_points

from helpers import face_adjacency


def square_prism(height):
    """Right prism on a unit square with the given height (a cube only for height 1)."""
    base = [(x, y) for x in (0.0, 1.0) for y in (0.0, 1.0)]
    return polyhedron_from_points([(x, y, z) for x, y in base for z in (0.0, height)], f"box 1x1x{height}")


def box(a, b, c):
    """Axis-aligned box with edges a, b, c."""
    return polyhedron_from_points(list(itertools.product((0.0, a), (0.0, b), (0.0, c))), f"box {a}x{b}x{c}")


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
