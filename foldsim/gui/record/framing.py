"""Framing a clip: where the camera stands for every frame so the whole motion stays in view.

The model's panel corners over the clip's range of t come from the core
(`kinematics.poses_at`); the camera is moved nearer or farther and re-centred
until their projection fills the frame, or the part of it the caption leaves
free (`plan_camera`).
"""

import math

import numpy as np

MARGIN = 1.12
"""Room left around the model when a clip is framed, as a factor on its projected size."""


def _clip_poses(viewport, t_values, chunk=64):
    """The core's poses (T, F, 4, 4) at each drive value, in chunks."""
    from ...kinematics import poses_at

    t_values = np.asarray(t_values, dtype=float)
    return np.concatenate([poses_at(viewport.mech, viewport.schedule, t_values[k:k + chunk])
                           for k in range(0, len(t_values), chunk)])


def _posed_corners(viewport, t_values):
    """Every panel corner (n, 3), in the model frame, at each drive value (from the core)."""
    from ...geometry import transform_points

    mech = viewport.mech
    flat = np.concatenate(mech.flat_faces)
    owner = np.concatenate([np.full(len(p), f) for f, p in enumerate(mech.flat_faces)])
    return np.concatenate([transform_points(p[owner], flat) for p in _clip_poses(viewport, t_values)])


def _eye_axes(viewport):
    """The camera's right and up directions (3,) in the display frame."""
    m = np.array(viewport.viewMatrix().data(), dtype=float).reshape(4, 4).T
    return m[0, :3], m[1, :3]


def _fit_region(viewport, points, size, region, margin, distance=None):
    """Aim the camera (along its line of sight) so that ``points`` fill ``region`` of the frame.

    ``region`` is (x0, y0, x1, y1) in pixels of a frame of ``size``. Without
    ``distance`` the camera also moves nearer or farther until the points'
    projected box is ``1 / margin`` of the region; with it, only the centre moves.
    """
    from pyqtgraph import Vector

    w, h = size
    x0, y0, x1, y1 = region
    if distance is not None:
        viewport.opts["distance"] = float(distance)
    for _ in range(12):
        px = viewport.model_to_pixels(points, w, h)
        if not np.isfinite(px).all():
            viewport.opts["distance"] *= 2.0
            continue
        lo, hi = px.min(axis=0), px.max(axis=0)
        if distance is None:
            factor = max((hi[0] - lo[0]) / (x1 - x0), (hi[1] - lo[1]) / (y1 - y0)) * margin
            viewport.opts["distance"] *= factor
        else:
            factor = 1.0
        dx, dy = (x0 + x1) / 2 - (lo[0] + hi[0]) / 2, (y0 + y1) / 2 - (lo[1] + hi[1]) / 2
        per_pixel = 2 * viewport.opts["distance"] * math.tan(math.radians(viewport.opts["fov"]) / 2) / w
        right, up = _eye_axes(viewport)
        c = viewport.opts["center"]
        centre = np.array([c.x(), c.y(), c.z()]) + per_pixel * (-dx * right + dy * up)
        viewport.opts["center"] = Vector(*centre)
        if abs(factor - 1.0) < 1e-3 and abs(dx) < 0.25 and abs(dy) < 0.25:
            break
    c = viewport.opts["center"]
    return np.array([c.x(), c.y(), c.z()]), float(viewport.opts["distance"])


def hull_meets_box(points, box):
    """Whether the convex hull of 2D points overlaps an axis-aligned box.

    Parameters
    ----------
    points : (n, 2) float
    box : (x0, y0, x1, y1)

    Examples
    --------
    >>> tri = np.array([[0.0, 0.0], [10.0, 0.0], [0.0, 10.0]])
    >>> hull_meets_box(tri, (6, 6, 9, 9)), hull_meets_box(tri, (4, 4, 9, 9))
    (False, True)
    """
    from scipy.spatial import ConvexHull, QhullError

    pts = np.asarray(points, dtype=float)
    x0, y0, x1, y1 = box
    lo, hi = pts.min(axis=0), pts.max(axis=0)
    if lo[0] >= x1 or lo[1] >= y1 or hi[0] <= x0 or hi[1] <= y0:
        return False
    try:
        hull = pts[ConvexHull(pts).vertices]
    except (QhullError, ValueError):
        return True  # flat or tiny: its bounding box overlaps, call it a meet
    corners = np.array([[x0, y0], [x1, y0], [x1, y1], [x0, y1]], dtype=float)
    edges = np.roll(hull, -1, axis=0) - hull
    for normal in np.column_stack([-edges[:, 1], edges[:, 0]]):
        a, b = hull @ normal, corners @ normal
        if a.max() <= b.min() or b.max() <= a.min():
            return False
    return True


