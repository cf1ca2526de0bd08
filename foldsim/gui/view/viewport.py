"""The 3D view of a mechanism at one drive value.

`FoldView` is a pyqtgraph `GLViewWidget` that shows a mechanism's panels at the
drive value t. The panels' geometry goes to the GPU once, built from their flat
outlines; a frame only sets every panel's transform to the core's pose
(`PanelLayer`). Over the panels it draws where colliding panels cut each other,
the gaps of cut edges that have not met with their lengths, and the selection.

Frames (display, model)
-----------------------
Everything hangs under one stage item whose transform turns the model's flat
frame into the display frame: the root face's centroid at the origin, its longest
edge along +x, and +z on the side the panels fold toward (the root's inner side),
so a shell closes upward from a fixed floor panel and the standard views (front,
top, side, iso) mean the same thing for every model. Under the stage, a panel's
transform is exactly the face's pose from `foldsim.kinematics.poses_at`.

Why one layer and not one GL item per panel
-------------------------------------------
A pyqtgraph item per panel costs a few draw calls and a dozen state changes per
panel per frame; with Mesa's software renderer that held a 1,280-panel model to
about 4 frames per second. The layer sends each block of panels' poses as one
uniform array and draws the block in one call, its fills drawing the outlines and
hinge lines too (GL lines remain only for the root's mark and a build's hinge lines;
see `python -m foldsim.gui.bench`).

Offscreen frames
----------------
`FoldView.render_image(width, height)` draws the current scene, labels included,
into an offscreen framebuffer of any size and returns it as an ``(height, width,
4)`` uint8 RGBA array, independent of the widget's size on screen. It is the one
entry point for screenshots and recorded clips.

Modules
-------
The widget is assembled here from parts beside it: `panel_layer` (the GL item that
draws the panels, and its shaders), `camera` (framing, projection, picking and the
mouse) and `overlays` (crossings, gaps and labels, the envelope, the selection).
"""

from dataclasses import dataclass

import numpy as np
import pyqtgraph.opengl as gl
from OpenGL import GL
from PySide6 import QtCore, QtGui, QtOpenGL, QtWidgets

from ...analysis.closure import posed_cut_ends
from ...analysis.collision import colliding_pairs, panels
from ...gearing import fold_schedule
from ...kinematics import poses_at
from ...tolerances import DEFAULT
from . import palette
from .camera import CLICK_SLOP, VIEWS, CameraControl, _matrix, stage_transform
from .overlays import (
    ENVELOPE,
    ENVELOPE_ALPHA,
    MAX_AUTO_LABELS,
    NEAR_GAP,
    Overlays,
    _LabelOverlay,
    label_text,
)
from .numbers import face_centres
from .panel_layer import PanelLayer, _PanelProgram, _rgba, uniform_slots
from .solid_layer import SolidLayer

__all__ = ["CLICK_SLOP", "ENVELOPE", "ENVELOPE_ALPHA", "MAX_AUTO_LABELS", "NEAR_GAP", "VIEWS", "FoldView",
           "PanelLayer", "default_face_colors", "image_array", "label_text", "stage_transform", "uniform_slots"]


# pyqtgraph keeps one compiled shader per program for every view; the programs are
# valid in every view only if the GL contexts share objects, which Qt must be told
# before the application object exists.
if QtWidgets.QApplication.instance() is None:
    QtCore.QCoreApplication.setAttribute(QtCore.Qt.ApplicationAttribute.AA_ShareOpenGLContexts)


@dataclass(frozen=True)
class _KnownCollisions:
    """A sweep's intervals as arrays, and the stretch of t [lo, hi] it settled."""

    faces: np.ndarray
    first: np.ndarray
    last: np.ndarray
    lo: float
    hi: float


