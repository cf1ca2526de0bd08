"""The GL item that draws a build's solids: thick panels and gear bodies.

`SolidLayer` is a `PanelLayer` whose fills are closed triangle meshes instead of
flat polygons. Every solid is carried by one face (`foldsim.build.prisms.Solid`),
so the layer moves with the same (F, 4, 4) poses and draws a block of faces per
call, as the flat layer does. A panel's prism takes the panel's colour (warning and
selection included); a gear body keeps a colour of its own. Outlines are the
meshes' feature edges, where two triangles meet at more than a few degrees, drawn
by the fills as bands along those triangle sides (see `panel_layer`): tens of
thousands of GL lines cost the software renderer more than all the fills.
"""

import numpy as np
from OpenGL import GL

from . import palette
from .panel_layer import _FAR, HINGE_WIDTH, PanelLayer, _rgba

FEATURE_DEG = 20.0
"""Edges between triangles that turn by more than this are drawn as outlines."""

GEAR_FEATURE_DEG = 45.0
"""The same for gear bodies: their ends and sector sides, never the facets of their
arcs (12 to the turn on the coarse bodies a large model draws, 30 degrees apart),
so coarse and fine bodies show the same outlines, and a large model does not draw
tens of thousands of lines."""

MULTISAMPLED_BODIES = 128
"""Gear bodies (and rods) up to which they are drawn multisampled, as everything
else is. A larger build (the app draws the bodies of more than 64 pairs coarse)
has many bodies a few pixels across; the software renderer's setup of a
multisampled triangle costs about twice a plain one's, and the bodies are most of
the triangles, so they are drawn without multisampling: their silhouettes are
not smoothed, their outline bands still are."""


def feature_edges(triangles, min_turn_deg=FEATURE_DEG):
    """The edges of a triangle mesh where its surface turns, and its open edges.

    Parameters
    ----------
    triangles : (n, 3, 3) float
    min_turn_deg : float
        Two triangles sharing an edge make it a feature edge when their normals
        differ by more than this.

    Returns
    -------
    (m, 2, 3) float
        End points of each feature edge, once each.

    Examples
    --------
    >>> import numpy as np
    >>> square = np.array([[[0, 0, 0], [1, 0, 0], [1, 1, 0]], [[0, 0, 0], [1, 1, 0], [0, 1, 0]]], float)
    >>> len(feature_edges(square))  # the four sides; the diagonal is flat
    4
    """
    tri = np.asarray(triangles, dtype=float).reshape(-1, 3, 3)
    if not len(tri):
        return np.zeros((0, 2, 3))
    sharp, first = _feature_sides(tri, min_turn_deg)
    ends = np.stack([tri, np.roll(tri, -1, axis=1)], axis=2).reshape(-1, 2, 3)
    return ends[np.unique(first[sharp.ravel()])]


def feature_sides(triangles, min_turn_deg=FEATURE_DEG):
    """Which sides of each triangle are feature edges (`feature_edges`).

    Parameters
    ----------
    triangles : (n, 3, 3) float
    min_turn_deg : float

    Returns
    -------
    (n, 3) bool
        ``out[i, j]``: the side from corner j to corner j + 1 (mod 3) of triangle i
        is a feature edge; both triangles at such an edge say so.

    Examples
    --------
    >>> import numpy as np
    >>> square = np.array([[[0, 0, 0], [1, 0, 0], [1, 1, 0]], [[0, 0, 0], [1, 1, 0], [0, 1, 0]]], float)
    >>> feature_sides(square).astype(int).tolist()  # the diagonal runs from corner 2 to 0, then 0 to 1
    [[1, 1, 0], [0, 1, 1]]
    """
    tri = np.asarray(triangles, dtype=float).reshape(-1, 3, 3)
    if not len(tri):
        return np.zeros((0, 3), bool)
    return _feature_sides(tri, min_turn_deg)[0]


