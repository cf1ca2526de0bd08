"""Headless pictures of posed panels as inline SVG (no display, no GPU).

An orthographic camera looks at the model from a fixed direction (default from
front-right-above, with the root face as the floor and the panels folding up from
it). Panels are projected, sorted far to near by the
depth of their centroid and drawn in that order (the painter's algorithm), each
flat-shaded by the angle between its normal and a light that comes from over
the viewer's left shoulder. A panel seen from its outside side is drawn warm, one
seen from its inside cool, so a reviewer can tell which way a panel faces.

The painter's algorithm draws whole panels, so two panels that pass through each
other (a collision) cannot both be right where they cross; such panels get a
red outline instead, and the collision table says where they cross.
"""

from xml.sax.saxutils import escape

import numpy as np

from ..geometry import newell_normals, transform_points, unit
from .common import face_normals, fmt

OUTSIDE_RGB = np.array([236.0, 196.0, 128.0])
INSIDE_RGB = np.array([150.0, 172.0, 204.0])
DEFAULT_VIEW = (1.0, -1.35, 0.95)


def camera(direction=DEFAULT_VIEW, up=(0.0, 0.0, 1.0)):
    """Screen axes of an orthographic camera looking toward ``-direction``.

    Parameters
    ----------
    direction : (3,) float
        From the scene toward the camera, in a frame whose third axis is ``up``
        (and whose first is model X, or model Y when ``up`` is along X); must not
        be vertical.
    up : (3,) float
        The direction shown as screen up (default model Z).

    Returns
    -------
    (3, 3) float
        Rows: screen right, screen up, toward the viewer.

    Examples
    --------
    >>> (np.round(camera((0.0, -1.0, 0.0)), 12) + 0.0).tolist()
    [[1.0, 0.0, 0.0], [0.0, 0.0, 1.0], [0.0, -1.0, 0.0]]

    Turned upside down (the frame turns half a revolution about model X, so its
    "front" is model +Y):

    >>> (np.round(camera((0.0, -1.0, 0.0), up=(0.0, 0.0, -1.0)), 12) + 0.0).tolist()
    [[1.0, 0.0, 0.0], [0.0, 0.0, -1.0], [0.0, 1.0, 0.0]]
    """
    up = unit(np.asarray(up, float))
    axis = np.eye(3)[0] if abs(up[0]) < 0.9 else np.eye(3)[1]
    first = unit(axis - (axis @ up) * up)
    d = np.asarray(direction, float)
    toward = unit(d[0] * first + d[1] * np.cross(up, first) + d[2] * up)
    right = unit(np.cross(up, toward))
    return np.array([right, np.cross(toward, right), toward])


def panels_up(mech, t_to=1.0):
    """The direction in which the panels fold away from the root face, (3,) float.

    Positive folds turn panels toward their backs, so for t > 0 the shell forms on
    the inside of the root face; pictures with this direction up show the root as
    the floor and the panels rising from it.
    """
    normal = unit(newell_normals([mech.flat_faces[mech.root]])[0])
    return -normal if t_to >= 0 else normal


def project(cam, points):
    """Screen (x right, y up) and depth (larger is nearer) of model points (..., 3)."""
    q = np.asarray(points, float) @ cam.T
    return q[..., :2], q[..., 2]


def screen_box(mech, cam, pose_sets):
    """Screen bounding box (xmin, xmax, ymin, ymax) of the panels over pose sets (T, F, 4, 4)."""
    pts = np.concatenate([transform_points(pose_sets[:, f][:, None], p[None]).reshape(-1, 3)
                          for f, p in enumerate(mech.flat_faces)])
    xy, _ = project(cam, pts)
    return xy[:, 0].min(), xy[:, 0].max(), xy[:, 1].min(), xy[:, 1].max()


