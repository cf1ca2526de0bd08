"""Forward kinematics: poses along the drive, rigidity, joints, mirror symmetry, speeds.

Properties run over the built-in solids placed by seeded random rigid motions. The
reference side is the input geometry itself, hand-checkable symmetry, or an
independent chain of rotations composed with scipy's `Rotation`.
"""

import numpy as np
import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st
from scipy.spatial.transform import Rotation

from foldsim.analysis.closure import cut_edge_gaps
from foldsim.gearing import fold_schedule
from foldsim import geometry
from foldsim.kinematics import face_poses, poses_at, row_poses, speed_bounds
from foldsim.model import Coupling, build_mechanism

from helpers import (
    built_in_solids, mechanism_from_solid, moved, pairwise_distances, plane_of, turn_subtrees,
)

SOLIDS = built_in_solids()
PROPERTY = settings(derandomize=True, max_examples=30, deadline=None)

solid_names = st.sampled_from(sorted(SOLIDS))
seeds = st.integers(min_value=0, max_value=2**32 - 1)
shifts = st.tuples(*[st.floats(-10.0, 10.0)] * 3)
drive_values = st.floats(-1.0, 1.0)
coupling_kinds = st.sampled_from(["none", "chain"])


def placed(name, seed, shift):
    """A solid under a rigid motion and its (closed, ideal or geared) mechanism."""
    return moved(SOLIDS[name](), seed, shift)


def size_of(poly):
    return float(np.linalg.norm(np.ptp(poly.vertices, axis=0)))


def posed(mech, poses):
    """Vertices of every face, list of (k, 3), at one pose set (F, 4, 4)."""
    return [p @ poses[f, :3, :3].T + poses[f, :3, 3] for f, p in enumerate(mech.flat_faces)]


def at_t(mech, t):
    return posed(mech, poses_at(mech, fold_schedule(mech), [t])[0])


def corner(poly, f, v):
    """Local index of closed vertex v in face f."""
    return list(poly.faces[f]).index(v)


# ---------------------------------------------------------------- ends of the drive

@PROPERTY
@given(solid_names, seeds, shifts, coupling_kinds)
def test_t_one_puts_every_face_back(name, seed, shift, kind):
    poly = placed(name, seed, shift)
    mech = mechanism_from_solid(poly, couplings=kind)
    for f, pts in enumerate(at_t(mech, 1.0)):
        # the input is the reference: a closed model closes onto itself
        np.testing.assert_allclose(pts, poly.vertices[poly.faces[f]], rtol=0, atol=1e-9 * size_of(poly))


@PROPERTY
@given(solid_names, seeds, shifts, st.integers(0, 79))
def test_t_zero_lays_every_face_in_the_root_plane(name, seed, shift, root):
    poly = placed(name, seed, shift)
    root %= len(poly.faces)
    mech = mechanism_from_solid(poly, root=root, couplings="chain")
    normal, centre = plane_of(poly.vertices[poly.faces[root]])
    for pts in at_t(mech, 0.0):
        # the root's plane, fitted to the input root face by SVD (hand check)
        np.testing.assert_allclose((pts - centre) @ normal, 0.0, rtol=0, atol=1e-9 * size_of(poly))


# ---------------------------------------------------------------- joints and rigidity

def check_joined_and_rigid(poly, mech, faces_now):
    size = size_of(poly)
    for a, b in mech.hinge_faces.tolist():
        shared = sorted(set(poly.faces[a].tolist()) & set(poly.faces[b].tolist()))
        pa = faces_now[a][[corner(poly, a, v) for v in shared]]
        pb = faces_now[b][[corner(poly, b, v) for v in shared]]
        # the hinge's endpoints as carried by both faces coincide (a hinge is a joint)
        np.testing.assert_allclose(pa, pb, rtol=0, atol=1e-9 * size)
    for f, face in enumerate(poly.faces):
        # a rigid panel keeps all its pairwise vertex distances
        np.testing.assert_allclose(pairwise_distances(faces_now[f]), pairwise_distances(poly.vertices[face]),
                                   rtol=0, atol=1e-9 * size)


@PROPERTY
@given(solid_names, seeds, shifts, drive_values, coupling_kinds)
@example("cube", 0, (0.0, 0.0, 0.0), 1.0, "none")
@example("icosahedron", 1, (0.0, 0.0, 0.0), -1.0, "chain")
def test_hinges_stay_joined_and_panels_rigid_along_the_drive(name, seed, shift, t, kind):
    poly = placed(name, seed, shift)
    mech = mechanism_from_solid(poly, couplings=kind)
    check_joined_and_rigid(poly, mech, at_t(mech, t))


