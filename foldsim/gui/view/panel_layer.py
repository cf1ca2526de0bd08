"""The GL item that draws every rigid panel of a mechanism, and its shaders.

`PanelLayer` holds all panels' flat-frame geometry in one vertex buffer and draws
them a block at a time: each block's poses and colours go to the shader as uniform
arrays, and the vertex shader picks a vertex's pose by its face index. A frame
therefore sends only the (F, 4, 4) poses from the core, never geometry.
"""

import ctypes

import numpy as np
import pyqtgraph.opengl as gl
from OpenGL import GL
from PySide6 import QtGui

from ...geometry import unit
from . import palette

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
    if (u_lines > 0.5 || a_color.a > 0.0) {
        // Lines, and solids with a colour of their own (gear bodies).
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


def _edge_key(a, b, scale):
    """The same key for a segment either way round, its end points rounded to ``scale``."""
    ka, kb = (tuple(np.round(np.asarray(p) / scale).astype(np.int64)) for p in (a, b))
    return (ka, kb) if ka <= kb else (kb, ka)


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

    closed = False
    """Whether every mesh is closed and faces outward, so back faces can be culled."""

    def __init__(self, outlines, triangles, hinge_lines, hinge_parent, root, parentItem=None):
        super().__init__(parentItem=parentItem)
        n_faces = len(outlines)
        fills, outline_rows, hinge_rows = [], [], []
        line_color, hinge_color = _rgba(palette.OUTLINE), _rgba(palette.HINGE)
        hinges_of = [[] for _ in range(n_faces)]
        for h, f in enumerate(hinge_parent):
            hinges_of[f].append(h)
        # A panel's outline leaves out its hinge edges: the hinge line is drawn there,
        # wider and on top, and lines are half of a large model's drawing.
        ends = np.asarray(hinge_lines, dtype=float).reshape(-1, 2, 3)
        scale = max(float(np.abs(np.concatenate([np.asarray(p, float) for p in outlines])).max()), 1.0) * 1e-9
        hinge_edges = {_edge_key(a, b, scale) for a, b in ends}
        for f, (poly, tri) in enumerate(zip(outlines, triangles)):
            poly = np.asarray(poly, dtype=float)
            centre = poly.mean(axis=0)
            normal = unit(np.cross(poly - centre, np.roll(poly, -1, axis=0) - centre).sum(axis=0))
            # Alpha 0: the fill takes the panel's colour (``set_colors``).
            fills.append(self._rows(poly[np.asarray(tri)].reshape(-1, 3), normal, f, (1, 1, 1, 0)))
            pairs = np.stack([poly, np.roll(poly, -1, axis=0)], axis=1)
            loop = pairs.reshape(-1, 3)
            edge = pairs[[_edge_key(a, b, scale) not in hinge_edges for a, b in pairs]].reshape(-1, 3)
            rows = [self._rows(edge, normal, f, line_color)]
            if f == root:
                inset = centre + 0.82 * (loop - centre)
                rows.append(self._rows(inset, normal, f, _rgba(palette.ROOT_MARK)))
            outline_rows.append(np.concatenate(rows))
            ends = np.asarray(hinge_lines, dtype=float)[hinges_of[f]].reshape(-1, 3)
            hinge_rows.append(self._rows(ends, normal, f, hinge_color))
        self._pack(fills, outline_rows, hinge_rows)

    def _pack(self, fills, outline_rows, hinge_rows):
        """Put each face's fill, outline and hinge rows into the one vertex buffer."""
        n_faces = len(fills)
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
        if self.closed:
            # Closed outward meshes: a back face is always behind a front one.
            GL.glEnable(GL.GL_CULL_FACE)
            GL.glCullFace(GL.GL_BACK)
            GL.glFrontFace(GL.GL_CCW)
        else:
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
        GL.glDisable(GL.GL_CULL_FACE)
        for loc in enabled:
            GL.glDisableVertexAttribArray(loc)
        GL.glBindBuffer(GL.GL_ARRAY_BUFFER, 0)
        GL.glUseProgram(0)

    def _draw(self, mode, block, first, last):
        start = int(self._starts[block, first])
        count = int(self._starts[block, last - 1] + self._counts[block, last - 1] - start)
        if count:
            GL.glDrawArrays(mode, start, count)
