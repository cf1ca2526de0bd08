"""Read a closed polyhedron from a mesh file (OBJ, OFF, STL, PLY).

Files are parsed by trimesh (an optional dependency, imported only here). The
triangles are then checked and turned into planar polygon faces:

1. duplicate vertices are merged (STL stores every triangle's corners apart);
2. the surface must be a closed, consistently wound 2-manifold that does not pass
   through itself, enclosing some volume (an inside-out file is turned outward);
3. edge-adjacent triangles that lie in one plane are merged into one polygon face,
   its boundary loop counter-clockwise seen from outside, and vertices left in the
   middle of a straight edge are dropped.

Every problem raises `ModelError` with one line naming the file.
"""

import io
import logging
import struct
from pathlib import Path

import numpy as np
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components

from ..analysis.broadphase import overlapping_boxes
from ..analysis.triangles import triangles_collide
from ..model import _check_magnitude
from .. import limits
from ..errors import ModelError
from ..solids import Polyhedron
from .mesh_checks import check_bytes, text_bytes
from ..tolerances import DEFAULT

FORMATS = ("obj", "off", "stl", "ply")

# What trimesh's readers raise on a damaged file (there is no common base class).
_READ_ERRORS = (OSError, ValueError, TypeError, KeyError, IndexError, AttributeError,
                NotImplementedError, UnicodeError, EOFError, ImportError, struct.error)


def _point(p):
    return "(" + ", ".join(f"{x:.6g}" for x in p) + ")"


def _quiet_trimesh():
    """Keep trimesh's log records (it logs tracebacks of what it recovers from) off stderr."""
    logger = logging.getLogger("trimesh")
    if not any(isinstance(h, logging.NullHandler) for h in logger.handlers):
        logger.addHandler(logging.NullHandler())
    logger.propagate = False


def _read(path, kind):
    """Vertices (V, 3) float and triangles (T, 3) int of a file, duplicate vertices merged."""
    try:
        import trimesh
    except ImportError:
        raise ModelError(f"{path}: reading mesh files needs the 'trimesh' package") from None
    _quiet_trimesh()
    try:
        size = path.stat().st_size
        if size > limits.MAX_MESH_BYTES:
            raise ModelError(f"{path}: the file is {size / 2**20:,.1f} MiB, larger than the limit of "
                             f"{limits.MAX_MESH_BYTES // 2**20} MiB (docs/format.md, Limits)")
        data = path.read_bytes()
    except OSError as exc:
        raise ModelError(f"{path}: cannot read file: {exc.strerror or exc}") from None
    check_bytes(path, kind, data)
    data = text_bytes(kind, data)
    try:
        mesh = trimesh.load(io.BytesIO(data), file_type=kind, process=False, force="mesh")
        if isinstance(mesh, trimesh.Trimesh) and len(mesh.faces) and np.isfinite(mesh.vertices).all():
            mesh.merge_vertices(merge_tex=True, merge_norm=True)
    except _READ_ERRORS as exc:
        reason = " ".join(str(exc).split()) or type(exc).__name__
        raise ModelError(f"{path}: cannot read as {kind.upper()}: {reason if len(reason) <= 80 else reason[:77] + '...'}") from None
    if not isinstance(mesh, trimesh.Trimesh):
        raise ModelError(f"{path}: no triangle mesh found in the file")
    vertices = np.asarray(mesh.vertices, dtype=np.float64)
    triangles = np.asarray(mesh.faces, dtype=np.int64).reshape(-1, 3)
    limits.check_count(len(triangles), limits.MAX_TRIANGLES, str(path), "triangles")
    if len(triangles) and (triangles.min() < 0 or triangles.max() >= len(vertices)):
        raise ModelError(f"{path}: a face refers to a vertex the file does not have")
    if len(triangles) == 0:
        raise ModelError(f"{path}: no triangles found (is it a {kind.upper()} mesh?)")
    if not np.isfinite(vertices).all():
        raise ModelError(f"{path}: a vertex coordinate is not a finite number")
    return vertices, triangles


def _check_triangles(path, vertices, triangles, size, tol):
    """Every triangle has three distinct corners and some area."""
    repeat = (triangles[:, 0] == triangles[:, 1]) | (triangles[:, 1] == triangles[:, 2]) | (
        triangles[:, 2] == triangles[:, 0])
    corners = vertices[triangles]
    area = 0.5 * np.linalg.norm(np.cross(corners[:, 1] - corners[:, 0], corners[:, 2] - corners[:, 0]),
                                axis=1)
    bad = np.flatnonzero(repeat | (area <= tol.area * size**2))
    if len(bad):
        raise ModelError(f"{path}: degenerate triangle (no area) at {_point(corners[bad[0]].mean(axis=0))}")


def _edges(triangles):
    """Directed edges (3T, 2), their undirected edge id (3T,), counts per id, and ids' ends."""
    directed = np.concatenate([triangles[:, [0, 1]], triangles[:, [1, 2]], triangles[:, [2, 0]]])
    keys, inverse, counts = np.unique(np.sort(directed, axis=1), axis=0, return_inverse=True,
                                      return_counts=True)
    return directed, inverse.ravel(), counts, keys


