"""The fast collision path against references outside it.

Each check names its reference beside it: python-fcl (a general-purpose collision
library), brute force over every pair (common practice), the shoelace formula
(elementary geometry), or the earlier implementation kept in
`foldsim.analysis.reference` and `foldsim.analysis.triangles` (one-axis
sweep-and-prune, ear clipping, the original narrow phase), which the existing tests
of test_collision.py, test_broadphase.py and test_triangles.py pin down.
"""

from pathlib import Path

import numpy as np
import pytest

from foldsim import solids
from foldsim.analysis import broadphase, collision, narrowphase, reference, spatialhash, triangles
from foldsim.analysis.panels import _face_boxes
from foldsim.gearing import fold_angles, fold_schedule
from foldsim.io.mechanism_json import load
from foldsim.kinematics import face_poses
from foldsim.tolerances import DEFAULT

from helpers import mechanism_from_solid

ASSETS = Path(__file__).resolve().parent.parent / "assets"
DEMOS = ["gift-box", "lantern", "tray", "tray-overfold"]


# ---------------------------------------------------------------- broad phase


def brute_force_pairs(lo, hi):
    """Every (frame, i, j), i < j, whose closed boxes overlap: all pairs tested."""
    rows = []
    for f in range(len(lo)):
        i, j = np.triu_indices(lo.shape[1], 1)
        meet = (np.maximum(lo[f, i], lo[f, j]) <= np.minimum(hi[f, i], hi[f, j])).all(axis=1)
        rows.append(np.column_stack([np.full(meet.sum(), f), i[meet], j[meet]]))
    return np.concatenate(rows)


