"""Which nets a study looks at: all of them up to symmetry, or a uniform sample of trees.

A net is a spanning tree of the face graph, kept as a bitmask over
`foldsim.nets.face_pairs` (bit ``e`` set when pair ``e`` is a hinge), the same
numbering as `foldsim.netcount`. Two trees are one net when a rotation or
reflection of the solid carries one onto the other; the canonical form of a tree is
the smallest bitmask in its orbit, which is also the representative that
`foldsim.netcount.nets_up_to_symmetry` keeps.

Samples come from Wilson's algorithm (D. B. Wilson, "Generating random spanning
trees more quickly than the cover time", STOC 1996): loop-erased random walks from
each face in turn until they hit the tree grown so far. Every spanning tree is
equally likely. Nets are then *not* equally likely: a net that a symmetry leaves
unchanged has fewer trees in its orbit.
"""

import numpy as np


def wilson_tree(neighbours, rng, root=0):
    """One uniformly random spanning tree, as (child, parent) edges.

    Parameters
    ----------
    neighbours : sequence of sequence of int
        Adjacency lists of a connected graph on nodes 0..n-1.
    rng : numpy.random.Generator
    root : int
        Where the tree starts; the distribution of the tree does not depend on it.

    Returns
    -------
    list of (int, int)
        n - 1 edges, one per node other than the root.

    Examples
    --------
    >>> edges = wilson_tree([[1, 2], [0, 2], [0, 1]], np.random.default_rng(0))
    >>> len(edges), sorted({u for e in edges for u in e})
    (2, [0, 1, 2])
    """
    n = len(neighbours)
    in_tree = np.zeros(n, bool)
    in_tree[root] = True
    step = np.full(n, -1)
    for start in range(n):
        u = start
        while not in_tree[u]:
            options = neighbours[u]
            step[u] = options[int(rng.integers(len(options)))]
            u = step[u]
        u = start
        while not in_tree[u]:
            in_tree[u] = True
            u = step[u]
    return [(int(u), int(step[u])) for u in range(n) if u != root]


def tree_mask(edges, pair_index):
    """Bitmask of a tree from its edges; ``pair_index`` maps a sorted face pair to its bit."""
    mask = 0
    for a, b in edges:
        mask |= 1 << pair_index[(min(a, b), max(a, b))]
    return mask


def canonical(mask, permutations):
    """The smallest image of a tree bitmask under edge permutations (identity included).

    Parameters
    ----------
    mask : int
    permutations : (G, E) int
        ``permutations[g, e]`` is the edge that symmetry ``g`` carries edge ``e`` to
        (`foldsim.symmetry.symmetry_group`'s ``edges``).

    Examples
    --------
    A triangle's three single edges, with a rotation among them: all one class.

    >>> perms = np.array([[0, 1, 2], [1, 2, 0], [2, 0, 1]])
    >>> canonical(0b100, perms), canonical(0b010, perms), canonical(0b001, perms)
    (1, 1, 1)
    """
    bits = [e for e in range(mask.bit_length()) if mask >> e & 1]
    best = mask
    for perm in np.asarray(permutations).tolist():
        image = 0
        for e in bits:
            image |= 1 << perm[e]
        best = min(best, image)
    return best


def sample_nets(graph, pairs, permutations, n, seed):
    """Draw ``n`` spanning trees uniformly and keep one tree per distinct net.

    Parameters
    ----------
    graph : networkx.Graph
        The face graph (`foldsim.nets.face_graph`).
    pairs : (E, 2) int
        `foldsim.nets.face_pairs` of that graph.
    permutations : (G, E) int
        The solid's symmetries acting on the pairs.
    n : int
        Trees to draw.
    seed : int

    Returns
    -------
    list of int
        Canonical bitmasks, in the order each net was first drawn; at most ``n``.
    """
    rng = np.random.default_rng(seed)
    neighbours = [sorted(graph.neighbors(f)) for f in range(graph.number_of_nodes())]
    index = {(int(a), int(b)): e for e, (a, b) in enumerate(np.asarray(pairs).tolist())}
    seen, out = set(), []
    for _ in range(n):
        mask = canonical(tree_mask(wilson_tree(neighbours, rng), index), permutations)
        if mask not in seen:
            seen.add(mask)
            out.append(mask)
    return out
