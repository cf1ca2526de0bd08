"""Where the view's camera looks, and what lies under a pixel.

`stage_transform` takes the model's flat frame to the display frame (see
`viewport`); `CameraControl`, a part of `viewport.FoldView`, fits the camera to the
model, turns it to the standard views, projects model points to pixels, casts the
ray through a pixel to pick a panel, and tells a click from a drag.
"""

import numpy as np
from pyqtgraph import Vector
from PySide6 import QtCore, QtGui

from ...geometry import transform_points, unit
from ...kinematics import poses_at
from ...picking import pick_face

VIEWS = {
    # name: (elevation, azimuth) in degrees; the camera looks at the centre from
    # azimuth (about +z, from +x) and elevation (above the xy plane).
    "front": (0.0, -90.0),
    "top": (90.0, -90.0),
    "side": (0.0, 0.0),
    "iso": (28.0, -58.0),
}
"""Standard camera directions in the display frame (see `viewport`)."""

CLICK_SLOP = 4
"""A press and release nearer than this many pixels is a click, not a drag."""


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



class CameraControl:
    """Camera, projection, picking and mouse handling (a mixin of `viewport.FoldView`)."""

    def stage(self):
        """`stage_transform` of the mechanism shown, (4, 4) float (computed once per mechanism)."""
        if getattr(self, "_stage_of", None) is not self.mech:
            self._stage_matrix = stage_transform(self.mech)
            self._stage_of = self.mech
        return self._stage_matrix

    def _display_points(self, t_values=None):
        """Corners (n, 3) of every panel in the display frame, at t or the current poses."""
        mech = self.mech
        flat = np.concatenate(mech.flat_faces)
        owner = np.concatenate([np.full(len(p), f) for f, p in enumerate(mech.flat_faces)])
        sets = [self.poses] if t_values is None else list(poses_at(mech, self.schedule, np.asarray(t_values)))
        stage = self.stage()
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

    def fit_pose(self):
        """Fit the model as it stands at the current t (a closed model fills the view)."""
        self.fit(t_values=(self.t,))

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
        m = self._view_projection(width, height) @ self.stage()
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
        m = self._view_projection(w, h) @ self.stage()
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

    def mouseMoveEvent(self, ev):
        if ev.buttons():
            self._fitted = False
        super().mouseMoveEvent(ev)

    def wheelEvent(self, ev):
        self._fitted = False
        super().wheelEvent(ev)
