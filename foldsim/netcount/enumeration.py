"""Every spanning tree of a face graph, by a frontier search over its edges.

Each edge is decided in or out in turn; a partial state keeps only how the faces
with both decided and undecided edges are already joined, so equal partial states
merge. The same search, run over groups of edges (the orbits of a symmetry),
counts the trees a symmetry leaves unchanged (`foldsim.netcount.burnside`).
"""

from collections import defaultdict

import networkx as nx
import numpy as np

from ..errors import ModelError
from ..limits import DEFAULT_LIMIT  # noqa: F401  (part of this module's interface)
from ..nets import face_pairs
from .matrix_tree import number_of_spanning_trees

_SMALL = 4096  # partial states with at most this many completions keep them as one array
_BATCH = 65536  # trees handed to the symmetry filter (and reported as progress) at a time


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
