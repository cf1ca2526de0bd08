"""The number of spanning trees of a graph, exactly, by the matrix-tree theorem."""

import numpy as np

from ..errors import ModelError


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