@pytest.mark.parametrize("seed", range(6))
def test_hash_pairs_equal_brute_force(seed):
    # Reference: brute force over every pair of boxes (common practice).
    rng = np.random.default_rng(seed)
    frames, m = int(rng.integers(1, 5)), int(rng.integers(2, 300))
    centre = rng.uniform(0, 10, size=(frames, m, 3))
    half = rng.exponential(0.3, size=(frames, m, 3))
    half[:, : m // 10] *= 40  # a few boxes span many cells: the direct path
    lo, hi = centre - half, centre + half
    hi[:, 0, 1] = lo[:, 0, 1] - 1.0  # an empty box overlaps nothing
    if m > 3:  # boxes that only touch overlap (closed intervals)
        lo[:, 2], hi[:, 2] = hi[:, 1] * [1, 0, 0] + lo[:, 1] * [0, 1, 1], hi[:, 1] + [1.0, 0, 0]
    got = spatialhash.box_pairs_batched(lo, hi)
    assert np.array_equal(got, brute_force_pairs(lo, hi))
    # Only pairs with an active box: the brute force's rows filtered the same way.
    active = rng.random(m) < 0.3
    active[0] = True  # the empty box stays empty
    want = brute_force_pairs(lo, hi)
    want = want[active[want[:, 1]] | active[want[:, 2]]]
    assert np.array_equal(spatialhash.box_pairs_batched(lo, hi, active), want)


def test_hash_pairs_equal_sweep_and_prune_on_posed_panels():
    # Reference: broadphase.overlapping_boxes (one-axis sweep and prune, tests/test_broadphase.py).
    mech = mechanism_from_solid(solids.geodesic(2), couplings="none")
    schedule = fold_schedule(mech)
    pan = collision.panels(mech)
    for t in (0.0, 0.4, 0.97, 1.2):
        poses = face_poses(mech, fold_angles(schedule, np.array([t])))
        lo, hi = _face_boxes(pan, poses)
        assert np.array_equal(spatialhash.overlapping_boxes(lo[0], hi[0]),
                              broadphase.overlapping_boxes(lo[0], hi[0]))


# ---------------------------------------------------------------- narrow phase


def triangle_batch(seed, n=3000):
    """Random triangle pairs, with shared corners, coplanar pairs and near misses."""
    rng = np.random.default_rng(seed)
    a = rng.normal(size=(n, 3, 3))
    b = rng.normal(size=(n, 3, 3)) + rng.normal(size=(n, 1, 3))
    b[:300, 0] = a[:300, 0]                     # a shared corner: touching
    a[300:600, :, 2] = 0.0                      # coplanar pairs
    b[300:600, :, 2] = 0.0
    b[600:900] = a[600:900] + [0.0, 0.0, 1e-3]  # parallel, just apart
    return a, b


@pytest.mark.parametrize("seed", range(3))
def test_crossing_overlap_is_the_reference_value(seed):
    # Reference: triangles.crossing_overlap, the earlier narrow phase.
    # The same steps on coordinate arrays: -inf in the same places, the same values to
    # rounding, and so the same verdict against the tolerance.
    a, b = triangle_batch(seed)
    eps = 1e-7
    ours, ref = narrowphase.crossing_overlap(a, b, eps), triangles.crossing_overlap(a, b, eps)
    assert np.array_equal(np.isinf(ours), np.isinf(ref))
    finite = np.isfinite(ref)
    assert finite.sum() > 100
    np.testing.assert_allclose(ours[finite], ref[finite], rtol=0, atol=1e-12)
    assert np.array_equal(ours > eps, ref > eps)


@pytest.mark.parametrize("seed", range(3))
def test_triangle_distance_matches_reference(seed):
    # Reference: triangles.triangle_distance, the earlier narrow phase.
    a, b = triangle_batch(seed)
    fast, ref = narrowphase.triangle_distance(a, b), triangles.triangle_distance(a, b)
    assert np.allclose(fast, ref, rtol=0, atol=1e-12)
    assert np.array_equal(fast == 0, ref == 0)


def test_triangle_distance_matches_fcl():
    # Reference: python-fcl's distance between two one-triangle BVH models.
    fcl = pytest.importorskip("fcl")
    a, b = triangle_batch(7, n=400)
    ours = narrowphase.triangle_distance(a, b)
    for k in range(len(a)):
        objs = []
        for tri in (a[k], b[k]):
            model = fcl.BVHModel()
            model.beginModel(3, 1)
            model.addSubModel(tri, np.array([[0, 1, 2]]))
            model.endModel()
            objs.append(fcl.CollisionObject(model, fcl.Transform()))
        d = fcl.distance(objs[0], objs[1], fcl.DistanceRequest(), fcl.DistanceResult())
        assert ours[k] == pytest.approx(max(d, 0.0), abs=1e-9), k


# ---------------------------------------------------------------- per frame


def fcl_pairs(mech, poses):
    """Face pairs python-fcl finds in contact (touching or crossing), hinged pairs left out."""
    fcl = pytest.importorskip("fcl")
    objects, owner = [], {}
    for f, poly in enumerate(mech.flat_faces):
        tris = np.array([[0, k, k + 1] for k in range(1, len(poly) - 1)])  # convex faces: a fan
        model = fcl.BVHModel()
        model.beginModel(len(poly), len(tris))
        model.addSubModel(np.asarray(poly, float), tris)
        model.endModel()
        obj = fcl.CollisionObject(model, fcl.Transform(poses[f][:3, :3], poses[f][:3, 3]))
        objects.append(obj)
        owner[id(model)] = f
    manager = fcl.DynamicAABBTreeCollisionManager()
    manager.registerObjects(objects)
    manager.setup()
    data = fcl.CollisionData(request=fcl.CollisionRequest(num_max_contacts=10**6, enable_contact=False))
    manager.collide(data, fcl.defaultCollisionCallback)
    pairs = {tuple(sorted((owner[id(c.o1)], owner[id(c.o2)]))) for c in data.result.contacts}
    return pairs - {tuple(sorted(p)) for p in mech.hinge_faces.tolist()}


def over_folded_poses(mech, ts):
    return face_poses(mech, fold_angles(fold_schedule(mech), np.asarray(ts, float)))


@pytest.mark.parametrize("shape", ["geodesic:2", "prism:40", "antiprism:24", "dodecahedron"])
def test_colliding_pairs_equal_reference_and_within_fcl(shape):
    # References: analysis.reference.colliding_pairs (the earlier path) for equality;
    # python-fcl for the bound: every pair foldsim calls crossing is one fcl finds in
    # contact (fcl also counts panels that only touch, which foldsim calls contact).
    mech = mechanism_from_solid(solids.builtin(shape), couplings="none")
    pan = collision.panels(mech)
    crossing = 0
    for poses in over_folded_poses(mech, [0.0, 0.5, 0.9, 1.0, 1.1, 1.25]):
        ours = collision.colliding_pairs(mech, poses, pan=pan)
        assert np.array_equal(ours, reference.colliding_pairs(mech, poses, pan=pan))
        assert {tuple(p) for p in ours.tolist()} <= fcl_pairs(mech, poses)
        crossing += len(ours)
    assert crossing > 0  # the over-folded poses really cross


@pytest.mark.parametrize("seed", range(3))
def test_colliding_pairs_on_random_poses(seed):
    # Reference: analysis.reference.colliding_pairs and python-fcl, as above, on
    # random rigid moves of the flat panels packed into a small region.
    rng = np.random.default_rng(seed)
    mech = mechanism_from_solid(solids.geodesic(1), couplings="none")
    pan = collision.panels(mech)
    from scipy.spatial.transform import Rotation

    poses = np.tile(np.eye(4), (mech.n_faces, 1, 1))
    poses[:, :3, :3] = Rotation.random(mech.n_faces, random_state=seed).as_matrix()
    poses[:, :3, 3] = rng.uniform(-0.4, 0.4, size=(mech.n_faces, 3)) * mech.size
    ours = collision.colliding_pairs(mech, poses, pan=pan)
    assert len(ours) > 0
    assert np.array_equal(ours, reference.colliding_pairs(mech, poses, pan=pan))
    assert {tuple(p) for p in ours.tolist()} <= fcl_pairs(mech, poses)
    for clearance in (0.05 * mech.size,):
        assert np.array_equal(collision.colliding_pairs(mech, poses, clearance=clearance, pan=pan),
                              reference.colliding_pairs(mech, poses, clearance=clearance, pan=pan))


def brute_force_colliding(mech, pan, poses, eps, clearance=0.0):
    """Face pairs colliding at one pose set: every triangle pair of every unskipped face pair tested.

    Brute force (common practice) over the reference kernels of `triangles`
    (crossing overlap beyond the contact tolerance; with a clearance, distance below
    it for pairs not in contact by design).
    """
    tri = np.stack([geometry_posed(poses[f], pan.tri_points[k]) for k, f in enumerate(pan.tri_face)])
    i, j = np.triu_indices(len(tri), 1)
    fa, fb = pan.tri_face[i], pan.tri_face[j]
    keys = fa * mech.n_faces + fb
    keep = (fa != fb) & ~np.isin(keys, pan.skip_keys)
    i, j, keys = i[keep], j[keep], keys[keep]
    hit = triangles.crossing_overlap(tri[i], tri[j], eps) > eps
    if clearance > 0:
        by_design = np.isin(keys, pan.touch_keys) | np.isin(keys, pan.pivot_keys)
        hit |= ~by_design & (triangles.triangle_distance(tri[i], tri[j]) < clearance)
    hit_keys = np.unique(keys[hit])
    return np.column_stack([hit_keys // mech.n_faces, hit_keys % mech.n_faces])


def geometry_posed(pose, points):
    return points @ pose[:3, :3].T + pose[:3, 3]


@pytest.mark.parametrize("shape, jitter", [("prism:60", 0.0), ("antiprism:30", 0.0), ("prism:24", 1e-8)])
def test_plane_pruning_keeps_every_colliding_pair_of_large_polygons(shape, jitter):
    # References: brute force over every triangle pair (common practice) with the
    # reference kernels of analysis.triangles, and python-fcl for the bound. The
    # caps are large polygons whose triangles' boxes overlap many side panels, the
    # case the face-plane and triangle-plane pruning of colliding_pairs is for. With
    # ``jitter`` the vertices move off their faces' planes by up to that share of the
    # size (within the model tolerance, beyond collision.PLANAR), so those planes
    # must not prune.
    solid = solids.builtin(shape)
    if jitter:
        vertices = np.asarray(solid.vertices, float)
        size = float(np.linalg.norm(np.ptp(vertices, axis=0)))
        moved_solid = type("Solid", (), {})()
        moved_solid.vertices = vertices + np.random.default_rng(2).uniform(-1, 1, vertices.shape) * jitter * size
        moved_solid.faces = solid.faces
        solid = moved_solid
    mech = mechanism_from_solid(solid, couplings="none")
    pan = collision.panels(mech)
    eps = DEFAULT.contact * mech.size
    crossing = 0
    for poses in over_folded_poses(mech, [0.3, 0.8, 1.0, 1.1, 1.25]):
        ours = collision.colliding_pairs(mech, poses, pan=pan)
        np.testing.assert_array_equal(ours, brute_force_colliding(mech, pan, poses, eps).reshape(-1, 2))
        assert {tuple(p) for p in ours.tolist()} <= fcl_pairs(mech, poses)
        crossing += len(ours)
        clearance = 0.02 * mech.size
        np.testing.assert_array_equal(collision.colliding_pairs(mech, poses, clearance=clearance, pan=pan),
                                      brute_force_colliding(mech, pan, poses, eps, clearance).reshape(-1, 2))
    assert crossing > 0  # the over-folded poses really cross


# ---------------------------------------------------------------- the sweep


def same_intervals(fast, ref, tol=DEFAULT):
    """Same colliding pairs in the same order; ends within the reporting resolution."""
    assert [c["faces"] for c in fast] == [c["faces"] for c in ref]
    for f, r in zip(fast, ref):
        assert abs(f["first_t"] - r["first_t"]) <= tol.t_resolution
        assert abs(f["last_t"] - r["last_t"]) <= tol.t_resolution


@pytest.mark.parametrize("stem", DEMOS)
def test_sweep_matches_reference_on_demos(stem):
    # Reference: analysis.reference.collision_intervals, the earlier sweep.
    mech = load(ASSETS / f"{stem}.mech.json")
    schedule = fold_schedule(mech)
    same_intervals(collision.collision_intervals(mech, schedule),
                   reference.collision_intervals(mech, schedule))


@pytest.mark.parametrize("shape", ["cube", "prism:6", "antiprism:4", "cuboctahedron", "geodesic:1",
                                   "prism:20"])
@pytest.mark.parametrize("t_range", [(0.0, 1.0), (-0.3, 1.3)])
def test_sweep_matches_reference_on_built_in_shapes(shape, t_range):
    # Reference: analysis.reference.collision_intervals. Past t = 1 the panels over-fold
    # and collide, so both sweeps have collisions to report there.
    mech = mechanism_from_solid(solids.builtin(shape))
    schedule = fold_schedule(mech)
    fast = collision.collision_intervals(mech, schedule, *t_range)
    ref = reference.collision_intervals(mech, schedule, *t_range)
    same_intervals(fast, ref)
    if t_range[1] > 1.0:
        assert fast  # over-folding collides


def test_sweep_matches_reference_with_clearance():
    # Reference: analysis.reference.collision_intervals with the same clearance.
    mech = mechanism_from_solid(solids.prism(5))
    schedule = fold_schedule(mech)
    for clearance in (0.02 * mech.size, 0.2 * mech.size):
        same_intervals(collision.collision_intervals(mech, schedule, clearance=clearance),
                       reference.collision_intervals(mech, schedule, clearance=clearance))


@pytest.mark.parametrize("shape", ["geodesic:1", "prism:12", "dodecahedron"])
def test_stretch_rates_bound_the_sampled_separation(shape):
    # Reference: brute-force sampling (plain numerics) of the exact panel distance
    # (analysis.triangles.triangle_distance over every triangle pair) at 33 values in
    # each stretch: it never changes faster than the stretch's rate bound.
    from foldsim.analysis import sweep

    mech = mechanism_from_solid(solids.builtin(shape), couplings="chain")
    schedule = fold_schedule(mech)
    pan = collision.panels(mech)
    ev = sweep.Evaluator(mech, schedule, pan, 0.0, DEFAULT)
    rng = np.random.default_rng(5)
    # Pairs that touch by design (they close in near the ends of the motion) and random ones.
    touch = rng.choice(pan.touch_keys, min(20, len(pan.touch_keys)), replace=False)
    pairs = np.concatenate([np.column_stack([touch // mech.n_faces, touch % mech.n_faces]),
                            np.sort(rng.integers(0, mech.n_faces, (20, 2)), axis=1)])
    keys = pairs[:, 0] * mech.n_faces + pairs[:, 1]
    pairs = pairs[(pairs[:, 0] < pairs[:, 1]) & ~np.isin(keys, pan.skip_keys) & ~np.isin(keys, pan.pivot_keys)]
    bound, pivot = ev.rates(pairs)
    turn = ev.turns(pairs)
    reach = pan.radius[pairs].max(axis=1)
    tighter = 0
    for t0, t1 in ((0.0, 1 / 64), (0.5, 0.5 + 1 / 128), (1 - 1 / 256, 1.0), (0.25, 0.5)):
        ts = np.linspace(t0, t1, 33)
        poses = face_poses(mech, fold_angles(schedule, ts))
        omega, lin = ev.twists(poses[[0, -1]])
        ends = []
        for k in (0, 1):
            frame = np.full(len(pairs), k)
            centre = np.einsum("nsij,nsj->nsi", poses[[0, -1]][frame[:, None], pairs, :3, :3],
                               pan.centre[pairs]) + poses[[0, -1]][frame[:, None], pairs, :3, 3]
            ends.append(ev.spin(omega, lin, frame, pairs, centre, pivot))
        rate = sweep._stretch_rates(bound, turn, reach, pivot, ends[0][0], ends[1][0], ends[0][1], ends[1][1],
                                    np.full(len(pairs), t1 - t0))
        tighter += int((rate < 0.5 * bound).sum())
        for n, (a, b) in enumerate(pairs):
            ia, ib, _ = collision.triangle_pairs(pan, np.array([[a, b]]))
            dist = []
            for pose in poses:
                ta = pan.tri_points[ia] @ pose[a, :3, :3].T + pose[a, :3, 3]
                tb = pan.tri_points[ib] @ pose[b, :3, :3].T + pose[b, :3, 3]
                dist.append(triangles.triangle_distance(ta, tb).min())
            change = np.abs(np.diff(dist)).max() / (ts[1] - ts[0])
            assert change <= rate[n] * (1 + 1e-9) + 1e-9 * mech.size
    assert tighter > 0  # the end twists do tighten the bound somewhere


@pytest.mark.parametrize("shape", ["cube", "prism:5", "prism:6", "antiprism:4", "cuboctahedron"])
def test_first_only_finds_the_earliest_collision_of_the_full_sweep(shape):
    # Reference: the full sweep; the early exit must report its earliest interval
    # (smallest first_t, ties to the smallest pair) exactly, and nothing when the
    # full sweep finds nothing.
    mech = mechanism_from_solid(solids.builtin(shape))
    schedule = fold_schedule(mech)
    for t_to in (1.0, 1.4):
        full = collision.collision_intervals(mech, schedule, 0.0, t_to)
        stats_full, stats_early = {}, {}
        collision.collision_intervals(mech, schedule, 0.0, t_to, stats=stats_full)
        early = collision.collision_intervals(mech, schedule, 0.0, t_to, first_only=True, stats=stats_early)
        if not full:
            assert early == []
            continue
        key = lambda c: (c["first_t"], c["faces"])  # noqa: E731
        first, got = min(full, key=key), min(early, key=key)
        assert (got["faces"], got["first_t"]) == (first["faces"], first["first_t"])
        assert stats_early["pair_tests"] <= stats_full["pair_tests"]


def test_stats_count_the_work():
    # Reference: hand check -- the counts are positive and the start grid has at
    # least the reference's 16 steps.
    mech = mechanism_from_solid(solids.geodesic(1))
    stats = {}
    collision.collision_intervals(mech, fold_schedule(mech), stats=stats)
    assert stats["grid_steps"] >= 16 and stats["t_values"] > 0 and stats["pair_tests"] > 0


# ---------------------------------------------------------------- triangulation


def star(k, seed):
    """A simple non-convex polygon: k vertices at random radii around a centre, tilted in 3D."""
    rng = np.random.default_rng(seed)
    angle = np.sort(rng.uniform(0, 2 * np.pi, k))
    radius = rng.uniform(0.3, 1.0, k)
    flat = np.column_stack([radius * np.cos(angle), radius * np.sin(angle), np.zeros(k)])
    from scipy.spatial.transform import Rotation

    return Rotation.random(random_state=seed).apply(flat) + rng.normal(size=3)


def shoelace(poly):
    """Area of a planar polygon (k, 3) by the shoelace formula in its own plane."""
    normal = np.cross(poly[1] - poly[0], poly[2] - poly[0])
    normal /= np.linalg.norm(normal)
    u = poly[1] - poly[0]
    u /= np.linalg.norm(u)
    v = np.cross(normal, u)
    x, y = poly @ u, poly @ v
    return 0.5 * abs(np.dot(x, np.roll(y, -1)) - np.dot(y, np.roll(x, -1)))


def covers(poly, tri):
    """k - 2 triangles, every one turning with the polygon, areas adding to its area."""
    normal = triangles.newell_normal(poly)
    areas = [triangles.polygon_area(poly[t]) for t in tri]
    turns = [np.dot(triangles.newell_normal(poly[t]), normal) > 0 for t in tri]
    return len(tri) == len(poly) - 2 and all(turns), float(np.sum(areas))


@pytest.mark.parametrize("seed", range(8))
@pytest.mark.parametrize("k", [16, 40, 200])
def test_earcut_covers_non_convex_polygons(seed, k):
    # References: the shoelace formula (elementary geometry) and ear clipping
    # (triangles.triangulate, the earlier triangulation).
    poly = star(k, seed)
    tri = triangles.triangulate_polygon(poly)
    ok, area = covers(poly, tri)
    assert ok
    assert area == pytest.approx(shoelace(poly), rel=1e-9)
    if k <= 40:
        _, clipped = covers(poly, triangles.triangulate(poly))
        assert area == pytest.approx(clipped, rel=1e-9)


@pytest.mark.parametrize("k", [16, 37, 500])
def test_convex_halving_covers_regular_polygons(k):
    # Reference: the area of a regular k-gon of circumradius 1, k sin(2 pi / k) / 2
    # (elementary geometry), and the shoelace formula.
    a = 2 * np.pi * np.arange(k) / k
    poly = np.column_stack([np.cos(a), np.sin(a), np.zeros(k)])
    tri = triangles.triangulate_polygon(poly)
    ok, area = covers(poly, tri)
    assert ok
    assert area == pytest.approx(k * np.sin(2 * np.pi / k) / 2, rel=1e-12)
    assert area == pytest.approx(shoelace(poly), rel=1e-12)


def test_prism_500_panels_build():
    # Reference: a 500-gon splits into 498 triangles and a square into 2 (Euler:
    # k - 2 triangles for a k-gon); the check time is measured in benchmarks/.
    mech = mechanism_from_solid(solids.prism(500), couplings="none")
    pan = collision.panels(mech)
    assert len(pan.tri_face) == 2 * 498 + 500 * 2
