"""Part types: which panels of a mechanism can be made as the same part.

Two faces are the same part when an isometry of the plane carries one polygon onto
the other together with everything that makes the panel a part: every edge's
length and role (hinge to the parent, hinge to a child, cut edge, free edge), the
fold angle at which the edge closes, and the gears on it (kind, ratio, shaft angle
or centre distance, and whether this panel carries the axles or holds the gear).

Proper rotations and reflections are both allowed: a panel and its mirror image
count as one part type, as they do for panels cut from a sheet with no marked side
(turn one over to get the other). Pass ``mirror=False`` for panels whose two sides
differ (say, with gears mounted on the inside), where only rotations in the
panel's plane count.

Each face is described by a cyclic sequence of tokens, corner angle, edge, corner
angle, edge, ... in counter-clockwise order. The canonical form is the smallest of
its rotations (and, with ``mirror``, of the rotations of the reversed sequence,
which is the mirror image). Faces with equal canonical forms are one type. Nothing
in a token depends on face, hinge or vertex numbering, so the grouping does not
change when a model is relabelled. Numbers are compared on a grid of
``tol.planar`` (lengths relative to the model's size, angles in radians, ratios
relative).
"""

import numpy as np

from . import geometry
from .kinematics import face_poses
from .layout import hinge_edge, pair_geometry
from .tolerances import DEFAULT


def _cut_edges(mech):
    """(face, local edge) -> the other face of the cut edge it carries (matched by flat ends)."""
    out = {}
    eps = DEFAULT.coincident * mech.size
    for e, pair in enumerate(mech.cut_faces.tolist()):
        for s, f in enumerate(pair):
            pts = mech.flat_faces[f]
            ends = mech.cut_points[e, s]
            n = len(pts)
            for k in range(n):
                seg = np.array([pts[k], pts[(k + 1) % n]])
                if min(np.abs(seg - ends).max(), np.abs(seg - ends[::-1]).max()) <= eps:
                    out[(f, k)] = pair[1 - s]
                    break
    return out


def _closed_normals(mech):
    """Closed poses (F, 4, 4) and outward normals (F, 3) of the faces at the closing angles."""
    closed = face_poses(mech, mech.closed_angles[None])[0]
    normals = geometry.newell_normals([geometry.transform_points(closed[f], p)
                                       for f, p in enumerate(mech.flat_faces)])
    return closed, normals


def _cut_angles(mech, closed, normals, cut):
    """Fold angle between face f and face g across f's edge k when closed, per (f, k) -> g.

    Measured like a hinge's: right-handed about the edge as it runs in f, from f's
    normal to g's, so it is the same seen from either face.
    """
    if not cut:
        return {}
    keys = list(cut)
    f = np.array([fk[0] for fk in keys])
    g = np.array([cut[fk] for fk in keys])
    ends = np.array([[mech.flat_faces[a][k], mech.flat_faces[a][(k + 1) % len(mech.flat_faces[a])]]
                     for a, k in keys])
    posed = geometry.transform_points(closed[f][:, None], ends)
    angles = geometry.signed_angle(normals[f], normals[g], posed[:, 1] - posed[:, 0])
    return dict(zip(keys, angles.tolist()))


def _edge_features(mech, tol):
    """Per face, per local edge: role, closing angle and gear items (without partner offsets).

    Gear items are ``(kind, factor, shape, carrier, partner_edge, apex)``:
    ``factor`` is theta[partner] / theta[this hinge]; ``shape`` the shaft angle
    (bevel kinds) or centre distance (spur); ``partner_edge`` the partner's local
    edge on this face when this face carries the pair, else None; ``apex`` (3,) the
    bevel apex in the flat frame (where along the edge the gear sits), else None.
    """
    cut = _cut_edges(mech)
    closed, normals = _closed_normals(mech)
    cut_angle = _cut_angles(mech, closed, normals, cut)
    features = []
    edge_of = {}
    for h in range(mech.n_hinges):
        for f in mech.hinge_faces[h].tolist():
            edge_of[(h, f)] = hinge_edge(mech, h, f)
    hinge_at = {(f, k): h for (h, f), k in edge_of.items()}
    gears = {}
    for c in mech.couplings:
        i, j = c.hinges
        pair = pair_geometry(mech, i, j, ratio=c.ratio, tol=tol)
        shape = pair.centre_distance if pair.kind == "spur" else pair.shaft_angle
        for this, other, factor in ((i, j, c.ratio), (j, i, 1.0 / c.ratio)):
            for f in mech.hinge_faces[this].tolist():
                carrier = f == pair.face
                partner = edge_of[(other, f)] if carrier else None
                gears.setdefault((f, edge_of[(this, f)]), []).append(
                    (pair.kind, factor, shape, carrier, partner, pair.apex))
    for f in range(mech.n_faces):
        row = []
        for k in range(len(mech.faces[f])):
            h = hinge_at.get((f, k))
            if h is not None:
                role = "parent" if mech.child[h] == f else "child"
                angle = float(mech.closed_angles[h])
            elif (f, k) in cut:
                role, angle = "cut", cut_angle[(f, k)]
            else:
                role, angle = "free", None
            row.append((role, angle, gears.get((f, k), [])))
        features.append(row)
    return features


def _q(value, step):
    """A number on the comparison grid (an int), or None."""
    return None if value is None else round(value / step)