def default_face_colors(mech):
    """Per-face colours (F, 3) in [0, 1].

    A model with no more faces than `palette.PANELS` has colours gives every face
    its own; a larger one is coloured greedily over the faces joined by a hinge or
    a cut edge, in face order, so that neighbours differ.
    """
    n = len(palette.PANELS)
    if mech.n_faces <= n:
        return np.array([palette.unit_rgb(c) for c in palette.PANELS[:mech.n_faces]])
    neighbours = [set() for _ in range(mech.n_faces)]
    for a, b in np.concatenate([mech.hinge_faces, mech.cut_faces]).tolist():
        neighbours[a].add(b)
        neighbours[b].add(a)
    choice = np.zeros(mech.n_faces, np.int64)
    for f in range(mech.n_faces):
        taken = {choice[g] for g in neighbours[f] if g < f}
        choice[f] = next(c for c in range(n + len(taken)) if c not in taken) % n
    return np.array([palette.unit_rgb(palette.PANELS[c]) for c in choice])


class FoldView(CameraControl, Overlays, gl.GLViewWidget):
    """3D view of a mechanism at one drive value.

    Signals
    -------
    facePicked(int)
        The user clicked a panel (its face index) or empty space (-1).
    """

    facePicked = QtCore.Signal(int)

    def __init__(self, parent=None):
        super().__init__(parent)
        fmt = QtGui.QSurfaceFormat(self.format())
        fmt.setSamples(4)
        self.setFormat(fmt)
        self.setBackgroundColor(palette.BACKGROUND)
        self.opts["fov"] = 40
        self.mech = None
        self.schedule = None
        self.pan = None
        self.t = 0.0
        self.poses = None
        self.colliding = np.zeros((0, 2), np.int64)
        self.known = None
        self.solids = None
        self.gaps = np.zeros(0)
        self._cut_ends = None
        self.gap_tolerance = 0.0
        self.selected_face = -1
        self.selected_hinge = -1
        self.label_edges = None
        self._stage = None
        self._layer = None
        self._base_colors = None
        self._colored_hot = None
        self._programs = {}
        self._program_context = None
        self._press = None
        self._line_scale = 1.0
        self._labels = []
        self._overlay = _LabelOverlay(self)
        self._fitted = False
        self.frames_drawn = 0
        self._envelope = None
        self._envelope_errors = None
        self.envelope_poses = None
        self.envelope_color = ENVELOPE
        self.show_numbers = False
        self.show_gap_lines = True
        self.show_legend = True
        self.part_types = None
        self.numbers_drawn = set()
        self.legend_shown = []
        self.legend_box = None
        self._centres = None

    # ------------------------------------------------------------------ model

    def set_mechanism(self, mech, schedule=None, pan=None, face_colors=None, tol=DEFAULT):
        """Show a new mechanism (at the current t), replacing the old one.

        Builds the panel geometry once from ``mech.flat_faces``; later frames only
        move the panels.

        Parameters
        ----------
        mech : Mechanism
        schedule : Schedule, optional
            Default `foldsim.gearing.fold_schedule(mech)`.
        pan : Panels, optional
            Triangulation to reuse; default `foldsim.analysis.collision.panels(mech)`.
        face_colors : (F, 3) float, optional
            Outer colours in [0, 1]; default `default_face_colors`.
        tol : Tolerances
        """
        self._drop_items()
        self.mech = mech
        self.schedule = schedule if schedule is not None else fold_schedule(mech, tol)
        self.pan = pan if pan is not None else panels(mech, tol)
        self.gap_tolerance = tol.gap * mech.size
        self.selected_face = -1
        self.selected_hinge = -1
        self.label_edges = None
        self.part_types = None
        self._centres = face_centres(mech)
        self.colliding = np.zeros((0, 2), np.int64)
        self.known = None
        self.solids = None
        self._stage = gl.GLGraphicsItem.GLGraphicsItem()
        self._stage.setTransform(_matrix(stage_transform(mech)))
        tris = [self._local_triangles(poly, self.pan.tri_points[s:s + c])
                for poly, s, c in zip(mech.flat_faces, self.pan.start, self.pan.count)]
        self._layer = PanelLayer(mech.flat_faces, tris, mech.axes, mech.parent, mech.root,
                                 mech.cut_faces, mech.cut_points, parentItem=self._stage)
        no_depth = {GL.GL_DEPTH_TEST: False, GL.GL_BLEND: True, GL.GL_CULL_FACE: False}
        self._crossings = gl.GLLinePlotItem(parentItem=self._stage, mode="lines", width=4.0,
                                            color=_rgba(palette.INTERSECTION), antialias=True,
                                            glOptions=no_depth)
        self._gap_lines = gl.GLLinePlotItem(parentItem=self._stage, mode="lines", width=2.5,
                                            color=_rgba(palette.GAP), antialias=True,
                                            glOptions={GL.GL_DEPTH_TEST: True, GL.GL_BLEND: True,
                                                       GL.GL_CULL_FACE: False})
        self._face_mark = gl.GLLinePlotItem(parentItem=self._stage, mode="line_strip", width=3.0,
                                            color=_rgba(palette.HIGHLIGHT), glOptions=no_depth)
        self._hinge_mark = gl.GLLinePlotItem(parentItem=self._stage, mode="lines", width=6.0,
                                             color=_rgba(palette.HIGHLIGHT), glOptions=no_depth)
        for depth, item in enumerate((self._gap_lines, self._crossings, self._face_mark, self._hinge_mark)):
            item.setDepthValue(10 + depth)
            item.setVisible(False)
        self.addItem(self._stage)
        self._base_colors = default_face_colors(mech) if face_colors is None else np.asarray(face_colors)
        self._colored_hot = None
        self._envelope = None
        self._envelope_errors = None
        self.envelope_poses = None
        self.set_t(self.t)
        self.fit_motion()

    def set_solids(self, solids):
        """Draw the panels as solids (a build's prisms and gear bodies), or flat again.

        The camera, t, colours and marks stay; only the panel layer is replaced.

        Parameters
        ----------
        solids : sequence of Solid or None
            `foldsim.build.prisms.Solid` (each carried by one face, flat frame);
            None draws the file's flat panels.
        """
        if self.mech is None:
            return
        mech = self.mech
        if self.isValid():
            self.makeCurrent()
            self._layer.release()
            self.doneCurrent()
        self._layer.setParentItem(None)
        if solids is None:
            tris = [self._local_triangles(poly, self.pan.tri_points[s:s + c])
                    for poly, s, c in zip(mech.flat_faces, self.pan.start, self.pan.count)]
            self._layer = PanelLayer(mech.flat_faces, tris, mech.axes, mech.parent, mech.root,
                                     mech.cut_faces, mech.cut_points, parentItem=self._stage)
        else:
            self._layer = SolidLayer(solids, mech.n_faces, mech.axes, mech.parent, parentItem=self._stage)
        self.solids = None if solids is None else list(solids)
        self._layer.set_poses(self.poses)
        self._layer.set_open_cuts(self.open_edge_mask())
        self._refresh_colors()
        self.update()

    @staticmethod
    def _local_triangles(poly, tris):
        """Indices (n, 3) into ``poly`` of triangles given by their corners."""
        d = np.linalg.norm(tris[:, :, None, :] - poly[None, None, :, :], axis=-1)
        return np.argmin(d, axis=-1)

    def _drop_items(self):
        if self._stage is None:
            return
        if self.isValid():
            self.makeCurrent()
            self._layer.release()
            self.doneCurrent()
        self.removeItem(self._stage)
        self._stage = None
        self._layer = None

    def panel_program(self, kind="panels"):
        """A layer's shader program ("panels" or "solids") in the current GL context (compiled once)."""
        context = QtGui.QOpenGLContext.currentContext()
        if self._program_context is not context:
            self._programs = {}
            self._program_context = context
        if kind not in self._programs:
            self._programs[kind] = _PanelProgram(kind)
        return self._programs[kind]

    def line_scale(self):
        """Factor on line widths: 1 on screen, larger for big offscreen frames."""
        return self._line_scale

    def set_face_colors(self, colors):
        """Outer colour of every panel, (F, 3) float in [0, 1]; the inner side follows."""
        self._base_colors = np.asarray(colors, dtype=float)[:, :3].copy()
        self._refresh_colors()
        self.update()

    def panel_colors(self):
        """Outer and inner colours (F, 4) of every panel as drawn now (warning, selection)."""
        return self._layer.front.astype(float), self._layer.back.astype(float)

    def panel_transforms(self):
        """Transforms (F, 4, 4) the panels are drawn with now (the poses at t)."""
        return self._layer.poses.astype(float)

    def _refresh_colors(self):
        front = np.ones((self.mech.n_faces, 4))
        front[:, :3] = self._base_colors
        back = front.copy()
        back[:, :3] = palette.back_of(self._base_colors)
        hot = np.unique(self.colliding)
        self._colored_hot = hot
        front[hot] = _rgba(palette.WARNING)
        back[hot] = _rgba(palette.WARNING_BACK)
        if self.selected_face >= 0:
            glow = np.array(_rgba(palette.HIGHLIGHT))
            for side in (front, back):
                side[self.selected_face] = 0.6 * side[self.selected_face] + 0.4 * glow
        self._layer.set_colors(front, back)

    # ------------------------------------------------------------------ drive

    def set_known_collisions(self, intervals, swept=None):
        """Take collisions from a sweep's intervals instead of testing every frame.

        Inside the swept range a frame's colliding pairs are the pairs whose
        interval holds its t (the sweep's ends are within ``t_resolution``), so a
        scrub costs the drawing and the gaps, not a collision query; outside it,
        and at t = 0 exactly (where flat-layout overlaps belong), the pose is tested.

        Parameters
        ----------
        intervals : list of dict or None
            ``{"faces", "first_t", "last_t"}`` as
            `foldsim.analysis.collision.collision_intervals` gives them; None
            forgets them.
        swept : (float, float), optional
            The stretch of t the sweep has settled so far.
        """
        if intervals is None or swept is None or not swept[1] > swept[0]:
            self.known = None
            return
        faces = np.array([c["faces"] for c in intervals], np.int64).reshape(-1, 2)
        faces.sort(axis=1)
        self.known = _KnownCollisions(faces, np.array([c["first_t"] for c in intervals], float),
                                      np.array([c["last_t"] for c in intervals], float),
                                      float(swept[0]), float(swept[1]))

    def _colliding_at(self, poses):
        known = self.known
        if known is not None and known.lo <= self.t <= known.hi and self.t != 0.0:
            inside = (known.first <= self.t) & (self.t <= known.last)
            if not inside.any():
                return np.zeros((0, 2), np.int64)
            return np.unique(known.faces[inside], axis=0).reshape(-1, 2)
        return colliding_pairs(self.mech, poses, pan=self.pan)

    def set_t(self, t):
        """Move every panel to the drive value t and update collisions and gaps.

        Parameters
        ----------
        t : float
            Drive value in [-1, 1].
        """
        self.t = float(t)
        if self.mech is None:
            return
        mech = self.mech
        poses = poses_at(mech, self.schedule, np.array([self.t]))
        self.poses = poses[0]
        self._layer.set_poses(self.poses)
        self.colliding = self._colliding_at(self.poses)
        # The colours change only with the colliding panels (a scrub mostly keeps them).
        if not np.array_equal(np.unique(self.colliding), self._colored_hot):
            self._refresh_colors()
        self._update_crossings()
        if len(mech.cut_faces):
            # Both sides' ends once: the gaps and the gap lines (`_update_gaps`) share them.
            self._cut_ends = (self.poses, *posed_cut_ends(mech, self.poses))
            self.gaps = np.linalg.norm(self._cut_ends[1] - self._cut_ends[2], axis=2).max(axis=1)
        else:
            self.gaps = np.zeros(0)
        self._layer.set_open_cuts(self.open_edge_mask())
        self._update_gaps()
        self._update_marks()
        self._update_envelope()
        self.update()

    # -------------------------------------------------------------- painting

    def paintGL(self):
        context = self.context()
        self._smooth_lines(context is None or context.format().samples() <= 0)
        super().paintGL()
        self.frames_drawn += 1
        # The labels follow the camera: repaint them with every frame.
        self._overlay.update()

    def _smooth_lines(self, on):
        """Smooth the gap and crossing lines with GL's line antialiasing, or leave it to multisampling.

        Where the frame is multisampled its samples already smooth every line, and
        GL leaves line smoothing aside (OpenGL 2.1 specification, section 3.4.4,
        multisampled lines); the software renderer still set up its smoothing for
        every line, about twice what drawing a few gap lines costs.
        """
        if self._stage is None:
            return
        for item in (self._gap_lines, self._crossings):
            item.antialias = bool(on)

    def resizeEvent(self, ev):
        super().resizeEvent(ev)
        self._overlay.setGeometry(self.rect())
        # Until the user moves the camera, keep the last fit as the view resizes.
        if self._fitted is not False and self.mech is not None:
            self.fit(self._fitted)

    def render_image(self, width, height, samples=4):
        """Draw the current scene offscreen and return the pixels.

        The camera, panels, overlays and labels are those on screen; only the frame
        size differs (the view keeps its field of view, so a wider frame shows more
        at the sides). Line widths and label text grow with the frame's height
        relative to the widget's, so a large frame looks like an enlarged screen.

        Parameters
        ----------
        width, height : int
            Frame size in pixels.
        samples : int
            Multisampling (anti-aliasing) samples per pixel; 0 for none.

        Returns
        -------
        (height, width, 4) uint8
            RGBA, top row first; alpha is 255 everywhere.

        Raises
        ------
        ValueError
            For a frame size that is not positive.
        RuntimeError
            If the view has never been shown (it has no GL context to draw with).
        """
        width, height = int(width), int(height)
        if width <= 0 or height <= 0:
            raise ValueError(f"frame size must be positive, not {width} x {height}")
        if not self.isValid():
            raise RuntimeError("render_image needs the view to have been shown once (it has no GL context yet)")
        self.makeCurrent()
        scale = max(1.0, height / max(self.height(), 1))
        self._line_scale = scale
        fmt = QtOpenGL.QOpenGLFramebufferObjectFormat()
        fmt.setAttachment(QtOpenGL.QOpenGLFramebufferObject.Attachment.CombinedDepthStencil)
        fmt.setSamples(int(samples))
        target = QtOpenGL.QOpenGLFramebufferObject(width, height, fmt)
        try:
            target.bind()
            GL.glViewport(0, 0, width, height)
            self._smooth_lines(not samples)
            self.paint(region=(0, 0, width, height), viewport=(0, 0, width, height))
            target.release()
            if samples:
                plain = QtOpenGL.QOpenGLFramebufferObject(width, height)
                QtOpenGL.QOpenGLFramebufferObject.blitFramebuffer(plain, target)
                image = plain.toImage()
            else:
                image = target.toImage()
        finally:
            self._line_scale = 1.0
            self.doneCurrent()
        image = image.convertToFormat(QtGui.QImage.Format.Format_RGBA8888)
        if self._labels or self.show_numbers:
            painter = QtGui.QPainter(image)
            self._draw_labels(painter, width, height, scale)
            painter.end()
        return image_array(image)


def image_array(image):
    """A QImage as an (h, w, 4) uint8 RGBA array (a copy)."""
    image = image.convertToFormat(QtGui.QImage.Format.Format_RGBA8888)
    w, h = image.width(), image.height()
    raw = np.frombuffer(image.constBits(), np.uint8, count=image.bytesPerLine() * h)
    return raw.reshape(h, image.bytesPerLine())[:, :4 * w].reshape(h, w, 4).copy()
