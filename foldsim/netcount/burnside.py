"""Nets up to symmetry by Burnside's lemma: trees each symmetry leaves unchanged."""

from collections import Counter

import numpy as np

from ..errors import ModelError
from ..limits import DEFAULT_MAX_STATES
from ..nets import face_graph, face_pairs
from ..symmetry import symmetry_group
from .enumeration import _check_face_graph, _FrontierSearch, _search_order
from .matrix_tree import number_of_spanning_trees



def _edge_orbits(permutation):
    """Cycles of an edge permutation (E,), each a sorted list, ordered by smallest edge."""
    seen, orbits = set(), []
    for start in range(len(permutation)):
        if start not in seen:
            orbit, e = [], start
            while e not in seen:
                seen.add(e)
                orbit.append(e)
                e = int(permutation[e])
            orbits.append(sorted(orbit))
    return orbits


def _greedy_order(groups, pairs, rank):
    """Groups of edges reordered so that few nodes are touched but unfinished at a time.

    Each step takes the group that adds the fewest such nodes (new nodes minus the
    nodes it finishes), the earliest-ranked edge breaking ties.

    Parameters
    ----------
    groups : list of list of int
    pairs : (E, 2) int
    rank : (E,) int
        Tie-break position of each edge.
    """
    nodes = [Counter(int(v) for e in group for v in pairs[e]) for group in groups]
    uses = Counter()
    for count in nodes:
        uses.update(count)
    first = [min(rank[e] for e in group) for group in groups]
    touched, left, out = set(), set(range(len(groups))), []

    def growth(g):
        opened = sum(1 for v in nodes[g] if v not in touched)
        finished = sum(1 for v, k in nodes[g].items() if uses[v] == k)
        return opened - finished, first[g]

    while left:
        g = min(left, key=growth)
        left.remove(g)
        out.append(groups[g])
        touched.update(nodes[g])
        uses.subtract(nodes[g])
    return out


def _conjugacy_classes(permutations):
    """(G,) int: the first element conjugate to each one by an element of the list.

    ``h g h^-1`` maps edge e to ``h[g[h^-1[e]]]``; conjugates absent from the list
    are ignored, so any list of automorphisms works, a whole group merges most.
    """
    inverse = np.argsort(permutations, axis=1)
    index = {row.tobytes(): k for k, row in enumerate(permutations)}
    first = np.full(len(permutations), -1)
    for g, permutation in enumerate(permutations):
        if first[g] < 0:
            conjugates = np.take_along_axis(permutations, permutation[inverse], axis=1)
            for row in conjugates:
                k = index.get(row.tobytes())
                if k is not None and first[k] < 0:
                    first[k] = g
            first[g] = g
    return first


def fixed_spanning_trees(graph, permutations, max_states=DEFAULT_MAX_STATES):
    """Number of spanning trees that each edge permutation maps onto itself.

    Parameters
    ----------
    graph : networkx.Graph
        Face graph, nodes 0..F-1.
    permutations : (G, E) int
        Edge permutations over `foldsim.nets.face_pairs` (e.g. ``SymmetryGroup.edges``),
        each induced by an automorphism of the face graph.
    max_states : int or None, optional
        Give up on an element whose search visits more partial states than this
        (None: never). Few-orbit elements of solids up to a few dozen faces need
        thousands; symmetries of large fine meshes can need astronomically many.

    Returns
    -------
    list of int or None
        Length G. The identity counts every tree (matrix-tree theorem); any other
        element counts the trees that are unions of whole orbits of its edges, or
        is None if its search was given up; after one is given up the other
        non-identity elements are None too (Burnside's sum is out of reach anyway).
        Conjugate elements fix equally many trees and are counted once, as are the
        generators of one cyclic subgroup (they have the same orbits).

    Examples
    --------
    The 4-cycle's reflection through two opposite nodes swaps its edges in two pairs;
    no union of whole pairs is a spanning tree:

    >>> import networkx as nx
    >>> fixed_spanning_trees(nx.cycle_graph(4), [[0, 1, 2, 3], [1, 0, 3, 2]])
    [4, 0]
    """
    _check_face_graph(graph)
    pairs = face_pairs(graph)
    permutations = np.asarray(permutations, dtype=np.int64).reshape(-1, len(pairs))
    rank = np.argsort(_search_order(graph, pairs))  # position of each edge in the listing's order
    first = _conjugacy_classes(permutations)
    cache, out = {}, []
    for g, permutation in enumerate(permutations):
        if first[g] != g:
            out.append(out[first[g]])
            continue
        orbits = _edge_orbits(permutation)
        key = tuple(map(tuple, orbits))
        if key not in cache:
            if len(orbits) == len(pairs):
                cache[key] = number_of_spanning_trees(graph)
            elif None in cache.values():
                cache[key] = None
            else:
                groups = _greedy_order(orbits, pairs, rank)
                cache[key] = _FrontierSearch(graph.number_of_nodes(), pairs, groups).count(max_states)
        out.append(cache[key])
    return out


def _burnside(fixed, group, poly):
    """Orbit counts (all symmetries, rotations only) from fixed-tree counts (G,).

    (None, None) if any count is missing.
    """
    if None in fixed:
        return None, None
    fixed = np.array(fixed, dtype=object)
    rotations = group.rotations
    counts = []
    for total, order in ((fixed.sum(), group.order), (fixed[rotations].sum(), int(rotations.sum()))):
        if total % order:
            raise ModelError(f"vertices: the symmetries found for {getattr(poly, 'name', 'the solid')!r} "
                             "do not form a group; are its vertex positions precise?")
        counts.append(int(total // order))
    return counts


def number_of_nets(poly, rotations_only=False, max_states=DEFAULT_MAX_STATES):
    """Number of distinct nets of a polyhedron (Burnside's lemma).

    Parameters
    ----------
    poly : Polyhedron or any object with ``vertices`` (V, 3) and ``faces``
    rotations_only : bool, optional
        Count a net and its mirror image as different (only rotations identify).
    max_states : int or None, optional
        Work limit per symmetry, see `fixed_spanning_trees`.

    Returns
    -------
    int
        Spanning trees of the face graph up to the solid's symmetries.

    Raises
    ------
    ModelError
        If a symmetry's fixed trees need more than ``max_states`` partial states.

    Examples
    --------
    >>> from foldsim.solids import cube
    >>> number_of_nets(cube())
    11
    """
    group = symmetry_group(poly)
    fixed = fixed_spanning_trees(face_graph(poly.faces), group.edges, max_states)
    if None in fixed:
        raise ModelError(f"max_states: counting the trees a symmetry of {getattr(poly, 'name', 'the solid')!r} "
                         f"leaves unchanged needs more than {max_states:,} partial states")
    return _burnside(fixed, group, poly)[1 if rotations_only else 0]