def _check_surface(path, vertices, triangles):
    """Closed, edge-manifold, consistently wound, vertex-manifold; return edge pairs (E, 2)."""
    directed, edge_id, counts, keys = _edges(triangles)
    n_tri = len(triangles)
    tri_of = np.tile(np.arange(n_tri), 3)

    def where(e):
        return f"the edge from {_point(vertices[keys[e, 0]])} to {_point(vertices[keys[e, 1]])}"

    many = np.flatnonzero(counts > 2)
    if len(many):
        raise ModelError(f"{path}: not a manifold surface: {where(many[0])} belongs to "
                         f"{counts[many[0]]} triangles")
    open_edges = np.flatnonzero(counts == 1)
    if len(open_edges):
        raise ModelError(f"{path}: not closed: {len(open_edges)} edge(s) belong to one triangle only, "
                         f"e.g. {where(open_edges[0])}")
    order = np.argsort(edge_id, kind="stable")
    first, second = order[0::2], order[1::2]
    same_way = np.flatnonzero(directed[first, 0] == directed[second, 0])
    if len(same_way):
        e = edge_id[first[same_way[0]]]
        raise ModelError(f"{path}: inconsistent winding: two triangles run the same way along {where(e)}; "
                         "every triangle must wind the same way round the solid")
    pairs = np.column_stack([tri_of[first], tri_of[second]])
    # Corners (vertex, triangle) around a vertex must form one fan: join the two
    # corners at each end of every edge and count the fans per vertex. Corner k of
    # triangle t is number 3 t + k.
    t1, t2 = pairs[:, 0], pairs[:, 1]
    rows, cols = [], []
    for end in keys[edge_id[first]].T:
        rows.append(3 * t1 + np.argmax(triangles[t1] == end[:, None], axis=1))
        cols.append(3 * t2 + np.argmax(triangles[t2] == end[:, None], axis=1))
    rows, cols = np.concatenate(rows), np.concatenate(cols)
    graph = coo_matrix((np.ones(len(rows)), (rows, cols)), shape=(3 * n_tri, 3 * n_tri))
    n_fans, label = connected_components(graph, directed=False)
    used = np.unique(triangles)
    if n_fans > len(used):
        fans = np.unique(np.column_stack([triangles.ravel(), label]), axis=0)
        vertex, count = np.unique(fans[:, 0], return_counts=True)
        v = vertex[np.argmax(count > 1)]
        raise ModelError(f"{path}: not a manifold surface: the surface touches itself at the vertex "
                         f"{_point(vertices[v])}")
    return pairs


def _check_no_crossing(path, vertices, triangles, size, tol):
    """No two triangles that share no vertex pass through each other."""
    corners = vertices[triangles]
    eps = tol.contact * size
    lo, hi = corners.min(axis=1) - eps, corners.max(axis=1) + eps
    pairs = overlapping_boxes(lo, hi)
    if len(pairs) == 0:
        return
    a, b = triangles[pairs[:, 0]], triangles[pairs[:, 1]]
    apart = ~(a[:, :, None] == b[:, None, :]).any(axis=(1, 2))
    pairs = pairs[apart]
    if len(pairs) == 0:
        return
    hit = np.flatnonzero(triangles_collide(corners[pairs[:, 0]], corners[pairs[:, 1]], eps))
    if len(hit):
        i, j = pairs[hit[0]]
        raise ModelError(f"{path}: self-intersecting: the triangles at {_point(corners[i].mean(axis=0))} and "
                         f"{_point(corners[j].mean(axis=0))} pass through each other")


def _signed_volume(vertices, triangles):
    c = vertices[triangles]
    return float(np.einsum("ij,ij->i", c[:, 0], np.cross(c[:, 1], c[:, 2])).sum() / 6.0)


def _coplanar_patches(vertices, triangles, pairs, size, tol):
    """Label (T,) of the flat patch each triangle belongs to."""
    c = vertices[triangles]
    normals = np.cross(c[:, 1] - c[:, 0], c[:, 2] - c[:, 0])
    normals /= np.linalg.norm(normals, axis=1, keepdims=True)
    t1, t2 = pairs[:, 0], pairs[:, 1]
    # Distance of each of t2's corners from t1's plane, and the other way round.
    d12 = np.abs(np.einsum("mkd,md->mk", c[t2] - c[t1][:, :1], normals[t1])).max(axis=1)
    d21 = np.abs(np.einsum("mkd,md->mk", c[t1] - c[t2][:, :1], normals[t2])).max(axis=1)
    same_side = np.einsum("ij,ij->i", normals[t1], normals[t2]) > 0
    flat = (np.maximum(d12, d21) <= tol.planar * size) & same_side
    n = len(triangles)
    graph = coo_matrix((np.ones(flat.sum()), (t1[flat], t2[flat])), shape=(n, n))
    return connected_components(graph, directed=False)[1]