@PROPERTY
@given(solid_names, seeds)
def test_hinges_stay_joined_at_any_fold_angles(name, seed):
    poly = placed(name, seed, (1.0, -2.0, 3.0))
    mech = mechanism_from_solid(poly, couplings="none")
    angles = np.random.default_rng(seed).uniform(-np.pi, np.pi, (1, mech.n_hinges))
    check_joined_and_rigid(poly, mech, posed(mech, face_poses(mech, angles)[0]))


# ---------------------------------------------------------------- rigid-motion invariance

def mismatched(poly):
    """Geared mechanism whose last coupling is 10 % off, so cut edges open at t = 1."""
    base = mechanism_from_solid(poly, couplings="chain")
    couplings = list(base.couplings)
    last = couplings[-1]
    couplings[-1] = Coupling(last.hinges, 1.1 * last.ratio)
    return build_mechanism(poly.vertices, poly.faces, base.hinge_faces, couplings=couplings)


@PROPERTY
@given(solid_names, seeds, shifts, drive_values)
def test_results_do_not_depend_on_where_the_input_is(name, seed, shift, t):
    poly = SOLIDS[name]()
    here, there = mismatched(poly), mismatched(moved(poly, seed, shift))
    # closing angles and gaps are intrinsic to the shape (hand check: rigid motions
    # preserve angles and distances)
    np.testing.assert_allclose(there.closed_angles, here.closed_angles, rtol=0, atol=1e-9)
    np.testing.assert_array_equal(there.cut_faces, here.cut_faces)
    gaps = [cut_edge_gaps(m, poses_at(m, fold_schedule(m), [t, 1.0])) for m in (here, there)]
    np.testing.assert_allclose(gaps[1], gaps[0], rtol=0, atol=1e-9 * size_of(poly))


# ---------------------------------------------------------------- mirror symmetry

def mirror(points, normal, centre):
    return points - 2.0 * ((points - centre) @ normal)[:, None] * normal


@PROPERTY
@given(solid_names, seeds, shifts, st.floats(0.0, 1.0), coupling_kinds)
@example("cube", 3, (0.0, 0.0, 0.0), 1.0, "none")
@example("dodecahedron", 4, (0.5, 0.5, 0.5), 1.0, "chain")
def test_negative_t_is_the_mirror_image_through_the_root_plane(name, seed, shift, t, kind):
    # Hand check: every fold line lies in the root's plane in the flat state, and a
    # rotation by -θ about a line in a plane is the mirror image of the rotation by θ.
    poly = placed(name, seed, shift)
    mech = mechanism_from_solid(poly, couplings=kind)
    normal, centre = plane_of(poly.vertices[poly.faces[mech.root]])
    for plus, minus in zip(at_t(mech, t), at_t(mech, -t)):
        np.testing.assert_allclose(minus, mirror(plus, normal, centre), rtol=0, atol=1e-9 * size_of(poly))


# ---------------------------------------------------------------- independent forward kinematics

# A flat chain of four quadrilateral panels in z = 0; panel k has corners
# P[k], P[k+1], Q[k+1], Q[k] (counter-clockwise seen from +z), so the hinge lines
# P[k]Q[k] are not parallel.
_P = [(0.0, 0.0), (1.0, 0.0), (2.2, 0.3), (3.1, 0.1), (4.0, 0.5)]
_Q = [(0.0, 1.0), (1.3, 1.2), (2.0, 1.6), (3.3, 1.4), (4.2, 1.9)]


def flat_chain(seed):
    """Vertices (10, 3) of the chain under a seeded rigid motion, faces, hinges."""
    pts = np.array([(x, y, 0.0) for x, y in _P + _Q])
    pts = Rotation.random(random_state=seed).apply(pts) + [0.3, -0.7, 2.0]
    faces = [[k, k + 1, 6 + k, 5 + k] for k in range(4)]
    hinges = [(0, 1), (1, 2), (2, 3)]
    return pts, faces, hinges