def _shape(pts, normal):
    """Interior angle at every corner and length of every edge (n,) of one face."""
    incoming, outgoing = pts - np.roll(pts, 1, axis=0), np.roll(pts, -1, axis=0) - pts
    interior = np.pi - geometry.signed_angle(incoming, outgoing, np.broadcast_to(normal, pts.shape))
    return interior, np.linalg.norm(outgoing, axis=1)


def _shapes(polygons, normals):
    """`_shape` of every polygon at once: lists of interior angles and edge lengths."""
    sizes = np.array([len(p) for p in polygons])
    pts = np.concatenate(polygons)
    start = np.repeat(np.concatenate([[0], np.cumsum(sizes)[:-1]]), sizes)
    local = np.arange(len(pts)) - start
    n = np.repeat(sizes, sizes)
    prev, nxt = start + (local - 1) % n, start + (local + 1) % n
    incoming, outgoing = pts - pts[prev], pts[nxt] - pts
    face_normal = np.repeat(np.asarray(normals, float), sizes, axis=0)
    interior = (np.pi - geometry.signed_angle(incoming, outgoing, face_normal)).tolist()
    lengths = np.linalg.norm(outgoing, axis=1).tolist()
    bounds = np.concatenate([[0], np.cumsum(sizes)]).tolist()
    return [(interior[s:e], lengths[s:e]) for s, e in zip(bounds[:-1], bounds[1:])]


def _sequence(pts, normal, features, forward, size, grid, shape=None):
    """Token sequence of one face walked forwards or backwards (the mirror image).

    ``pts`` (n, 3) are the face's vertices, ``normal`` (3,) its outward normal;
    ``shape``, optional, its `_shape` (interior angles and edge lengths).
    """
    n = len(pts)
    order = list(range(n)) if forward else list(range(n - 1, -1, -1))
    position = {k: p for p, k in enumerate(order)}
    interior, lengths = _shape(pts, normal) if shape is None else shape
    tokens = []
    for p, k in enumerate(order):
        corner = k if forward else (k + 1) % n  # the corner before this edge in walking order
        tokens.append(repr(("corner", _q(float(interior[corner]), grid))))
        role, angle, gears = features[k]
        items = ()
        if gears:
            a, b = pts[k], pts[(k + 1) % n]
            start, end = (a, b) if forward else (b, a)
            along = (end - start) / np.linalg.norm(end - start)
            items = tuple(sorted(
                repr((kind, _q(factor, grid * max(1.0, abs(factor))),
                      _q(form / size if kind == "spur" else form, grid), carrier,
                      None if partner is None else (position[partner] - p) % n,
                      None if apex is None else _q(np.dot(apex - start, along) / size, grid)))
                for kind, factor, form, carrier, partner, apex in gears))
        tokens.append(repr(("edge", _q(float(lengths[k]) / size, grid), role, _q(angle, grid),
                            items)))
    return tokens


def _canonical(tokens):
    """Smallest rotation of a token sequence that starts at a corner."""
    return min(tuple(tokens[s:] + tokens[:s]) for s in range(0, len(tokens), 2))


def face_signature(mech, f, mirror=True, features=None, tol=DEFAULT, normal=None, shape=None):
    """Canonical description of face f as a part (equal for faces of one type).

    Parameters
    ----------
    mech : Mechanism
    f : int
    mirror : bool
        Count mirror images as the same part.
    features : list, optional
        Precomputed edge features (internal).
    tol : Tolerances
    normal, shape : optional
        Precomputed normal and `_shape` of the face (internal).

    Returns
    -------
    tuple of str
    """
    features = _edge_features(mech, tol) if features is None else features
    pts = mech.flat_faces[f]
    normal = geometry.newell_normals([pts])[0] if normal is None else normal
    shape = _shape(pts, normal) if shape is None else shape
    # Walking the loop backwards describes the mirror image.
    walks = (True, False) if mirror else (True,)
    return min(_canonical(_sequence(pts, normal, features[f], forward, mech.size, tol.planar, shape))
               for forward in walks)


def part_types(mech, mirror=True, tol=DEFAULT):
    """Faces grouped into part types.

    Parameters
    ----------
    mech : Mechanism
    mirror : bool
        Count mirror images as the same part (default; see the module docstring).
    tol : Tolerances

    Returns
    -------
    list of list of int
        Each group's faces in increasing order; groups ordered by their first face.

    Examples
    --------
    Three squares in a row folding 90° each way: the two ends are one part.

    >>> from foldsim.model import build_mechanism
    >>> pts = [(x, y, 0.0) for y in (0.0, 1.0) for x in range(4)]
    >>> m = build_mechanism(pts, [[0, 1, 5, 4], [1, 2, 6, 5], [2, 3, 7, 6]], [(1, 0), (1, 2)],
    ...                     root=1, state="flat", closed_angles=[np.pi / 2, np.pi / 2])
    >>> part_types(m)
    [[0, 2], [1]]
    """
    features = _edge_features(mech, tol)
    normals = geometry.newell_normals(mech.flat_faces)
    shapes = _shapes(mech.flat_faces, normals)
    groups = {}
    for f in range(mech.n_faces):
        groups.setdefault(face_signature(mech, f, mirror, features, tol, normals[f], shapes[f]), []).append(f)
    return sorted(groups.values())
