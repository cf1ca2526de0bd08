"""Counting and listing nets: spanning trees of the face graph, and their symmetry classes.

Trees are numbered over the edges of the face graph as `foldsim.nets.face_pairs`
orders them: a tree is a bitmask whose bit ``e`` is set when ``face_pairs[e]`` is a
hinge. Two nets are the same when a symmetry of the solid (a rotation or a
reflection, `foldsim.symmetry.symmetry_group`) carries one tree onto the other.

- The number of spanning trees comes from the matrix-tree theorem: any cofactor of
  the graph Laplacian, here computed exactly with Bareiss' fraction-free
  elimination on Python integers.
- The number of nets up to symmetry comes from Burnside's lemma: the mean, over the
  group, of the number of trees each element leaves unchanged. The identity leaves
  all of them; another element leaves exactly the trees that are unions of whole
  orbits of its edge permutation, which are few, so those are counted by a search
  over orbits.
- Listing works by a frontier search over the edges (each edge in or out, keeping
  only how the faces with both decided and undecided edges are already joined),
  which merges equal partial states; each tree is then kept as its orbit's
  representative when no symmetry maps it to a smaller bitmask.
"""

from collections import Counter, defaultdict
from dataclasses import dataclass

import networkx as nx
import numpy as np

from .errors import ModelError
from .limits import DEFAULT_LIMIT, DEFAULT_MAX_STATES  # noqa: F401  (part of this module's interface)
from .nets import _check_connected, face_graph, face_pairs, tree_diameter
from .symmetry import symmetry_group, symmetry_tolerances

_SMALL = 4096  # partial states with at most this many completions keep them as one array
_BATCH = 65536  # trees handed to the symmetry filter (and reported as progress) at a time


def _bareiss_determinant(matrix):
    """Exact determinant of a symmetric positive semi-definite integer matrix.

    Bareiss' fraction-free elimination: every intermediate entry is an integer and
    the k-th pivot is the k-th leading principal minor. For a positive semi-definite
    matrix a zero leading minor makes the whole matrix singular, so no row swaps
    are needed.

    Parameters
    ----------
    matrix : numpy.ndarray, shape (n, n), object
        Python ints; overwritten.

    Returns
    -------
    int
    """
    n = len(matrix)
    previous = 1
    for k in range(n - 1):
        pivot = matrix[k, k]
        if pivot == 0:
            return 0
        rest = matrix[k + 1:, k + 1:] * pivot - np.outer(matrix[k + 1:, k], matrix[k, k + 1:])
        matrix[k + 1:, k + 1:] = rest // previous  # exact: Bareiss' quotients are integers
        previous = pivot
    return int(matrix[n - 1, n - 1]) if n else 1


def number_of_spanning_trees(graph):
    """Exact number of spanning trees of a graph (the matrix-tree theorem).

    Parameters
    ----------
    graph : networkx.Graph or networkx.MultiGraph
        Self-loops are ignored; parallel edges of a multigraph count separately.

    Returns
    -------
    int
        0 for a disconnected graph, 1 for a single node.

    Examples
    --------
    Cayley's formula gives n**(n - 2) for the complete graph:

    >>> import networkx as nx
    >>> number_of_spanning_trees(nx.complete_graph(6))
    1296
    """
    index = {node: i for i, node in enumerate(graph.nodes)}
    n = len(index)
    if n == 0:
        raise ModelError("graph: has no nodes")
    laplacian = [[0] * n for _ in range(n)]
    for u, v in graph.edges():
        i, j = index[u], index[v]
        if i != j:
            laplacian[i][i] += 1
            laplacian[j][j] += 1
            laplacian[i][j] -= 1
            laplacian[j][i] -= 1
    minor = np.empty((n - 1, n - 1), dtype=object)
    minor[:, :] = [row[1:] for row in laplacian[1:]]
    return _bareiss_determinant(minor)


