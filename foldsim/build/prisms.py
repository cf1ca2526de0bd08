"""Thick panels as prisms, bevelled at their edges by the tapered-panel method.

Each panel is the file's polygon given a thickness toward one side. With the hinge
line on the panel's surface and the material on the side the hinge folds toward,
neighbours would run into each other; the tapered-panel method (Tachi,
"Rigid-foldable thick origami", Origami 5, 2011; Lang, Tolman, Crampton, Magleby &
Howell, "A review of thickness-accommodation techniques in origami-inspired
engineering", Appl. Mech. Rev. 70(1) 010805, 2018) cuts every side face on the
plane through the edge line that bisects the dihedral angle the edge closes to.
At a depth z below the hinge line the side moves inward by ``z * tan(rho / 2)``,
``rho`` the fold angle the edge closes at, so at closure the two neighbours' side
faces lie in the same bisector plane and meet flush; before closure the joint
opens as a V. Material on the side the edge folds away from needs no cut. With the
axis at the mid-plane, the half on the folding side is cut the same way and the
other half is square.

Cut edges (adjacent at closure but not hinged) are bevelled by their closing
dihedral too, so the closed shell meets flush all round; open boundary edges
stay square.
"""

import weakref
from dataclasses import dataclass

import numpy as np

from .. import geometry
from ..analysis.triangles import triangulate
from ..errors import ModelError
from ..kinematics import face_poses
from ..layout import hinge_edge
from ..tolerances import DEFAULT


@dataclass(frozen=True, eq=False)
class Solid:
    """A rigid closed triangle mesh carried by one face, in the flat frame.

    Attributes
    ----------
    face : int
        The face whose pose carries it.
    label : str
        ``"panel 3"``, ``"coupling 0 gear on hinge 2"``, ...
    kind : str
        ``panel``, ``gear`` or ``rod``.
    triangles : (n, 3, 3) float
        Outward-facing (counter-clockwise seen from outside).
    coupling : int
        The gear's coupling (-1 for panels).
    hinge : int
        The gear's hinge (-1 for panels).
    """

    face: int
    label: str
    kind: str
    triangles: np.ndarray
    coupling: int = -1
    hinge: int = -1

    @property
    def vertices(self):
        """(n, 3) float: the mesh's distinct corner points."""
        return np.unique(self.triangles.reshape(-1, 3), axis=0)


def edge_closing_angles(mech):
    """The fold angle every face edge closes at (`_edge_closing_angles`, kept per mechanism).

    Returns
    -------
    list of (n,) float
        As `_edge_closing_angles`; callers must not change them.
    """
    if mech not in _CLOSING:
        angles = _edge_closing_angles(mech)
        for row in angles:
            row.flags.writeable = False
        _CLOSING[mech] = angles
    return _CLOSING[mech]


_CLOSING = weakref.WeakKeyDictionary()


def _edge_closing_angles(mech):
    """The fold angle every face edge closes at.

    Parameters
    ----------
    mech : Mechanism

    Returns
    -------
    list of (k,) float
        ``out[f][k]``: the signed angle, right-handed about the edge as it runs in
        face f (``face[k] -> face[k+1]``), from f's outward normal to its
        neighbour's at the closing angles; 0 for an open boundary edge. For a
        hinge it equals the hinge's closing angle, seen from either face.
    """
    closed = face_poses(mech, np.asarray(mech.closed_angles, float)[None])[0]
    flat_normal = geometry.newell_normals([mech.flat_faces[mech.root]])[0]
    flat_normal = flat_normal / np.linalg.norm(flat_normal)
    normals = closed[:, :3, :3] @ flat_normal
    out = [np.zeros(len(f)) for f in mech.faces]
    for h in range(mech.n_hinges):
        for f in (int(mech.parent[h]), int(mech.child[h])):
            out[f][hinge_edge(mech, h, f)] = mech.closed_angles[h]
    for (fa, fb), pts in zip(mech.cut_faces.tolist(), mech.cut_points):
        for f, g, side in ((fa, fb, pts[0]), (fb, fa, pts[1])):
            poly = mech.flat_faces[f]
            n = len(poly)
            for k in range(n):
                ends = poly[[k, (k + 1) % n]]
                if np.allclose(ends, side, atol=1e-9 * mech.size) or np.allclose(ends, side[::-1],
                                                                                  atol=1e-9 * mech.size):
                    direction = closed[f, :3, :3] @ (ends[1] - ends[0])
                    out[f][k] = geometry.signed_angle(normals[f], normals[g], direction)
    return out


