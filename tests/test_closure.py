"""Cut-edge gaps: how far apart the two copies of each cut edge are.

The mis-geared cube's gaps are recomputed here from the input cube alone: each
panel is turned about its hinge line (scipy's `Rotation`) by how far its hinge
misses its closing angle, then the two copies of every cut edge are compared.
"""

import json

import numpy as np
import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st

import foldsim
from foldsim.analysis.closure import cut_edge_gaps
from foldsim.gearing import fold_schedule
from foldsim.kinematics import poses_at

from helpers import (
    Shape, built_in_solids, cube_document, face_adjacency, mechanism_from_solid, moved, turn_subtrees,
)

SOLIDS = built_in_solids()
PROPERTY = settings(derandomize=True, max_examples=30, deadline=None)


def gaps_by_pair(mech, t):
    """Engine gaps at drive values t, as {frozenset(face pair): (T,) gaps}."""
    gaps = cut_edge_gaps(mech, poses_at(mech, fold_schedule(mech), np.atleast_1d(t)))
    return {frozenset(pair): gaps[:, e] for e, pair in enumerate(mech.cut_faces.tolist())}


def reference_gaps(vertices, faces, hinges, root, deltas):
    """Gaps after turning each hinge by ``deltas`` (rad) away from the closed shell.

    Everything here comes from the input: the closed faces are turned with
    `turn_subtrees` (scipy rotations about the current hinge lines), and each cut
    edge's gap is the larger endpoint distance between its two faces' copies.
    """
    now = turn_subtrees([vertices[f] for f in faces], faces, hinges, root, deltas)
    adjacency = face_adjacency(Shape(vertices, faces))
    hinged = {frozenset(h) for h in hinges}
    out = {}
    for a, b in adjacency.edges:
        if frozenset((a, b)) in hinged:
            continue
        ends = adjacency.edges[a, b]["runs"][a]
        pa = now[a][[list(faces[a]).index(v) for v in ends]]
        pb = now[b][[list(faces[b]).index(v) for v in ends]]
        out[frozenset((a, b))] = float(np.linalg.norm(pa - pb, axis=1).max())
    return out


# ---------------------------------------------------------------- a mis-geared cube

# The helpers' cube: faces bottom, front, right, back, left, top (0..5) of the unit
# cube; hinges 0:[0,1] 1:[0,2] 2:[0,3] 3:[0,4] 4:[3,5]; all close at 90°.
RIGHT_ANGLE = np.pi / 2  # cube dihedral 90° (Coxeter, Regular Polytopes, Table I, memory)


def misgeared_cube(ratio):
    """The cube with couplings front→right 1, right→back ``ratio``, back→top 1, front→left 1."""
    doc = cube_document()
    doc["couplings"] = [
        {"hinges": [0, 1], "ratio": 1.0}, {"hinges": [1, 2], "ratio": ratio},
        {"hinges": [2, 4], "ratio": 1.0}, {"hinges": [0, 3], "ratio": 1.0},
    ]
    return doc, foldsim.loads(json.dumps(doc))


def reached_angles(ratio, t):
    """Fold angles (rad) at drive t, by hand: the drive closes at 90°; back and top follow ×ratio."""
    return t * RIGHT_ANGLE * np.array([1.0, 1.0, ratio, 1.0, ratio])


@pytest.mark.parametrize("t", [1.0, 0.5, 0.0, -0.5, -1.0])
def test_misgeared_cube_gaps_match_an_independent_refold(t):
    doc, mech = misgeared_cube(1.1)
    hinges = [h["faces"] for h in doc["hinges"]]
    deltas = reached_angles(1.1, t) - RIGHT_ANGLE
    expected = reference_gaps(np.array(doc["vertices"]), doc["faces"], hinges, doc["root"], deltas)
    ours = gaps_by_pair(mech, t)
    # the same seven cut edges: 12 edges − 5 hinges (Euler)
    assert set(ours) == set(expected) and len(expected) == 7
    for pair, gap in expected.items():
        np.testing.assert_allclose(ours[pair][0], gap, rtol=0, atol=1e-9, err_msg=f"cut edge {sorted(pair)}")