@PROPERTY
@given(seeds, st.integers(0, 3), st.lists(st.floats(-np.pi, np.pi), min_size=3, max_size=3))
@example(0, 0, [np.pi / 2, np.pi / 2, np.pi / 2])
def test_poses_match_rotations_composed_with_scipy(seed, root, angles):
    pts, faces, hinges = flat_chain(seed)
    mech = build_mechanism(pts, faces, hinges, root=root, state="flat", closed_angles=[1.0, 1.0, 1.0])
    angles = np.array(angles)
    ours = posed(mech, face_poses(mech, angles[None])[0])
    # independent reference: subtrees turned one hinge at a time with scipy's Rotation
    reference = turn_subtrees([pts[f] for f in faces], faces, hinges, root, angles)
    for f in range(4):
        np.testing.assert_allclose(ours[f], reference[f], rtol=0, atol=1e-11)


@PROPERTY
@given(seeds, st.integers(0, 3), st.lists(st.floats(-np.pi, np.pi), min_size=3, max_size=3),
       st.lists(st.integers(0, 3), min_size=1, max_size=3))
def test_poses_of_some_faces_match_scipy(seed, root, angles, faces):
    # Only the chains of the faces asked for are walked; each pose must still be the
    # subtree turns composed with scipy's Rotation (independent reference).
    pts, quads, hinges = flat_chain(seed)
    mech = build_mechanism(pts, quads, hinges, root=root, state="flat", closed_angles=[1.0, 1.0, 1.0])
    angles = np.array(angles)
    some = face_poses(mech, np.stack([angles, -angles]), faces=faces)
    assert some.shape == (2, len(faces), 4, 4)
    reference = turn_subtrees([pts[f] for f in quads], quads, hinges, root, angles)
    for k, f in enumerate(faces):
        np.testing.assert_allclose(posed_one(some[0, k], mech.flat_faces[f]), reference[f], rtol=0, atol=1e-11)
    np.testing.assert_array_equal(some, face_poses(mech, np.stack([angles, -angles]))[:, faces])


@PROPERTY
@given(seeds, st.integers(0, 3), st.lists(st.floats(0.2, 2.5), min_size=3, max_size=3),
       st.lists(st.tuples(st.integers(0, 3), st.floats(-1.0, 1.0)), min_size=1, max_size=6))
def test_poses_one_face_and_drive_value_per_row_match_scipy(seed, root, closed, rows):
    # row_poses: face f at drive value t per row; each must be the subtree turns at
    # the schedule's fold angles, composed with scipy's Rotation (independent reference).
    pts, quads, hinges = flat_chain(seed)
    mech = build_mechanism(pts, quads, hinges, root=root, state="flat", closed_angles=closed)
    schedule = fold_schedule(mech)
    faces, t = np.array([f for f, _ in rows]), np.array([x for _, x in rows])
    ours = row_poses(mech, schedule, faces, t)
    assert ours.shape == (len(rows), 4, 4)
    for k, (f, x) in enumerate(rows):
        reference = turn_subtrees([pts[q] for q in quads], quads, hinges, root, x * schedule.rates)
        np.testing.assert_allclose(posed_one(ours[k], mech.flat_faces[f]), reference[f], rtol=0, atol=1e-11)
        np.testing.assert_allclose(ours[k], poses_at(mech, schedule, [x])[0, f], rtol=0, atol=1e-12)


@PROPERTY
@given(seeds, st.integers(0, 3), st.lists(st.floats(0.2, 2.5), min_size=3, max_size=3),
       st.lists(st.tuples(st.integers(0, 3), st.integers(0, 3), st.floats(-1.0, 1.0)), min_size=1, max_size=6))
def test_pairs_posed_from_their_common_ancestor_keep_their_relative_placement(seed, root, closed, rows):
    # row_poses with start = the pair's common depth: both faces moved by one rigid
    # motion, so the distance between any point of one and any point of the other
    # is as in the posed model (the faces' corners, posed with scipy's Rotation
    # reference), and a face posed from its own depth stays flat.
    from foldsim.kinematics import common_depth

    pts, quads, hinges = flat_chain(seed)
    mech = build_mechanism(pts, quads, hinges, root=root, state="flat", closed_angles=closed)
    schedule = fold_schedule(mech)
    pairs = np.array([(a, b) for a, b, _ in rows])
    t = np.array([x for _, _, x in rows])
    start = np.repeat(common_depth(mech, pairs), 2)
    ours = row_poses(mech, schedule, pairs.ravel(), np.repeat(t, 2), start=start).reshape(-1, 2, 4, 4)
    for k, (a, b, x) in enumerate(rows):
        reference = turn_subtrees([pts[q] for q in quads], quads, hinges, root, x * schedule.rates)
        pa, pb = (posed_one(ours[k, s], mech.flat_faces[f]) for s, f in ((0, a), (1, b)))
        ref = np.linalg.norm(reference[a][:, None] - reference[b][None], axis=2)
        np.testing.assert_allclose(np.linalg.norm(pa[:, None] - pb[None], axis=2), ref, rtol=0, atol=1e-11)
    own = np.array([common_depth(mech, [[f, f]])[0] for f, _, _ in rows])
    flat = row_poses(mech, schedule, pairs[:, 0], t, start=own)
    np.testing.assert_allclose(flat, np.broadcast_to(np.eye(4), flat.shape), rtol=0, atol=1e-15)


