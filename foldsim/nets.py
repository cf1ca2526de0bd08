"""Nets: spanning trees of the face graph, and the ones with the shortest hinge chains.

The face graph has a node per face and an edge per pair of faces that share an edge
of the shell; a net is a spanning tree of it (its edges are the hinges). The
longest hinge chain of a net is the tree's diameter. A shortest-path tree rooted at
an absolute 1-center of the graph (which may lie at the midpoint of an edge) has
the smallest possible diameter, twice the absolute radius (Hassin & Tamir, "On the
minimum diameter spanning tree problem", Information Processing Letters, 1995). For
an unweighted graph it is enough to try every node and every edge midpoint.
"""

from dataclasses import dataclass

import networkx as nx
import numpy as np
from scipy.sparse import csr_matrix
from scipy.sparse.csgraph import shortest_path

from .errors import ModelError


def face_graph(faces):
    """Face-adjacency graph of a polygon mesh.

    Parameters
    ----------
    faces : sequence of (k,) int
        Vertex indices of each face.

    Returns
    -------
    networkx.Graph
        Nodes 0..F-1; edge (a, b) carries ``edge``, the shared vertex pair (u, v).

    Examples
    --------
    >>> g = face_graph([[0, 1, 2], [0, 2, 3], [0, 3, 1], [1, 3, 2]])
    >>> g.number_of_nodes(), g.number_of_edges()
    (4, 6)
    """
    graph = nx.Graph()
    graph.add_nodes_from(range(len(faces)))
    owner = {}
    for f, face in enumerate(faces):
        n = len(face)
        for k in range(n):
            u, v = int(face[k]), int(face[(k + 1) % n])
            key = (min(u, v), max(u, v))
            if key in owner and owner[key] != f:
                graph.add_edge(owner[key], f, edge=key)
            else:
                owner[key] = f
    return graph


def face_pairs(graph):
    """The face graph's edges as sorted face pairs, in sorted order.

    Row ``e`` is "edge e" of the face graph wherever edges are numbered: in tree
    bitmasks (bit ``e`` set: the pair is a hinge) and in symmetry permutations.

    Parameters
    ----------
    graph : networkx.Graph
        Nodes 0..F-1.

    Returns
    -------
    numpy.ndarray, shape (E, 2), int64
        ``pairs[e] = (a, b)`` with a < b, rows sorted.

    Examples
    --------
    >>> face_pairs(face_graph([[0, 1, 2], [0, 2, 3], [0, 3, 1], [1, 3, 2]])).tolist()
    [[0, 1], [0, 2], [0, 3], [1, 2], [1, 3], [2, 3]]
    """
    pairs = sorted((min(a, b), max(a, b)) for a, b in graph.edges())
    return np.array(pairs, dtype=np.int64).reshape(-1, 2)


def distances(graph):
    """(F, F) float hop distances between faces (inf where unconnected)."""
    n = graph.number_of_nodes()
    edges = np.array(list(graph.edges()), dtype=np.int64).reshape(-1, 2)
    adj = csr_matrix((np.ones(len(edges)), (edges[:, 0], edges[:, 1])), shape=(n, n))
    return shortest_path(adj, directed=False, unweighted=True)


@dataclass(frozen=True)
class NetChoice:
    """A spanning tree of the face graph chosen for short hinge chains.

    Attributes
    ----------
    hinges : list of (int, int)
        Tree edges as face pairs (parent first, from the root).
    root : int
        Root face (an end of the central edge when the center is an edge).
    center : tuple
        ``("face", f)`` or ``("edge", a, b)``: the absolute 1-center.
    diameter : int
        Longest hinge chain, in hinges (faces along it: diameter + 1).
    lower_bound : int
        No spanning tree has a smaller diameter (twice the absolute radius).
    """

    hinges: list
    root: int
    center: tuple
    diameter: int
    lower_bound: int


def _tree_adjacency(n_nodes, hinges):
    """Neighbour lists of a forest on nodes 0..n_nodes-1."""
    adjacency = [[] for _ in range(n_nodes)]
    for a, b in hinges:
        adjacency[a].append(b)
        adjacency[b].append(a)
    return adjacency


def _depths(adjacency, source):
    """Hop distances from ``source`` to the nodes of its tree, in breadth-first order."""
    depth = {source: 0}
    queue = [source]
    for f in queue:
        for g in adjacency[f]:
            if g not in depth:
                depth[g] = depth[f] + 1
                queue.append(g)
    return depth


def tree_diameter(n_nodes, hinges):
    """Diameter in edges of a tree given as an edge list.

    Examples
    --------
    >>> tree_diameter(4, [(0, 1), (1, 2), (2, 3)])
    3
    """
    adjacency = _tree_adjacency(n_nodes, hinges)
    depth = _depths(adjacency, 0)
    far = max(depth.items(), key=lambda kv: (kv[1], -kv[0]))[0]
    return max(_depths(adjacency, far).values())


