"""Built-in convex polyhedra, computed from their definitions.

Vertex sets come from coordinate formulas; faces come from the convex hull, with
coplanar hull triangles merged into planar polygons. Every face lists its vertex
indices counter-clockwise seen from outside, so its right-hand normal points out.
"""

import itertools
import re
from dataclasses import dataclass

import numpy as np
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components
from scipy.spatial import ConvexHull, QhullError

from foldsim.errors import ModelError
from foldsim.limits import MAX_SIDES, MAX_SOLID_SIZE
from foldsim.tolerances import DEFAULT

PHI = (1.0 + np.sqrt(5.0)) / 2.0  # the golden ratio


@dataclass(frozen=True, eq=False)
class Polyhedron:
    """A closed polyhedron with planar polygon faces (arrays are read-only copies).

    Attributes
    ----------
    name : str
        Label, e.g. ``"cube"`` or ``"prism:5"``.
    vertices : numpy.ndarray, shape (V, 3), float64
        Vertex coordinates.
    faces : tuple of numpy.ndarray, each shape (k,), int64
        Vertex indices of each face, k >= 3, counter-clockwise seen from outside.
    """

    name: str
    vertices: np.ndarray
    faces: tuple

    def __post_init__(self):
        vertices = np.array(self.vertices, dtype=np.float64)
        if vertices.ndim != 2 or vertices.shape[1] != 3:
            raise ValueError(f"{self.name}: vertices must have shape (V, 3), got {vertices.shape}")
        faces = tuple(np.array(face, dtype=np.int64) for face in self.faces)
        for i, face in enumerate(faces):
            if face.ndim != 1 or face.size < 3 or face.min() < 0 or face.max() >= len(vertices):
                raise ValueError(f"{self.name}: faces[{i}] must list >= 3 valid vertex indices")
            face.setflags(write=False)
        vertices.setflags(write=False)
        object.__setattr__(self, "vertices", vertices)
        object.__setattr__(self, "faces", faces)


def polyhedron_from_points(points, name, tol=DEFAULT.planar):
    """Convex hull of a point set, with coplanar hull triangles merged into polygons.

    Parameters
    ----------
    points : array_like, shape (N, 3)
        Points in convex position or not; points inside the hull, inside a face or
        on an edge are dropped.
    name : str
        Name of the result, also used in error messages.
    tol : float, optional
        Planarity tolerance relative to the bounding-box diagonal: neighbouring hull
        triangles merge when each one's vertices lie this close to the other's plane.

    Returns
    -------
    Polyhedron
        Vertices are the hull's corners, kept in input order, shape (V, 3); faces are
        counter-clockwise seen from outside, each starting at its smallest index.

    Raises
    ------
    ModelError
        If the points are not a finite (N, 3) array spanning a volume.
    """
    pts = np.asarray(points, dtype=np.float64)
    if pts.ndim != 2 or pts.shape[1] != 3 or len(pts) < 4 or not np.isfinite(pts).all():
        raise ModelError(f"{name}: need a finite (N, 3) array with N >= 4, got shape {pts.shape}")
    atol = tol * np.linalg.norm(pts.max(axis=0) - pts.min(axis=0))
    try:
        hull = ConvexHull(pts)
    except QhullError:
        raise ModelError(f"{name}: the points span no volume") from None
    tris = _outward_triangles(pts, hull)
    labels = _coplanar_groups(pts, tris, hull, atol)
    loops = [_boundary_loop(tris[labels == g], name) for g in range(labels.max() + 1)]
    loops = [_drop_collinear(pts, loop, atol) for loop in loops]
    used = np.unique(np.concatenate(loops))
    new_index = np.full(len(pts), -1, dtype=np.int64)
    new_index[used] = np.arange(len(used))
    return Polyhedron(name, pts[used], tuple(new_index[loop] for loop in loops))


def _outward_triangles(pts, hull):
    """Hull triangles, shape (T, 3), reordered so their right-hand normals point out."""
    tris = hull.simplices.astype(np.int64)
    a, b, c = (pts[tris[:, i]] for i in range(3))
    flip = np.einsum("ij,ij->i", np.cross(b - a, c - a), hull.equations[:, :3]) < 0
    tris[flip] = tris[flip][:, [0, 2, 1]]
    return tris