def posed_one(pose, points):
    return points @ pose[:3, :3].T + pose[:3, 3]


def test_chain_folded_square_by_hand():
    """Four unit squares in a row, each hinge at 90°: a closed square tube (hand check)."""
    pts = np.array([(x, y, 0.0) for y in (0.0, 1.0) for x in range(5)])
    faces = [[k, k + 1, 6 + k, 5 + k] for k in range(4)]
    mech = build_mechanism(pts, faces, [(0, 1), (1, 2), (2, 3)], state="flat",
                           closed_angles=[np.pi / 2] * 3)
    ours = posed(mech, face_poses(mech, np.full((1, 3), np.pi / 2))[0])
    # the far edge of panel 3 comes back onto the near edge of panel 0 (x = 0, z = 0)
    np.testing.assert_allclose(ours[3][[1, 2]], [[0.0, 0.0, 0.0], [0.0, 1.0, 0.0]], rtol=0, atol=1e-12)


# ---------------------------------------------------------------- speed bounds

def vertex_speeds(mech, rates, t, dt):
    """Largest finite-difference vertex speed of each face, (T, F), per unit t."""
    angles = np.asarray(t)[:, None] * rates[None]
    here = face_poses(mech, angles)
    later = face_poses(mech, angles + dt * rates[None])
    out = np.zeros((len(t), mech.n_faces))
    for f, p in enumerate(mech.flat_faces):
        a = np.einsum("tij,kj->tki", here[:, f, :3, :3], p) + here[:, f, None, :3, 3]
        b = np.einsum("tij,kj->tki", later[:, f, :3, :3], p) + later[:, f, None, :3, 3]
        out[:, f] = np.linalg.norm(b - a, axis=-1).max(axis=1) / dt
    return out


@pytest.mark.parametrize("name", sorted(SOLIDS))
@pytest.mark.parametrize("kind", ["none", "chain"])
def test_vertex_speeds_never_exceed_the_bound(name, kind):
    mech = mechanism_from_solid(SOLIDS[name](), couplings=kind)
    rates = fold_schedule(mech).rates
    bound = speed_bounds(mech, rates)
    t = np.linspace(-1.0, 1.0, 401)
    speeds = vertex_speeds(mech, rates, t, 1e-6)
    # a chord is never longer than the path, so a finite-difference speed is at most
    # the largest true speed over the step (mean value inequality, hand check)
    np.testing.assert_array_less(speeds, np.broadcast_to(bound * (1 + 1e-6) + 1e-9 * mech.size, speeds.shape))
    assert speeds.max() > 0  # the sampled motion does move


@PROPERTY
@given(solid_names, seeds)
def test_speed_bound_holds_for_any_rates(name, seed):
    mech = mechanism_from_solid(SOLIDS[name](), couplings="none")
    rates = np.random.default_rng(seed).uniform(-3.0, 3.0, mech.n_hinges)
    bound = speed_bounds(mech, rates)
    speeds = vertex_speeds(mech, rates, np.linspace(-1.0, 1.0, 101), 1e-6)
    # mean value inequality, as above
    np.testing.assert_array_less(speeds, np.broadcast_to(bound * (1 + 1e-6) + 1e-9 * mech.size, speeds.shape))


def test_speed_of_one_flap_by_hand():
    """One square flap turning at rate w: its far corner moves at w · (distance to the hinge)."""
    square = [[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0], [3, 0, 0], [3, 1, 0]]
    mech = build_mechanism(square, [[0, 1, 2, 3], [1, 4, 5, 2]], [[0, 1]], state="flat",
                           closed_angles=[np.pi / 2])
    speeds = vertex_speeds(mech, np.array([2.0]), np.linspace(-1, 1, 11), 1e-7)
    # far corner is 2 from the hinge line x = 1: speed 2 · 2 = 4 (hand check)
    np.testing.assert_allclose(speeds[:, 1], 4.0, rtol=1e-6)
    assert speed_bounds(mech, np.array([2.0]))[1] >= 4.0 * (1 - 1e-12)