def _levels(spec, f):
    """Heights along the outward normal of the solid's cross-sections, bottom first."""
    t = spec.thickness[f]
    if spec.axis == "mid":
        return np.array([-t / 2, 0.0, t / 2])
    return np.array([-t, 0.0]) if spec.material == "back" else np.array([0.0, t])


def _inset_polygon(poly, normal, shift):
    """Move every edge of a convex-or-not planar polygon inward by ``shift[k]``.

    Parameters
    ----------
    poly : (..., k, 3) float
        Counter-clockwise about ``normal``; leading axes for many polygons at once.
    normal : (..., 3) float
        Unit.
    shift : (..., k) float

    Returns
    -------
    (..., k, 3) float
        Vertex k where the moved edges k-1 and k cross.
    """
    d = np.roll(poly, -1, axis=-2) - poly
    d = d / np.linalg.norm(d, axis=-1)[..., None]
    inward = np.cross(np.asarray(normal)[..., None, :], d)
    prev_d, prev_in, prev_s = np.roll(d, 1, axis=-2), np.roll(inward, 1, axis=-2), np.roll(shift, 1, axis=-1)
    # p = poly[k] + x d[k-1] + y d[k] with (p - poly[k]) . inward[k-1] = s[k-1] and
    # (p - poly[k]) . inward[k] = s[k]; d[j] . inward[j] = 0.
    across_prev = (d * prev_in).sum(axis=-1)
    across = (prev_d * inward).sum(axis=-1)
    parallel = (np.abs(across_prev) < 1e-12) | (np.abs(across) < 1e-12)
    with np.errstate(divide="ignore", invalid="ignore"):
        x = np.where(parallel, 0.0, shift / across)
        y = np.where(parallel, 0.0, prev_s / across_prev)
    out = poly + x[..., None] * prev_d + y[..., None] * d
    return np.where(parallel[..., None], poly + shift[..., None] * inward, out)


def panel_rings(mech, spec, f, closing=None, erode=0.0, tol=DEFAULT):
    """The cross-sections of one panel's prism, bottom first (flat frame).

    Parameters
    ----------
    mech : Mechanism
    spec : BuildSpec
    f : int
    closing : list of (k,) float, optional
        From `edge_closing_angles`.
    erode : float
        As for `panel_solid`.

    Returns
    -------
    list of (k, 3) float
        Every level's outline (two or three levels): the bevels move each edge in.

    Raises
    ------
    ModelError
        When the bevels leave no panel.
    """
    closing = edge_closing_angles(mech) if closing is None else closing
    return [ring[0] for ring in _rings_of(mech, spec, np.array([f]), closing, erode, tol)]


def panel_solid(mech, spec, f, closing, erode=0.0, tol=DEFAULT):
    """The prism of one panel.

    Parameters
    ----------
    mech : Mechanism
    spec : BuildSpec
    f : int
    closing : list of (k,) float
        From `edge_closing_angles`.
    erode : float
        Shrink every face of the solid inward by this length (a contact
        tolerance: solids that only touch are then apart).

    Returns
    -------
    Solid

    Raises
    ------
    ModelError
        When the bevels leave no panel (``build.thickness`` too large for it).
    """
    (tris,) = _prisms_of(mech, spec, np.array([f]), closing, erode, tol)
    return Solid(int(f), f"panel {f}", "panel", tris)


def panel_solids(mech, spec, erode=0.0, tol=DEFAULT):
    """The prism of every panel (list of `Solid`, in face order).

    Kept per mechanism (while it lives) and per thickness, side, axis, erosion and
    tolerances: a check builds the same prisms for several of its sweeps.
    """
    key = (np.asarray(spec.thickness, float).tobytes(), spec.material, spec.axis, float(erode), tol)
    known = _PRISMS.setdefault(mech, {})
    if key not in known:
        closing = edge_closing_angles(mech)
        sizes = np.array([len(p) for p in mech.flat_faces])
        out = [None] * mech.n_faces
        for k in np.unique(sizes).tolist():
            faces = np.flatnonzero(sizes == k)
            for f, tris in zip(faces.tolist(), _prisms_of(mech, spec, faces, closing, erode, tol)):
                out[f] = Solid(int(f), f"panel {f}", "panel", tris)
        known[key] = tuple(out)
        for solid in known[key]:
            solid.triangles.flags.writeable = False  # shared between callers
    return list(known[key])


