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
uniform array and draws the block in three calls (see `python -m foldsim.gui.bench`).

Offscreen frames
----------------
`FoldView.render_image(width, height)` draws the current scene, labels included,
into an offscreen framebuffer of any size and returns it as an ``(height, width,
4)`` uint8 RGBA array, independent of the widget's size on screen. It is the one
entry point for screenshots and recorded clips.
"""

import ctypes

import numpy as np
import pyqtgraph.opengl as gl
from OpenGL import GL
from PySide6 import QtCore, QtGui, QtOpenGL, QtWidgets
from pyqtgraph import Vector

from ..analysis.closure import cut_edge_gaps
from ..analysis.collision import colliding_pairs, panels, triangle_pairs
from ..gearing import fold_angles, fold_schedule
from ..geometry import transform_points, unit
from ..kinematics import poses_at
from ..picking import intersection_segments, pick_face
from ..stackup import perturbed_poses
from ..tolerances import DEFAULT
from . import palette

# pyqtgraph keeps one compiled shader per program for every view; the programs are
# valid in every view only if the GL contexts share objects, which Qt must be told
# before the application object exists.
if QtWidgets.QApplication.instance() is None:
    QtCore.QCoreApplication.setAttribute(QtCore.Qt.ApplicationAttribute.AA_ShareOpenGLContexts)

VIEWS = {
    # name: (elevation, azimuth) in degrees; the camera looks at the centre from
    # azimuth (about +z, from +x) and elevation (above the xy plane).
    "front": (0.0, -90.0),
    "top": (90.0, -90.0),
    "side": (0.0, 0.0),
    "iso": (28.0, -58.0),
}
"""Standard camera directions in the display frame (see the module docstring)."""

MAX_AUTO_LABELS = 6
"""Gap labels shown when no cut edge is chosen: the widest open gaps."""

NEAR_GAP = 0.25
"""Open cut edges get gap lines when their gap is below this fraction of the model's size."""

CLICK_SLOP = 4
"""A press and release nearer than this many pixels is a click, not a drag."""

ENVELOPE = (176, 84, 0)
"""Colour of the sampled-build outlines (`FoldView.set_envelope`), drawn see-through."""

ENVELOPE_ALPHA = 0.35

_VERTEX_SHADER = """
uniform mat4 u_projection;
uniform mat4 u_modelview;
uniform mat4 u_pose[SLOTS];
uniform vec4 u_front[SLOTS];
uniform vec4 u_back[SLOTS];
uniform float u_base;
uniform float u_lines;
attribute vec4 a_position;
attribute vec3 a_normal;
attribute float a_face;
attribute vec4 a_color;
varying vec3 v_normal;
varying vec4 v_front;
varying vec4 v_back;
void main() {
    int slot = int(a_face - u_base + 0.5);
    mat4 pose = u_pose[slot];
    v_normal = (u_modelview * (pose * vec4(a_normal, 0.0))).xyz;
    if (u_lines > 0.5) {
        v_front = a_color;
        v_back = a_color;
    } else {
        v_front = u_front[slot];
        v_back = u_back[slot];
    }
    gl_Position = u_projection * (u_modelview * (pose * a_position));
}
"""

# Two-sided lighting in eye space: a key light from the upper left and a little
# of a head light, over a high ambient so no side of a panel goes black. The
# outer side (counter-clockwise, as the model's faces are) takes the front
# colour, the inner side the back colour. Lines are drawn unlit.
_FRAGMENT_SHADER = """
#ifdef GL_ES
precision mediump float;
#endif
uniform float u_lines;
varying vec3 v_normal;
varying vec4 v_front;
varying vec4 v_back;
void main() {
    if (u_lines > 0.5) {
        gl_FragColor = v_front;
        return;
    }
    vec3 n = normalize(v_normal);
    vec4 base = v_front;
    if (!gl_FrontFacing) {
        n = -n;
        base = v_back;
    }
    vec3 key = normalize(vec3(-0.45, 0.55, 0.70));
    float light = 0.60 + 0.32 * max(dot(n, key), 0.0) + 0.14 * abs(n.z);
    gl_FragColor = vec4(min(base.rgb * light, 1.0), base.a);
}
"""

