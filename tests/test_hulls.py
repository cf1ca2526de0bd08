"""Convex items and their cheap distance bounds (`foldsim.analysis.hulls`), and their use in the narrow phase."""

import itertools
import json
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from scipy.spatial import ConvexHull

from foldsim.analysis.hulls import convex_items, hull_distance_bounds, hull_gap
from helpers import fcl_object

ROOT = Path(__file__).resolve().parent.parent


def _hull_triangles(points):
    """Outward-wound triangles of the convex hull of points (scipy's Qhull)."""
    hull = ConvexHull(points)
    tri = points[hull.simplices]
    centre = points.mean(axis=0)
    normal = np.cross(tri[:, 1] - tri[:, 0], tri[:, 2] - tri[:, 0])
    flip = np.einsum("ij,ij->i", normal, tri[:, 0] - centre) < 0
    tri[flip] = tri[flip][:, ::-1]
    return tri


def _fcl_distance(fcl, ta, tb):
    objects = [fcl_object(fcl, ta), fcl_object(fcl, tb)]
    if fcl.collide(objects[0], objects[1], fcl.CollisionRequest(), fcl.CollisionResult()):
        return 0.0
    return fcl.distance(objects[0], objects[1], fcl.DistanceRequest(), fcl.DistanceResult())


def _items(*meshes):
    tri = np.concatenate(meshes)
    count = np.array([len(m) for m in meshes])
    start = np.concatenate([[0], np.cumsum(count)[:-1]])
    return tri, start, count


CUBE = np.array(list(itertools.product((0.0, 1.0), repeat=3)))


def test_convex_items_takes_convex_solids_only():
    # A cube has 8 corners and 6 face planes (Euler, common practice); an L-shaped
    # prism is not convex and a lone triangle is no solid.
    cube = _hull_triangles(CUBE)
    l_shape = np.array([[0, 0], [2, 0], [2, 1], [1, 1], [1, 2], [0, 2]], float)
    bottom = np.column_stack([l_shape, np.zeros(6)])
    top = bottom + [0, 0, 1]
    quads = [[bottom[i], bottom[(i + 1) % 6], top[(i + 1) % 6], top[i]] for i in range(6)]
    sides = [t for q in quads for t in ([q[0], q[1], q[2]], [q[0], q[2], q[3]])]
    fan = [[bottom[0], bottom[k + 1], bottom[k]] for k in (1, 2, 3, 4)]
    l_mesh = np.array(sides + fan + [[top[0], top[k], top[k + 1]] for k in (1, 2, 3, 4)])
    single = np.array([[[0, 0, 0], [1, 0, 0], [0, 1, 0]]], float)
    points, normals, ok = convex_items(*_items(cube, l_mesh, single))
    assert ok.tolist() == [True, False, False]
    assert len(np.unique(points[0], axis=0)) == 8
    np.testing.assert_allclose(np.sort(np.abs(np.unique(np.round(normals[0], 9), axis=0)).sum(axis=1)), np.ones(6))


def test_separating_axes_and_gilbert_bound_the_fcl_distance():
    # Reference: python-fcl's exact distance between the same convex meshes (random
    # hulls of 5-12 points, random placements). Every bound must hold, and with
    # enough steps Gilbert's two bounds close in on it.
    fcl = pytest.importorskip("fcl")
    rng = np.random.default_rng(11)
    meshes, want = [], []
    for _ in range(60):
        a = rng.normal(size=(rng.integers(5, 13), 3))
        b = rng.normal(size=(rng.integers(5, 13), 3)) + rng.normal(scale=3.0, size=3)
        ta, tb = _hull_triangles(a), _hull_triangles(b)
        meshes += [ta, tb]
        want.append(_fcl_distance(fcl, ta, tb))
    points, normals, ok = convex_items(*_items(*meshes))
    assert ok.all()
    pa, pb, na, nb = points[0::2], points[1::2], normals[0::2], normals[1::2]
    want = np.array(want)
    gap = hull_gap(pa, na, pb, nb)
    assert (gap <= want + 1e-9).all()
    assert (gap[want == 0.0] <= 1e-9).all()
    lower, upper = hull_distance_bounds(pa, pb, gap, np.full(len(pa), np.inf), 1e-9, steps=4000)
    assert (lower <= want + 1e-9).all() and (upper >= want - 1e-9).all()
    apart = want > 0.05
    assert apart.sum() >= 20
    # Gilbert's steps close in slowly at the end; 1 % is what 4,000 steps give here.
    np.testing.assert_allclose(lower[apart], want[apart], rtol=1e-2)
    np.testing.assert_allclose(upper[apart], want[apart], rtol=1e-2)


