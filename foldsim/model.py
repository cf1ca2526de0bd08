"""The mechanism: panels, the hinge tree, gear couplings and the drive.

`build_mechanism` validates plain arrays (as read from a file or made by a
generator) and derives everything the engine needs: the hinge tree oriented from
the root, each hinge's fold axis and closing angle, every panel's flat position,
and the cut edges that must meet at closure. `Mechanism` is an immutable record of
the result; the algorithms live in the topic modules.

Conventions: a face's vertices run counter-clockwise seen from the outside of the
closed shell. A hinge's fold axis runs along the shared edge in the direction it
has in the parent face, so a positive fold angle turns the child toward its back,
as a net folds up into a box. Angles are radians here.
"""

from dataclasses import dataclass, field

import numpy as np

from scipy.spatial import cKDTree

from . import geometry, limits
from .errors import ModelError
from .gearing import check_rates
from .kinematics import face_poses
from .tolerances import DEFAULT


@dataclass(frozen=True)
class Coupling:
    """A gear pair: ``theta[hinges[1]] = ratio * theta[hinges[0]]``."""

    hinges: tuple
    ratio: float
    teeth: tuple = None


@dataclass(frozen=True, eq=False)
class Mechanism:
    """An immutable, validated mechanism (build with `build_mechanism`).

    Attributes
    ----------
    name, units, state : str
        ``state`` is what the source vertices described: "closed" or "flat".
    vertices : (V, 3) float
        Source vertices.
    faces : tuple of (k,) int
        Vertex indices of each face.
    root, drive : int
        Face that stays put; hinge that drives the motion.
    hinge_faces : (H, 2) int
        Face pair of each hinge as given.
    couplings : tuple of Coupling
    closed_angles : (H,) float
        Fold angle that closes each hinge (radians, positive toward the back).
    parent, child : (H,) int
        Faces of each hinge, oriented away from the root.
    axes : (H, 2, 3) float
        Two points on each hinge line in the flat frame; the fold turns right-handed
        about ``axes[:, 1] - axes[:, 0]``.
    flat_faces : tuple of (k, 3) float
        Each face's vertices in the flat state (the root's frame).
    face_hinge : (F,) int
        Hinge joining each face to its parent (-1 for the root).
    levels : tuple of (m,) int
        Hinges grouped by depth below the root, shallow first.
    cut_faces : (E, 2) int
        Face pair of every cut edge (faces adjacent in the closed shell, not hinged).
    cut_points : (E, 2, 2, 3) float
        The edge's two endpoints as carried by each of the two faces, in the flat
        frame: ``cut_points[e, s, k]`` is endpoint ``k`` on side ``s``; the two sides
        list the endpoints in matching order.
    size : float
        Diagonal of the closed shape's bounding box.
    """

    name: str
    units: str
    state: str
    vertices: np.ndarray
    faces: tuple
    root: int
    drive: int
    hinge_faces: np.ndarray
    couplings: tuple
    closed_angles: np.ndarray
    parent: np.ndarray
    child: np.ndarray
    axes: np.ndarray
    flat_faces: tuple
    face_hinge: np.ndarray
    levels: tuple
    cut_faces: np.ndarray
    cut_points: np.ndarray
    size: float
    extras: dict = field(default_factory=dict)

    @property
    def n_faces(self):
        return len(self.faces)

    @property
    def n_hinges(self):
        return len(self.hinge_faces)


