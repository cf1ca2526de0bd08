"""What the view draws over the panels: crossings, gaps and their labels, envelope, selection.

`Overlays`, a part of `viewport.FoldView`, keeps the line items under the view's
stage up to date with the current poses: where colliding panels cut each other,
the gap lines of open cut edges with their length labels, the outlines of sampled
builds (the play-and-backlash envelope) and the selected panel and hinge. The
labels are painted by `_LabelOverlay`, a see-through widget over the GL view, and
into offscreen frames by `viewport.FoldView.render_image`.
"""

import numpy as np
import pyqtgraph.opengl as gl
from OpenGL import GL
from PySide6 import QtCore, QtGui, QtWidgets

from ...analysis.closure import posed_cut_ends
from ...analysis.collision import triangle_pairs
from ...gearing import fold_angles
from ...geometry import transform_points
from ...picking import intersection_segments
from ...stackup import perturbed_poses
from ...tolerances import DEFAULT
from . import palette
from .camera import _matrix
from .legend import draw_legend, legend_entries
from .numbers import anchor_points, draw_numbers
from .panel_layer import _rgba

MAX_AUTO_LABELS = 6
"""Gap labels shown when no cut edge is chosen: the widest open gaps."""

NEAR_GAP = 0.25
"""Open cut edges get gap lines when their gap is below this fraction of the model's size."""

LARGE_MODEL = 100
"""From this many panels on, gap lines are drawn only for the chosen cut edges (or the widest few)."""

ENVELOPE = (176, 84, 0)
"""Colour of the sampled-build outlines (`FoldView.set_envelope`), drawn see-through."""

ENVELOPE_ALPHA = 0.35


def label_text(gap, units):
    """Text of a gap label, three significant figures.

    Examples
    --------
    >>> label_text(23.456, "mm"), label_text(0.0012345, "in")
    ('23.5 mm', '0.00123 in')
    """
    return f"{gap:.3g} {units}".strip()


class _LabelOverlay(QtWidgets.QWidget):
    """A see-through widget over the GL view that draws the gap labels.

    Text drawn by the raster engine here is much cheaper than through the GL
    paint engine inside the frame.
    """

    def __init__(self, view):
        super().__init__(view)
        self.view = view
        self.setAttribute(QtCore.Qt.WidgetAttribute.WA_TransparentForMouseEvents)
        self.setAttribute(QtCore.Qt.WidgetAttribute.WA_NoSystemBackground)

    def paintEvent(self, ev):
        view = self.view
        if view.mech is None:
            return
        painter = QtGui.QPainter(self)
        view.numbers_drawn = view._draw_labels(painter, self.width(), self.height(), 1.0)
        rows = max(4, int(0.35 * self.height() / max(self.fontMetrics().height() + 3, 1)))
        view.legend_shown = legend_entries(view, rows) if view.show_legend else []
        view.legend_box = draw_legend(painter, view, view.legend_shown, self.width(), self.height())
        painter.end()


