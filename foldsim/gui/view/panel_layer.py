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

# What both vertex shaders take per block of panels: the camera, each panel's pose
# and colours, the block's first panel, and whether lines are being drawn.
_BLOCK_UNIFORMS = """
uniform mat4 u_projection;
uniform mat4 u_modelview;
uniform mat4 u_pose[SLOTS];
uniform vec4 u_front[SLOTS];
uniform vec4 u_back[SLOTS];
uniform float u_base;
uniform float u_lines;
"""


# The panels are flat, so each triangle has one normal and its lighting is the
# same all over it: the vertex shader lights the side the triangle shows (two-
# sided lighting in eye space: a key light from the upper left and a little of a
# head light, over a high ambient so no side of a panel goes black), and the
# fragments get that one colour. The outer side (counter-clockwise, as the model's
# faces are) takes the front colour, the inner side the back colour. Which side a
# triangle shows is the sign of the determinant of its corners' clip coordinates
# (x, y, w), which every corner works out alike and which holds for corners
# behind the eye too (Olano and Greer, "Triangle scan conversion using 2D
# homogeneous coordinates", Graphics Hardware 1997). Lines are drawn unlit.
#
# A flat panel's outline and hinge edges are drawn by its own fill, as bands along
# the triangle's edges (single-pass wireframe: Baerentzen, Munk Nielsen, Gjoel
# and Larsen, "Single-pass wireframe rendering", SIGGRAPH 2006 sketch). Each
# corner gets its distance in pixels to the opposite edge from the screen
# positions of the triangle's three corners, and that distance, interpolated
# linearly across the screen, is every fragment's distance to each edge. Each of
# the two panels at an edge draws the band on its own side, so the halves make
# one line as wide as a GL line centred on the edge; an outline edge that no
# panel meets (the mesh's border, a cut edge whose gap is open) takes the whole
# width on its one side. The band's border is smoothed over one pixel. A drawn
# line of its own cost the software renderer more than the fill it lies on.
_VERTEX_SHADER = _BLOCK_UNIFORMS + """
uniform vec2 u_viewport;
uniform float u_outline_half;
uniform float u_hinge_half;
attribute vec4 a_position;
attribute vec3 a_normal;
attribute float a_face;
attribute vec4 a_color;
attribute vec3 a_corner;
attribute vec3 a_kind;
attribute vec3 a_next;
attribute vec3 a_prev;
attribute vec3 a_free;
varying vec4 v_color;
varying vec3 v_outline;
varying vec3 v_hinge;

void main() {
    int slot = int(a_face - u_base + 0.5);
    mat4 pose = u_pose[slot];
    mat4 eye = u_modelview * pose;
    vec4 here = u_projection * (eye * a_position);
    gl_Position = here;
    // Band edges beyond reach (no edge line) unless the corner says otherwise.
    v_outline = vec3(-1.0e4);
    v_hinge = vec3(-1.0e4);
    if (u_lines > 0.5) {
        v_color = a_color;
        return;
    }
    vec4 next = u_projection * (eye * vec4(a_next, 1.0));
    vec4 prev = u_projection * (eye * vec4(a_prev, 1.0));
    bool outer = dot(here.xyw, cross(next.xyw, prev.xyw)) > 0.0;
    vec3 n = normalize((eye * vec4(a_normal, 0.0)).xyz);
    vec4 base = outer ? u_front[slot] : u_back[slot];
    vec3 key = normalize(vec3(-0.45, 0.55, 0.70));
    n = outer ? n : -n;
    float light = 0.60 + 0.32 * max(dot(n, key), 0.0) + 0.14 * abs(n.z);
    v_color = vec4(min(base.rgb * light, 1.0), base.a);
    if (a_kind.x + a_kind.y + a_kind.z < 0.5 || min(here.w, min(next.w, prev.w)) <= 1.0e-6) {
        return;
    }
    vec2 s0 = 0.5 * u_viewport * here.xy / here.w;
    vec2 s1 = 0.5 * u_viewport * next.xy / next.w;
    vec2 s2 = 0.5 * u_viewport * prev.xy / prev.w;
    vec2 along = s2 - s1;
    vec2 up = s1 - s0;
    // This corner's height in pixels over the opposite edge.
    float height = min(abs(up.x * along.y - up.y * along.x) / max(length(along), 1.0e-6), 1.0e5);
    vec3 away = a_corner * height;
    vec3 outline = step(0.5, a_kind) - step(1.5, a_kind);
    vec3 hinge = step(1.5, a_kind);
    // Coverage of the band = clamp(half width + 0.5 - distance), linear in the
    // distance; times w so that the fragment shader's perspective-correct
    // interpolation, times 1/w there, comes out linear across the screen.
    // A free outline edge (no panel meets it) takes the whole width on its side.
    v_outline = here.w * mix(vec3(-1.0e4), u_outline_half * (1.0 + a_free) + 0.5 - away, outline);
    v_hinge = here.w * mix(vec3(-1.0e4), vec3(u_hinge_half + 0.5) - away, hinge);
}
"""