def _loop(path, vertices, patch):
    """Boundary loop (k,) of a patch of triangles (m, 3), counter-clockwise like them."""
    edges = np.concatenate([patch[:, [0, 1]], patch[:, [1, 2]], patch[:, [2, 0]]])
    directed = set(map(tuple, edges.tolist()))
    boundary = [(a, b) for a, b in directed if (b, a) not in directed]
    following = dict(boundary)
    if len(following) != len(boundary):
        where = _point(vertices[patch].reshape(-1, 3).mean(axis=0))
        raise ModelError(f"{path}: the flat region around {where} pinches at a corner; "
                         "faces must be simple polygons")
    loop = [min(following)]
    while following[loop[-1]] != loop[0] and len(loop) <= len(boundary):
        loop.append(following[loop[-1]])
    if len(loop) != len(boundary):
        where = _point(vertices[patch].reshape(-1, 3).mean(axis=0))
        raise ModelError(f"{path}: the flat region around {where} has a hole; "
                         "faces must be simple polygons")
    return loop


def _check_planar(path, vertices, loops, size, tol):
    for loop in loops:
        pts = vertices[loop]
        centre = pts.mean(axis=0)
        normal = np.linalg.svd(pts - centre)[2][-1]
        off = np.abs((pts - centre) @ normal).max()
        if off > tol.planar * size:
            raise ModelError(f"{path}: the nearly flat region around {_point(centre)} is not planar "
                             f"(a corner is {off:.3g} off its plane)")


def _drop_straight(vertices, loops, size, tol):
    """Loops without vertices that sit in the middle of a straight edge of both their faces."""
    faces_at = {}
    for f, loop in enumerate(loops):
        for v in loop:
            faces_at.setdefault(v, []).append(f)

    def straight(loop, k):
        before, here, after = (vertices[loop[(k + s) % len(loop)]] for s in (-1, 0, 1))
        chord = after - before
        return np.linalg.norm(np.cross(chord, here - before)) / np.linalg.norm(chord) <= tol.planar * size

    drop = set()
    for v, fs in faces_at.items():
        if len(fs) == 2 and all(straight(loops[f], loops[f].index(v)) for f in fs):
            drop.add(v)
    return [[v for v in loop if v not in drop] for loop in loops]


def load_mesh(path, tol=DEFAULT):
    """Read a closed polyhedron from an OBJ, OFF, STL or PLY file.

    Parameters
    ----------
    path : str or Path
        The format comes from the file's extension.
    tol : Tolerances
        ``planar`` (relative to the bounding-box diagonal) decides which triangles
        are one face and which vertices lie on a straight edge; ``contact`` is the
        depth that counts as passing through; ``area`` the smallest triangle.

    Returns
    -------
    Polyhedron
        Named by the file's stem; vertices (V, 3) are those the faces use; faces are
        planar polygons, counter-clockwise seen from outside, each starting at its
        smallest vertex index.

    Raises
    ------
    ModelError
        ``"<file>: <what is wrong>"`` for an unreadable file, an unsupported
        extension, a surface that is not closed, not manifold, inconsistently
        wound, self-intersecting, in several pieces, or without volume.
    """
    path = Path(path)
    kind = path.suffix.lower().lstrip(".")
    if kind not in FORMATS:
        raise ModelError(f"{path}: unsupported mesh format {path.suffix!r}; use one of "
                         + ", ".join(f".{k}" for k in FORMATS))
    if path.is_dir():
        raise ModelError(f"{path}: cannot read file: it is a directory")
    if not path.is_file():
        raise ModelError(f"{path}: cannot read file: no such file")
    vertices, triangles = _read(path, kind)
    used = np.unique(triangles)
    try:
        size = _check_magnitude(vertices[used])
    except ModelError as exc:
        raise ModelError(f"{path}: {exc}") from None
    _check_triangles(path, vertices, triangles, size, tol)
    pairs = _check_surface(path, vertices, triangles)
    _check_no_crossing(path, vertices, triangles, size, tol)
    n_tri = len(triangles)
    graph = coo_matrix((np.ones(len(pairs)), (pairs[:, 0], pairs[:, 1])), shape=(n_tri, n_tri))
    n_pieces = connected_components(graph, directed=False)[0]
    if n_pieces > 1:
        raise ModelError(f"{path}: the mesh is in {n_pieces} separate pieces; give one closed surface")
    volume = _signed_volume(vertices, triangles)
    if abs(volume) <= tol.area * size**3:
        raise ModelError(f"{path}: the surface encloses no volume")
    if volume < 0:
        triangles = triangles[:, ::-1]
    label = _coplanar_patches(vertices, triangles, pairs, size, tol)
    loops = [_loop(path, vertices, triangles[label == g]) for g in range(label.max() + 1)]
    _check_planar(path, vertices, loops, size, tol)
    loops = _drop_straight(vertices, loops, size, tol)
    keep = np.unique(np.concatenate(loops))
    index = np.full(len(vertices), -1, dtype=np.int64)
    index[keep] = np.arange(len(keep))
    faces = []
    for loop in loops:
        face = index[np.array(loop)]
        start = int(np.argmin(face))
        faces.append(np.roll(face, -start))
    return Polyhedron(path.stem, vertices[keep], tuple(faces))