def _check_faces(vertices, faces, tol):
    """Validate face indices, shape, area and planarity; return unit normals."""
    n_vertices = len(vertices)
    polygons = []
    for i, face in enumerate(faces):
        if len(face) < 3:
            raise ModelError(f"faces[{i}]: needs at least 3 vertices, has {len(face)}")
        bad = [v for v in face if not 0 <= v < n_vertices]
        if bad:
            raise ModelError(f"faces[{i}]: vertex index {bad[0]} out of range (0..{n_vertices - 1})")
        if len(set(face.tolist())) != len(face):
            raise ModelError(f"faces[{i}]: repeats a vertex")
        polygons.append(vertices[face])
    size = _check_magnitude(vertices)
    normals = geometry.newell_normals(polygons)
    areas = np.linalg.norm(normals, axis=1)
    for i, (poly, normal, area) in enumerate(zip(polygons, normals, areas)):
        if area <= tol.area * size**2:
            raise ModelError(f"faces[{i}]: degenerate (zero area)")
        off = np.abs((poly - poly.mean(axis=0)) @ (normal / area))
        if off.max() > tol.planar * size:
            raise ModelError(f"faces[{i}]: not planar (a vertex is {off.max():.3g} off the face's plane)")
    units = normals / areas[:, None]
    defects = geometry.polygon_defects(polygons, units, tol.coincident * size)
    if defects:
        f, kind, a, b = defects[0]
        face = faces[f]
        if kind == "short":
            raise ModelError(f"faces[{f}]: vertices {face[a]} and {face[b]} are at one point (an edge of zero "
                             "length)")
        if kind == "fold":
            raise ModelError(f"faces[{f}]: not a simple polygon: its boundary turns back on itself at "
                             f"vertex {face[a]}")
        raise ModelError(f"faces[{f}]: not a simple polygon: its edges {face[a]}-{face[(a + 1) % len(face)]} "
                         f"and {face[b]}-{face[(b + 1) % len(face)]} cross or touch")
    return units, size


def _check_magnitude(vertices):
    """The model's size (bounding-box diagonal); coordinates must keep float64 arithmetic sound.

    Raises `ModelError` naming the limit (docs/format.md, Limits) for a coordinate
    beyond `limits.MAX_COORDINATE`, a model smaller than `limits.MIN_SIZE`, or one
    lying more than `limits.MAX_OFFSET` times its own size from the origin.
    """
    magnitude = np.abs(vertices).max(axis=1)
    far = int(np.argmax(magnitude))
    if magnitude[far] > limits.MAX_COORDINATE:
        raise ModelError(f"vertices[{far}]: coordinate {magnitude[far]:.3g} is beyond the limit of "
                         f"{limits.MAX_COORDINATE:g} in size (docs/format.md, Limits)")
    extent = np.ptp(vertices, axis=0)
    if 0 < extent.max() < limits.MIN_SIZE:
        raise ModelError(f"vertices: the model's size {extent.max():.3g} is below the limit of "
                         f"{limits.MIN_SIZE:g} (docs/format.md, Limits)")
    size = float(np.linalg.norm(extent))
    if magnitude[far] > limits.MAX_OFFSET * size:
        raise ModelError(f"vertices[{far}]: coordinate {magnitude[far]:.3g} is more than {limits.MAX_OFFSET:g} "
                         f"times the model's size ({size:.3g}) from the origin, beyond float64 precision "
                         "(docs/format.md, Limits)")
    return size or 1.0


def _edge_table(faces):
    """Map each undirected edge to the (face, local index, forward) uses of it."""
    table = {}
    for f, face in enumerate(faces):
        for k in range(len(face)):
            u, v = int(face[k]), int(face[(k + 1) % len(face)])
            table.setdefault((min(u, v), max(u, v)), []).append((f, k, u < v))
    return table


def _shared_edge(faces, edges, a, b):
    """Directed shared edge (u, v) as it runs in face a, or None."""
    fa = faces[a]
    for k in range(len(fa)):
        u, v = int(fa[k]), int(fa[(k + 1) % len(fa)])
        if any(f == b for f, _, _ in edges[(min(u, v), max(u, v))]):
            return u, v
    return None


