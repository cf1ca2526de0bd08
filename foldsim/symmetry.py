"""Symmetries of a polyhedron, found from its geometry.

A symmetry is an orthogonal map (a rotation, or a rotation times a reflection) that
carries the vertex set onto itself and every face onto a face. Every such map fixes
the centroid of the vertices, so the search works on centred vertices: it picks
three reference vertices spanning space, tries every image triple with the same
norms and pairwise dot products, fits the orthogonal map by least squares over the
three pairs (the Kabsch fit, with reflections allowed) and keeps the maps under
which each vertex lands on a vertex and each face on a face.

Reference images are pruned with exact invariants (a vertex's degree and the sizes
of the faces around it) and, when possible, the second and third references are
neighbours of the first, so their images must be neighbours of its image.
"""

import math
from dataclasses import dataclass, replace

import numpy as np
from scipy.spatial import cKDTree

from .errors import FoldsimError, ModelError
from .nets import face_graph, face_pairs
from .tolerances import DEFAULT


DEFAULT_SYMMETRY_TOL = DEFAULT.planar
"""Default relative distance within which a vertex's image must land on a vertex."""
MAX_SYMMETRY_TOL = 1e-2


def symmetry_tolerances(rel=None, tol=DEFAULT):
    """The tolerances `symmetry_group` uses, with the vertex-matching tolerance ``rel``.

    Parameters
    ----------
    rel : float, optional
        Relative to the bounding-box diagonal; default `DEFAULT_SYMMETRY_TOL`
        (``tol.planar``). A box 1 x 1 x (1 + d) counts as a cube when d is below
        about ``rel`` times its diagonal, so exact counts of nearly symmetric solids
        need a smaller value.

    Returns
    -------
    Tolerances

    Raises
    ------
    FoldsimError
        Unless ``0 < rel <= MAX_SYMMETRY_TOL``.

    Examples
    --------
    >>> symmetry_tolerances(1e-9).planar
    1e-09
    """
    if rel is None:
        return replace(tol, planar=DEFAULT_SYMMETRY_TOL)
    if not (math.isfinite(rel) and 0 < rel <= MAX_SYMMETRY_TOL):
        raise FoldsimError(f"--symmetry-tol: must lie in (0, {MAX_SYMMETRY_TOL:g}], not {rel}")
    return replace(tol, planar=float(rel))


@dataclass(frozen=True, eq=False)
class SymmetryGroup:
    """The symmetries of a polyhedron as orthogonal maps and as permutations.

    Element ``g`` maps vertex ``i`` to vertex ``vertices[g, i]``, face ``f`` to face
    ``faces[g, f]`` and face-graph edge ``e`` (a row of `foldsim.nets.face_pairs`)
    to edge ``edges[g, e]``. Element 0 is the identity.

    Attributes
    ----------
    matrices : numpy.ndarray, shape (G, 3, 3), float64
        Orthogonal maps about the vertex centroid: ``x -> centre + M @ (x - centre)``.
    centre : numpy.ndarray, shape (3,), float64
        Centroid of the vertices, fixed by every symmetry.
    vertices : numpy.ndarray, shape (G, V), int64
    faces : numpy.ndarray, shape (G, F), int64
    edges : numpy.ndarray, shape (G, E), int64
    """

    matrices: np.ndarray
    centre: np.ndarray
    vertices: np.ndarray
    faces: np.ndarray
    edges: np.ndarray

    @property
    def order(self):
        """Number of symmetries, rotations and reflections together."""
        return len(self.matrices)

    @property
    def rotations(self):
        """(G,) bool: which elements are proper rotations (determinant +1)."""
        return np.linalg.det(self.matrices) > 0


def _vertex_neighbours(n_vertices, faces):
    """Sets of vertices joined to each vertex by a face edge."""
    neighbours = [set() for _ in range(n_vertices)]
    for face in faces:
        for u, v in zip(face.tolist(), np.roll(face, -1).tolist()):
            neighbours[u].add(v)
            neighbours[v].add(u)
    return neighbours


def _vertex_classes(n_vertices, faces, neighbours):
    """(V,) int label of each vertex's exact invariants: degree and sorted face sizes."""
    around = [[] for _ in range(n_vertices)]
    for face in faces:
        for v in face.tolist():
            around[v].append(len(face))
    keys = [(len(neighbours[v]), tuple(sorted(around[v]))) for v in range(n_vertices)]
    index = {key: k for k, key in enumerate(sorted(set(keys)))}
    return np.array([index[key] for key in keys], dtype=np.int64)