def central_face(n_faces, hinges):
    """The face of a tree whose farthest face is nearest: least eccentricity, lowest index.

    Parameters
    ----------
    n_faces : int
    hinges : sequence of (int, int)
        Tree edges spanning faces 0..n_faces-1.

    Returns
    -------
    int

    Examples
    --------
    >>> central_face(5, [(0, 1), (1, 2), (2, 3), (3, 4)])
    2
    """
    adjacency = _tree_adjacency(n_faces, hinges)
    far = max(_depths(adjacency, 0).items(), key=lambda kv: (kv[1], -kv[0]))[0]
    end = _depths(adjacency, far)
    other = max(end.items(), key=lambda kv: (kv[1], -kv[0]))[0]
    back = _depths(adjacency, other)
    return min(range(n_faces), key=lambda f: (max(end[f], back[f]), f))


def hinges_from(root, hinges):
    """Tree edges as (parent, child) pairs in breadth-first order from a root face.

    Neighbours are visited in increasing order.

    Examples
    --------
    >>> hinges_from(2, [(0, 1), (1, 2), (2, 3)])
    [(2, 1), (2, 3), (1, 0)]
    """
    adjacency = _tree_adjacency(max([root, *(max(h) for h in hinges)]) + 1, hinges)
    seen, queue, out = {root}, [root], []
    for f in queue:
        for g in sorted(adjacency[f]):
            if g not in seen:
                seen.add(g)
                queue.append(g)
                out.append((int(f), int(g)))
    return out


def _check_connected(graph):
    if graph.number_of_nodes() and not nx.is_connected(graph):
        orphan = min(min(c) for c in nx.connected_components(graph) if 0 not in c)
        raise ModelError(f"faces[{orphan}]: not connected to face 0 through shared edges")


def _grow(graph, sources, dist):
    """Shortest-path tree from a set of sources (lowest-index parent wins)."""
    hinges = []
    for f in sorted(graph.nodes, key=lambda f: (dist[f], f)):
        if f in sources:
            continue
        parent = min((g for g in graph.neighbors(f) if dist[g] == dist[f] - 1))
        hinges.append((parent, f))
    return hinges


def min_diameter_net(graph):
    """A net whose longest hinge chain is as short as possible.

    Parameters
    ----------
    graph : networkx.Graph
        Face graph (see `face_graph`), connected.

    Returns
    -------
    NetChoice

    Examples
    --------
    The cube's faces: the best net has a longest chain of 3 hinges.

    >>> from foldsim.solids import cube
    >>> min_diameter_net(face_graph(cube().faces)).diameter
    3
    """
    _check_connected(graph)
    d = distances(graph)
    ecc = d.max(axis=1)
    best_face = int(np.argmin(ecc))
    best = (2 * ecc[best_face], ("face", best_face))
    for a, b in sorted(tuple(sorted(e)) for e in graph.edges()):
        radius = np.minimum(d[a], d[b]).max() + 0.5
        if 2 * radius < best[0]:
            best = (2 * radius, ("edge", a, b))
    diameter_bound = int(round(best[0]))
    center = best[1]
    if center[0] == "face":
        root = center[1]
        hinges = _grow(graph, {root}, d[root])
    else:
        _, a, b = center
        root = a
        hinges = [(a, b)] + _grow(graph, {a, b}, np.minimum(d[a], d[b]))
    return NetChoice(hinges, root, center, tree_diameter(graph.number_of_nodes(), hinges), diameter_bound)


def bfs_net(graph, root=0):
    """Breadth-first net from a root face.

    Returns
    -------
    list of (int, int)
        Hinges as (parent, child).
    """
    _check_connected(graph)
    if root not in graph:
        raise ModelError(f"root: face {root} out of range (0..{graph.number_of_nodes() - 1})")
    return _grow(graph, {root}, distances(graph)[root])


def net_from_cuts(graph, cuts):
    """The net left when the given face pairs are cut apart.

    Parameters
    ----------
    graph : networkx.Graph
    cuts : sequence of (int, int)
        Face pairs to cut; each must be adjacent.

    Returns
    -------
    list of (int, int)
        The remaining face pairs, which must form a spanning tree.
    """
    remaining = graph.copy()
    for i, (a, b) in enumerate(cuts):
        if not remaining.has_edge(a, b):
            raise ModelError(f"cut[{i}]: faces {a} and {b} share no uncut edge")
        remaining.remove_edge(a, b)
    if not nx.is_connected(remaining):
        raise ModelError("cut: the cuts split the faces apart; leave them joined in one piece")
    if not nx.is_tree(remaining):
        n_extra = remaining.number_of_edges() - (remaining.number_of_nodes() - 1)
        raise ModelError(f"cut: {n_extra} more face pair(s) must be cut for the rest to form a tree")
    return sorted(tuple(sorted(e)) for e in remaining.edges())