_FLOATS = 11  # position 3, normal 3, face 1, colour 4


def uniform_slots(max_components):
    """Panels drawn per call: the most whose pose and colours fit the uniforms.

    Each panel takes a mat4 and two vec4 (24 components); a few are left for the
    other uniforms. A power of two from 8 to 256.

    Examples
    --------
    >>> uniform_slots(1024), uniform_slots(16384)
    (32, 256)
    """
    slots = 256
    while slots > 8 and slots * 24 + 64 > max_components:
        slots //= 2
    return slots


class _PanelProgram:
    """The panel layer's shader program in one GL context, with its locations."""

    def __init__(self):
        from OpenGL.GL import shaders

        limit = int(GL.glGetIntegerv(GL.GL_MAX_VERTEX_UNIFORM_COMPONENTS))
        self.slots = uniform_slots(limit)
        define = f"#define SLOTS {self.slots}\n"
        self.program = shaders.compileProgram(
            shaders.compileShader(define + _VERTEX_SHADER, GL.GL_VERTEX_SHADER),
            shaders.compileShader(_FRAGMENT_SHADER, GL.GL_FRAGMENT_SHADER))
        GL.glBindAttribLocation(self.program, 0, "a_position")
        GL.glLinkProgram(self.program)
        self.attributes = {name: GL.glGetAttribLocation(self.program, name)
                           for name in ("a_position", "a_normal", "a_face", "a_color")}
        self.uniforms = {name: GL.glGetUniformLocation(self.program, name)
                         for name in ("u_projection", "u_modelview", "u_pose", "u_front", "u_back",
                                      "u_base", "u_lines")}


def _rgba(rgb, alpha=1.0):
    """A 0-255 palette triple as an (r, g, b, a) tuple in [0, 1]."""
    return (*palette.unit_rgb(rgb), alpha)