def _rings_of(mech, spec, faces, closing, erode, tol):
    """`panel_rings` of faces that all have k corners, at once: a list of L (m, k, 3) levels."""
    poly = np.array([mech.flat_faces[f] for f in faces.tolist()])  # (m, k, 3)
    normal = geometry.newell_normals(list(poly))
    normal = normal / np.linalg.norm(normal, axis=1, keepdims=True)
    half = np.tan(np.array([np.asarray(closing[f], float) for f in faces.tolist()]) / 2.0)  # (m, k)
    levels = np.array([_levels(spec, f) for f in faces.tolist()])  # (m, L)
    levels = (levels + np.where(levels == levels.min(axis=1, keepdims=True), erode, 0.0)
              - np.where(levels == levels.max(axis=1, keepdims=True), erode, 0.0))
    d = np.roll(poly, -1, axis=1) - poly
    length = np.linalg.norm(d, axis=2)
    rings = []
    for z in levels.T:  # (m,) one level of every face
        shift = np.maximum(0.0, -z[:, None] * half) + erode
        ring = _inset_polygon(poly, normal, shift) + z[:, None, None] * normal[:, None]
        moved = np.roll(ring, -1, axis=1) - ring
        thin = (np.einsum("mkj,mkj->mk", moved, d) <= tol.coincident * mech.size * length).any(axis=1)
        if thin.any():
            f = int(faces[np.argmax(thin)])
            field = "build.thickness" if f not in spec.doc.faces else "build.faces"
            raise ModelError(f"{field}: panel {f} is too thick for the bevels its edges need "
                             f"(thickness {spec.thickness[f]:.6g} {mech.units})")
        rings.append(ring)
    return rings


def _prisms_of(mech, spec, faces, closing, erode, tol):
    """The triangles (2 c + 2 k (L - 1), 3, 3) of the prism of each of faces that all have k corners."""
    rings = _rings_of(mech, spec, faces, closing, erode, tol)
    m, k = rings[0].shape[:2]
    caps = [np.array([[0, 1, 2]]) if k == 3 else triangulate(mech.flat_faces[f]) for f in faces.tolist()]
    side = np.arange(k)
    nxt = (side + 1) % k
    out = []
    for row in range(m):
        cap = caps[row]
        tris = [rings[0][row][cap[:, ::-1]], rings[-1][row][cap]]
        for lo, hi in zip(rings[:-1], rings[1:]):
            lo, hi = lo[row], hi[row]
            quads = np.stack([np.stack([lo[side], lo[nxt], hi[nxt]], axis=1),
                              np.stack([lo[side], hi[nxt], hi[side]], axis=1)], axis=1)  # (k, 2, 3, 3)
            tris.append(quads.reshape(-1, 3, 3))
        out.append(np.concatenate(tris, axis=0))
    return out


_PRISMS = weakref.WeakKeyDictionary()
"""The prisms of each mechanism, by what they depend on (`panel_solids`)."""


def outer_surface_points(mech, spec):
    """Where each cut edge's two copies sit on the outer surface of the shell.

    With the material toward the back and the axis on the surface, the file's
    polygons are the outer surface; with the axis at the mid-plane the outer
    surface lies half a thickness toward the front; with the material toward the
    front it lies a whole thickness out. A side face that is not cut (the edge
    folds away from that side) reaches the outer surface straight above the edge.

    Parameters
    ----------
    mech : Mechanism
    spec : BuildSpec

    Returns
    -------
    (E, 2, 2, 3) float
        Like ``mech.cut_points``, on the outer surface, flat frame.
    """
    flat_normal = geometry.newell_normals([mech.flat_faces[mech.root]])[0]
    flat_normal = flat_normal / np.linalg.norm(flat_normal)
    closing = edge_closing_angles(mech)
    out = np.array(mech.cut_points, dtype=float, copy=True)
    for e, (fa, fb) in enumerate(mech.cut_faces.tolist()):
        for s, f in enumerate((fa, fb)):
            z = _levels(spec, f).max()
            if z == 0.0:
                continue
            poly = mech.flat_faces[f]
            shift = np.maximum(0.0, -z * np.tan(closing[f] / 2.0))
            ring = _inset_polygon(poly, flat_normal, shift) + z * flat_normal
            for k in range(2):
                nearest = np.argmin(np.linalg.norm(poly - out[e, s, k], axis=1))
                out[e, s, k] = ring[nearest]
    return out