def test_sphere_against_planes_bounds_the_fcl_distance():
    # Reference: python-fcl's exact distance between a random convex hull and a
    # sphere (fcl.Sphere) placed at random. The planes' bound never exceeds it, and
    # it is exact where the sphere lies straight above a face (the nearest point of
    # the hull inside that face): the cube's faces, centres over the face.
    fcl = pytest.importorskip("fcl")
    from foldsim.analysis.hulls import plane_offsets, sphere_plane_gap

    rng = np.random.default_rng(5)
    meshes, centres, radii, want = [], [], [], []
    for _ in range(60):
        a = rng.normal(size=(rng.integers(5, 13), 3))
        ta = _hull_triangles(a)
        centre, radius = rng.normal(scale=3.0, size=3), rng.uniform(0.1, 1.0)
        meshes.append(ta)
        centres.append(centre)
        radii.append(radius)
        sphere = fcl.CollisionObject(fcl.Sphere(radius), fcl.Transform(centre))
        want.append(fcl.distance(fcl_object(fcl, ta), sphere, fcl.DistanceRequest(), fcl.DistanceResult()))
    points, normals, ok = convex_items(*_items(*meshes))
    assert ok.all()
    gap = sphere_plane_gap(np.array(centres), np.array(radii), normals, plane_offsets(points, normals))
    want = np.maximum(np.array(want), 0.0)
    assert (gap <= want + 1e-9).all()
    assert (gap > 0).sum() >= 20  # the bound settles something
    cube = np.array(list(itertools.product((0.0, 1.0), repeat=3)))
    above = np.array([[0.5, 0.5, 3.0], [0.3, -2.0, 0.6], [4.0, 0.9, 0.1]])
    points, normals, _ = convex_items(*_items(*[_hull_triangles(cube)] * 3))
    gap = sphere_plane_gap(above, np.full(3, 0.5), normals, plane_offsets(points, normals))
    np.testing.assert_allclose(gap, [1.5, 1.5, 2.5])  # by hand: height above the face less the radius


def test_gilbert_stops_within_its_slack():
    # Two unit cubes a corner's diagonal apart (distance sqrt 3, corner to corner;
    # elementary geometry): a slack of 0.25 stops with the lower bound at least 3/4
    # of the upper, and the distance between them.
    a = CUBE[None]
    b = CUBE[None] + 2.0
    lower, upper = hull_distance_bounds(a, b, np.array([-np.inf]), np.array([np.inf]), 0.25)
    assert lower[0] - 1e-12 <= np.sqrt(3) <= upper[0] + 1e-12
    assert lower[0] >= 0.75 * upper[0]


def test_extreme_generators_drop_a_face_diagonal():
    # A cube's corner: its three edges generate the cone (its extreme rays, always
    # kept); the diagonal of a face (1, 1, 0)/sqrt 2 lies between x and y, and the
    # body diagonal (1, 1, 1)/sqrt 3 between z and that face diagonal, so both go
    # (elementary geometry).
    from foldsim.build.bodies import _extreme_rays

    dirs = np.array([[1, 0, 0], [0, 1, 0], [0, 0, 1], [1, 1, 0], [1, 1, 1]], float)
    dirs /= np.linalg.norm(dirs, axis=1, keepdims=True)
    keep = _extreme_rays(dirs[None], np.ones((1, 5), bool))[0]
    assert keep.tolist() == [True, True, True, False, False]


def _gift_box(thickness=2.0):
    from foldsim.io.mechanism_json import loads

    doc = json.loads((ROOT / "assets" / "gift-box.mech.json").read_text())
    doc["build"] = {"thickness": thickness}
    return loads(json.dumps(doc), source="gift-box")


def test_thick_panels_reach_their_thickness_beyond_the_thin_panel():
    # A prism with its material behind the panel lies within its thickness of the
    # thin panel (bevels only take material away); the inner face's corners are
    # exactly that far (hand geometry).
    from foldsim.analysis.panels import panels
    from foldsim.build.bodies import body_panels
    from foldsim.build.prisms import panel_solids
    from foldsim.build.spec import build_spec

    mech = _gift_box(2.0)
    solids = panel_solids(mech, build_spec(mech))
    pan = body_panels(mech, solids, skip=mech.hinge_faces, pivots=panels(mech))
    assert pan.hull_ok.all()
    np.testing.assert_allclose(pan.core_reach, 2.0, rtol=1e-9)
    np.testing.assert_array_equal(pan.core.tri_face, np.repeat(np.arange(pan.n), pan.core.count))