def _hinge_tree(n_faces, hinge_faces, root):
    """Validate that hinges form a spanning tree; orient it from the root."""
    seen = {}
    for i, (a, b) in enumerate(hinge_faces):
        key = (min(a, b), max(a, b))
        if key in seen:
            raise ModelError(f"hinges[{i}]: duplicate of hinges[{seen[key]}]")
        seen[key] = i
    link = np.arange(n_faces)

    def find(x):
        while link[x] != x:
            link[x] = link[link[x]]
            x = link[x]
        return x

    for i, (a, b) in enumerate(hinge_faces):
        ra, rb = find(a), find(b)
        if ra == rb:
            raise ModelError(f"hinges[{i}]: closes a loop between faces {a} and {b} (hinges must form a tree)")
        link[ra] = rb
    adjacency = [[] for _ in range(n_faces)]
    for i, (a, b) in enumerate(hinge_faces):
        adjacency[a].append((b, i))
        adjacency[b].append((a, i))
    parent = np.full(len(hinge_faces), -1)
    child = np.full(len(hinge_faces), -1)
    face_hinge = np.full(n_faces, -1)
    depth = np.full(n_faces, -1)
    depth[root] = 0
    queue = [root]
    for f in queue:
        for g, h in adjacency[f]:
            if depth[g] < 0:
                depth[g] = depth[f] + 1
                parent[h], child[h], face_hinge[g] = f, g, h
                queue.append(g)
    unreached = np.flatnonzero(depth < 0)
    if len(unreached):
        raise ModelError(f"faces[{unreached[0]}]: not connected to the root face {root} by hinges")
    hinge_depth = depth[child]
    levels = tuple(np.flatnonzero(hinge_depth == d) for d in range(1, int(depth.max()) + 1))
    return parent, child, face_hinge, levels, queue