class Overlays:
    """Crossings, gap lines and labels, the envelope and the selection marks (a mixin of `viewport.FoldView`)."""

    # ------------------------------------------------------ crossings and gaps

    def _update_crossings(self):
        pan, pairs = self.pan, self.colliding
        if not len(pairs):
            self._crossings.setVisible(False)
            return
        ia, ib, _ = triangle_pairs(pan, pairs)
        ta = transform_points(self.poses[pan.tri_face[ia]][:, None], pan.tri_points[ia])
        tb = transform_points(self.poses[pan.tri_face[ib]][:, None], pan.tri_points[ib])
        segments, hit = intersection_segments(ta, tb)
        if not hit.any():
            self._crossings.setVisible(False)
            return
        self._crossings.setData(pos=segments[hit].reshape(-1, 3))
        self._crossings.setVisible(True)

    def open_edge_mask(self):
        """Whether each cut edge's gap at the current t exceeds the tolerance, (E,) bool."""
        return self.gaps > self.gap_tolerance

    def open_edges(self):
        """Indices (n,) of cut edges whose gap at the current t exceeds the tolerance."""
        return np.flatnonzero(self.open_edge_mask())

    def drawn_gaps(self):
        """Indices (n,) of the cut edges whose gap lines are drawn now.

        Open edges nearer than `NEAR_GAP` of the model's size, and every open edge
        chosen with `set_label_edges`; wider gaps are the pattern lying open, not
        a fault, and would only clutter the view. On a model of `LARGE_MODEL`
        panels or more, only the chosen edges (none chosen: the `MAX_AUTO_LABELS`
        widest of those) are drawn. With `show_gap_lines` off, none.
        """
        if not self.show_gap_lines:
            return np.zeros(0, np.int64)
        open_ = self.open_edges()
        near = self.gaps[open_] <= NEAR_GAP * self.mech.size
        chosen = np.isin(open_, self.label_edges or [])
        drawn = open_[near | chosen]
        if self.mech.n_faces >= LARGE_MODEL:
            if self.label_edges:
                drawn = open_[chosen]
            else:
                drawn = np.sort(drawn[np.argsort(-self.gaps[drawn], kind="stable")[:MAX_AUTO_LABELS]])
        return drawn

    def set_gap_lines(self, on):
        """Draw the gap lines of open cut edges (and their lengths), or not."""
        self.show_gap_lines = bool(on)
        if self.mech is not None:
            self._update_gaps()
            self.update()

    def set_numbers(self, on):
        """Draw face, hinge and cut-edge numbers, or not."""
        self.show_numbers = bool(on)
        self.update()

    def set_legend(self, on):
        """Show the legend in the view's corner, or not."""
        self.show_legend = bool(on)
        self.update()

    def set_part_types(self, types):
        """The part types the panels are coloured by, for the legend: list of (name, RGB 0-255), or None."""
        self.part_types = None if types is None else [(str(n), tuple(int(c) for c in rgb)) for n, rgb in types]
        self.update()

    def _eye(self):
        """The camera's position (3,) in the model frame."""
        eye = self.cameraPosition()
        inverse = np.linalg.inv(self.stage())
        return (inverse @ np.array([eye.x(), eye.y(), eye.z(), 1.0]))[:3]

    def hidden_points(self, points, chunk=64):
        """Which model-frame points (n, 3) a panel hides from the camera (n,) bool.

        A label whose line is hidden behind a panel, or a number whose panel is
        turned away behind others, is not drawn over the panel in front. Every
        ray starts at the eye, so the Möller–Trumbore terms that depend only on
        the triangles are shared by all rays (Möller and Trumbore, 1997); a point
        on a panel's own surface is not hidden by that panel.
        """
        points = np.asarray(points, dtype=float).reshape(-1, 3)
        out = np.zeros(len(points), bool)
        if not len(points) or self.poses is None:
            return out
        eye = self._eye()
        pan = self.pan
        tris = transform_points(self.poses[pan.tri_face][:, None], pan.tri_points)
        e1, e2 = tris[:, 1] - tris[:, 0], tris[:, 2] - tris[:, 0]
        s = eye - tris[:, 0]
        q = np.cross(s, e1)
        along = np.einsum("ij,ij->i", e2, q)
        area2 = np.linalg.norm(np.cross(e1, e2), axis=1)
        slack = 1e-2 * self.mech.size
        for start in range(0, len(points), chunk):
            rays = points[start:start + chunk] - eye
            reach = np.linalg.norm(rays, axis=1)
            units = rays / np.where(reach > 0, reach, 1.0)[:, None]
            p = np.cross(units[:, None, :], e2[None, :, :])
            det = np.einsum("kj,mkj->mk", e1, p)
            usable = np.abs(det) > DEFAULT.coincident * area2[None, :]
            inv = np.where(usable, 1.0 / np.where(usable, det, 1.0), 0.0)
            u = np.einsum("kj,mkj->mk", s, p) * inv
            v = (units @ q.T) * inv
            dist = along[None, :] * inv
            hit = usable & (u >= 0) & (v >= 0) & (u + v <= 1) & (dist >= 0)
            nearest = np.where(hit, dist, np.inf).min(axis=1)
            out[start:start + chunk] = (reach > 0) & (nearest < reach - slack)
        return out

    def _update_gaps(self):
        mech = self.mech
        drawn = self.drawn_gaps()
        if not len(drawn):
            self._gap_lines.setVisible(False)
            self._labels = []
            return
        # The ends `set_t` posed for the gaps, unless the poses changed since.
        if self._cut_ends is None or self._cut_ends[0] is not self.poses:
            self._cut_ends = (self.poses, *posed_cut_ends(mech, self.poses))
        a, b = self._cut_ends[1][drawn], self._cut_ends[2][drawn]
        self._gap_lines.setData(pos=np.stack([a, b], axis=2).reshape(-1, 3))
        self._gap_lines.setVisible(True)
        if self.label_edges is None:
            shown = drawn[np.argsort(-self.gaps[drawn], kind="stable")[:MAX_AUTO_LABELS]]
        else:
            shown = np.intersect1d(np.asarray(self.label_edges, np.int64), drawn)
        where = {e: k for k, e in enumerate(drawn)}
        shown = sorted(shown, key=lambda e: -self.gaps[e])
        self._labels = [((a[where[e]].sum(axis=0) + b[where[e]].sum(axis=0)) / 4.0,
                         label_text(self.gaps[e], mech.units)) for e in shown]

    def set_label_edges(self, edges):
        """Label these cut edges' gaps (sequence of int); None labels the widest."""
        self.label_edges = None if edges is None else [int(e) for e in edges]
        if self.mech is not None:
            self._update_gaps()
            self.update()

    # --------------------------------------------------------------- envelope

    def set_envelope(self, errors):
        """Outline the panels of a few sampled builds around the ideal ones, or clear with None.

        Parameters
        ----------
        errors : foldsim.stackup.Errors or None
            Drawn hinge and mesh errors, one row per build. At every t the core
            poses each build (`foldsim.stackup.perturbed_poses`) and the view draws
            every panel's outline thin and see-through, so the spread shows how far
            play and backlash can carry the panels.
        """
        if self.mech is None:
            return
        self._envelope_errors = errors if errors is not None and len(errors) else None
        if self._envelope_errors is not None and self._envelope is None:
            self._envelope = gl.GLLinePlotItem(parentItem=self._stage, mode="lines", width=1.0,
                                               color=_rgba(ENVELOPE, ENVELOPE_ALPHA), antialias=True,
                                               glOptions={GL.GL_DEPTH_TEST: True, GL.GL_BLEND: True,
                                                          GL.GL_CULL_FACE: False})
            self._envelope.setDepthValue(9)
            polys = self.mech.flat_faces
            self._envelope_owner = np.concatenate([np.full(len(p), f) for f, p in enumerate(polys)])
            self._envelope_ends = np.concatenate([np.stack([p, np.roll(p, -1, axis=0)], axis=1) for p in polys])
        self._update_envelope()
        self.update()

    def _update_envelope(self):
        if self._envelope_errors is None:
            self.envelope_poses = None
            if self._envelope is not None:
                self._envelope.setVisible(False)
            return
        angles = fold_angles(self.schedule, np.array([self.t]))
        poses = perturbed_poses(self.mech, angles, self._envelope_errors)[:, 0]
        self.envelope_poses = poses
        ends = transform_points(poses[:, self._envelope_owner][:, :, None], self._envelope_ends[None])
        self._envelope.setData(pos=ends.reshape(-1, 3))
        self._envelope.setVisible(True)

    # -------------------------------------------------------------- selection

    def select_face(self, face):
        """Highlight one panel (-1 for none): tinted, with its outline drawn on top."""
        self.selected_face = int(face)
        if self.mech is not None:
            self._refresh_colors()
            self._update_marks()

    def select_hinge(self, hinge):
        """Highlight one hinge line (-1 for none), drawn thick and on top."""
        self.selected_hinge = int(hinge)
        if self.mech is not None:
            self._update_marks()

    def _update_marks(self):
        f, h = self.selected_face, self.selected_hinge
        if f >= 0:
            poly = self.mech.flat_faces[f]
            self._face_mark.setData(pos=np.vstack([poly, poly[:1]]))
            self._face_mark.setTransform(_matrix(self.poses[f]))
        self._face_mark.setVisible(f >= 0)
        if h >= 0:
            self._hinge_mark.setData(pos=self.mech.axes[h])
            self._hinge_mark.setTransform(_matrix(self.poses[self.mech.parent[h]]))
        self._hinge_mark.setVisible(h >= 0)

    def _draw_labels(self, painter, width, height, scale):
        """Gap labels, then the numbers (with `show_numbers`) where they fit; return the kinds of number drawn.

        Gap labels: the length in a pale box at the middle of each gap, except
        where a panel hides that point (its line is hidden there too).
        """
        placed = []
        if self._labels:
            self._draw_gap_labels(painter, width, height, scale, placed)
        if not self.show_numbers or self.poses is None:
            return set()
        return draw_numbers(painter, self, anchor_points(self.mech, self.poses, self._centres),
                            width, height, scale, placed)

    def _draw_gap_labels(self, painter, width, height, scale, placed):
        points = np.array([p for p, _ in self._labels])
        where = self.model_to_pixels(points, width, height)
        where[self.hidden_points(points)] = np.nan
        font = QtGui.QFont(self.font())
        font.setPointSizeF(font.pointSizeF() * scale if font.pointSizeF() > 0 else 9 * scale)
        painter.setFont(font)
        painter.setRenderHints(QtGui.QPainter.RenderHint.Antialiasing | QtGui.QPainter.RenderHint.TextAntialiasing)
        metrics = QtGui.QFontMetricsF(font)
        pen = QtGui.QPen(QtGui.QColor(*palette.GAP))
        pen.setWidthF(1.2 * scale)
        for (x, y), (_, text) in zip(where, self._labels):
            if not np.isfinite(x):
                continue
            box = metrics.boundingRect(text).adjusted(-4 * scale, -2 * scale, 4 * scale, 2 * scale)
            box.moveCenter(QtCore.QPointF(x, y))
            # Labels come widest gap first; one that would cover an earlier one is left out.
            if any(box.intersects(other) for other in placed):
                continue
            placed.append(box)
            painter.setPen(pen)
            painter.setBrush(QtGui.QColor(*palette.LABEL_FILL))
            painter.drawRoundedRect(box, 3 * scale, 3 * scale)
            painter.setPen(QtGui.QColor(*palette.LABEL_TEXT))
            painter.drawText(box, QtCore.Qt.AlignmentFlag.AlignCenter, text)
