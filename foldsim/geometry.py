"""Small geometric building blocks shared by the model and the kinematics.

Rigid folding is a product of rotations about fold lines (belcastro & Hull,
"Modelling the folding of paper into three dimensions using affine
transformations", Linear Algebra Appl. 348 (2002) 273-282). These functions build
those rotations, batched with numpy.
"""

import numpy as np


def newell_normals(polygons):
    """Area-weighted normals of planar polygons (Newell's method).

    Parameters
    ----------
    polygons : sequence of (k, 3) float
        Polygon vertices in order.

    Returns
    -------
    (n, 3) float
        Normal vectors whose length is the polygon's area.

    Examples
    --------
    >>> square = np.array([[0, 0, 0], [2, 0, 0], [2, 2, 0], [0, 2, 0]], float)
    >>> newell_normals([square]).tolist()
    [[0.0, 0.0, 4.0]]
    """
    out = np.empty((len(polygons), 3))
    for i, p in enumerate(polygons):
        q = np.roll(p, -1, axis=0)
        out[i] = 0.5 * np.cross(p, q).sum(axis=0)
    return out


def unit(vectors):
    """Vectors scaled to unit length.

    Parameters
    ----------
    vectors : (..., 3) float

    Returns
    -------
    (..., 3) float
    """
    vectors = np.asarray(vectors, dtype=float)
    return vectors / np.linalg.norm(vectors, axis=-1, keepdims=True)


def line_rotations(points, angles):
    """Rigid transforms rotating about directed lines, batched.

    Parameters
    ----------
    points : (..., 2, 3) float
        Two points ``a, b`` on each line; the rotation is right-handed about
        ``b - a``.
    angles : (...) float
        Rotation angles in radians; broadcast against ``points[..., 0, 0]``.

    Returns
    -------
    (..., 4, 4) float
        Homogeneous transforms ``x -> R (x - a) + a``.

    Examples
    --------
    >>> z_axis = np.array([[0.0, 0, 0], [0, 0, 1]])
    >>> m = line_rotations(z_axis, np.pi / 2)
    >>> np.round(m[:3, :3] @ [1.0, 0, 0], 12).tolist()
    [0.0, 1.0, 0.0]
    """
    points = np.asarray(points, dtype=float)
    angles = np.asarray(angles, dtype=float)
    a = points[..., 0, :]
    u = unit(points[..., 1, :] - a)
    shape = np.broadcast_shapes(angles.shape, a.shape[:-1])
    a = np.broadcast_to(a, shape + (3,))
    u = np.broadcast_to(u, shape + (3,))
    angles = np.broadcast_to(angles, shape)
    c = np.cos(angles)[..., None, None]
    s = np.sin(angles)[..., None, None]
    k = np.zeros(shape + (3, 3))
    k[..., 0, 1], k[..., 0, 2] = -u[..., 2], u[..., 1]
    k[..., 1, 0], k[..., 1, 2] = u[..., 2], -u[..., 0]
    k[..., 2, 0], k[..., 2, 1] = -u[..., 1], u[..., 0]
    outer = u[..., :, None] * u[..., None, :]
    rot = c * np.eye(3) + s * k + (1.0 - c) * outer
    out = np.zeros(shape + (4, 4))
    out[..., :3, :3] = rot
    out[..., :3, 3] = a - np.einsum("...ij,...j->...i", rot, a)
    out[..., 3, 3] = 1.0
    return out


def transform_points(transforms, points):
    """Apply rigid transforms to points.

    Parameters
    ----------
    transforms : (..., 4, 4) float
    points : (..., 3) float
        Broadcast against the transforms' leading shape.

    Returns
    -------
    (..., 3) float
    """
    return np.einsum("...ij,...j->...i", transforms[..., :3, :3], points) + transforms[..., :3, 3]


def signed_angle(u, v, axis):
    """Signed angle from vector u to vector v, right-handed about axis.

    Parameters
    ----------
    u, v, axis : (..., 3) float
        ``axis`` need not be unit length; u and v are taken perpendicular to it.

    Returns
    -------
    (...) float
        Radians in (-pi, pi].

    Examples
    --------
    >>> float(np.degrees(signed_angle([1, 0, 0], [0, 1, 0], [0, 0, 1])))
    90.0
    """
    axis = unit(axis)
    return np.arctan2(np.einsum("...i,...i", axis, np.cross(u, v)), np.einsum("...i,...i", u, v))