def fit_values(fit, t_values):
    """The drive values whose shapes a clip's framing must hold, for a ``fit`` choice.

    Parameters
    ----------
    fit : True, "range", "pose" or "motion"
        True and ``"range"``: every shape over the clip's own range of t;
        ``"pose"``: the shape at the last frame only (a closed model fills the
        frame); ``"motion"``: every shape from flat to closed on the side of the
        last frame, as View ▸ Fit whole motion, and the clip's own range.
    t_values : (n,) float
        The clip's drive values (`clip_plan`).

    Returns
    -------
    (m,) float

    Examples
    --------
    >>> fit_values("pose", [0.0, 0.5, 1.0]).tolist()
    [1.0]
    >>> fit_values("motion", [-0.5]).tolist()[:3]
    [-1.0, -0.9, -0.8]
    """
    t_values = np.asarray(t_values, dtype=float)
    if fit == "pose":
        return t_values[-1:]
    if fit == "motion":
        end = 1.0 if t_values[-1] >= 0 else -1.0
        return np.unique(np.concatenate([np.linspace(0.0, end, 11), t_values[[0, -1]]]))
    lo, hi = float(np.min(t_values)), float(np.max(t_values))
    return np.unique(np.concatenate([np.linspace(lo, hi, 13), t_values[[0, -1]]]))


def plan_camera(viewport, t_values, turns, size, margin=MARGIN, reserve=None, fit=True):
    """Camera of every frame such that the whole clip stays in view.

    From the view's current direction, turned by each frame's offset, the
    model's shapes over the clip's range of t are fitted into the frame,
    centred. With ``reserve``, if those shapes would reach into the caption's
    corner, they are fitted instead into the larger of the parts the caption
    leaves free (below it, or right of it). The farthest camera distance over
    the orbit is kept for every frame, so the model does not seem to grow and
    shrink; the centre is found for each direction.

    Parameters
    ----------
    viewport : FoldView
    t_values, turns : (n,) float
        `clip_plan`.
    size : (int, int)
    margin : float
    reserve : (float, float), optional
        Width and height in pixels to keep clear in the top-left corner.
    fit : True, "range", "pose" or "motion"
        Which shapes to hold (`fit_values`).

    Returns
    -------
    list of dict
        Per frame: ``center`` (3,), ``distance``, ``azimuth``, ``elevation``.
        The view's camera is left as it was.
    """
    w, h = size
    saved = _camera(viewport)
    samples = fit_values(fit, t_values)
    points = _posed_corners(viewport, samples)
    turns = np.asarray(turns, dtype=float)
    sample_turns = np.unique(np.linspace(turns.min(), turns.max(), 9 if np.ptp(turns) > 0 else 1))
    whole = (0.0, 0.0, float(w), float(h))

    def aim(turn, region, distance=None):
        viewport.opts["azimuth"] = saved["azimuth"] + turn
        if distance is None:
            viewport.fit(t_values=samples, margin=margin)
        return _fit_region(viewport, points, size, region, margin, distance)

    def framing(region):
        distance = max(aim(turn, region)[1] for turn in sample_turns)
        centres, clear = [], True
        for turn in sample_turns:
            centres.append(aim(turn, region, distance)[0])
            if reserve is not None:
                clear &= not hull_meets_box(viewport.model_to_pixels(points, w, h), (0, 0, *reserve))
        return distance, np.array(centres), clear

    try:
        distance, centres, clear = framing(whole)
        if not clear:
            rw, rh = reserve
            options = [framing(r) for r in ((0.0, rh, w, h), (rw, 0.0, w, h))
                       if r[2] - r[0] > w / 4 and r[3] - r[1] > h / 4]
            if options:
                distance, centres, _ = min(options, key=lambda o: o[0])
    finally:
        _set_camera(viewport, saved)
    plan = []
    for turn in turns:
        centre = [np.interp(turn, sample_turns, centres[:, k]) for k in range(3)]
        plan.append({"center": np.array(centre), "distance": distance,
                     "azimuth": saved["azimuth"] + turn, "elevation": saved["elevation"]})
    return plan


def _camera(viewport):
    c = viewport.opts["center"]
    return {"center": np.array([c.x(), c.y(), c.z()]), "distance": float(viewport.opts["distance"]),
            "azimuth": float(viewport.opts["azimuth"]), "elevation": float(viewport.opts["elevation"]),
            "fitted": getattr(viewport, "_fitted", False)}


def _set_camera(viewport, camera):
    from pyqtgraph import Vector

    viewport.opts["center"] = Vector(*(float(v) for v in camera["center"]))
    viewport.opts["distance"] = float(camera["distance"])
    viewport.opts["azimuth"] = float(camera["azimuth"])
    viewport.opts["elevation"] = float(camera["elevation"])
    if "fitted" in camera and hasattr(viewport, "_fitted"):
        viewport._fitted = camera["fitted"]
    viewport.update()
