"""A polyhedron's net counts and, when few enough, one tree per net."""

from dataclasses import dataclass

import numpy as np

from ..nets import _check_connected, face_graph, face_pairs, tree_diameter
from ..symmetry import symmetry_group, symmetry_tolerances
from .burnside import DEFAULT_MAX_STATES, _burnside, fixed_spanning_trees
from .enumeration import DEFAULT_LIMIT, _to_int, _tree_batches, _words, tree_pairs


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