_FRAGMENT_SHADER = """
#ifdef GL_ES
precision mediump float;
#endif
uniform vec4 u_outline;
uniform vec4 u_hinge;
varying vec4 v_color;
varying vec3 v_outline;
varying vec3 v_hinge;
void main() {
    vec4 color = v_color;
    vec3 outline = clamp(v_outline * gl_FragCoord.w, 0.0, 1.0);
    vec3 hinge = clamp(v_hinge * gl_FragCoord.w, 0.0, 1.0);
    color.rgb = mix(color.rgb, u_outline.rgb, max(outline.x, max(outline.y, outline.z)));
    color.rgb = mix(color.rgb, u_hinge.rgb, max(hinge.x, max(hinge.y, hinge.z)));
    gl_FragColor = color;
}
"""

# A build's solids (`solid_layer.SolidLayer`) draw their outlines (feature edges)
# as bands of their fills too, from each corner's barycentric coordinate, and
# through their pixel derivatives, rather than from the corners' screen positions:
# a solid has many small triangles, so its vertices cost more than its pixels.
# Barycentric coordinate i falls from 1 at corner i to 0 on the opposite edge, and
# its value over the length of its screen gradient is a fragment's distance in
# pixels to that edge (common practice in wireframe shaders). An edge that is no
# outline has _FAR added to its coordinate, so it is never within a band's reach.
# The solids are closed and culled, so only their front sides are ever seen, and
# their triangles are flat: each vertex is lit with its triangle's normal, and the
# fragments get one colour.
_SOLID_VERTEX_SHADER = _BLOCK_UNIFORMS + """
attribute vec4 a_position;
attribute vec3 a_normal;
attribute float a_face;
attribute vec4 a_color;
attribute vec3 a_edge;
varying vec4 v_color;
varying vec3 v_edge;
void main() {
    int slot = int(a_face - u_base + 0.5);
    mat4 pose = u_pose[slot];
    vec4 eye = u_modelview * (pose * a_position);
    gl_Position = u_projection * eye;
    v_edge = a_edge;
    if (u_lines > 0.5) {
        v_color = a_color;
        return;
    }
    vec3 n = normalize((u_modelview * (pose * vec4(a_normal, 0.0))).xyz);
    // Solids with a colour of their own (gear bodies) keep it.
    vec4 base = a_color.a > 0.0 ? a_color : u_front[slot];
    vec3 key = normalize(vec3(-0.45, 0.55, 0.70));
    float light = 0.60 + 0.32 * max(dot(n, key), 0.0) + 0.14 * abs(n.z);
    v_color = vec4(min(base.rgb * light, 1.0), base.a);
}
"""

_SOLID_FRAGMENT_SHADER = """
#ifdef GL_ES
precision mediump float;
#endif
uniform float u_lines;
uniform vec4 u_outline;
uniform float u_outline_half;
varying vec4 v_color;
varying vec3 v_edge;
void main() {
    if (u_lines > 0.5) {
        gl_FragColor = v_color;
        return;
    }
    vec3 dx = dFdx(v_edge);
    vec3 dy = dFdy(v_edge);
    vec3 away = v_edge / max(sqrt(dx * dx + dy * dy), vec3(1.0e-9));
    vec3 band = clamp(vec3(u_outline_half + 0.5) - away, 0.0, 1.0);
    gl_FragColor = vec4(mix(v_color.rgb, u_outline.rgb, max(band.x, max(band.y, band.z))), v_color.a);
}
"""