def shade(normal, toward, light):
    """Fill colour "#rrggbb" of a panel: its side's colour times Lambert light.

    Parameters
    ----------
    normal, toward, light : (3,) float
        The panel's outside normal, the direction to the viewer, the direction
        to the light (unit vectors).

    Examples
    --------
    >>> shade(np.array([0, 0, 1.0]), np.array([0, 0, 1.0]), np.array([0, 0, 1.0]))
    '#ecc480'
    """
    outside = float(normal @ toward) >= 0
    seen = normal if outside else -normal
    light_level = 0.35 + 0.65 * max(0.0, float(seen @ light))
    rgb = np.clip(np.round((OUTSIDE_RGB if outside else INSIDE_RGB) * light_level), 0, 255).astype(int)
    return "#" + "".join(f"{c:02x}" for c in rgb)


def render(mech, poses, cam, box, width=320, height=None, highlight=(), caption="", labels=True):
    """One posed state as an ``<svg>`` element.

    Parameters
    ----------
    mech : Mechanism
    poses : (F, 4, 4) float
    cam : (3, 3) float
        From `camera`.
    box : (4,) float
        Screen box to fit (`screen_box`), shared by renders that are compared.
    width, height : int
        Pixels; height defaults to the box's aspect.
    highlight : iterable of int
        Faces to outline in red (e.g. colliding ones).
    caption : str
        Text in the picture's <title>.
    labels : bool
        Draw face numbers.

    Returns
    -------
    str
    """
    xmin, xmax, ymin, ymax = box
    span = max(xmax - xmin, ymax - ymin, 1e-12)
    pad = 0.06 * span
    scale = (width - 2.0) / (xmax - xmin + 2 * pad) if xmax > xmin else width / span
    height = height or int(np.ceil((ymax - ymin + 2 * pad) * scale)) + 2
    cx, cy = (xmin + xmax) / 2, (ymin + ymax) / 2
    light = unit(cam[2] + 0.6 * cam[1] - 0.5 * cam[0])
    highlight = {int(f) for f in highlight}
    posed = [transform_points(poses[f], p) for f, p in enumerate(mech.flat_faces)]
    normals = face_normals(posed)
    order = sorted(range(mech.n_faces), key=lambda f: float(project(cam, posed[f].mean(axis=0))[1]))
    font = max(9.0, min(16.0, 0.05 * width))
    out = [f'<svg xmlns="http://www.w3.org/2000/svg" class="render" width="{width}" height="{height}" '
           f'viewBox="0 0 {width} {height}" role="img">',
           f"<title>{escape(caption)}</title>",
           f'<rect width="{width}" height="{height}" fill="#ffffff"/>']
    for f in order:
        xy, _ = project(cam, posed[f])
        sx = width / 2 + (xy[:, 0] - cx) * scale
        sy = height / 2 - (xy[:, 1] - cy) * scale
        points = " ".join(f"{fmt(x, 2)},{fmt(y, 2)}" for x, y in zip(sx, sy))
        hot = f in highlight
        stroke = 'stroke="#d0021b" stroke-width="2.5"' if hot else 'stroke="#333333" stroke-width="0.8"'
        out.append(f'<polygon class="panel{" colliding" if hot else ""}" data-face="{f}" '
                   f'points="{points}" fill="{shade(normals[f], cam[2], light)}" {stroke} '
                   'stroke-linejoin="round"/>')
        if labels and abs(float(normals[f] @ cam[2])) > 0.25:  # not for panels seen edge-on
            c = posed[f].mean(axis=0)
            (lx, ly), _ = project(cam, c)
            out.append(f'<text x="{fmt(width / 2 + (lx - cx) * scale, 2)}" '
                       f'y="{fmt(height / 2 - (ly - cy) * scale, 2)}" font-size="{fmt(font, 1)}" '
                       'text-anchor="middle" dominant-baseline="central" font-family="sans-serif" '
                       f'fill="#222222">{f}</text>')
    out.append("</svg>")
    return "\n".join(out)