class PanelLayer(gl.GLGraphicsItem.GLGraphicsItem):
    """Every rigid panel of a mechanism, built once and moved by setting poses.

    The flat-frame geometry of all panels (shaded triangles; outline, the root's
    inset mark and the hinge lines each panel carries as the parent of the hinge)
    goes into one vertex buffer when the layer is made. A frame only changes the
    panels' transforms (`set_poses`, a (F, 4, 4) array, as `setTransform` does for
    one item) and, when something changes, their colours (`set_colors`); the GPU
    applies the transforms. Panels are drawn a block at a time, as many as the
    shader's uniform arrays hold, so a thousand panels take a few dozen draw calls
    instead of thousands.

    Parameters
    ----------
    outlines : sequence of (k, 3) float
        Each face's flat-frame polygon.
    triangles : sequence of (n, 3) int
        Each face's triangles, as indices into its outline.
    hinge_lines : (H, 2, 3) float
        Each hinge's flat-frame end points.
    hinge_parent : (H,) int
        The face each hinge moves with.
    root : int
        The fixed face, marked with an inset outline.
    """

    def __init__(self, outlines, triangles, hinge_lines, hinge_parent, root, parentItem=None):
        super().__init__(parentItem=parentItem)
        n_faces = len(outlines)
        fills, outline_rows, hinge_rows = [], [], []
        line_color, hinge_color = _rgba(palette.OUTLINE), _rgba(palette.HINGE)
        hinges_of = [[] for _ in range(n_faces)]
        for h, f in enumerate(hinge_parent):
            hinges_of[f].append(h)
        for f, (poly, tri) in enumerate(zip(outlines, triangles)):
            poly = np.asarray(poly, dtype=float)
            centre = poly.mean(axis=0)
            normal = unit(np.cross(poly - centre, np.roll(poly, -1, axis=0) - centre).sum(axis=0))
            fills.append(self._rows(poly[np.asarray(tri)].reshape(-1, 3), normal, f, (1, 1, 1, 1)))
            loop = np.stack([poly, np.roll(poly, -1, axis=0)], axis=1).reshape(-1, 3)
            rows = [self._rows(loop, normal, f, line_color)]
            if f == root:
                inset = centre + 0.82 * (loop - centre)
                rows.append(self._rows(inset, normal, f, _rgba(palette.ROOT_MARK)))
            outline_rows.append(np.concatenate(rows))
            ends = np.asarray(hinge_lines, dtype=float)[hinges_of[f]].reshape(-1, 3)
            hinge_rows.append(self._rows(ends, normal, f, hinge_color))
        blocks = fills + outline_rows + hinge_rows
        self._data = np.ascontiguousarray(np.concatenate(blocks), dtype=np.float32)
        counts = np.array([len(b) for b in blocks]).reshape(3, n_faces)
        starts = np.concatenate([[0], np.cumsum(counts.ravel())[:-1]]).reshape(3, n_faces)
        self._starts, self._counts = starts, counts
        self.n_faces = n_faces
        self.poses = np.broadcast_to(np.eye(4), (n_faces, 4, 4)).astype(np.float32)
        self.front = np.ones((n_faces, 4), np.float32)
        self.back = np.ones((n_faces, 4), np.float32)
        self._buffer = None
        self._context = None

    @staticmethod
    def _rows(points, normal, face, color):
        n = len(points)
        return np.hstack([points, np.broadcast_to(normal, (n, 3)), np.full((n, 1), float(face)),
                          np.broadcast_to(np.asarray(color, float), (n, 4))])

    def set_poses(self, poses):
        """Transforms (F, 4, 4) from each panel's flat frame to its posed place."""
        self.poses = np.ascontiguousarray(poses, dtype=np.float32)
        self.update()

    def set_colors(self, front, back):
        """Outer and inner colours of every panel, (F, 4) float RGBA in [0, 1]."""
        self.front = np.ascontiguousarray(front, dtype=np.float32)
        self.back = np.ascontiguousarray(back, dtype=np.float32)
        self.update()

    def release(self):
        """Free the vertex buffer (the view's GL context must be current)."""
        if self._buffer is not None and self._context is QtGui.QOpenGLContext.currentContext():
            GL.glDeleteBuffers(1, [self._buffer])
        self._buffer = None

    def paint(self):
        view = self.view()
        program = view.panel_program()
        context = QtGui.QOpenGLContext.currentContext()
        if self._buffer is None or self._context is not context:
            self._buffer = int(GL.glGenBuffers(1))
            self._context = context
            GL.glBindBuffer(GL.GL_ARRAY_BUFFER, self._buffer)
            GL.glBufferData(GL.GL_ARRAY_BUFFER, self._data.nbytes, self._data, GL.GL_STATIC_DRAW)
        else:
            GL.glBindBuffer(GL.GL_ARRAY_BUFFER, self._buffer)
        GL.glEnable(GL.GL_DEPTH_TEST)
        GL.glDisable(GL.GL_BLEND)
        GL.glDisable(GL.GL_CULL_FACE)
        GL.glUseProgram(program.program)
        u, a = program.uniforms, program.attributes
        GL.glUniformMatrix4fv(u["u_projection"], 1, False, np.array(self.projectionMatrix().data(), np.float32))
        GL.glUniformMatrix4fv(u["u_modelview"], 1, False, np.array(self.modelViewMatrix().data(), np.float32))
        offsets = {"a_position": (3, 0), "a_normal": (3, 12), "a_face": (1, 24), "a_color": (4, 28)}
        enabled = []
        for name, (size, offset) in offsets.items():
            if a[name] >= 0:
                GL.glEnableVertexAttribArray(a[name])
                GL.glVertexAttribPointer(a[name], size, GL.GL_FLOAT, False, 4 * _FLOATS,
                                         ctypes.c_void_p(offset))
                enabled.append(a[name])
        scale = view.line_scale()
        for first in range(0, self.n_faces, program.slots):
            last = min(first + program.slots, self.n_faces)
            GL.glUniform1f(u["u_base"], float(first))
            GL.glUniformMatrix4fv(u["u_pose"], last - first, True, self.poses[first:last])
            GL.glUniform4fv(u["u_front"], last - first, self.front[first:last])
            GL.glUniform4fv(u["u_back"], last - first, self.back[first:last])
            # Push the fill back a little so outlines and hinge lines on it win.
            GL.glEnable(GL.GL_POLYGON_OFFSET_FILL)
            GL.glPolygonOffset(1.0, 1.0)
            GL.glUniform1f(u["u_lines"], 0.0)
            self._draw(GL.GL_TRIANGLES, 0, first, last)
            GL.glDisable(GL.GL_POLYGON_OFFSET_FILL)
            GL.glUniform1f(u["u_lines"], 1.0)
            GL.glLineWidth(1.6 * scale)
            self._draw(GL.GL_LINES, 1, first, last)
            GL.glLineWidth(3.0 * scale)
            self._draw(GL.GL_LINES, 2, first, last)
        GL.glLineWidth(1.0)
        for loc in enabled:
            GL.glDisableVertexAttribArray(loc)
        GL.glBindBuffer(GL.GL_ARRAY_BUFFER, 0)
        GL.glUseProgram(0)

    def _draw(self, mode, block, first, last):
        start = int(self._starts[block, first])
        count = int(self._starts[block, last - 1] + self._counts[block, last - 1] - start)
        if count:
            GL.glDrawArrays(mode, start, count)


