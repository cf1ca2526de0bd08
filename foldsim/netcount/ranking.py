"""Cheap scores of listed nets, so that only the nets shown need a full mechanism.

Building a net's mechanism (`foldsim.model.build_mechanism`) and grouping its
panels into part types (`foldsim.parts.part_types`) costs milliseconds a net. For a
net without gears the part types depend only on the solid and on which edges are
hinges and which way each hinge points (to the parent or to a child), so they can
be read from the solid's faces directly: every face's corner angles, edge lengths
and fold angles are computed once, and a face's part token is memoised per
pattern of edge roles. `NetScorer.part_count` does that in microseconds a net,
with the same comparison grid as `foldsim.parts` (and the same token code).
"""

import numpy as np

from .. import geometry
from ..nets import central_face, face_graph
from ..parts import _canonical, _sequence
from ..tolerances import DEFAULT


class NetScorer:
    """Part-type counts of a solid's nets, without building mechanisms.

    Parameters
    ----------
    poly : Polyhedron or any object with ``vertices`` (V, 3) and ``faces``
    mirror : bool, optional
        Count a panel and its mirror image as one part (as `foldsim.parts.part_types`).
    tol : Tolerances, optional

    Examples
    --------
    The cube's cross: the root square hinged on four sides, the top hinged once to
    one side. The side that carries the lid and the root are parts of their own;
    the lid matches the three plain sides (one hinge to its parent, three cut edges,
    the same fold angles), so there are three types:

    >>> from foldsim.solids import cube
    >>> scorer = NetScorer(cube())
    >>> scorer.part_count([(0, 1), (0, 2), (0, 3), (0, 4), (3, 5)], root=0)
    3
    """

    def __init__(self, poly, mirror=True, tol=DEFAULT):
        vertices = np.asarray(poly.vertices, dtype=float)
        self.faces = [np.asarray(f, dtype=np.int64) for f in poly.faces]
        self.mirror = mirror
        self.tol = tol
        self.size = float(np.linalg.norm(np.ptp(vertices, axis=0))) or 1.0
        self.points = [vertices[f] for f in self.faces]
        self.normals = geometry.newell_normals(self.points)
        graph = face_graph(self.faces)
        self.n_faces = len(self.faces)
        # neighbour[f][k]: the face across face f's local edge k (None on an open edge),
        # angle[f][k]: the fold angle between them there, right-handed about the edge as it runs in f.
        owner = {}
        for a, b, data in graph.edges(data=True):
            owner[(a, frozenset(data["edge"]))] = b
            owner[(b, frozenset(data["edge"]))] = a
        self.neighbour, self.angle = [], []
        for f, face in enumerate(self.faces):
            ring = np.roll(face, -1)
            across = [owner.get((f, frozenset((int(u), int(v))))) for u, v in zip(face, ring)]
            self.neighbour.append(across)
            ends = self.points[f], vertices[ring]
            angles = [None if g is None else
                      float(geometry.signed_angle(self.normals[f], self.normals[g], ends[1][k] - ends[0][k]))
                      for k, g in enumerate(across)]
            self.angle.append(angles)
        self._memo = {}

    def _token(self, f, roles):
        key = (f, roles)
        token = self._memo.get(key)
        if token is None:
            features = [(role, None if role == "free" else angle, [])
                        for role, angle in zip(roles, self.angle[f])]
            walks = (True, False) if self.mirror else (True,)
            token = min(_canonical(_sequence(self.points[f], self.normals[f], features, forward, self.size,
                                             self.tol.planar)) for forward in walks)
            self._memo[key] = token
        return token

    def part_count(self, hinges, root=None):
        """Number of part types of the ungeared net with these hinges.

        Parameters
        ----------
        hinges : sequence of (int, int)
            Face pairs of a spanning tree of the face graph.
        root : int, optional
            The face that stays put; default `foldsim.nets.central_face`, as `foldsim
            nets` builds its mechanisms.

        Returns
        -------
        int
        """
        root = central_face(self.n_faces, hinges) if root is None else root
        adjacency = [[] for _ in range(self.n_faces)]
        for a, b in hinges:
            adjacency[a].append(b)
            adjacency[b].append(a)
        parent = [-1] * self.n_faces
        parent[root] = root
        stack = [root]
        while stack:
            f = stack.pop()
            for g in adjacency[f]:
                if parent[g] < 0:
                    parent[g] = f
                    stack.append(g)
        linked = [set(row) for row in adjacency]
        tokens = set()
        for f in range(self.n_faces):
            roles = tuple("free" if g is None else
                          ("parent" if g == parent[f] and f != root else "child") if g in linked[f] else "cut"
                          for g in self.neighbour[f])
            tokens.add(self._token(f, roles))
        return len(tokens)