def _feature_sides(tri, min_turn_deg):
    """(n, 3) bool feature sides, and each side's (3 n,) first side of the same edge."""
    normals = np.cross(tri[:, 1] - tri[:, 0], tri[:, 2] - tri[:, 0])
    length = np.linalg.norm(normals, axis=1, keepdims=True)
    normals = np.divide(normals, length, out=np.zeros_like(normals), where=length > 0)
    owner = np.repeat(np.arange(len(tri)), 3)
    # Corners that coincide (to 1e-9 of the mesh's size) are one vertex.
    scale = max(float(np.ptp(tri.reshape(-1, 3), axis=0).max()), 1e-300)
    _, vid = np.unique(np.round(tri.reshape(-1, 3) / (scale * 1e-9)).astype(np.int64), axis=0,
                       return_inverse=True)
    vid = vid.ravel().reshape(-1, 3)
    keys = np.sort(np.stack([vid, np.roll(vid, -1, axis=1)], axis=2).reshape(-1, 2), axis=1)
    _, first, inverse, counts = np.unique(keys, axis=0, return_index=True, return_inverse=True,
                                          return_counts=True)
    inverse = inverse.ravel()
    keep = counts[inverse] != 2
    pairs = np.flatnonzero(counts == 2)
    if len(pairs):
        order = np.argsort(inverse, kind="stable")
        starts = np.searchsorted(inverse[order], pairs)
        a, b = owner[order[starts]], owner[order[starts + 1]]
        turn = np.degrees(np.arccos(np.clip(np.einsum("ij,ij->i", normals[a], normals[b]), -1.0, 1.0)))
        sharp = np.zeros(len(counts), bool)
        sharp[pairs[turn > min_turn_deg]] = True
        keep |= sharp[inverse]
    return keep.reshape(-1, 3), first[inverse]


class SolidLayer(PanelLayer):
    """Every face's solids (its prism, the gear bodies it carries) as one layer.

    Parameters
    ----------
    solids : sequence of Solid
        ``face``, ``kind`` and ``triangles`` (flat frame, outward).
    n_faces : int
    hinge_lines : (H, 2, 3) float
    hinge_parent : (H,) int
    parentItem : GLGraphicsItem, optional
    """

    closed = True
    shaders = "solids"
    outline_side = 1.0
    """A solid's outline at its silhouette shows only the band on the near side, so
    each side draws the whole outline width, as a flat panel's free edge does."""

    def __init__(self, solids, n_faces, hinge_lines, hinge_parent, parentItem=None):
        super(PanelLayer, self).__init__(parentItem=parentItem)
        fills = [[] for _ in range(n_faces)]
        bodies = [[] for _ in range(n_faces)]
        gear = _rgba(palette.GEAR_BODY)
        for solid in solids:
            tri = np.asarray(solid.triangles, dtype=float).reshape(-1, 3, 3)
            normals = np.cross(tri[:, 1] - tri[:, 0], tri[:, 2] - tri[:, 0])
            normals /= np.maximum(np.linalg.norm(normals, axis=1, keepdims=True), 1e-300)
            # Alpha 0: a panel's prism takes the panel's colour; a gear keeps its own.
            color = (1.0, 1.0, 1.0, 0.0) if solid.kind == "panel" else gear
            sides = feature_sides(tri, FEATURE_DEG if solid.kind == "panel" else GEAR_FEATURE_DEG)
            rows = fills if solid.kind == "panel" else bodies
            rows[solid.face].append(self._mesh_rows(tri, normals, solid.face, color, sides))
        hinge_rows = [[] for _ in range(n_faces)]
        for h, f in enumerate(hinge_parent):
            ends = np.asarray(hinge_lines, dtype=float)[h]
            hinge_rows[f].append(self._rows(ends, (0.0, 0.0, 1.0), f, _rgba(palette.HINGE)))
        self.solid_count = len(solids)
        self.multisampled_bodies = sum(solid.kind != "panel" for solid in solids) <= MULTISAMPLED_BODIES
        # The layer's three blocks of rows: prisms, gear bodies, hinge lines.
        self._pack([self._join(r) for r in fills], [self._join(r) for r in bodies],
                   [self._join(r) for r in hinge_rows])

    def _draws(self):
        return ((GL.GL_TRIANGLES, 0.0, True), (GL.GL_TRIANGLES, 0.0, self.multisampled_bodies),
                (GL.GL_LINES, HINGE_WIDTH, True))

    @staticmethod
    def _join(rows):
        return np.concatenate(rows) if rows else np.zeros((0, 11))

    @staticmethod
    def _mesh_rows(tri, normals, face, color, sides):
        """Vertex rows (3 n, 14) of triangles (n, 3, 3) with their feature sides (n, 3) bool.

        The last three columns are each corner's barycentric coordinates, with
        `_FAR` added to the coordinate of an edge that is no outline (the edge
        opposite corner i is the side from corner i + 1 to i + 2).
        """
        n = len(tri) * 3
        plain = np.where(np.roll(sides, -1, axis=1), 0.0, _FAR)
        edge = np.eye(3)[None, :, :] + plain[:, None, :]
        return np.hstack([tri.reshape(-1, 3), np.repeat(normals, 3, axis=0), np.full((n, 1), float(face)),
                          np.broadcast_to(np.asarray(color, float), (n, 4)), edge.reshape(-1, 3)])