_FAR = 100.0
"""Added to a solid corner's barycentric coordinate of an edge that is no outline."""

_SHADERS = {"panels": (_VERTEX_SHADER, _FRAGMENT_SHADER),
            "solids": (_SOLID_VERTEX_SHADER, _SOLID_FRAGMENT_SHADER)}

_FLOATS = 23  # position 3, normal 3, face 1, colour 4, corner 3, edge kinds 3, next 3, previous 3

# Where each attribute lies in a vertex (floats: size, offset) for each program.
_LAYOUTS = {"panels": {"a_position": (3, 0), "a_normal": (3, 3), "a_face": (1, 6), "a_color": (4, 7),
                       "a_corner": (3, 11), "a_kind": (3, 14), "a_next": (3, 17), "a_prev": (3, 20)},
            "solids": {"a_position": (3, 0), "a_normal": (3, 3), "a_face": (1, 6), "a_color": (4, 7),
                       "a_edge": (3, 11)}}

OUTLINE_WIDTH = 1.6
"""Width in pixels of a panel's outline (on screen; offscreen frames scale it)."""

HINGE_WIDTH = 3.0
"""Width in pixels of a hinge line."""


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
    """A layer's shader program in one GL context, with its locations.

    ``kind`` is "panels" (flat panels with edge bands) or "solids"; a location the
    program does not use is -1, which GL ignores.
    """

    def __init__(self, kind="panels"):
        from OpenGL.GL import shaders

        vertex, fragment = _SHADERS[kind]
        limit = int(GL.glGetIntegerv(GL.GL_MAX_VERTEX_UNIFORM_COMPONENTS))
        self.slots = uniform_slots(limit)
        define = f"#define SLOTS {self.slots}\n"
        self.program = shaders.compileProgram(
            shaders.compileShader(define + vertex, GL.GL_VERTEX_SHADER),
            shaders.compileShader(fragment, GL.GL_FRAGMENT_SHADER))
        GL.glBindAttribLocation(self.program, 0, "a_position")
        GL.glLinkProgram(self.program)
        self.attributes = {name: GL.glGetAttribLocation(self.program, name)
                           for name in (*_LAYOUTS[kind], "a_free")}
        self.uniforms = {name: GL.glGetUniformLocation(self.program, name)
                         for name in ("u_projection", "u_modelview", "u_pose", "u_front", "u_back",
                                      "u_base", "u_lines", "u_outline", "u_hinge", "u_outline_half",
                                      "u_hinge_half", "u_viewport")}


def _rgba(rgb, alpha=1.0):
    """A 0-255 palette triple as an (r, g, b, a) tuple in [0, 1]."""
    return (*palette.unit_rgb(rgb), alpha)


def _edge_key(a, b, scale):
    """The same key for a segment either way round, its end points rounded to ``scale``."""
    ka, kb = (tuple(np.round(np.asarray(p) / scale).astype(np.int64)) for p in (a, b))
    return (ka, kb) if ka <= kb else (kb, ka)