def test_relative_speed_bounds_hold_for_vertex_distances():
    # Finite differences (reference: plain numerics): the distance between any
    # vertex of face a and any vertex of face b changes no faster than the pair's
    # bound, which counts only the hinges below their common ancestor.
    from foldsim import solids
    from foldsim.gearing import fold_schedule
    from foldsim.kinematics import common_depth, relative_speed_bounds
    from foldsim.nets import bfs_net, face_graph

    poly = solids.dodecahedron()
    mech = build_mechanism(poly.vertices, poly.faces, bfs_net(face_graph(poly.faces), 0))
    sched = fold_schedule(mech)
    rng = np.random.default_rng(7)
    pairs = np.array([p for p in rng.integers(0, mech.n_faces, (60, 2)) if p[0] != p[1]])
    bound = relative_speed_bounds(mech, sched.rates, pairs)
    ts = np.linspace(-1, 1, 801)
    poses = poses_at(mech, sched, ts)
    dt = ts[1] - ts[0]
    for (a, b), limit in zip(pairs, bound):
        pa = geometry.transform_points(poses[:, a, None], mech.flat_faces[a][None])
        pb = geometry.transform_points(poses[:, b, None], mech.flat_faces[b][None])
        dist = np.linalg.norm(pa[:, :, None] - pb[:, None], axis=-1)
        assert np.abs(np.diff(dist, axis=0)).max() / dt <= limit * (1 + 1e-9)
    # Reference (networkx): a face and its parent have the parent as their common
    # ancestor, whose depth is its hop distance from the root along the hinges.
    import networkx as nx

    tree = nx.Graph([tuple(e) for e in mech.hinge_faces.tolist()])
    hops = nx.single_source_shortest_path_length(tree, mech.root)
    pc = np.column_stack([mech.parent, mech.child])
    np.testing.assert_array_equal(common_depth(mech, pc), [hops[p] for p in mech.parent])


@pytest.mark.parametrize("name", sorted(SOLIDS))
def test_face_twists_are_the_derivative_of_the_poses(name):
    # Reference: central finite differences of face_poses (plain numerics). A
    # vertex's velocity is omega x p + lin at its posed position p.
    from foldsim.kinematics import face_twists

    mech = mechanism_from_solid(SOLIDS[name](), couplings="chain")
    rates = fold_schedule(mech).rates
    t = np.array([-0.7, 0.0, 0.4, 0.95])
    h = 1e-6
    omega, lin = face_twists(mech, face_poses(mech, t[:, None] * rates), rates)
    ahead, behind = face_poses(mech, (t + h)[:, None] * rates), face_poses(mech, (t - h)[:, None] * rates)
    here = face_poses(mech, t[:, None] * rates)
    for f, p in enumerate(mech.flat_faces):
        at = np.einsum("tij,kj->tki", here[:, f, :3, :3], p) + here[:, f, None, :3, 3]
        fwd = np.einsum("tij,kj->tki", ahead[:, f, :3, :3], p) + ahead[:, f, None, :3, 3]
        back = np.einsum("tij,kj->tki", behind[:, f, :3, :3], p) + behind[:, f, None, :3, 3]
        numeric = (fwd - back) / (2 * h)
        exact = np.cross(omega[:, f, None], at) + lin[:, f, None]
        np.testing.assert_allclose(exact, numeric, atol=1e-6 * mech.size * (1 + np.abs(rates).sum()))


def test_turn_profile_is_the_sum_of_path_rates():
    # Reference: networkx shortest paths in the hinge tree; the hinges on the path
    # between two faces are the edges of that path.
    import networkx as nx
    from foldsim.kinematics import common_depth, turn_profile

    mech = mechanism_from_solid(SOLIDS[sorted(SOLIDS)[0]](), couplings="chain")
    rates = fold_schedule(mech).rates
    tree = nx.Graph()
    for h, (a, b) in enumerate(mech.hinge_faces.tolist()):
        tree.add_edge(a, b, hinge=h)
    turn = turn_profile(mech, rates)
    rng = np.random.default_rng(3)
    pairs = np.array([p for p in rng.integers(0, mech.n_faces, (40, 2)) if p[0] != p[1]])
    depth = common_depth(mech, pairs)
    for (a, b), d in zip(pairs, depth):
        path = nx.shortest_path(tree, a, b)
        expected = sum(abs(rates[tree.edges[u, v]["hinge"]]) for u, v in zip(path, path[1:]))
        np.testing.assert_allclose(turn[a, d] + turn[b, d], expected, rtol=1e-12)