def test_cheap_bounds_keep_the_narrow_phase_answers():
    # The gift box's thick panels at 40 drive values: with the cheap bounds the
    # collision flags are those of the triangle tests alone, and every separation is
    # at most python-fcl's distance (less the clearance) and at least the exact one
    # shrunk by the larger slack, or the need.
    fcl = pytest.importorskip("fcl")
    from foldsim.analysis.narrowphase import CORE_SLACK, HULL_SLACK, pair_state
    from foldsim.analysis.panels import panels
    from foldsim.build.bodies import body_panels
    from foldsim.build.prisms import panel_solids
    from foldsim.build.spec import build_spec
    from foldsim.gearing import fold_schedule
    from foldsim.kinematics import poses_at

    mech = _gift_box(2.0)
    solids = panel_solids(mech, build_spec(mech))
    pan = body_panels(mech, solids, skip=mech.hinge_faces, pivots=panels(mech))
    plain = replace(pan, core=None, core_reach=None, hull_ok=None)
    poses = poses_at(mech, fold_schedule(mech), np.linspace(0.0, 1.0, 40))
    skip = set(pan.skip_keys.tolist())
    pairs = np.array([(a, b) for a in range(pan.n) for b in range(a + 1, pan.n) if a * pan.n + b not in skip])
    frame = np.repeat(np.arange(len(poses)), len(pairs))
    pairs = np.tile(pairs, (len(poses), 1))
    rng = np.random.default_rng(3)
    for clearance, need in ((0.0, np.full(len(pairs), np.inf)), (0.5, np.full(len(pairs), np.inf)),
                            (0.0, rng.uniform(0.0, 40.0, len(pairs))), (0.5, rng.uniform(0.0, 40.0, len(pairs)))):
        sep, hit = pair_state(mech, pan, poses, frame, pairs, clearance, 1e-9 * mech.size, need=need)
        ref_sep, ref_hit = pair_state(mech, plain, poses, frame, pairs, clearance, 1e-9 * mech.size, need=need)
        np.testing.assert_array_equal(hit, ref_hit)
        pivot = np.isin(pairs[:, 0] * pan.n + pairs[:, 1], pan.pivot_keys)
        plain_rows = ~pivot & ~hit
        # Where the triangle tests are exact (below the need), the cheap separation is
        # no larger, and no smaller than the slack allows unless it reaches the need.
        exact = plain_rows & (ref_sep < need)
        assert exact.sum() > (150 if np.isinf(need).all() else 10)
        assert (sep[exact] <= ref_sep[exact] + 1e-9).all()
        slack = max(CORE_SLACK, HULL_SLACK)
        assert ((sep[exact] >= (1 - slack) * ref_sep[exact] - 1e-9) | (sep[exact] >= need[exact])).all()
        for k in np.flatnonzero(plain_rows)[::37]:
            a, b = pairs[k]
            ta = solids[a].triangles @ poses[frame[k], a, :3, :3].T + poses[frame[k], a, :3, 3]
            tb = solids[b].triangles @ poses[frame[k], b, :3, :3].T + poses[frame[k], b, :3, 3]
            assert sep[k] <= _fcl_distance(fcl, ta, tb) - clearance + 1e-6


def test_corner_boxes_hold_every_posed_corner_tightly():
    """`panels._corner_boxes` (all t of an item in one product) against each corner posed apart.

    Reference: scipy's `Rotation.apply` on every corner, then numpy's min and max
    over the corners; the boxes must be those, and the extra point posed alike.
    """
    from scipy.spatial.transform import Rotation

    from foldsim.analysis.panels import _corner_boxes

    rng = np.random.default_rng(5)
    n_t, n, v = 7, 5, 6
    corners = rng.normal(size=(n, v, 3))
    extra = rng.normal(size=(n, 3))
    turns = Rotation.random(n_t * n, random_state=3)
    poses = np.tile(np.eye(4), (n_t, n, 1, 1))
    poses[..., :3, :3] = turns.as_matrix().reshape(n_t, n, 3, 3)
    poses[..., :3, 3] = rng.normal(size=(n_t, n, 3))
    lo, hi, posed = _corner_boxes(corners, poses, extra)
    for t in range(n_t):
        for f in range(n):
            r = turns[t * n + f]
            pts = r.apply(corners[f]) + poses[t, f, :3, 3]
            assert np.allclose(lo[t, f], pts.min(axis=0), atol=1e-12)
            assert np.allclose(hi[t, f], pts.max(axis=0), atol=1e-12)
            assert np.allclose(posed[t, f], r.apply(extra[f]) + poses[t, f, :3, 3], atol=1e-12)