def _edge_columns(poly, tri, hinge_edges, scale, cuts=None):
    """The fill's edge columns (3 n, 12) for a face's triangles (n, 3) of indices into ``poly`` (k, 3).

    Per corner: which corner it is (a row of the 3 x 3 identity), its triangle's
    edge kinds, and the triangle's next and previous corners (flat frame). With
    ``cuts`` (a dict from an edge's key to its cut-edge index, this face's copies),
    also each corner's (3,) cut-edge indices of its triangle's edges, -1 where none.

    Edge i of a triangle is the one opposite its corner i; its kind is 0 for a
    diagonal inside the polygon, 2 for a hinge edge (its key in ``hinge_edges``)
    and 1 for the rest of the outline.
    """
    k = len(poly)
    kinds = np.zeros(tri.shape, float)
    cut = np.full(tri.shape, -1, np.int64)
    for i in range(3):
        a, b = tri[:, (i + 1) % 3], tri[:, (i + 2) % 3]
        side = ((b - a) % k == 1) | ((a - b) % k == 1)
        keys = [_edge_key(poly[p], poly[q], scale) for p, q in zip(a, b)]
        hinge = np.array([key in hinge_edges for key in keys], bool)
        kinds[:, i] = np.where(side, np.where(hinge, 2.0, 1.0), 0.0)
        if cuts:
            cut[:, i] = [cuts.get(key, -1) if on else -1 for key, on in zip(keys, side & ~hinge)]
    corners = np.broadcast_to(np.eye(3), (len(tri), 3, 3)).reshape(-1, 3)
    following = poly[np.roll(tri, -1, axis=1)].reshape(-1, 3)
    preceding = poly[np.roll(tri, 1, axis=1)].reshape(-1, 3)
    columns = np.hstack([corners, np.repeat(kinds, 3, axis=0), following, preceding])
    return columns if cuts is None else (columns, np.repeat(cut, 3, axis=0))


