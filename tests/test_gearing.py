"""Gear couplings: degrees of freedom, free hinges, locked cycles and the schedule.

Small hand-made coupling graphs on a flat strip of panels, where every expected
value is worked out by hand; the degree-of-freedom count is cross-checked against
networkx's connected components of the coupling graph built here.
"""

import json

import networkx as nx
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import foldsim
from foldsim.gearing import fold_angles, fold_schedule
from foldsim.kinematics import poses_at
from foldsim.model import Coupling, build_mechanism

from helpers import strip_document

PROPERTY = settings(derandomize=True, max_examples=30, deadline=None)
CLOSED = np.array([0.5, 0.7, 0.9, 1.1, 1.3, 1.5])  # closing angles (rad) of the strip's hinges


def strip(n_hinges, couplings=(), drive=0, closed=None):
    """A flat row of n_hinges + 1 unit squares along x; hinge k joins squares k and k+1."""
    n = n_hinges + 1
    pts = [(float(x), y, 0.0) for y in (0.0, 1.0) for x in range(n + 1)]
    faces = [[k, k + 1, n + 2 + k, n + 1 + k] for k in range(n)]
    hinges = [(k, k + 1) for k in range(n_hinges)]
    closed = CLOSED[:n_hinges] if closed is None else closed
    return build_mechanism(pts, faces, hinges, drive=drive, couplings=couplings, state="flat",
                           closed_angles=closed)


def c(i, j, ratio):
    return Coupling((i, j), ratio)


# ---------------------------------------------------------------- hand-made graphs

def test_no_couplings_is_the_ideal_schedule():
    s = fold_schedule(strip(4))
    # every hinge moves as t times its own closing angle (docs/format.md; hand check)
    assert (s.kind, s.dof, s.free_hinges, s.locked_cycles) == ("ideal", 1, (), ())
    np.testing.assert_allclose(s.rates, CLOSED[:4], rtol=0, atol=0)


def test_a_chain_has_one_degree_of_freedom():
    s = fold_schedule(strip(4, [c(0, 1, 2.0), c(1, 2, 0.5), c(2, 3, 3.0)]))
    assert (s.kind, s.dof, s.free_hinges, s.locked_cycles) == ("geared", 1, (), ())
    # hand check: θ1 = 2 θ0, θ2 = 0.5 θ1 = θ0, θ3 = 3 θ2 = 3 θ0, θ0 = 0.5 t
    np.testing.assert_allclose(s.rates, [0.5, 1.0, 0.5, 1.5], rtol=1e-15, atol=0)


def test_a_coupling_may_run_against_the_hinge_order():
    s = fold_schedule(strip(3, [c(1, 0, 4.0), c(2, 1, 0.5)]))
    # hand check: θ0 = 4 θ1, so θ1 = θ0 / 4; θ1 = 0.5 θ2, so θ2 = 2 θ1 = θ0 / 2
    assert s.dof == 1
    np.testing.assert_allclose(s.rates, [0.5, 0.125, 0.25], rtol=1e-15, atol=0)


def test_two_components_leave_two_degrees_of_freedom():
    s = fold_schedule(strip(4, [c(0, 1, 2.0), c(2, 3, 3.0)]))
    # hand check: {0, 1} follow the drive, {2, 3} move on their own
    assert (s.dof, s.free_hinges, s.locked_cycles) == (2, (2, 3), ())
    np.testing.assert_allclose(s.rates[1] / s.rates[0], 2.0, rtol=1e-15)
    np.testing.assert_allclose(s.rates[3] / s.rates[2], 3.0, rtol=1e-15)


def test_free_hinges_are_those_the_drive_does_not_reach():
    s = fold_schedule(strip(4, [c(0, 1, 2.0), c(2, 3, 3.0)], drive=3))
    assert (s.dof, s.free_hinges) == (2, (0, 1))  # hand check
    s = fold_schedule(strip(4, [c(0, 1, 2.0), c(1, 2, 3.0)]))
    # an ungeared hinge is a component of its own (hand check)
    assert (s.dof, s.free_hinges) == (2, (3,))


@pytest.mark.parametrize("ratios", [(2.0, 3.0, 6.0), (0.1, 0.3, 0.03), (-2.0, 0.25, -0.5)])
def test_a_consistent_triangle_keeps_one_degree_of_freedom(ratios):
    r01, r12, r02 = ratios
    assert np.isclose(r01 * r12, r02, rtol=1e-12)  # the ratio product around the cycle is 1 (hand check)
    s = fold_schedule(strip(3, [c(0, 1, r01), c(1, 2, r12), c(0, 2, r02)]))
    assert (s.dof, s.free_hinges, s.locked_cycles) == (1, (), ())
    np.testing.assert_allclose(s.rates, 0.5 * np.array([1.0, r01, r02]), rtol=1e-12, atol=0)


def test_an_inconsistent_triangle_is_locked():
    s = fold_schedule(strip(3, [c(0, 1, 2.0), c(1, 2, 3.0), c(0, 2, 5.0)]))
    # hand check: θ2 = 3·2 θ0 = 6 θ0 and θ2 = 5 θ0 only at θ0 = 0, so the drive's
    # component cannot move: no degree of freedom left, the cycle 0-1-2 reported
    assert s.dof == 0
    assert len(s.locked_cycles) == 1
    assert sorted(s.locked_cycles[0]) == [0, 1, 2]