def _matrix(pose):
    """A (4, 4) numpy transform as a QMatrix4x4."""
    return QtGui.QMatrix4x4(*np.asarray(pose, dtype=float).ravel())


def _numpy(matrix):
    """A QMatrix4x4 as a (4, 4) float array (Qt stores it column-major)."""
    return np.array(matrix.data(), dtype=float).reshape(4, 4).T


def stage_transform(mech):
    """Transform (4, 4) from the model's flat frame to the display frame.

    The root face's centroid goes to the origin, its longest edge to +x and its
    inner side (the one the panels fold toward) to +z.

    Parameters
    ----------
    mech : Mechanism

    Returns
    -------
    (4, 4) float
        A rigid transform.
    """
    poly = mech.flat_faces[mech.root]
    centre = poly.mean(axis=0)
    outward = unit(np.cross(poly - centre, np.roll(poly, -1, axis=0) - centre).sum(axis=0))
    edges = np.roll(poly, -1, axis=0) - poly
    x = unit(edges[np.argmax(np.linalg.norm(edges, axis=1))])
    up = -outward
    y = np.cross(up, x)
    out = np.eye(4)
    out[:3, :3] = np.array([x, y, up])
    out[:3, 3] = -out[:3, :3] @ centre
    return out


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
        if self.view._labels:
            painter = QtGui.QPainter(self)
            self.view._draw_labels(painter, self.width(), self.height(), 1.0)
            painter.end()


