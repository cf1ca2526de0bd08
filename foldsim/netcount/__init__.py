"""Counting and listing nets: spanning trees of the face graph, and their symmetry classes.

Trees are numbered over the edges of the face graph as `foldsim.nets.face_pairs`
orders them: a tree is a bitmask whose bit ``e`` is set when ``face_pairs[e]`` is a
hinge. Two nets are the same when a symmetry of the solid (a rotation or a
reflection, `foldsim.symmetry.symmetry_group`) carries one tree onto the other.

The package is split by method:

- `matrix_tree`: the number of spanning trees from the matrix-tree theorem: any
  cofactor of the graph Laplacian, computed exactly with Bareiss' fraction-free
  elimination on Python integers.
- `enumeration`: listing works by a frontier search over the edges (each edge in or
  out, keeping only how the faces with both decided and undecided edges are
  already joined), which merges equal partial states.
- `burnside`: the number of nets up to symmetry from Burnside's lemma: the mean,
  over the group, of the number of trees each element leaves unchanged. The
  identity leaves all of them; another element leaves exactly the trees that are
  unions of whole orbits of its edge permutation, which are few, so those are
  counted by the same frontier search over orbits.
- `census`: the counts together with one tree per net, each tree kept as its
  orbit's representative when no symmetry maps it to a smaller bitmask.
"""

from .burnside import DEFAULT_MAX_STATES, fixed_spanning_trees, number_of_nets
from .census import NetCensus, nets_up_to_symmetry
from .enumeration import DEFAULT_LIMIT, enumerate_spanning_trees, tree_pairs
from .matrix_tree import number_of_spanning_trees

__all__ = [
    "DEFAULT_LIMIT", "DEFAULT_MAX_STATES", "NetCensus", "enumerate_spanning_trees",
    "fixed_spanning_trees", "nets_up_to_symmetry", "number_of_nets", "number_of_spanning_trees", "tree_pairs",
]