def test_a_locked_cycle_away_from_the_drive():
    s = fold_schedule(strip(5, [c(0, 1, 2.0), c(2, 3, 1.0), c(3, 4, 1.0), c(2, 4, 1.5)]))
    # hand check: {0, 1} moves with the drive; {2, 3, 4} is free but locked (1·1 ≠ 1.5)
    assert s.dof == 1
    assert s.free_hinges == (2, 3, 4)
    assert [sorted(cycle) for cycle in s.locked_cycles] == [[2, 3, 4]]


def test_two_gears_on_one_hinge_pair_must_agree():
    ok = fold_schedule(strip(2, [c(0, 1, 2.0), c(1, 0, 0.5)]))
    assert (ok.dof, ok.locked_cycles) == (1, ())  # 2 · 0.5 = 1 (hand check)
    bad = fold_schedule(strip(2, [c(0, 1, 2.0), c(0, 1, 3.0)]))
    assert bad.dof == 0
    assert [sorted(cycle) for cycle in bad.locked_cycles] == [[0, 1]]  # 2 ≠ 3 (hand check)


def test_fold_angles_are_linear_in_t():
    s = fold_schedule(strip(3, [c(0, 1, 2.0), c(1, 2, -1.0)]))
    t = np.array([-1.0, -0.25, 0.0, 0.5, 1.0])
    # hand check: θ = t · (0.5, 1.0, -1.0)
    np.testing.assert_allclose(fold_angles(s, t), t[:, None] * [0.5, 1.0, -1.0], rtol=1e-15, atol=0)


# ---------------------------------------------------------------- negative ratios and teeth

def far_edge(ratio):
    """The free end (x = 3 edge) of a three-square strip at t = 1, hinges at 90°."""
    mech = strip(2, [c(0, 1, ratio)], closed=[np.pi / 2, np.pi / 2])
    poses = poses_at(mech, fold_schedule(mech), [1.0])[0]
    corners = mech.flat_faces[2][[1, 2]]  # (3, 0, 0) and (3, 1, 0)
    return corners @ poses[2, :3, :3].T + poses[2, :3, 3]


def test_a_negative_ratio_folds_that_hinge_the_other_way():
    # Hand check: with both hinges at +90° the strip folds into a U and the free
    # edge lands over the first square's near edge at z = -1; with hinge 1 at -90°
    # the last square turns back outward, a step, and the edge lands at x = 2, z = -1.
    np.testing.assert_allclose(far_edge(1.0), [[0.0, 0.0, -1.0], [0.0, 1.0, -1.0]], rtol=0, atol=1e-12)
    np.testing.assert_allclose(far_edge(-1.0), [[2.0, 0.0, -1.0], [2.0, 1.0, -1.0]], rtol=0, atol=1e-12)
    s = fold_schedule(strip(2, [c(0, 1, -1.0)], closed=[np.pi / 2, np.pi / 2]))
    np.testing.assert_allclose(s.rates, [np.pi / 2, -np.pi / 2], rtol=1e-15, atol=0)


def test_teeth_set_the_ratio():
    doc = strip_document()
    doc["couplings"] = [{"hinges": [0, 1], "teeth": [20, 40]}]
    mech = foldsim.loads(json.dumps(doc))
    # a 20-tooth gear turns a 40-tooth gear at half its speed (common practice)
    assert mech.couplings[0].ratio == 0.5
    assert mech.couplings[0].teeth == (20, 40)
    s = fold_schedule(mech)
    np.testing.assert_allclose(s.rates[1], 0.5 * s.rates[0], rtol=1e-15, atol=0)


# ---------------------------------------------------------------- networkx cross-check

@st.composite
def coupling_graphs(draw):
    """Random consistent couplings over 6 hinges: ratios g[j] / g[i] from hinge gains g."""
    gains = draw(st.lists(st.sampled_from([-2.0, -0.5, 0.25, 1.0, 1.5, 3.0]), min_size=6, max_size=6))
    pairs = draw(st.lists(st.tuples(st.integers(0, 5), st.integers(0, 5)).filter(lambda p: p[0] != p[1]),
                          max_size=10))
    drive = draw(st.integers(0, 5))
    return [c(i, j, gains[j] / gains[i]) for i, j in pairs], drive


@PROPERTY
@given(coupling_graphs())
def test_dof_counts_connected_components(case):
    couplings, drive = case
    s = fold_schedule(strip(6, couplings, drive=drive))
    graph = nx.Graph()  # networkx (reference library)
    graph.add_nodes_from(range(6))
    graph.add_edges_from(x.hinges for x in couplings)
    reached = nx.node_connected_component(graph, drive)
    if couplings:
        assert s.dof == nx.number_connected_components(graph)
        assert s.free_hinges == tuple(sorted(set(range(6)) - reached))
        assert s.locked_cycles == ()
    else:
        assert (s.kind, s.dof) == ("ideal", 1)  # no gears: the ideal schedule (docs)
    for x in couplings:
        i, j = x.hinges
        # every gear pair holds: θj = r θi (the coupling's definition)
        np.testing.assert_allclose(s.rates[j], x.ratio * s.rates[i], rtol=1e-12, atol=0)
