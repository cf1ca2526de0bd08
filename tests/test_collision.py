"""Collisions at one pose and over the motion, against hand-worked cases and references."""

import numpy as np
import pytest

from foldsim.analysis.collision import (colliding_pairs, collision_intervals, flat_overlaps, pair_state,
                                       panels)
from foldsim.report import check
from foldsim.gearing import fold_schedule
from foldsim.kinematics import poses_at
from foldsim.model import Coupling, build_mechanism
from foldsim.tolerances import DEFAULT
from helpers import fcl_object

T_RES = 1e-3  # the reporting resolution promised in docs/cli.md


def strip(closing_deg):
    """Three unit squares in a row, the middle one fixed, both outer ones folding."""
    v = [[0, 0, 0], [1, 0, 0], [2, 0, 0], [3, 0, 0], [0, 1, 0], [1, 1, 0], [2, 1, 0], [3, 1, 0]]
    f = [[0, 1, 5, 4], [1, 2, 6, 5], [2, 3, 7, 6]]
    return build_mechanism(v, f, [[1, 0], [1, 2]], root=1, state="flat",
                           closed_angles=np.radians([closing_deg, closing_deg]))


def corner(closing_deg):
    """A square base with two flaps on adjacent edges (they meet at the base's corner)."""
    v = [[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0], [1, -1, 0], [0, -1, 0], [-1, 0, 0], [-1, 1, 0]]
    f = [[0, 1, 2, 3], [0, 5, 4, 1], [0, 3, 7, 6]]
    return build_mechanism(v, f, [[0, 1], [0, 2]], state="flat",
                           closed_angles=np.radians([closing_deg, closing_deg]))


def passing_flaps(a_deg, b_deg):
    """Two flaps on opposite edges of a square folding under it at different rates."""
    v = [[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0], [-0.6, 0, 0], [-0.6, 1, 0], [1.6, 0, 0], [1.6, 1, 0]]
    f = [[0, 1, 2, 3], [4, 0, 3, 5], [1, 6, 7, 2]]
    return build_mechanism(v, f, [[0, 1], [0, 2]], state="flat", closed_angles=np.radians([a_deg, b_deg]))


def fan(angles_deg):
    """A regular hexagon cut into six triangles about its centre, hinged along five spokes."""
    ring = [[np.cos(a), np.sin(a), 0.0] for a in np.linspace(0, 2 * np.pi, 7)[:-1]]
    v = [[0.0, 0.0, 0.0]] + ring
    f = [[0, 1 + k, 1 + (k + 1) % 6] for k in range(6)]
    hinges = [[k, k + 1] for k in range(5)]
    return build_mechanism(v, f, hinges, root=2, drive=2, state="flat", closed_angles=np.radians(angles_deg))


def sweep(mech, **kw):
    return collision_intervals(mech, fold_schedule(mech), **kw)