class _FrontierSearch:
    """Spanning trees made of whole edge groups, decided one group at a time.

    After deciding groups ``0..i-1`` only the *active* nodes matter: those an earlier
    group touched and a later one touches. A state is their partition into blocks
    already joined, as a tuple of block labels numbered by first appearance; nodes no
    group has touched yet are blocks of their own. A block none of whose nodes a
    later group touches is finished, a dead end unless it is the whole graph.

    Parameters
    ----------
    n_nodes : int
    pairs : (E, 2) int
        Edge endpoints, nodes 0..n_nodes-1.
    groups : list of list of int
        Edge indices of each group, in search order; every edge in at most one group.
    """

    def __init__(self, n_nodes, pairs, groups):
        self.groups = groups
        self.n_nodes = n_nodes
        nodes = [sorted({int(v) for e in group for v in pairs[e]}) for group in groups]
        later = [set() for _ in range(len(groups) + 1)]
        for i in reversed(range(len(groups))):
            later[i] = later[i + 1] | set(nodes[i])
        seen, active = set(), []
        self.ends, self.keep, self.fresh, self.unseen = [], [], [], []
        for i, group in enumerate(groups):
            new = [v for v in nodes[i] if v not in seen]
            seen.update(new)
            here = active + new  # the state's nodes, then this group's new ones
            pos = {v: k for k, v in enumerate(here)}
            active = [v for v in here if v in later[i + 1]]
            self.fresh.append(len(new))
            self.ends.append([(pos[int(pairs[e][0])], pos[int(pairs[e][1])]) for e in group])
            self.keep.append([pos[v] for v in active])
            self.unseen.append(n_nodes - len(seen))
        sizes = [len(g) for g in groups]
        self.remaining = np.cumsum(sizes[::-1])[::-1].tolist() + [0]
        self.start = () if len(later[0]) == n_nodes > 1 else None

    def step(self, i, state, include):
        """State after deciding group ``i`` (in or out), or None if no tree follows."""
        labels = list(state) + list(range(len(state), len(state) + self.fresh[i]))
        if include:
            for pu, pv in self.ends[i]:
                a, b = labels[pu], labels[pv]
                if a == b:
                    return None
                labels = [a if x == b else x for x in labels]
        kept = [labels[p] for p in self.keep[i]]
        finished = len(set(labels)) - len(set(kept))
        if finished and (kept or self.unseen[i] or finished > 1):
            return None
        number = {}
        out = tuple(number.setdefault(x, len(number)) for x in kept)
        if len(number) + self.unseen[i] - 1 > self.remaining[i + 1]:
            return None  # too few edges left to join the blocks
        return out

    def count(self, max_states=None):
        """Number of spanning trees made of whole groups (forward pass over states).

        Returns None once more than ``max_states`` states have been visited.
        """
        if self.start is None:
            return int(self.n_nodes == 1)
        level, visited = {self.start: 1}, 1
        for i in range(len(self.groups)):
            following = defaultdict(int)
            for state, ways in level.items():
                for include in (True, False):
                    nxt = self.step(i, state, include)
                    if nxt is not None:
                        following[nxt] += ways
            level = following
            visited += len(level)
            if max_states is not None and visited > max_states:
                return None
        return level.get((), 0)

    def batches(self, bits, batch=_BATCH):
        """Every tree as rows of bitmask words, a few thousand rows at a time.

        Parameters
        ----------
        bits : (G, W) uint64
            Bitmask words of each group.

        Yields
        ------
        (n, W) uint64
        """
        n_groups, words = bits.shape
        if self.start is None:
            if self.n_nodes == 1:
                yield np.zeros((1, words), np.uint64)
            return
        moves = [{} for _ in range(n_groups + 1)]
        moves[0][self.start] = None
        for i in range(n_groups):
            for state in moves[i]:
                pair = (self.step(i, state, True), self.step(i, state, False))
                moves[i][state] = pair
                for nxt in pair:
                    if nxt is not None:
                        moves[i + 1][nxt] = None
        counts = [{} for _ in range(n_groups + 1)]
        counts[n_groups] = {(): 1}
        small = [{} for _ in range(n_groups + 1)]
        small[n_groups] = {(): np.zeros((1, words), np.uint64)}
        for i in reversed(range(n_groups)):
            below, below_small, needed = counts[i + 1], small[i + 1], set()
            for state, (inc, exc) in moves[i].items():
                total = counts[i][state] = below.get(inc, 0) + below.get(exc, 0)
                if total > _SMALL:
                    needed.update((inc, exc))
                elif total:
                    parts = [below_small[inc] | bits[i]] if below.get(inc, 0) else []
                    parts += [below_small[exc]] if below.get(exc, 0) else []
                    small[i][state] = np.concatenate(parts) if len(parts) > 1 else parts[0]
            small[i + 1] = {s: a for s, a in below_small.items() if s in needed}
        stack = [(0, self.start, np.zeros(words, np.uint64))] if counts[0][self.start] else []
        pending, size = [], 0
        while stack:
            i, state, base = stack.pop()
            if counts[i][state] <= _SMALL:
                pending.append(small[i][state] | base)
                size += len(pending[-1])
                if size >= batch:
                    yield np.concatenate(pending)
                    pending, size = [], 0
                continue
            inc, exc = moves[i][state]
            if counts[i + 1].get(exc, 0):
                stack.append((i + 1, exc, base))
            if counts[i + 1].get(inc, 0):
                stack.append((i + 1, inc, base | bits[i]))
        if pending:
            yield np.concatenate(pending)