def build_mechanism(vertices, faces, hinges, root=0, drive=0, couplings=(), state="closed",
                    closed_angles=None, name="", units="mm", extras=None, tol=DEFAULT):
    """Validate a mechanism and derive its flat layout, fold axes and cut edges.

    Parameters
    ----------
    vertices : (V, 3) float
    faces : sequence of sequences of int
        Counter-clockwise seen from outside (flat state: from the side that ends up
        outside).
    hinges : (H, 2) int
        Face pairs that share an edge and together form a spanning tree.
    root, drive : int
        Fixed face; driving hinge.
    couplings : sequence of Coupling
    state : {"closed", "flat"}
        What ``vertices`` describe.
    closed_angles : (H,) float, optional
        Closing fold angles in radians; required for the flat state, derived from
        the geometry (and ignored) for the closed state.
    tol : Tolerances

    Returns
    -------
    Mechanism

    Raises
    ------
    ModelError
        With the offending field and index in the message.
    """
    try:
        vertices = np.asarray(vertices, dtype=float)
        vertices = vertices.reshape(0, 3) if vertices.size == 0 else vertices
        if vertices.ndim != 2 or vertices.shape[1] != 3:
            raise ValueError(f"vertices have shape {vertices.shape}, not (V, 3)")
        faces = tuple(np.asarray(f, dtype=np.int64).reshape(-1) for f in faces)
        hinge_faces = np.asarray(hinges, dtype=np.int64).reshape(-1, 2)
    except (OverflowError, ValueError, TypeError) as exc:
        raise ModelError(f"vertices, faces or hinges: not arrays of numbers of the right shape ({exc})") from None
    limits.check_count(len(vertices), limits.MAX_VERTICES, "vertices", "vertices")
    limits.check_count(len(faces), limits.MAX_FACES, "faces", "faces")
    limits.check_count(len(hinge_faces), limits.MAX_HINGES, "hinges", "hinges")
    n_faces, n_hinges = len(faces), len(hinge_faces)
    if n_faces == 0:
        raise ModelError("faces: no faces")
    if not np.isfinite(vertices).all():
        bad = int(np.argwhere(~np.isfinite(vertices))[0, 0])
        raise ModelError(f"vertices[{bad}]: coordinates must be finite numbers")
    normals, size = _check_faces(vertices, faces, tol)
    if not 0 <= root < n_faces:
        raise ModelError(f"root: face {root} out of range (0..{n_faces - 1})")
    for i, (a, b) in enumerate(hinge_faces):
        for f in (a, b):
            if not 0 <= f < n_faces:
                raise ModelError(f"hinges[{i}]: face {f} out of range (0..{n_faces - 1})")
        if a == b:
            raise ModelError(f"hinges[{i}]: joins face {a} to itself")
    edges = _edge_table(faces)
    for key, uses in edges.items():
        if len(uses) > 2:
            raise ModelError(f"faces[{uses[2][0]}]: edge {key[0]}-{key[1]} is shared by more than two faces")
        if len(uses) == 2 and uses[0][2] == uses[1][2]:
            raise ModelError(
                f"faces[{uses[1][0]}]: edge {key[0]}-{key[1]} runs the same way as in face {uses[0][0]} "
                "(faces must all be counter-clockwise seen from outside)")
    directed = []
    for i, (a, b) in enumerate(hinge_faces):
        edge = _shared_edge(faces, edges, a, b)
        if edge is None:
            raise ModelError(f"hinges[{i}]: faces {a} and {b} share no edge")
        directed.append(edge)
    parent, child, face_hinge, levels, order = _hinge_tree(n_faces, hinge_faces, root)
    if n_hinges == 0:
        raise ModelError("hinges: a mechanism needs at least one hinge")
    if not 0 <= drive < n_hinges:
        raise ModelError(f"drive: hinge {drive} out of range (0..{n_hinges - 1})")
    for i, c in enumerate(couplings):
        for h in c.hinges:
            if not 0 <= h < n_hinges:
                raise ModelError(f"couplings[{i}]: hinge {h} out of range (0..{n_hinges - 1})")
        if c.hinges[0] == c.hinges[1]:
            raise ModelError(f"couplings[{i}]: couples hinge {c.hinges[0]} to itself")
        if not (np.isfinite(c.ratio) and c.ratio != 0):
            raise ModelError(f"couplings[{i}].ratio: must be a finite non-zero number, not {c.ratio}")
    # Directed hinge edge as it runs in the parent face.
    axis_index = np.array([d if parent[i] == hinge_faces[i][0] else d[::-1] for i, d in enumerate(directed)])
    if state == "closed":
        angles, flat_faces, axes = _unfold(vertices, faces, normals, parent, child, levels, face_hinge, axis_index)
    elif state == "flat":
        if closed_angles is None:
            raise ModelError("hinges[0]: closed_angle_deg is required when state is flat")
        angles = np.asarray(closed_angles, dtype=float)
        _check_flat(vertices, faces, normals, root, size, tol)
        flat_faces = tuple(vertices[f] for f in faces)
        axes = vertices[axis_index]
    else:
        raise ModelError(f"state: must be 'closed' or 'flat', not {state!r}")
    if abs(angles[drive]) <= tol.coincident:
        raise ModelError(f"drive: hinge {drive} does not fold (closing angle 0); drive a hinge that folds")
    mech = Mechanism(
        name=name, units=units, state=state, vertices=vertices, faces=faces, root=int(root),
        drive=int(drive), hinge_faces=hinge_faces, couplings=tuple(couplings), closed_angles=angles,
        parent=parent, child=child, axes=axes, flat_faces=flat_faces, face_hinge=face_hinge,
        levels=levels, cut_faces=np.zeros((0, 2), np.int64), cut_points=np.zeros((0, 2, 2, 3)),
        size=size, extras=dict(extras or {}))
    if state == "flat":
        closed = face_poses(mech, angles[None])[0]
        pts = np.concatenate([geometry.transform_points(closed[f], p) for f, p in enumerate(flat_faces)])
        object.__setattr__(mech, "size", float(np.linalg.norm(np.ptp(pts, axis=0))) or size)
        cut_faces, cut_points = _matched_cut_edges(mech, edges, closed, tol)
    else:
        cut_faces, cut_points = _shared_cut_edges(mech, edges)
    for arr in (cut_faces, cut_points):
        arr.setflags(write=False)
    object.__setattr__(mech, "cut_faces", cut_faces)
    object.__setattr__(mech, "cut_points", cut_points)
    check_rates(mech)
    return mech