class PanelLayer(gl.GLGraphicsItem.GLGraphicsItem):
    """Every rigid panel of a mechanism, built once and moved by setting poses.

    The flat-frame geometry of all panels (shaded triangles that also draw the
    panel's outline and hinge edges, and the root's inset mark) goes into one
    vertex buffer when the layer is made. A frame only changes the panels'
    transforms (`set_poses`, a (F, 4, 4) array, as `setTransform` does for one
    item) and, when something changes, their colours (`set_colors`); the GPU
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
    cut_faces : (E, 2) int, optional
        The two faces of each cut edge, and
    cut_points : (E, 2, 2, 3) float, optional
        each face's copy of it (flat frame), as `foldsim.model.Mechanism` has
        them; with them `set_open_cuts` can say which cut edges are open.
    """

    closed = False
    """Whether every mesh is closed and faces outward, so back faces can be culled."""

    outline_side = 0.5
    """Share of `OUTLINE_WIDTH` an outline's band takes on each side of its edge."""

    shaders = "panels"
    """Which shader program draws the layer (`_PanelProgram`)."""

    def __init__(self, outlines, triangles, hinge_lines, hinge_parent, root, cut_faces=None, cut_points=None,
                 parentItem=None):
        super().__init__(parentItem=parentItem)
        n_faces = len(outlines)
        fills, outline_rows, fill_cuts = [], [], []
        # The fills draw the outlines and hinge lines (see the fragment shader):
        # a line of its own costs the software renderer more than the fill it
        # lies on, and lines were half of a large model's drawing.
        ends = np.asarray(hinge_lines, dtype=float).reshape(-1, 2, 3)
        scale = max(float(np.abs(np.concatenate([np.asarray(p, float) for p in outlines])).max()), 1.0) * 1e-9
        hinge_edges = {_edge_key(a, b, scale) for a, b in ends}
        cuts = [{} for _ in range(n_faces)]
        if cut_faces is not None:
            for e, (faces, copies) in enumerate(zip(np.asarray(cut_faces), np.asarray(cut_points, float))):
                for f, (a, b) in zip(faces, copies):
                    cuts[f][_edge_key(a, b, scale)] = e
        for f, (poly, tri) in enumerate(zip(outlines, triangles)):
            poly = np.asarray(poly, dtype=float)
            tri = np.asarray(tri, dtype=np.int64).reshape(-1, 3)
            centre = poly.mean(axis=0)
            normal = unit(np.cross(poly - centre, np.roll(poly, -1, axis=0) - centre).sum(axis=0))
            # Alpha 0: the fill takes the panel's colour (``set_colors``).
            rows = self._rows(poly[tri].reshape(-1, 3), normal, f, (1, 1, 1, 0))
            columns, cut = _edge_columns(poly, tri, hinge_edges, scale, cuts[f])
            fills.append(np.hstack([rows, columns]))
            fill_cuts.append(cut)
            if f == root:
                loop = np.stack([poly, np.roll(poly, -1, axis=0)], axis=1).reshape(-1, 3)
                inset = centre + 0.82 * (loop - centre)
                outline_rows.append(self._rows(inset, normal, f, _rgba(palette.ROOT_MARK)))
            else:
                outline_rows.append(np.zeros((0, _FLOATS)))
        self._pack(fills, outline_rows, [np.zeros((0, _FLOATS))] * n_faces)
        # Which cut edge each fill corner's triangle edges are (-1: none); the
        # rest of the buffer (lines) has none.
        self._cut_of[:sum(len(c) for c in fill_cuts)] = np.concatenate(fill_cuts)
        self.set_open_cuts(np.ones(0 if cut_faces is None else len(cut_faces), bool))

    def _pack(self, fills, outline_rows, hinge_rows):
        """Put each face's rows of three blocks into the one vertex buffer (`_draws` says how each is drawn).

        The flat layer's blocks are fills, outlines and hinge lines; rows without
        the edge columns (lines) get zeros there: no edges.
        """
        n_faces = len(fills)
        blocks = fills + outline_rows + hinge_rows
        width = sum(size for size, _ in _LAYOUTS[self.shaders].values())
        data = np.zeros((sum(len(b) for b in blocks), width), np.float32)
        at = 0
        for b in blocks:
            if len(b):
                data[at:at + len(b), :np.shape(b)[1]] = b
                at += len(b)
        self._data = data
        counts = np.array([len(b) for b in blocks]).reshape(3, n_faces)
        starts = np.concatenate([[0], np.cumsum(counts.ravel())[:-1]]).reshape(3, n_faces)
        self._starts, self._counts = starts, counts
        self.n_faces = n_faces
        self.poses = np.broadcast_to(np.eye(4), (n_faces, 4, 4)).astype(np.float32)
        self.front = np.ones((n_faces, 4), np.float32)
        self.back = np.ones((n_faces, 4), np.float32)
        # Per vertex, per triangle edge: 1 where the outline edge is free (its band
        # takes the whole width), 0 where a panel meets it; a second buffer, sent
        # again only when it changes.
        self._free = np.ones((len(self._data), 3), np.float32)
        self._free_sent = False
        self._cut_of = np.full((len(self._data), 3), -1, np.int64)
        self._open = None
        self._blocks_for = None
        self._buffer = None
        self._free_buffer = None
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

    def set_open_cuts(self, is_open):
        """Which cut edges are open, (E,) bool: their outlines take the whole line width.

        Where a cut edge has met, each of its two panels draws half the line on its
        side, as at a hinge. Nothing is sent to the GPU unless the answer changed.
        """
        is_open = np.asarray(is_open, bool)
        if self._open is not None and np.array_equal(is_open, self._open):
            return
        self._open = is_open.copy()
        cut = self._cut_of
        met = (cut >= 0) & ~np.concatenate([is_open, [True]])[cut]
        self._free = np.where(met, 0.0, 1.0).astype(np.float32)
        self._free_sent = False
        self.update()

    def release(self):
        """Free the vertex buffer (the view's GL context must be current)."""
        if self._buffer is not None and self._context is QtGui.QOpenGLContext.currentContext():
            GL.glDeleteBuffers(2, [self._buffer, self._free_buffer])
        self._buffer = None
        self._free_buffer = None

    def paint(self):
        view = self.view()
        program = view.panel_program(self.shaders)
        context = QtGui.QOpenGLContext.currentContext()
        if self._buffer is None or self._context is not context:
            self._buffer, self._free_buffer = (int(b) for b in GL.glGenBuffers(2))
            self._context = context
            GL.glBindBuffer(GL.GL_ARRAY_BUFFER, self._buffer)
            GL.glBufferData(GL.GL_ARRAY_BUFFER, self._data.nbytes, self._data, GL.GL_STATIC_DRAW)
            self._free_sent = False
        if not self._free_sent:
            GL.glBindBuffer(GL.GL_ARRAY_BUFFER, self._free_buffer)
            GL.glBufferData(GL.GL_ARRAY_BUFFER, self._free.nbytes, self._free, GL.GL_DYNAMIC_DRAW)
            self._free_sent = True
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
        enabled = []
        if a["a_free"] >= 0:
            GL.glBindBuffer(GL.GL_ARRAY_BUFFER, self._free_buffer)
            GL.glEnableVertexAttribArray(a["a_free"])
            GL.glVertexAttribPointer(a["a_free"], 3, GL.GL_FLOAT, False, 12, ctypes.c_void_p(0))
            enabled.append(a["a_free"])
        GL.glBindBuffer(GL.GL_ARRAY_BUFFER, self._buffer)
        for name, (size, offset) in _LAYOUTS[self.shaders].items():
            if a[name] >= 0:
                GL.glEnableVertexAttribArray(a[name])
                GL.glVertexAttribPointer(a[name], size, GL.GL_FLOAT, False, 4 * self._data.shape[1],
                                         ctypes.c_void_p(4 * offset))
                enabled.append(a[name])
        scale = view.line_scale()
        GL.glUniform4f(u["u_outline"], *_rgba(palette.OUTLINE))
        GL.glUniform4f(u["u_hinge"], *_rgba(palette.HINGE))
        GL.glUniform1f(u["u_outline_half"], self.outline_side * OUTLINE_WIDTH * scale)
        GL.glUniform1f(u["u_hinge_half"], 0.5 * HINGE_WIDTH * scale)
        GL.glUniform2f(u["u_viewport"], *(float(v) for v in GL.glGetIntegerv(GL.GL_VIEWPORT)[2:]))
        # Push the fill back a little so lines drawn on it (the root's mark, a
        # solid's outlines and hinge lines) win.
        GL.glEnable(GL.GL_POLYGON_OFFSET_FILL)
        GL.glPolygonOffset(1.0, 1.0)
        GL.glUniform1f(u["u_lines"], 0.0)
        lines = False
        for first, last, draws in self._block_draws(program.slots):
            GL.glUniform1f(u["u_base"], float(first))
            GL.glUniformMatrix4fv(u["u_pose"], last - first, True, self.poses[first:last])
            GL.glUniform4fv(u["u_front"], last - first, self.front[first:last])
            GL.glUniform4fv(u["u_back"], last - first, self.back[first:last])
            for mode, width, multisample, start, count in draws:
                if (mode == GL.GL_LINES) != lines:
                    lines = not lines
                    GL.glUniform1f(u["u_lines"], float(lines))
                if lines:
                    GL.glLineWidth(width * scale)
                if not multisample:
                    GL.glDisable(GL.GL_MULTISAMPLE)
                GL.glDrawArrays(mode, start, count)
                if not multisample:
                    GL.glEnable(GL.GL_MULTISAMPLE)
        GL.glDisable(GL.GL_POLYGON_OFFSET_FILL)
        GL.glLineWidth(1.0)
        GL.glDisable(GL.GL_CULL_FACE)
        for loc in enabled:
            GL.glDisableVertexAttribArray(loc)
        GL.glBindBuffer(GL.GL_ARRAY_BUFFER, 0)
        GL.glUseProgram(0)

    def _draws(self):
        """How each of the three blocks of rows is drawn: (mode, line width, multisampled)."""
        return ((GL.GL_TRIANGLES, 0.0, True), (GL.GL_LINES, OUTLINE_WIDTH, True), (GL.GL_LINES, HINGE_WIDTH, True))

    def _block_draws(self, slots):
        """Per block of ``slots`` faces: (first, last, draws), each draw (mode, width, multisampled, start, count).

        Worked out once per slot count; draws of no vertices are left out.
        """
        if self._blocks_for != slots:
            out = []
            for first in range(0, self.n_faces, slots):
                last = min(first + slots, self.n_faces)
                draws = []
                for block, (mode, width, multisample) in enumerate(self._draws()):
                    start = int(self._starts[block, first])
                    count = int(self._starts[block, last - 1] + self._counts[block, last - 1] - start)
                    if count:
                        draws.append((mode, width, multisample, start, count))
                out.append((first, last, draws))
            self._blocks, self._blocks_for = out, slots
        return self._blocks