@pytest.mark.parametrize("t", [-0.4, 0.3, 0.8, 1.0])
def test_posed_cut_ends_give_the_independent_refold_gaps(t):
    # The view's one-pose path (`posed_cut_ends`: both sides' ends at once) against
    # the same independent refold (scipy rotations) as above.
    from foldsim.analysis.closure import posed_cut_ends

    doc, mech = misgeared_cube(1.1)
    hinges = [h["faces"] for h in doc["hinges"]]
    expected = reference_gaps(np.array(doc["vertices"]), doc["faces"], hinges, doc["root"],
                              reached_angles(1.1, t) - RIGHT_ANGLE)
    a, b = posed_cut_ends(mech, poses_at(mech, fold_schedule(mech), np.array([t]))[0])
    gaps = np.linalg.norm(a - b, axis=2).max(axis=1)
    for e, pair in enumerate(mech.cut_faces.tolist()):
        np.testing.assert_allclose(gaps[e], expected[frozenset(pair)], rtol=0, atol=1e-9)


def test_misgeared_cube_gaps_by_hand():
    _, mech = misgeared_cube(1.1)
    ours = gaps_by_pair(mech, 1.0)
    # Hand check: the back panel overshoots by 9° about the bottom-back edge, so the
    # top corners of its side edges move along a unit circle by 9°: chord 2 sin 4.5°.
    for side in (2, 4):  # right, left
        np.testing.assert_allclose(ours[frozenset((side, 3))][0], 2 * np.sin(np.radians(4.5)), rtol=0, atol=1e-12)
    # front meets right and left: all three panels close exactly at 90° (hand check)
    for side in (2, 4):
        np.testing.assert_allclose(ours[frozenset((1, side))][0], 0.0, rtol=0, atol=1e-12)


@PROPERTY
@given(st.floats(0.8, 1.25), st.floats(-1.0, 1.0))
@example(1.0, 1.0)
def test_any_misgearing_matches_the_independent_refold(ratio, t):
    doc, mech = misgeared_cube(ratio)
    hinges = [h["faces"] for h in doc["hinges"]]
    expected = reference_gaps(np.array(doc["vertices"]), doc["faces"], hinges, doc["root"],
                              reached_angles(ratio, t) - RIGHT_ANGLE)
    ours = gaps_by_pair(mech, t)
    pairs = sorted(expected, key=sorted)
    np.testing.assert_allclose([ours[p][0] for p in pairs], [expected[p] for p in pairs], rtol=0, atol=1e-9)


# ---------------------------------------------------------------- consistent models

@PROPERTY
@given(st.sampled_from(sorted(SOLIDS)), st.integers(0, 2**32 - 1), st.sampled_from(["none", "chain"]))
def test_consistent_models_close_their_cut_edges(name, seed, kind):
    poly = moved(SOLIDS[name](), seed, (2.0, -1.0, 0.5))
    mech = mechanism_from_solid(poly, couplings=kind)
    size = float(np.linalg.norm(np.ptp(poly.vertices, axis=0)))
    gaps = cut_edge_gaps(mech, poses_at(mech, fold_schedule(mech), [1.0, -1.0]))
    assert gaps.shape == (2, len(np.unique(np.concatenate(poly.faces))) - 1)  # E − H = V − 1 (Euler)
    # closed at t = 1, and at t = -1 (the mirror image, which closes too: hand check)
    np.testing.assert_allclose(gaps, 0.0, rtol=0, atol=1e-9 * size)


@pytest.mark.parametrize("name", sorted(SOLIDS))
def test_cut_edges_of_a_convex_solid_are_open_before_the_end(name):
    mech = mechanism_from_solid(SOLIDS[name](), couplings="chain")
    # Hand check: on a convex shell a cut edge's two faces reach their places
    # together only when every hinge is closed, so the gap is positive for |t| < 1.
    half = gaps_by_pair(mech, 0.5)
    np.testing.assert_array_less(np.full(len(half), 1e-3 * mech.size), np.concatenate(list(half.values())))
    t = np.linspace(-0.99, 0.99, 199)
    gaps = cut_edge_gaps(mech, poses_at(mech, fold_schedule(mech), t))
    np.testing.assert_array_less(np.full(gaps.shape, 1e-6 * mech.size), gaps)