def _coplanar_groups(pts, tris, hull, atol):
    """Label, shape (T,), of the coplanar patch each hull triangle belongs to."""
    count = len(tris)
    i, j = np.repeat(np.arange(count), 3), hull.neighbors.ravel()
    normal, offset = hull.equations[i, :3], hull.equations[i, 3]
    dist = np.abs(np.einsum("mkd,md->mk", pts[tris[j]], normal) + offset[:, None])
    close = dist.max(axis=1) <= atol
    graph = coo_matrix((np.ones(close.sum()), (i[close], j[close])), shape=(count, count))
    return connected_components(graph, directed=False)[1]


def _boundary_loop(tris, name):
    """Ordered boundary, shape (k,), of a patch of consistently oriented triangles (T, 3)."""
    directed = set(map(tuple, np.concatenate([tris[:, [0, 1]], tris[:, [1, 2]], tris[:, [2, 0]]]).tolist()))
    boundary = [(a, b) for a, b in directed if (b, a) not in directed]  # inner edges come in pairs
    following = dict(boundary)
    loop = [min(following, default=-1)]
    while following.get(loop[-1], loop[0]) != loop[0] and len(loop) <= len(boundary):
        loop.append(following[loop[-1]])
    if len(loop) < 3 or len(loop) != len(boundary):
        raise ModelError(f"{name}: a hull face has no single boundary loop; are the points flat?")
    return np.array(loop, dtype=np.int64)


def _drop_collinear(pts, loop, atol):
    """Loop, shape (k',), without vertices lying on the segment between their neighbours."""
    here, before, after = pts[loop], pts[np.roll(loop, 1)], pts[np.roll(loop, -1)]
    chord = after - before
    height = np.linalg.norm(np.cross(chord, here - before), axis=1) / np.linalg.norm(chord, axis=1)
    return loop[height > atol]


def _orbit(base, *, cyclic=False, even_signs=False):
    """Distinct points, shape (M, 3), from sign changes and permutations of ``base`` (3,).

    Only cyclic permutations if ``cyclic``; only even numbers of sign flips if ``even_signs``.
    """
    perms = [(0, 1, 2), (1, 2, 0), (2, 0, 1)] if cyclic else list(itertools.permutations(range(3)))
    signs = np.array(list(itertools.product((1.0, -1.0), repeat=3)))
    if even_signs:
        signs = signs[signs.prod(axis=1) > 0]
    permuted = np.asarray(base, dtype=np.float64)[np.array(perms)]
    pts = (permuted[:, None, :] * signs[None, :, :]).reshape(-1, 3) + 0.0  # -0.0 -> 0.0
    return np.unique(pts, axis=0)


def _ring(n, radius, z, phase=0.0):
    """Vertices, shape (n, 3), of a regular n-gon in the plane at height z."""
    angle = phase + 2.0 * np.pi * np.arange(n) / n
    return np.column_stack([radius * np.cos(angle), radius * np.sin(angle), np.full(n, z)])


def _positive(value, what):
    """``value`` as a float, or ValueError if it is not finite and positive."""
    if not (np.isfinite(value := float(value)) and value > 0.0):
        raise ValueError(f"{what} must be finite and positive, got {value}")
    return value


def _solid(name, pts, native_edge, edge):
    """Polyhedron of the hull of ``pts`` (shape (N, 3)) scaled to the edge length."""
    return polyhedron_from_points(pts * (_positive(edge, "edge") / native_edge), name)


def tetrahedron(edge=1.0):
    """Regular tetrahedron, centred at the origin; see `cube` for the return value."""
    return _solid("tetrahedron", _orbit((1, 1, 1), even_signs=True), 2.0 * np.sqrt(2.0), edge)