class FoldView(gl.GLViewWidget):
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
        self.gaps = np.zeros(0)
        self.gap_tolerance = 0.0
        self.selected_face = -1
        self.selected_hinge = -1
        self.label_edges = None
        self._stage = None
        self._layer = None
        self._base_colors = None
        self._program = None
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
        self.colliding = np.zeros((0, 2), np.int64)
        self._stage = gl.GLGraphicsItem.GLGraphicsItem()
        self._stage.setTransform(_matrix(stage_transform(mech)))
        tris = [self._local_triangles(poly, self.pan.tri_points[s:s + c])
                for poly, s, c in zip(mech.flat_faces, self.pan.start, self.pan.count)]
        self._layer = PanelLayer(mech.flat_faces, tris, mech.axes, mech.parent, mech.root,
                                 parentItem=self._stage)
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
        self._envelope = None
        self._envelope_errors = None
        self.envelope_poses = None
        self.set_t(self.t)
        self.fit_motion()

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

    def panel_program(self):
        """The panels' shader program in the current GL context (compiled once)."""
        context = QtGui.QOpenGLContext.currentContext()
        if self._program is None or self._program_context is not context:
            self._program = _PanelProgram()
            self._program_context = context
        return self._program

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
        hot = np.unique(self.colliding.ravel())
        front[hot] = _rgba(palette.WARNING)
        back[hot] = _rgba(palette.WARNING_BACK)
        if self.selected_face >= 0:
            glow = np.array(_rgba(palette.HIGHLIGHT))
            for side in (front, back):
                side[self.selected_face] = 0.6 * side[self.selected_face] + 0.4 * glow
        self._layer.set_colors(front, back)

    # ------------------------------------------------------------------ drive

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
        self.colliding = colliding_pairs(mech, self.poses, pan=self.pan)
        self._refresh_colors()
        self._update_crossings()
        self.gaps = cut_edge_gaps(mech, poses)[0] if len(mech.cut_faces) else np.zeros(0)
        self._update_gaps()
        self._update_marks()
        self._update_envelope()
        self.update()

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

    def open_edges(self):
        """Indices (n,) of cut edges whose gap at the current t exceeds the tolerance."""
        return np.flatnonzero(self.gaps > self.gap_tolerance)

    def drawn_gaps(self):
        """Indices (n,) of the cut edges whose gap lines are drawn now.

        Open edges nearer than `NEAR_GAP` of the model's size, and every open edge
        chosen with `set_label_edges`; wider gaps are the pattern lying open, not
        a fault, and would only clutter the view.
        """
        open_ = self.open_edges()
        near = self.gaps[open_] <= NEAR_GAP * self.mech.size
        chosen = np.isin(open_, self.label_edges or [])
        return open_[near | chosen]

    def _update_gaps(self):
        mech = self.mech
        drawn = self.drawn_gaps()
        if not len(drawn):
            self._gap_lines.setVisible(False)
            self._labels = []
            return
        a = transform_points(self.poses[mech.cut_faces[drawn, 0]][:, None], mech.cut_points[drawn, 0])
        b = transform_points(self.poses[mech.cut_faces[drawn, 1]][:, None], mech.cut_points[drawn, 1])
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

    # ----------------------------------------------------------------- camera

    def _display_points(self, t_values=None):
        """Corners (n, 3) of every panel in the display frame, at t or the current poses."""
        mech = self.mech
        flat = np.concatenate(mech.flat_faces)
        owner = np.concatenate([np.full(len(p), f) for f, p in enumerate(mech.flat_faces)])
        sets = [self.poses] if t_values is None else list(poses_at(mech, self.schedule, np.asarray(t_values)))
        stage = stage_transform(mech)
        return np.concatenate([transform_points(stage @ p[owner], flat) for p in sets])

    def fit(self, t_values=None, margin=1.1):
        """Aim the camera at the model and step back until it just fills the view.

        The camera keeps its direction; only its centre and distance change.

        Parameters
        ----------
        t_values : sequence of float, optional
            Fit the union of the shapes at these drive values (default: the
            current shape).
        margin : float
            Room left around the model, as a factor on its projected size.
        """
        if self.mech is None:
            return
        pts = self._display_points(t_values)
        centre = 0.5 * (pts.min(axis=0) + pts.max(axis=0))
        w, h = max(self.width(), 1), max(self.height(), 1)
        tan_h = np.tan(np.radians(self.opts["fov"]) / 2)
        tan_v = tan_h * h / w
        self.opts["center"] = Vector(*centre)
        rot = _numpy(self.viewMatrix())[:3, :3]
        for _ in range(2):
            # Eye-frame offsets from the centre; the camera sits at +distance on z.
            q = (pts - centre) @ rot.T
            distance = max((q[:, 2] + margin * np.abs(q[:, 0]) / tan_h).max(),
                           (q[:, 2] + margin * np.abs(q[:, 1]) / tan_v).max(), 1e-9)
            depth = distance - q[:, 2]
            u, v = q[:, 0] / depth, q[:, 1] / depth
            shift = np.array([(u.max() + u.min()) / 2, (v.max() + v.min()) / 2, 0.0]) * distance
            centre = centre + rot.T @ shift
        self.opts["center"] = Vector(*centre)
        self.opts["distance"] = float(distance)
        self._fitted = t_values
        self.update()

    def fit_motion(self):
        """Fit every shape from flat to closed (on the side of the current t), and t itself."""
        end = 1.0 if self.t >= 0 else -1.0
        self.fit(t_values=(*np.linspace(0.0, end, 11), self.t))

    def set_view(self, name):
        """Turn the camera to a standard view ("front", "top", "side" or "iso") and fit."""
        elevation, azimuth = VIEWS[name]
        self.setCameraPosition(elevation=elevation, azimuth=azimuth)
        self.fit_motion()

    def _view_projection(self, width, height):
        """(4, 4) float: display frame to clip space for a viewport of this size."""
        region = (0, 0, width, height)
        return _numpy(self.projectionMatrix(region, region)) @ _numpy(self.viewMatrix())

    def model_to_pixels(self, points, width=None, height=None):
        """Project model-frame points to pixel coordinates of a viewport.

        Parameters
        ----------
        points : (n, 3) float
            Model (flat-frame) coordinates.
        width, height : int, optional
            Viewport size; default the widget's.

        Returns
        -------
        (n, 2) float
            x right, y down, in pixels; points behind the camera get NaN.
        """
        width = width or self.width()
        height = height or self.height()
        m = self._view_projection(width, height) @ stage_transform(self.mech)
        p = np.asarray(points, dtype=float).reshape(-1, 3)
        clip = np.hstack([p, np.ones((len(p), 1))]) @ m.T
        with np.errstate(divide="ignore", invalid="ignore"):
            ndc = clip[:, :2] / clip[:, 3:4]
        ndc[clip[:, 3] <= 0] = np.nan
        return np.column_stack([(ndc[:, 0] + 1) * width / 2, (1 - ndc[:, 1]) * height / 2])

    def ray_at(self, x, y):
        """The ray through a widget pixel, in the model's flat frame.

        Parameters
        ----------
        x, y : float
            Widget coordinates (logical pixels, y down).

        Returns
        -------
        origin, direction : (3,) float
            ``direction`` has unit length.
        """
        w, h = max(self.width(), 1), max(self.height(), 1)
        m = self._view_projection(w, h) @ stage_transform(self.mech)
        inv = np.linalg.inv(m)
        ndc = np.array([[2 * x / w - 1, 1 - 2 * y / h, z, 1.0] for z in (-1.0, 1.0)])
        ends = ndc @ inv.T
        ends = ends[:, :3] / ends[:, 3:4]
        return ends[0], unit(ends[1] - ends[0])

    def pick(self, x, y):
        """Face under a widget pixel, or -1; see `foldsim.picking.pick_face`."""
        if self.mech is None:
            return -1
        origin, direction = self.ray_at(x, y)
        return pick_face(self.mech, self.poses, origin, direction, pan=self.pan)[0]

    # ------------------------------------------------------------------ mouse

    def mousePressEvent(self, ev):
        self._press = ev.position()
        super().mousePressEvent(ev)

    def mouseReleaseEvent(self, ev):
        super().mouseReleaseEvent(ev)
        if (ev.button() == QtCore.Qt.MouseButton.LeftButton and self._press is not None
                and (ev.position() - self._press).manhattanLength() <= CLICK_SLOP):
            self.facePicked.emit(self.pick(ev.position().x(), ev.position().y()))
        self._press = None

    # -------------------------------------------------------------- painting

    def paintGL(self):
        super().paintGL()
        self.frames_drawn += 1
        # The labels follow the camera: repaint them with every frame.
        self._overlay.update()

    def resizeEvent(self, ev):
        super().resizeEvent(ev)
        self._overlay.setGeometry(self.rect())
        # Until the user moves the camera, keep the last fit as the view resizes.
        if self._fitted is not False and self.mech is not None:
            self.fit(self._fitted)

    def mouseMoveEvent(self, ev):
        if ev.buttons():
            self._fitted = False
        super().mouseMoveEvent(ev)

    def wheelEvent(self, ev):
        self._fitted = False
        super().wheelEvent(ev)

    def _draw_labels(self, painter, width, height, scale):
        """Gap labels: the length in a pale box at the middle of each gap."""
        where = self.model_to_pixels(np.array([p for p, _ in self._labels]), width, height)
        font = QtGui.QFont(self.font())
        font.setPointSizeF(font.pointSizeF() * scale if font.pointSizeF() > 0 else 9 * scale)
        painter.setFont(font)
        painter.setRenderHints(QtGui.QPainter.RenderHint.Antialiasing | QtGui.QPainter.RenderHint.TextAntialiasing)
        metrics = QtGui.QFontMetricsF(font)
        pen = QtGui.QPen(QtGui.QColor(*palette.GAP))
        pen.setWidthF(1.2 * scale)
        placed = []
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
        if self._labels:
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
