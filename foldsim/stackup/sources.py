"""Where the error sources act and how backlash travels: hinge frames, the gear tree, chains.

Sources are numbered hinge-major (``6 h + k`` for kind ``k`` of `KINDS` at hinge
``h``), then the couplings (``6 H + c``).
"""

from dataclasses import dataclass

import networkx as nx
import numpy as np

from .. import geometry
from ..gearing import _factor, coupling_graph
from .inputs import KINDS

# ---------------------------------------------------------------- gear tree


@dataclass(frozen=True)
class GearTree:
    """Meshes walked breadth-first from the drive through the couplings.

    Attributes
    ----------
    driver, driven : (G,) int
        Hinges of each mesh on the tree, driven farther from the drive.
    factor : (G,) float
        ``d theta[driven] / d theta[driver]``.
    coupling : (G,) int
        Index in ``mech.couplings`` of the mesh.
    depth : (H,) int
        Meshes between each hinge and the start of its component (the drive, or the
        lowest hinge of a component the drive does not reach).
    levels : tuple of (g,) int
        Mesh indices grouped by the depth of their driven hinge, shallow first.
    """

    driver: np.ndarray
    driven: np.ndarray
    factor: np.ndarray
    coupling: np.ndarray
    depth: np.ndarray
    levels: tuple


def gear_tree(mech):
    """The breadth-first mesh tree (same walk as `foldsim.gearing.fold_schedule`).

    Returns
    -------
    GearTree

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> from foldsim.model import Coupling
    >>> m = SimpleNamespace(n_hinges=3, drive=0, couplings=(Coupling((1, 0), 0.5), Coupling((1, 2), 3.0)))
    >>> g = gear_tree(m)
    >>> g.driver.tolist(), g.driven.tolist(), g.factor.tolist(), g.depth.tolist()
    ([0, 1], [1, 2], [2.0, 3.0], [0, 1, 2])
    """
    graph = coupling_graph(mech)
    first = {}
    for k, c in enumerate(mech.couplings):
        first.setdefault(frozenset(c.hinges), k)
    driver, driven, factor, coupling = [], [], [], []
    depth = np.zeros(mech.n_hinges, dtype=np.int64)
    for comp in sorted(nx.connected_components(graph), key=lambda c: (mech.drive not in c, min(c))):
        start = mech.drive if mech.drive in comp else min(comp)
        for a, b in nx.bfs_edges(graph, start):
            edge = graph.edges[a, b]
            driver.append(a)
            driven.append(b)
            factor.append(_factor(edge, a))
            coupling.append(first[frozenset((a, b))])
            depth[b] = depth[a] + 1
    driver = np.array(driver, dtype=np.int64)
    driven = np.array(driven, dtype=np.int64)
    mesh_depth = depth[driven]
    levels = tuple(np.flatnonzero(mesh_depth == d) for d in range(1, int(depth.max(initial=0)) + 1))
    return GearTree(driver, driven, np.array(factor, dtype=float), np.array(coupling, dtype=np.int64),
                    depth, levels)


def transmitted_errors(tree, backlash, n_hinges):
    """Angle error every hinge receives through the gears.

    Parameters
    ----------
    tree : GearTree
    backlash : (N, C) float
        Backlash angle at the driven gear of every coupling, per sample.
    n_hinges : int

    Returns
    -------
    (N, H) float
        ``e[driven] = factor * e[driver] + backlash[mesh]``, walked one depth level
        at a time; 0 at the start of each component.

    Examples
    --------
    Two meshes in a row, ratio 2 then 3: the last hinge is off by 3 * (2 * 0 + b0) + b1.

    >>> from types import SimpleNamespace
    >>> t = SimpleNamespace(driver=np.array([0, 1]), driven=np.array([1, 2]),
    ...                     factor=np.array([2.0, 3.0]), coupling=np.array([0, 1]),
    ...                     levels=(np.array([0]), np.array([1])))
    >>> transmitted_errors(t, np.array([[0.01, 0.002]]), 3).round(6).tolist()
    [[0.0, 0.01, 0.032]]
    """
    backlash = np.asarray(backlash, dtype=float)
    out = np.zeros((backlash.shape[0], n_hinges))
    for level in tree.levels:
        out[:, tree.driven[level]] = (tree.factor[level] * out[:, tree.driver[level]]
                                      + backlash[:, tree.coupling[level]])
    return out


def backlash_matrix(mech, tree=None):
    """(H, C) float: angle error at each hinge per unit backlash at each coupling."""
    tree = gear_tree(mech) if tree is None else tree
    n_c = len(mech.couplings)
    return transmitted_errors(tree, np.eye(n_c), mech.n_hinges).T.reshape(mech.n_hinges, n_c)


def _sparse_backlash(mech, tree):
    """`backlash_matrix` as a scipy.sparse CSR matrix (a mesh reaches only the hinges it drives)."""
    from scipy.sparse import csr_matrix

    return csr_matrix(backlash_matrix(mech, tree))


def longest_gear_chain(mech, tree=None):
    """Most meshes between the drive (or a component's start) and any hinge."""
    tree = gear_tree(mech) if tree is None else tree
    return int(tree.depth.max(initial=0))


def longest_hinge_chain(mech):
    """Most hinges on a path between two faces of the hinge tree (the tree's diameter)."""
    from ..nets import tree_diameter

    return int(tree_diameter(mech.n_faces, [tuple(h) for h in mech.hinge_faces.tolist()]))


# ---------------------------------------------------------------- frames and labels


def hinge_frames(mech):
    """Every hinge's source directions and midpoint in the flat frame.

    Returns
    -------
    dirs : (H, 3, 3) float
        Rows ``u`` (fold axis), ``w = n x u``, ``n`` (the flat sheet's outward normal).
    mids : (H, 3) float
        Hinge midpoints.
    """
    normal = geometry.unit(geometry.newell_normals([mech.flat_faces[mech.root]])[0])
    u = geometry.unit(mech.axes[:, 1] - mech.axes[:, 0])
    n = np.broadcast_to(normal, u.shape)
    return np.stack([u, np.cross(n, u), n], axis=1), mech.axes.mean(axis=1)


def source_names(mech):
    """Label of every source, hinge-major then couplings: ``"hinge 3 tilt_across"``."""
    names = [f"hinge {h} {k}" for h in range(mech.n_hinges) for k in KINDS]
    return names + [f"mesh {c} backlash" for c in range(len(mech.couplings))]