def _references(x, label, neighbours, atol, snap):
    """Three vertex indices whose centred positions span space: (a, b, c, adjacent).

    ``a`` is a vertex of the rarest class, farthest out. ``b`` and ``c`` are the two
    neighbours of ``a`` spanning the widest corner with it (``adjacent`` True) when a
    map fitted to them alone would still place every vertex within ``snap`` of its
    image despite position errors of ``atol``; otherwise two vertices far apart.
    """
    counts = np.bincount(label)
    norms = np.linalg.norm(x, axis=1)
    a = min(range(len(x)), key=lambda v: (counts[label[v]], -round(norms[v] / atol), v))

    def spread(b, c):
        """|det| of the three unit directions: 1 for a right-angled corner, 0 if coplanar."""
        return abs(np.linalg.det(x[[a, b, c]])) / max(norms[a] * norms[b] * norms[c], atol**3)

    pairs = [(b, c) for b in neighbours[a] for c in neighbours[a] if b < c]
    best = max(pairs, key=lambda p: spread(*p), default=None)
    if best is not None and atol * norms.max() < snap * spread(*best):
        return a, best[0], best[1], True
    others = np.delete(np.arange(len(x)), a)
    b = int(others[np.argmax(np.linalg.norm(np.cross(x[others], x[a]), axis=1))])
    c = int(others[np.argmax(np.abs(x[others] @ np.cross(x[a], x[b])))])
    if spread(b, c) * norms[a] > atol:
        return a, b, c, False
    raise ModelError("vertices: all vertices lie in one plane through their centroid; the solid is flat")


def _orthogonal_fit(source, target):
    """(3, 3) orthogonal M minimising sum |M @ source[k] - target[k]|^2 over (n, 3) rows.

    The Kabsch fit without forcing det(M) = +1, so reflections come out too.
    """
    u, _, vt = np.linalg.svd(target.T @ source)
    return u @ vt


def symmetry_group(poly, tol=DEFAULT):
    """Every rotation and reflection that maps the polyhedron onto itself.

    Parameters
    ----------
    poly : Polyhedron or any object with ``vertices`` (V, 3) and ``faces``
        A closed polyhedron; faces are sequences of vertex indices.
    tol : Tolerances, optional
        A vertex's image must land within ``tol.planar`` (relative to the bounding-box
        diagonal) of a vertex: positions are trusted to the precision to which faces
        are trusted to be planar.

    Returns
    -------
    SymmetryGroup
        Identity first, then the other elements in order of their vertex permutation.

    Raises
    ------
    ModelError
        If the vertices are not finite or all lie in one plane.

    Examples
    --------
    >>> from foldsim.solids import cube, prism
    >>> group = symmetry_group(cube())
    >>> group.order, int(group.rotations.sum())
    (48, 24)
    >>> symmetry_group(prism(5)).order
    20
    """
    vertices = np.asarray(poly.vertices, dtype=np.float64)
    faces = tuple(np.asarray(f, dtype=np.int64) for f in poly.faces)
    if vertices.ndim != 2 or vertices.shape[1] != 3 or len(vertices) < 4 or not np.isfinite(vertices).all():
        raise ModelError(f"vertices: need finite (V, 3) coordinates with V >= 4, got shape {vertices.shape}")
    centre = vertices.mean(axis=0)
    x = vertices - centre
    atol = tol.planar * (float(np.linalg.norm(np.ptp(vertices, axis=0))) or 1.0)
    tree = cKDTree(x)
    snap = tree.query(x, k=2)[0][:, 1].min() / 2  # nearer than this, a point can only be one vertex
    neighbours = _vertex_neighbours(len(x), faces)
    label = _vertex_classes(len(x), faces, neighbours)
    a, b, c, adjacent = _references(x, label, neighbours, atol, snap)
    norms = np.linalg.norm(x, axis=1)
    face_index = {frozenset(f.tolist()): i for i, f in enumerate(faces)}
    pairs = face_pairs(face_graph(faces))
    pair_index = {(p, q): e for e, (p, q) in enumerate(pairs.tolist())}
    everything = np.arange(len(x))

    def like(v, pool, anchors):
        """Candidate images of reference ``v``, given (reference, image) pairs fixed so far."""
        pool = np.fromiter(pool, dtype=np.int64)
        keep = (label[pool] == label[v]) & (np.abs(norms[pool] - norms[v]) <= atol)
        for vi, wi in anchors:
            keep &= np.abs(x[pool] @ x[wi] - x[v] @ x[vi]) <= atol * (norms[v] + norms[vi] + atol)
        return pool[keep].tolist()

    found = []
    for a2 in like(a, everything, []):
        pool = neighbours[a2] if adjacent else everything
        for b2 in like(b, pool, [(a, a2)]):
            for c2 in like(c, pool, [(a, a2), (b, b2)]):
                if len({a2, b2, c2}) < 3:
                    continue
                rough = _orthogonal_fit(x[[a, b, c]], x[[a2, b2, c2]])
                dist, image = tree.query(x @ rough.T, distance_upper_bound=snap)
                if not np.isfinite(dist).all() or len(set(image.tolist())) != len(x):
                    continue
                m = _orthogonal_fit(x, x[image])
                if np.linalg.norm(x @ m.T - x[image], axis=1).max() > atol:
                    continue
                face_image = [face_index.get(frozenset(image[f].tolist())) for f in faces]
                if None in face_image:
                    continue
                edge_image = [pair_index[tuple(sorted((face_image[p], face_image[q])))] for p, q in pairs.tolist()]
                found.append((image.tolist(), m, face_image, edge_image))
    found.sort(key=lambda item: item[0])
    return SymmetryGroup(
        matrices=np.array([item[1] for item in found]).reshape(-1, 3, 3),
        centre=centre,
        vertices=np.array([item[0] for item in found], dtype=np.int64).reshape(-1, len(x)),
        faces=np.array([item[2] for item in found], dtype=np.int64).reshape(-1, len(faces)),
        edges=np.array([item[3] for item in found], dtype=np.int64).reshape(-1, len(pairs)))