def dense_windows(mech, step=5e-5, t_from=0.0, t_to=1.0):
    """Brute-force reference: every unhinged pair at every one of many drive values.

    No broad phase and no advancement: the triangle test alone, on all pairs.
    """
    sched, pan = fold_schedule(mech), panels(mech)
    hinged = {tuple(sorted(h)) for h in mech.hinge_faces.tolist()}
    pairs = np.array([(a, b) for a in range(mech.n_faces) for b in range(a + 1, mech.n_faces)
                      if (a, b) not in hinged])
    ts = np.arange(t_from, t_to + step / 2, step)
    found = {}
    for chunk in np.array_split(ts, max(1, len(ts) // 2000)):
        poses = poses_at(mech, sched, chunk)
        frame = np.repeat(np.arange(len(chunk)), len(pairs))
        rows = np.tile(pairs, (len(chunk), 1))
        _, hit = pair_state(mech, pan, poses, frame, rows, 0.0, DEFAULT.contact * mech.size)
        for k in np.flatnonzero(hit):
            key, t = tuple(rows[k].tolist()), chunk[frame[k]]
            lo, hi = found.get(key, (t, t))
            found[key] = (min(lo, t), max(hi, t))
    return found


def test_strip_closes_into_a_triangle_then_collides():
    # Hand check: the three unit panels form an equilateral triangle when both folds
    # reach 120 degrees; folding on, the outer panels pass through each other.
    # With a closing angle of 150 that is t = 120 / 150 = 0.8.
    hits = sweep(strip(150))
    assert [h["faces"] for h in hits] == [[0, 2]]
    assert hits[0]["first_t"] == pytest.approx(0.8, abs=T_RES)
    assert hits[0]["last_t"] == pytest.approx(1.0, abs=T_RES)


def test_strip_folded_the_other_way_collides_mirrored():
    # Hand check: t -> -t mirrors the motion through the root's plane.
    hits = sweep(strip(150), t_from=-1.0, t_to=0.0)
    assert [h["faces"] for h in hits] == [[0, 2]]
    assert hits[0]["first_t"] == pytest.approx(-1.0, abs=T_RES)
    assert hits[0]["last_t"] == pytest.approx(-0.8, abs=T_RES)


def test_strip_that_stops_short_does_not_collide():
    # Hand check: at 119 degrees the outer panels' free edges are still 1 + 2 cos(119°) apart.
    assert sweep(strip(119)) == []


def test_clearance_brings_the_collision_forward():
    # Hand check: the free edges are 1 + 2 cos(theta) apart, so with clearance c the
    # panels come too near once theta > arccos((c - 1) / 2).
    c = 0.1
    theta = np.degrees(np.arccos((c - 1) / 2))
    hits = sweep(strip(150), clearance=c)
    assert hits[0]["first_t"] == pytest.approx(theta / 150, abs=T_RES)


def test_corner_flaps_meet_at_ninety_degrees_then_cross():
    # Hand check: flaps on adjacent edges of a square meet along the corner's
    # vertical edge at a 90 degree fold (contact); past it they cross: t = 90 / 120.
    mech = corner(120)
    hits = sweep(mech)
    assert [h["faces"] for h in hits] == [[1, 2]]
    assert hits[0]["first_t"] == pytest.approx(0.75, abs=T_RES)
    # At exactly 90 degrees they only touch along an edge.
    at_90 = poses_at(mech, fold_schedule(mech), np.array([0.75]))[0]
    assert colliding_pairs(mech, at_90).tolist() == []
    assert sweep(corner(90)) == []


def test_brief_collision_between_grid_points_is_found():
    # The two flaps pass through each other over a stretch of t shorter than the
    # sweep's first grid spacing (at most 1/16), so sampling the grid alone could
    # step over it. Reference: python-fcl on every one of 20,001 drive values.
    fcl = pytest.importorskip("fcl")
    mech = passing_flaps(169.3, 175)
    sched = fold_schedule(mech)
    ts = np.linspace(0.85, 1.0, 3001)
    poses = poses_at(mech, sched, ts)
    pan = panels(mech)
    hit_t = []
    for t, p in zip(ts, poses):
        objs = []
        for f in (1, 2):
            rows = pan.tri_face == f
            tri = np.einsum("ij,nkj->nki", p[f, :3, :3], pan.tri_points[rows]) + p[f, :3, 3]
            objs.append(fcl_object(fcl, tri))
        if fcl.collide(objs[0], objs[1], fcl.CollisionRequest(), fcl.CollisionResult()):
            hit_t.append(t)
    first, last = min(hit_t), max(hit_t)
    assert 0 < last - first < 1 / 16
    hits = sweep(mech)
    assert [h["faces"] for h in hits] == [[1, 2]]
    assert hits[0]["first_t"] == pytest.approx(first, abs=T_RES)
    assert hits[0]["last_t"] == pytest.approx(last, abs=T_RES)


@pytest.mark.parametrize("angles", [
    [70, 80, 90, 100, 110], [150, -40, 120, 100, 60], [170, 170, 10, 170, 170], [-120, -90, 45, 30, 20],
])
def test_sweep_agrees_with_dense_sampling_on_pivoting_fans(angles):
    # Two implementations of the same question: the conservative-advancement sweep
    # and testing every pair at 20,001 drive values. All six triangles pivot about
    # the hexagon's centre, so this exercises the wedge separation.
    mech = fan(angles)
    ref = dense_windows(mech)
    got = {}
    for h in sweep(mech):
        lo, hi = got.get(tuple(h["faces"]), (h["first_t"], h["last_t"]))
        got[tuple(h["faces"])] = (min(lo, h["first_t"]), max(hi, h["last_t"]))
    assert sorted(got) == sorted(ref)
    for key, (lo, hi) in ref.items():
        np.testing.assert_allclose(got[key], (lo, hi), atol=T_RES)


def cube(ratio=1.0):
    """Unit cube, bottom as root, walls on the bottom, lid on the x = 1 wall."""
    v = [[x, y, z] for x in (0, 1) for y in (0, 1) for z in (0, 1)]
    f = [[0, 2, 6, 4], [1, 5, 7, 3], [0, 4, 5, 1], [2, 3, 7, 6], [0, 1, 3, 2], [4, 6, 7, 5]]
    c = [Coupling((0, 1), 1.0), Coupling((0, 2), 1.0), Coupling((0, 3), 1.0), Coupling((3, 4), ratio)]
    return build_mechanism(v, f, [[0, 2], [0, 3], [0, 4], [0, 5], [5, 1]], couplings=c)


def test_closed_cube_touches_but_does_not_collide():
    # Common practice: panels meeting along their edges at closure are in contact.
    mech = cube()
    closed = poses_at(mech, fold_schedule(mech), np.array([1.0]))[0]
    assert colliding_pairs(mech, closed).tolist() == []
    assert sweep(mech, t_from=-1.0, t_to=1.0) == []


def test_overfolded_lid_slides_along_the_walls_without_crossing():
    # Hand check: geared 1.5:1 the lid turns 135 degrees about the top of its wall
    # and dips into the box; it turns about a line parallel to the y = 0 and y = 1
    # walls, so its side edges stay in those walls' planes (contact, not collision)
    # and its free edge stops short of the x = 0 wall. The cut edges open instead.
    mech = cube(ratio=1.5)
    assert sweep(mech) == []
    report = check(mech)
    assert not report["ok"] and not report["closure"]["meets"]


def four_around_a_vertex_and_one_more():
    """Five unit squares hinged in a chain around vertex (1, 1); the fifth lies on the first.

    Only the first hinge folds (90 degrees); the others stay flat, so from t > 0 the
    last four squares turn together about the line x = 1.
    """
    v = [[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0],     # 0-3: face 0 at cell (0, 0)
         [2, 0, 0], [2, 1, 0], [2, 2, 0], [1, 2, 0],     # 4-7
         [0, 1, 0], [0, 2, 0],                           # 8-9: a second copy of (0, 1)
         [0, 0, 0], [1, 0, 0]]                           # 10-11: face 4's own corners
    f = [[0, 1, 2, 3],       # cell (0, 0)
         [1, 4, 5, 2],       # cell (1, 0), hinged to face 0 along x = 1
         [2, 5, 6, 7],       # cell (1, 1), hinged to face 1 along y = 1
         [8, 2, 7, 9],       # cell (0, 1), hinged to face 2 along x = 1
         [10, 11, 2, 8]]     # cell (0, 0) again, hinged to face 3 along y = 1
    return build_mechanism(v, f, [[0, 1], [1, 2], [2, 3], [3, 4]], state="flat",
                           closed_angles=np.radians([90, 0, 0, 0]))


def test_flat_overlap_is_reported_and_fails_only_for_one_sheet():
    # Hand check: faces 0 and 4 cover the same unit cell when flat; once the first
    # hinge turns, face 4 swings up about x = 1, keeping only that edge in contact.
    mech = four_around_a_vertex_and_one_more()
    assert flat_overlaps(mech).tolist() == [[0, 4]]
    assert sweep(mech) == []
    loose = check(mech)
    assert loose["flat_overlap"] and loose["flat_overlap_pairs"] == [[0, 4]]
    assert loose["ok"]
    assert not check(mech, sheet=True)["ok"]


def test_sweep_reports_progress_and_can_be_abandoned():
    # Common practice for long work: progress rises to 1; raising from the
    # callback stops the sweep and reaches the caller.
    seen = []
    sweep(fan([70, 80, 90, 100, 110]), progress=seen.append)
    assert seen[-1] == 1.0 and all(0.0 <= a <= b <= 1.0 for a, b in zip(seen, seen[1:]))

    class Stop(Exception):
        pass

    def stop(fraction):
        raise Stop

    with pytest.raises(Stop):
        sweep(fan([70, 80, 90, 100, 110]), progress=stop)


def clearance_windows(mech, clearance, step=5e-4):
    """Brute-force reference for the clearance: python-fcl's distance between every
    unhinged pair of panels at every one of many drive values.

    Pairs that share a corner when flat or at t = 1 are in contact by design and the
    clearance does not apply to them (docs/cli.md). Panels here are convex, so each
    is fanned into triangles independently of foldsim's triangulation.
    """
    fcl = pytest.importorskip("fcl")
    sched = fold_schedule(mech)
    ts = np.arange(0.0, 1.0 + step / 2, step)
    poses = poses_at(mech, sched, ts)
    ends = poses_at(mech, sched, np.array([0.0, 1.0]))
    eps = DEFAULT.coincident * mech.size
    hinged = {tuple(sorted(h)) for h in mech.hinge_faces.tolist()}

    def corners(p, f):
        return mech.flat_faces[f] @ p[f, :3, :3].T + p[f, :3, 3]

    def share_corner(a, b):
        return any(np.linalg.norm(corners(p, a)[:, None] - corners(p, b)[None], axis=-1).min() <= eps
                   for p in ends)

    objects = []
    for poly in mech.flat_faces:
        model = fcl.BVHModel()
        model.beginModel(len(poly), len(poly) - 2)
        model.addSubModel(np.asarray(poly, float), np.array([[0, k, k + 1] for k in range(1, len(poly) - 1)]))
        model.endModel()
        objects.append(fcl.CollisionObject(model, fcl.Transform()))
    pairs = [(a, b) for a in range(mech.n_faces) for b in range(a + 1, mech.n_faces)
             if (a, b) not in hinged and not share_corner(a, b)]
    found = {}
    for t, pose in zip(ts, poses):
        for obj, p in zip(objects, pose):
            obj.setTransform(fcl.Transform(p[:3, :3], p[:3, 3]))
        for a, b in pairs:
            if fcl.distance(objects[a], objects[b], fcl.DistanceRequest(), fcl.DistanceResult()) < clearance:
                lo, hi = found.get((a, b), (t, t))
                found[(a, b)] = (min(lo, t), max(hi, t))
    return found


def windows(hits):
    got = {}
    for h in hits:
        lo, hi = got.get(tuple(h["faces"]), (h["first_t"], h["last_t"]))
        got[tuple(h["faces"])] = (min(lo, h["first_t"]), max(hi, h["last_t"]))
    return got


def test_clearance_applies_to_panels_whose_boxes_never_overlap(tmp_path):
    # A 10 mm cube from `foldsim new`: opposite faces are 10 mm apart at t = 1 (and
    # faces one square apart in the net are 10 mm apart when flat), so a clearance of
    # 11 mm must flag them although their boxes are disjoint. Reference: python-fcl
    # distances at 2,001 drive values.
    from foldsim.cli import main
    from foldsim.io.mechanism_json import load
    path = tmp_path / "c10.mech.json"
    assert main(["new", "cube", "--size", "10", "-o", str(path)]) == 0
    mech = load(path)
    ref = clearance_windows(mech, 11.0)
    assert len(ref) >= 3
    got = windows(sweep(mech, clearance=11.0))
    assert sorted(got) == sorted(ref)
    for key, span in ref.items():
        np.testing.assert_allclose(got[key], span, atol=T_RES)
    assert sweep(mech, clearance=9.0) == []


@pytest.mark.parametrize("mech, clearance", [(strip(110), 0.4), (passing_flaps(150, 160), 0.3)],
                         ids=["strip", "flaps"])
def test_clearance_hidden_between_disjoint_boxes_agrees_with_dense_sampling(mech, clearance):
    # The panels come nearer than the clearance while their boxes stay apart (for the
    # strip: free edges 1 + 2 cos(theta) apart, boxes [1, 1 - cos theta] and
    # [2 + cos theta, 2] on x, disjoint below 120 degrees). Reference: python-fcl
    # distances at 2,001 drive values.
    ref = clearance_windows(mech, clearance)
    assert ref
    (a, b), (first, _) = next(iter(ref.items()))
    pose = poses_at(mech, fold_schedule(mech), np.array([first]))[0]
    pa, pb = (mech.flat_faces[f] @ pose[f, :3, :3].T + pose[f, :3, 3] for f in (a, b))
    assert (np.maximum(pa.min(axis=0), pb.min(axis=0)) > np.minimum(pa.max(axis=0), pb.max(axis=0))).any()
    got = windows(sweep(mech, clearance=clearance))
    assert sorted(got) == sorted(ref)
    for key, span in ref.items():
        np.testing.assert_allclose(got[key], span, atol=T_RES)