def _unfold(vertices, faces, normals, parent, child, levels, face_hinge, axis_index):
    """Closing angles, flat face positions and flat axes from a closed shape.

    Batched over the hinges of each depth level of the tree, root first.
    """
    n_hinges = len(parent)
    lines = vertices[axis_index].reshape(n_hinges, 2, 3)
    angles = np.asarray(geometry.signed_angle(normals[parent], normals[child], lines[:, 1] - lines[:, 0]),
                        float).reshape(n_hinges)
    rotations = geometry.line_rotations(lines, -angles)
    unfold = np.broadcast_to(np.eye(4), (len(faces), 4, 4)).copy()
    axes = np.zeros((n_hinges, 2, 3))
    for level in levels:
        up = unfold[parent[level]]
        unfold[child[level]] = up @ rotations[level]
        axes[level] = geometry.transform_points(up[:, None], lines[level])
    flat_faces = tuple(geometry.transform_points(unfold[f], vertices[face]) for f, face in enumerate(faces))
    return angles, flat_faces, axes


def _check_flat(vertices, faces, normals, root, size, tol):
    """A flat file's faces must all lie in the root's plane, facing the same way."""
    n0 = normals[root]
    p0 = vertices[faces[root]].mean(axis=0)
    off = np.abs((vertices[np.unique(np.concatenate(faces))] - p0) @ n0)
    used = np.unique(np.concatenate(faces))
    if off.max() > tol.planar * size:
        raise ModelError(f"vertices[{used[np.argmax(off)]}]: not in the plane of the root face (state is flat)")
    flipped = np.flatnonzero(normals @ n0 < 0)
    if len(flipped):
        raise ModelError(f"faces[{flipped[0]}]: wound clockwise; in a flat file every face runs "
                         "counter-clockwise seen from the side that ends up outside")


def _shared_cut_edges(mech, edges):
    """Cut edges of a closed file: edges two faces share that are not hinges."""
    hinged = {(min(a, b), max(a, b)) for a, b in mech.hinge_faces.tolist()}
    pairs, points = [], []
    for (u, v), uses in edges.items():
        if len(uses) != 2:
            continue
        fa, fb = uses[0][0], uses[1][0]
        if (min(fa, fb), max(fa, fb)) in hinged:
            continue
        sides = []
        for f in (fa, fb):
            local = list(mech.faces[f])
            sides.append(mech.flat_faces[f][[local.index(u), local.index(v)]])
        pairs.append((fa, fb))
        points.append(sides)
    return np.array(pairs, np.int64).reshape(-1, 2), np.array(points, float).reshape(-1, 2, 2, 3)


def _matched_cut_edges(mech, edges, closed, tol):
    """Cut edges of a flat file: unhinged edges that coincide when ideally closed.

    ``closed`` is (F, 4, 4), the face poses at the closing angles.
    """
    hinged = {(min(a, b), max(a, b)) for a, b in mech.hinge_faces.tolist()}
    free = []
    for uses in edges.values():
        if len(uses) == 2 and (min(uses[0][0], uses[1][0]), max(uses[0][0], uses[1][0])) in hinged:
            continue
        for f, k, _ in uses:
            free.append((f, k, (k + 1) % len(mech.faces[f])))
    if not free:
        return np.zeros((0, 2), np.int64), np.zeros((0, 2, 2, 3))
    free = np.array(free)
    flat = np.array([mech.flat_faces[f][[k0, k1]] for f, k0, k1 in free])
    posed = geometry.transform_points(closed[free[:, 0]][:, None], flat)
    eps = tol.coincident * mech.size
    tree = cKDTree(posed.mean(axis=1))
    pairs, points = [], []
    for i, j in sorted(tree.query_pairs(eps)):
        a, b = posed[i], posed[j]
        if np.abs(a - b[::-1]).max() <= eps and free[i, 0] != free[j, 0]:
            pairs.append((free[i, 0], free[j, 0]))
            points.append([flat[i], flat[j][::-1]])
    return np.array(pairs, np.int64).reshape(-1, 2), np.array(points, float).reshape(-1, 2, 2, 3)