def _search_order(graph, pairs):
    """(E,) int: edges in an order that keeps the search frontier narrow.

    Nodes are ranked in Cuthill-McKee order (a breadth-first order that reduces
    bandwidth); an edge comes when its later endpoint does.
    """
    rank = {v: k for k, v in enumerate(nx.utils.cuthill_mckee_ordering(graph))}
    key = [(max(rank[a], rank[b]), min(rank[a], rank[b])) for a, b in pairs.tolist()]
    return np.array(sorted(range(len(pairs)), key=key.__getitem__), dtype=np.int64)


def _words(n_edges):
    """Number of 64-bit words in a tree bitmask over ``n_edges`` edges."""
    return max(1, -(-n_edges // 64))


def _group_bits(groups, n_edges):
    """(G, W) uint64 bitmask words of each group of edge indices."""
    bits = np.zeros((len(groups), _words(n_edges)), np.uint64)
    for g, group in enumerate(groups):
        for e in group:
            bits[g, e // 64] |= np.uint64(1) << np.uint64(e % 64)
    return bits


def _to_int(words):
    """A bitmask given as little-endian 64-bit words (W,) as one Python int."""
    return sum(int(w) << (64 * k) for k, w in enumerate(words.tolist()))


def _check_face_graph(graph):
    if sorted(graph.nodes) != list(range(graph.number_of_nodes())):
        raise ModelError("graph: nodes must be the integers 0..n-1")


def _tree_batches(graph):
    """Spanning trees of a face graph as (n, W) uint64 bitmask rows, in batches."""
    pairs = face_pairs(graph)
    groups = [[int(e)] for e in _search_order(graph, pairs)]
    search = _FrontierSearch(graph.number_of_nodes(), pairs, groups)
    return search.batches(_group_bits(groups, len(pairs)))


def enumerate_spanning_trees(graph, limit=DEFAULT_LIMIT):
    """Every spanning tree of a graph, once each, as a bitmask over its edges.

    Parameters
    ----------
    graph : networkx.Graph
        Nodes 0..n-1 (a face graph, see `foldsim.nets.face_graph`).
    limit : int or None, optional
        Refuse graphs with more spanning trees than this (counted first, exactly).

    Yields
    ------
    int
        Bit ``e`` set when edge ``e`` of `foldsim.nets.face_pairs` is in the tree.

    Raises
    ------
    ModelError
        If the graph has more than ``limit`` spanning trees, or other node labels.

    Examples
    --------
    A 4-cycle has 4 spanning trees, each leaving out one edge:

    >>> import networkx as nx
    >>> sorted(enumerate_spanning_trees(nx.cycle_graph(4)))
    [7, 11, 13, 14]
    """
    _check_face_graph(graph)
    total = number_of_spanning_trees(graph)
    if limit is not None and total > limit:
        raise ModelError(f"limit: the graph has {total} spanning trees, more than the limit of {limit}")
    for rows in _tree_batches(graph):
        if rows.shape[1] == 1:
            yield from rows[:, 0].tolist()
        else:
            yield from (_to_int(row) for row in rows)


def tree_pairs(tree, pairs):
    """Face pairs of a tree bitmask.

    Parameters
    ----------
    tree : int
        Bitmask over the rows of ``pairs``.
    pairs : (E, 2) int
        `foldsim.nets.face_pairs` of the face graph.

    Returns
    -------
    list of (int, int)
        The pairs whose bits are set, in row order.

    Examples
    --------
    >>> tree_pairs(0b101, [[0, 1], [0, 2], [1, 2]])
    [(0, 1), (1, 2)]
    """
    return [(int(a), int(b)) for e, (a, b) in enumerate(np.asarray(pairs).tolist()) if tree >> e & 1]


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


@dataclass(frozen=True, eq=False)
class NetCensus:
    """Counts of a polyhedron's nets and, when few enough, one tree per net.

    Attributes
    ----------
    faces : int
    pairs : numpy.ndarray, shape (E, 2), int64
        Face pairs of the face graph (`foldsim.nets.face_pairs`), the bits of a tree.
    spanning_trees : int
    symmetry_order : int
        Rotations and reflections of the solid.
    rotations : int
        How many of them are proper rotations.
    fixed : tuple of int or None
        Length ``symmetry_order``: trees each symmetry leaves unchanged (identity
        first); None where the count was given up (see `fixed_spanning_trees`).
    nets : int or None
        Distinct nets up to rotations and reflections: Burnside's lemma, or the
        listing when a fixed count was given up; None if neither was possible.
    nets_up_to_rotation : int or None
        Distinct nets when a mirror image counts as different (Burnside only).
    enumerated : bool
        Whether the trees were listed (False: more than the limit).
    representatives : tuple of int or None
        One tree bitmask per net, the smallest in its orbit, ordered by diameter
        then bitmask; None if not enumerated.
    diameters : numpy.ndarray, shape (nets,), int64, or None
        Longest hinge chain (in hinges) of each representative.
    """

    faces: int
    pairs: np.ndarray
    spanning_trees: int
    symmetry_order: int
    rotations: int
    fixed: tuple
    nets: int
    nets_up_to_rotation: int
    enumerated: bool
    representatives: tuple = None
    diameters: np.ndarray = None

    @property
    def histogram(self):
        """{diameter: number of distinct nets}, ascending; None if not enumerated."""
        if not self.enumerated:
            return None
        values, counts = np.unique(self.diameters, return_counts=True)
        return dict(zip(values.tolist(), counts.tolist()))


def _byte_tables(permutations, n_edges):
    """(G, B, 256, W) uint64: image words of every value of every input byte of a bitmask."""
    n_bytes, words = -(-n_edges // 8), _words(n_edges)
    tables = np.zeros((len(permutations), n_bytes, 256, words), np.uint64)
    value = np.arange(256)
    for g, permutation in enumerate(permutations):
        for e, target in enumerate(permutation.tolist()):
            on = ((value >> (e % 8)) & 1).astype(bool)
            tables[g, e // 8, on, target // 64] |= np.uint64(1) << np.uint64(target % 64)
    return tables


def _image(rows, table):
    """Bitmask rows (n, W) uint64 mapped by one element's byte table (B, 256, W)."""
    out = np.zeros_like(rows)
    for j in range(table.shape[0]):
        byte = (rows[:, j // 8] >> np.uint64(8 * (j % 8))) & np.uint64(255)
        out |= table[j][byte.astype(np.intp)]
    return out


def _less(a, b):
    """(n,) bool: bitmask rows a < b, both (n, W) uint64 (word W-1 most significant)."""
    less = np.zeros(len(a), bool)
    equal = np.ones(len(a), bool)
    for w in reversed(range(a.shape[1])):
        less |= equal & (a[:, w] < b[:, w])
        equal &= a[:, w] == b[:, w]
    return less


def nets_up_to_symmetry(poly, limit=DEFAULT_LIMIT, progress=None, max_states=DEFAULT_MAX_STATES,
                        symmetry_tol=None):
    """Count a polyhedron's nets and, if the trees are few enough, list one per net.

    Parameters
    ----------
    poly : Polyhedron or any object with ``vertices`` (V, 3) and ``faces``
    limit : int or None, optional
        List the trees only if there are at most this many (None: always).
    progress : callable, optional
        Called as ``progress(done, total)`` after each batch of trees is sorted out.
    max_states : int or None, optional
        Work limit per symmetry for Burnside's counts, see `fixed_spanning_trees`.
    symmetry_tol : float, optional
        Vertex-matching tolerance of the symmetry search, relative to the size;
        see `foldsim.symmetry.symmetry_tolerances`.

    Returns
    -------
    NetCensus
        Counts always (Burnside's lemma); representatives and their diameters only
        when listed (``enumerated``).

    Examples
    --------
    >>> from foldsim.solids import tetrahedron
    >>> census = nets_up_to_symmetry(tetrahedron())
    >>> census.spanning_trees, census.symmetry_order, census.nets, census.histogram
    (16, 24, 2, {2: 1, 3: 1})
    """
    graph = face_graph(poly.faces)
    _check_connected(graph)
    group = symmetry_group(poly, symmetry_tolerances(symmetry_tol))
    pairs = face_pairs(graph)
    fixed = fixed_spanning_trees(graph, group.edges, max_states)
    total = fixed[0]
    nets, chiral = _burnside(fixed, group, poly)
    census = {"faces": graph.number_of_nodes(), "pairs": pairs, "spanning_trees": total,
              "symmetry_order": group.order, "rotations": int(group.rotations.sum()), "fixed": tuple(fixed),
              "nets": nets, "nets_up_to_rotation": chiral}
    if limit is not None and total > limit:
        return NetCensus(enumerated=False, **census)
    tables = _byte_tables(group.edges[1:], len(pairs))
    found, done = [], 0
    for rows in _tree_batches(graph):
        keep = np.arange(len(rows))
        for table in tables:
            keep = keep[~_less(_image(rows[keep], table), rows[keep])]
        found.extend(rows[keep, 0].tolist() if rows.shape[1] == 1 else map(_to_int, rows[keep]))
        done += len(rows)
        if progress is not None:
            progress(done, total)
    if census["nets"] is None:
        census["nets"] = len(found)
    diameters = [tree_diameter(census["faces"], tree_pairs(tree, pairs)) for tree in found]
    order = sorted(range(len(found)), key=lambda k: (diameters[k], found[k]))
    return NetCensus(enumerated=True, representatives=tuple(found[k] for k in order),
                     diameters=np.array([diameters[k] for k in order], dtype=np.int64), **census)