def cube(edge=1.0):
    """Cube, centred at the origin, axis-aligned.

    Parameters
    ----------
    edge : float, optional
        Edge length.

    Returns
    -------
    Polyhedron
        Vertices shape (V, 3); faces counter-clockwise seen from outside.
    """
    return _solid("cube", _orbit((1, 1, 1)), 2.0, edge)


def octahedron(edge=1.0):
    """Regular octahedron, centred at the origin; see `cube` for the return value."""
    return _solid("octahedron", _orbit((1, 0, 0)), np.sqrt(2.0), edge)


def dodecahedron(edge=1.0):
    """Regular dodecahedron, centred at the origin; see `cube` for the return value."""
    pts = np.vstack([_orbit((1, 1, 1)), _orbit((0, 1 / PHI, PHI), cyclic=True)])
    return _solid("dodecahedron", pts, 2.0 / PHI, edge)


def icosahedron(edge=1.0):
    """Regular icosahedron, centred at the origin; see `cube` for the return value."""
    return _solid("icosahedron", _orbit((0, 1, PHI), cyclic=True), 2.0, edge)


def truncated_tetrahedron(edge=1.0):
    """Truncated tetrahedron, centred at the origin; see `cube` for the return value."""
    return _solid("truncated-tetrahedron", _orbit((3, 1, 1), even_signs=True), 2.0 * np.sqrt(2.0), edge)


def cuboctahedron(edge=1.0):
    """Cuboctahedron, centred at the origin; see `cube` for the return value."""
    return _solid("cuboctahedron", _orbit((1, 1, 0)), np.sqrt(2.0), edge)


def prism(n, edge=1.0):
    """Right prism on a regular n-gon, every edge ``edge`` long, axis along z.

    Parameters
    ----------
    n : int
        Sides of each base, n >= 3.
    edge : float, optional
        Length of every edge (base sides and height).

    Returns
    -------
    Polyhedron
        Vertices shape (2n, 3); two n-gons and n squares, named ``"prism:n"``.
    """
    return _two_rings("prism", n, edge, twist=False)


def antiprism(n, edge=1.0):
    """Antiprism on a regular n-gon with equilateral side triangles, axis along z.

    Parameters and return value as for `prism`, with two n-gons and 2n triangles,
    named ``"antiprism:n"``.
    """
    return _two_rings("antiprism", n, edge, twist=True)


def _two_rings(kind, n, edge, twist):
    """Hull of two regular n-gons of side ``edge``, the top one turned by pi/n if ``twist``."""
    n, edge = _count(n, 3, "number of sides"), _positive(edge, "edge")
    radius = edge / (2.0 * np.sin(np.pi / n))
    turn = np.pi / n if twist else 0.0
    height = np.sqrt(edge**2 - (2.0 * radius * np.sin(turn / 2)) ** 2)  # side edges have length edge
    pts = np.vstack([_ring(n, radius, -height / 2), _ring(n, radius, height / 2, turn)])
    return polyhedron_from_points(pts, f"{kind}:{n}")


def _count(value, low, what):
    """``value`` as an int, or ValueError unless it is an integer >= low."""
    if int(value) != value or value < low:
        raise ValueError(f"{what} must be an integer >= {low}, got {value}")
    return int(value)


def geodesic(k, radius=1.0):
    """Geodesic sphere: the icosahedron with each triangle split 1 -> 4, k times.

    New vertices are edge midpoints pushed out onto the sphere; faces are built
    directly by subdivision, never merged, so near-coplanar triangles stay apart.

    Parameters
    ----------
    k : int
        Subdivision level, k >= 0.
    radius : float, optional
        Circumradius; every vertex lies on this sphere.

    Returns
    -------
    Polyhedron
        Vertices shape (10 * 4**k + 2, 3); 20 * 4**k triangles, outward.
    """
    k, radius = _count(k, 0, "subdivision level"), _positive(radius, "radius")
    ico = icosahedron()
    vertices = ico.vertices / np.linalg.norm(ico.vertices, axis=1, keepdims=True)
    faces = np.array(ico.faces, dtype=np.int64)
    for _ in range(k):
        vertices, faces = _subdivide(vertices, faces)
    return Polyhedron(f"geodesic:{k}", vertices * radius, tuple(faces))


def _subdivide(vertices, faces):
    """Split each triangle of a unit-sphere mesh in four, keeping orientation.

    Takes vertices (V, 3) and faces (F, 3); returns vertices (V + E, 3) -- the old ones,
    then one midpoint per edge pushed onto the sphere -- and faces (4F, 3).
    """
    a, b, c = faces.T
    edges = np.sort(np.concatenate([faces[:, [0, 1]], faces[:, [1, 2]], faces[:, [2, 0]]]), axis=1)
    unique, inverse = np.unique(edges, axis=0, return_inverse=True)
    mid = vertices[unique].sum(axis=1)
    mid /= np.linalg.norm(mid, axis=1, keepdims=True)
    ab, bc, ca = len(vertices) + inverse.reshape(3, len(faces))
    new_faces = np.concatenate([np.column_stack(t) for t in ((a, ab, ca), (b, bc, ab), (c, ca, bc), (ab, bc, ca))])
    return np.vstack([vertices, mid]), new_faces


_NAMED = {
    "tetrahedron": tetrahedron, "cube": cube, "octahedron": octahedron, "dodecahedron": dodecahedron,
    "icosahedron": icosahedron, "truncated-tetrahedron": truncated_tetrahedron, "cuboctahedron": cuboctahedron,
}
_FAMILIES = {  # kind: (constructor, smallest number, largest number, how it reads)
    "prism": (prism, 3, MAX_SIDES, f"prism:N (N in 3..{MAX_SIDES})"),
    "antiprism": (antiprism, 3, MAX_SIDES, f"antiprism:N (N in 3..{MAX_SIDES})"),
    "geodesic": (geodesic, 0, 5, "geodesic:K (K in 0..5)"),
}
_EXPECTED = ", ".join(list(_NAMED) + [family[3] for family in _FAMILIES.values()])


def builtin(spec, size=None):
    """A built-in solid by name.

    Parameters
    ----------
    spec : str
        One of ``tetrahedron``, ``cube``, ``octahedron``, ``dodecahedron``,
        ``icosahedron``, ``truncated-tetrahedron``, ``cuboctahedron``, ``prism:N``,
        ``antiprism:N`` (N in 3..`foldsim.limits.MAX_SIDES`) or ``geodesic:K`` (K in
        0..5); case-insensitive.
    size : float, optional
        Edge length, or the circumradius for ``geodesic:K``; default 1, at most
        `foldsim.limits.MAX_SOLID_SIZE`.

    Returns
    -------
    Polyhedron
        The solid, named by its canonical spec, e.g. ``"prism:5"``.

    Raises
    ------
    ModelError
        If the spec is unknown or malformed, or the size is not a positive number.
    """
    text = spec.strip().lower() if isinstance(spec, str) else ""
    kind, _, number = text.partition(":")
    family = _FAMILIES.get(kind) if re.fullmatch(r"[0-9]+", number) else None
    if text not in _NAMED and family is None:
        raise ModelError(f"unknown built-in solid {spec!r}; expected one of: {_EXPECTED}")
    if family is not None and not family[1] <= int(number) <= family[2]:
        raise ModelError(f"built-in solid {spec!r} is out of range: expected {family[3]}")
    try:
        kwargs = {} if size is None else {"radius" if kind == "geodesic" else "edge": _positive(size, "size")}
    except (TypeError, ValueError):
        raise ModelError(f"built-in solid {spec!r}: size must be a positive number, got {size!r}") from None
    if any(not 1.0 / MAX_SOLID_SIZE <= value <= MAX_SOLID_SIZE for value in kwargs.values()):
        raise ModelError(f"--size: {size:g} is outside the limit of {1.0 / MAX_SOLID_SIZE:g}..{MAX_SOLID_SIZE:g} "
                         "for a built-in solid (docs/format.md, Limits)")
    try:
        return _NAMED[text](**kwargs) if family is None else family[0](int(number), **kwargs)
    except ValueError as exc:
        raise ModelError(f"built-in solid {spec!r}: {exc}") from None
