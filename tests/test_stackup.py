"""Tolerance stack-up: hinge play and gear backlash against values checked outside the code.

Reference values come from closed forms worked by hand (lever arms of a straight
chain, the unit cube's hinge lines), from an independent re-fold of the input shell
with scipy rotations (`refold` below: it walks the hinge tree with networkx and
turns each subtree about the hinge's current line, never calling foldsim), and from
elementary statistics (a uniform error on [-b, b] has standard deviation b/sqrt(3)).
"""

import itertools
import json
import math
import re

import networkx as nx
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.spatial.transform import Rotation

import foldsim
from foldsim import stackup as S
from foldsim.analysis.closure import cut_edge_gaps
from foldsim.cli import main
from foldsim.gearing import fold_schedule
from foldsim.kinematics import poses_at
from foldsim.model import Coupling, build_mechanism

from helpers import (
    Shape, chain_couplings, cube_document, face_adjacency, mechanism_from_solid, turn_subtrees, write_doc,
)

PROPERTY = settings(derandomize=True, max_examples=15, deadline=None)
RIGHT_ANGLE = np.pi / 2  # the cube's dihedral, 90° (Coxeter, Regular Polytopes, Table I, memory)


# ---------------------------------------------------------------- builders


def strip(n, closed_deg=30.0, couplings=(), extras=None):
    """A flat strip of n unit squares along x (hinge i between squares i and i+1 at x = i+1)."""
    vertices = [[x, y, 0.0] for x in range(n + 1) for y in (0, 1)]   # id = 2x + y
    faces = [[2 * i, 2 * i + 2, 2 * i + 3, 2 * i + 1] for i in range(n)]
    hinges = [[i, i + 1] for i in range(n - 1)]
    angles = np.radians(np.broadcast_to(closed_deg, (n - 1,)).astype(float))
    return build_mechanism(vertices, faces, hinges, state="flat", closed_angles=angles,
                           couplings=couplings, extras=extras, name=f"strip {n}")


def only(mech, kind, bound, mesh=0.0):
    """A PlaySpec with the same bound on one kind at every hinge (and on every mesh)."""
    hinge = np.zeros((mech.n_hinges, S.N_KINDS))
    if kind is not None:
        hinge[:, S.KINDS.index(kind)] = bound
    return S.PlaySpec(hinge, np.full(len(mech.couplings), float(mesh)))


def geared_cube(ratio=1.0, root=0):
    """The helpers' unit cube geared front→right 1, right→back ``ratio``, back→top 1, front→left 1.

    Hand-worked backlash matrix (angle error at each hinge per unit backlash at each
    coupling's driven gear), hinges 0..4 = bottom-front, bottom-right, bottom-back,
    bottom-left, back-top: coupling 0 drives hinge 1, and through it hinges 2 (×ratio)
    and 4; coupling 1 drives 2 and 4; coupling 2 drives 4; coupling 3 drives 3.
    """
    doc = cube_document()
    doc["root"] = root
    doc["couplings"] = [
        {"hinges": [0, 1], "ratio": 1.0}, {"hinges": [1, 2], "ratio": ratio},
        {"hinges": [2, 4], "ratio": 1.0}, {"hinges": [0, 3], "ratio": 1.0},
    ]
    hand = np.array([[0, 0, 0, 0], [1, 0, 0, 0], [ratio, 1, 0, 0], [0, 0, 0, 1], [ratio, 1, 1, 0]], float)
    return doc, foldsim.loads(json.dumps(doc)), hand


# ---------------------------------------------------------------- independent re-fold


def normal_of(points):
    """Unit normal of a planar polygon (counter-clockwise seen from its front), by cross product."""
    n = np.cross(points[1] - points[0], points[2] - points[0])
    return n / np.linalg.norm(n)


def refold(start, faces, hinges, root, hinge_errors, angle_errors):
    """Face vertices after applying every hinge's errors, walking out from the root.

    At each hinge (parent, child): the hinge's current line runs along the shared edge
    a -> b as it is in the parent face, ``u = (b - a)/|b - a|``, midpoint ``m``,
    ``n`` the parent's current normal, ``w = n x u``. The child and everything beyond
    it turns about that line by its angle error, then about ``m`` by the rotation
    vector ``tilt_across * w + tilt_normal * n``, then slides by
    ``axial * u + shift_across * w + shift_normal * n`` (scipy rotations).

    Parameters
    ----------
    start : sequence of (k, 3) float
    faces : sequence of vertex-id lists
    hinges : sequence of (a, b)
    root : int
    hinge_errors : (H, 6) float
        Columns as `foldsim.stackup.KINDS`; column 0 is ignored (see angle_errors).
    angle_errors : (H,) float
        Total turn about each hinge line.
    """
    graph = nx.Graph()
    graph.add_nodes_from(range(len(faces)))
    for k, (a, b) in enumerate(hinges):
        graph.add_edge(int(a), int(b), hinge=k)
    tree = nx.bfs_tree(graph, root)
    now = {f: np.array(p, dtype=float) for f, p in enumerate(start)}
    for parent, child in nx.bfs_edges(graph, root):
        k = graph.edges[parent, child]["hinge"]
        ring = [int(v) for v in faces[parent]]
        other = {int(v) for v in faces[child]}
        i = next(i for i in range(len(ring)) if ring[i] in other and ring[(i + 1) % len(ring)] in other)
        a, b = now[parent][i], now[parent][(i + 1) % len(ring)]
        u = (b - a) / np.linalg.norm(b - a)
        m = 0.5 * (a + b)
        n = normal_of(now[parent])
        w = np.cross(n, u)
        e = hinge_errors[k]
        turn = Rotation.from_rotvec(angle_errors[k] * u)
        tilt = Rotation.from_rotvec(e[1] * w + e[2] * n)
        slide = e[3] * u + e[4] * w + e[5] * n
        for f in {child} | nx.descendants(tree, child):
            now[f] = tilt.apply(turn.apply(now[f] - m)) + m + slide
    return now


class Reference:
    """The cube refolded outside foldsim: shells, cut-edge difference vectors, Jacobians."""

    def __init__(self, doc, achieved):
        self.vertices = np.array(doc["vertices"], float)
        self.faces = doc["faces"]
        self.hinges = [h["faces"] for h in doc["hinges"]]
        self.root = doc.get("root", 0)
        closed = [self.vertices[f] for f in self.faces]
        # From the closed shell (every hinge at 90°) to the pose the gears reach.
        self.shell = turn_subtrees(closed, self.faces, self.hinges, self.root, np.asarray(achieved) - RIGHT_ANGLE)
        adjacency = face_adjacency(Shape(self.vertices, self.faces))
        hinged = {frozenset(h) for h in self.hinges}
        self.cuts = []
        for a, b in adjacency.edges:
            if frozenset((a, b)) not in hinged:
                ends = adjacency.edges[a, b]["runs"][a]
                self.cuts.append((a, b, [(self.faces[a].index(v), self.faces[b].index(v)) for v in ends]))

    def diffs(self, hinge_errors, angle_errors):
        """{frozenset(faces): [(point on a, p_a - p_b) per endpoint]}."""
        now = refold([self.shell[f] for f in range(len(self.faces))], self.faces, self.hinges, self.root,
                     hinge_errors, angle_errors)
        return {frozenset((a, b)): [(now[a][i], now[a][i] - now[b][j]) for i, j in ends]
                for a, b, ends in self.cuts}

    def jacobian(self, n_couplings, mesh_matrix, step=1e-5):
        """{faces: [(point, (3, 6H + C) central-difference Jacobian) per endpoint]}."""
        n_h = len(self.hinges)
        n_s = S.N_KINDS * n_h + n_couplings
        cols = {}
        for s in range(n_s):
            vals = []
            for sign in (1.0, -1.0):
                errs, angles = self.source(s, sign * step, n_h, mesh_matrix)
                vals.append(self.diffs(errs, angles))
            for key, ends in vals[0].items():
                cols.setdefault(key, [[] for _ in ends])
                for k, (_, d) in enumerate(ends):
                    cols[key][k].append((d - vals[1][key][k][1]) / (2 * step))
        base = self.diffs(np.zeros((n_h, S.N_KINDS)), np.zeros(n_h))
        return {key: [(base[key][k][0], np.array(c).T) for k, c in enumerate(ends)] for key, ends in cols.items()}

    @staticmethod
    def source(s, value, n_h, mesh_matrix):
        """Hinge errors and angle errors with one source set to value."""
        errs = np.zeros((n_h, S.N_KINDS))
        angles = np.zeros(n_h)
        if s < S.N_KINDS * n_h:
            h, kind = divmod(s, S.N_KINDS)
            errs[h, kind] = value
            if kind == 0:
                angles[h] = value
        else:
            angles = mesh_matrix[:, s - S.N_KINDS * n_h] * value
        return errs, angles


def match(points, ref_ends):
    """Index of the reference endpoint at each engine endpoint position."""
    out = []
    for p in points:
        d = [np.linalg.norm(p - q) for q, _ in ref_ends]
        assert min(d) < 1e-9, "engine and reference disagree on the ideal endpoint positions"
        out.append(int(np.argmin(d)))
    return out


# ---------------------------------------------------------------- closed forms on a straight chain


@pytest.mark.parametrize("n", [2, 3, 5, 8])
def test_chain_tip_worst_case_and_rss_are_play_times_lever_arms(n):
    # A straight chain of n unit links, play ±delta at each of its n-1 hinges, flat (t = 0).
    # Hinge i (i = 1..n-1, at x = i) turns the far end (x = n) by delta about a line
    # (n - i) away, moving it along z only: worst case delta * sum(n - i),
    # RSS sigma * sqrt(sum (n - i)^2) (hand calculation; sum of independent terms).
    mech = strip(n)
    delta = 1e-3
    levers = np.arange(n - 1, 0, -1, dtype=float)
    uniform = S.linear_stackup(mech, only(mech, "play", delta), times=(0.0,), dist="uniform")
    assert uniform.tip_bound[0, -1] == pytest.approx(delta * levers.sum(), rel=1e-12)
    assert delta * levers.sum() == pytest.approx(delta * n * (n - 1) / 2)   # arithmetic series
    sigma = delta / math.sqrt(3.0)  # uniform on [-delta, delta]
    assert uniform.tip_rss[0, -1] == pytest.approx(sigma * np.sqrt((levers**2).sum()), rel=1e-12)
    # Normal errors with bound = 3 sigma: with the bound at 3 delta, RSS = delta sqrt(sum L^2).
    normal = S.linear_stackup(mech, only(mech, "play", 3 * delta), times=(0.0,), dist="normal")
    assert normal.tip_rss[0, -1] == pytest.approx(delta * np.sqrt((levers**2).sum()), rel=1e-12)
    # The root link never moves.
    assert uniform.tip_bound[0, 0] == 0.0


def test_single_hinge_sources_move_the_far_edge_by_hand_computed_amounts():
    # Two unit squares, hinge along x = 1 from (1,0,0) to (1,1,0) (+y as it runs in face 0),
    # outward normal +z, so w = z x y = -x, midpoint (1, 0.5, 0); far corners (2,0,0), (2,1,0).
    # Turn about w by tau: corners move by tau * |w x (p - m)| = tau * 0.5 (out of the plane).
    # Turn about n by tau: tau * |z x (1, -+0.5, 0)| = tau * sqrt(1.25).
    # Slides move every point by the slide itself.
    mech = strip(2)
    b = 1e-3
    expected = {"play": b * 1.0, "tilt_across": b * 0.5, "tilt_normal": b * math.sqrt(1.25),
                "axial": b, "shift_across": b, "shift_normal": b}
    for kind, value in expected.items():
        lin = S.linear_stackup(mech, only(mech, kind, b), times=(0.0,))
        assert lin.tip_bound[0, 1] == pytest.approx(value, rel=1e-12), kind


def test_monte_carlo_spread_converges_to_the_analytic_sigma():
    # Tip z of the 5-link chain is sum_i e_i * L_i (to first order) with independent e_i:
    # std = sigma_e * sqrt(sum L_i^2), sigma_e = b/sqrt(3) (uniform on [-b, b]) or b/3
    # (normal, bound at 3 sigma). The sample std of N draws has relative standard error
    # about 1/sqrt(2N) (0.5% at N = 20000); allow 4 of them.
    n, b, samples = 5, 1e-3, 20_000
    mech = strip(n)
    levers = np.arange(n - 1, 0, -1, dtype=float)
    spec = only(mech, "play", b)
    tip = np.array([float(n), 0.0, 0.0])   # a far corner, flat coordinates (root frame)
    for dist, sigma_e in (("uniform", b / math.sqrt(3.0)), ("normal", b / 3.0)):
        errors = S.draw_errors(spec, samples, np.random.default_rng(11), dist)
        poses = S.perturbed_poses(mech, np.zeros((1, mech.n_hinges)), errors)[:, 0, -1]
        z = (poses[:, :3, :3] @ tip + poses[:, :3, 3])[:, 2]
        analytic = sigma_e * np.sqrt((levers**2).sum())
        assert z.std() == pytest.approx(analytic, rel=4 / math.sqrt(2 * samples))
        assert abs(z.mean()) < 5 * analytic / math.sqrt(samples)
        # The report's RMS tip deviation of the last panel estimates the same number.
        mc = S.monte_carlo(mech, spec, samples=samples, seed=11, dist=dist, times=(0.0,))
        assert mc.tip_rms[0, -1] == pytest.approx(analytic, rel=4 / math.sqrt(2 * samples))


# ---------------------------------------------------------------- the unit cube by hand


def test_cube_play_bounds_by_hand():
    # Unit cube (faces bottom, front, right, back, left, top; hinges bottom to the four
    # sides, back to top), play ±delta at every hinge, ideal schedule, closed.
    # Per endpoint, each hinge moves the point by delta times its distance from the
    # hinge line, perpendicular to both:
    #   front-right edge, top end (1,0,1): front hinge -> y, right hinge -> x:
    #       worst case delta * |(1, 1, 0)| = sqrt(2) delta, RSS sigma sqrt(2);
    #   front-top edge, ends (x,0,1): bottom-back hinge -> (0,1,1), back-top -> z, front -> y:
    #       per axis y: 2 delta, z: 2 delta -> 2 sqrt(2) delta; RSS sigma sqrt(2+1+1) = 2 sigma;
    #       variance shares 1/2 bottom-back, 1/4 back-top, 1/4 front;
    #   right-top edge, end (1,0,1): bottom-back -> (0,1,1), back-top -> z, right -> x:
    #       sqrt(1 + 1 + 4) delta = sqrt(6) delta, RSS 2 sigma.
    mech = foldsim.loads(json.dumps(cube_document()))
    delta = 1e-3
    sigma = delta / math.sqrt(3.0)
    lin = S.linear_stackup(mech, only(mech, "play", delta), times=(1.0,))
    by_pair = {frozenset(p): e for e, p in enumerate(mech.cut_faces.tolist())}
    hand = {(1, 2): (math.sqrt(2) * delta, math.sqrt(2) * sigma),
            (1, 5): (2 * math.sqrt(2) * delta, 2 * sigma),
            (2, 5): (math.sqrt(6) * delta, 2 * sigma)}
    for pair, (bound, rss) in hand.items():
        e = by_pair[frozenset(pair)]
        assert lin.gap_bound[-1, e] == pytest.approx(bound, rel=1e-9), pair
        assert lin.gap_rss[-1, e] == pytest.approx(rss, rel=1e-9), pair
    # Contributors of the front-top edge: hinge 2 (bottom-back) 50 %, hinges 4 and 0 25 % each.
    result = S.Stackup(mech, only(mech, "play", delta), None, lin)
    ranked = S._ranking(mech, lin.variance, lin.element_bound, rows=by_pair[frozenset((1, 5))])
    shares = {r["index"]: r["share"] for r in ranked}
    assert shares == pytest.approx({2: 0.5, 4: 0.25, 0: 0.25}, rel=1e-9)
    # Right-top edge: shares come from its end with the larger RSS, (1,0,1): bottom-back
    # 2 sigma^2 of 4, back-top and right 1 each (the (1,1,1) end would give 1/2, 0, 1/2).
    ranked = S._ranking(mech, lin.variance, lin.element_bound, rows=by_pair[frozenset((2, 5))])
    assert {r["index"]: r["share"] for r in ranked} == pytest.approx({2: 0.5, 4: 0.25, 1: 0.25}, rel=1e-9)
    assert result.contributors()[0]["index"] == 2   # the back hinge carries the top: tighten first


# Root 0 (the bottom): no cut edge has faces with a common ancestor hinge. Root 5 (the
# top): every side-to-side edge shares the top-back and back-bottom hinges.
ROOTS = pytest.mark.parametrize("root", [0, 5])


@ROOTS
def test_sampled_poses_match_the_independent_refold_exactly(root):
    # Finite errors (up to 0.05 rad and 0.05 of the cube's edge): no linearisation here,
    # so the sampled shell must be the refolded one to round-off.
    doc, mech, hand = geared_cube(1.1, root)
    rates = RIGHT_ANGLE * np.array([1.0, 1.0, 1.1, 1.0, 1.1])
    ref = Reference(doc, 0.8 * rates)
    rng = np.random.default_rng(root)
    errors = S.Errors(rng.uniform(-0.05, 0.05, (3, 5, S.N_KINDS)), rng.uniform(-0.05, 0.05, (3, 4)))
    poses = S.perturbed_poses(mech, 0.8 * rates[None], errors)[:, 0]
    for n in range(3):
        angles = errors.hinge[n, :, 0] + hand @ errors.mesh[n]
        now = refold([ref.shell[f] for f in range(6)], ref.faces, ref.hinges, root, errors.hinge[n], angles)
        for f, flat in enumerate(mech.flat_faces):
            posed = flat @ poses[n, f, :3, :3].T + poses[n, f, :3, 3]
            np.testing.assert_allclose(posed, now[f], atol=1e-12)


@ROOTS
def test_linearised_jacobian_matches_a_brute_force_refold(root):
    # Every source of the geared cube (ratio 1.1 on one mesh, so the cube does not quite
    # close and the difference vectors are not zero) at t = 1 and t = 0.5, against central
    # differences of the independent refold (step 1e-5).
    doc, mech, hand = geared_cube(1.1, root)
    rates = RIGHT_ANGLE * np.array([1.0, 1.0, 1.1, 1.0, 1.1])     # reached at t = 1 (by hand)
    assert np.allclose(S.backlash_matrix(mech), hand, atol=1e-15)
    for t in (1.0, 0.5):
        ref = Reference(doc, t * rates)
        expected = ref.jacobian(len(mech.couplings), hand)
        points, _, jac = S.gap_jacobian(mech, t * rates)
        for e, pair in enumerate(mech.cut_faces.tolist()):
            ends = expected[frozenset(pair)]
            for k, r in enumerate(match(points[e], ends)):
                np.testing.assert_allclose(jac[e, k], ends[r][1], atol=1e-8, rtol=0)


@ROOTS
def test_linearised_worst_case_matches_the_brute_force_corner_and_bounds_monte_carlo(root):
    # For a linear map the largest |component| over the box |s_i| <= b_i is
    # sum |J_ci| b_i, reached at s = b * sign(J_c). Evaluate the independent refold at
    # that corner for every edge, endpoint and axis; with bounds of 1e-4 the nonlinear
    # value agrees to about 1e-4 relative.
    doc, mech, hand = geared_cube(1.1, root)
    rates = RIGHT_ANGLE * np.array([1.0, 1.0, 1.1, 1.0, 1.1])
    rng = np.random.default_rng(5)
    spec = S.PlaySpec(rng.uniform(0.2e-4, 1e-4, (mech.n_hinges, S.N_KINDS)), rng.uniform(0.2e-4, 1e-4, 4))
    bounds = spec.bounds
    ref = Reference(doc, rates)
    jac_ref = ref.jacobian(len(mech.couplings), hand)
    base = ref.diffs(np.zeros((5, 6)), np.zeros(5))
    lin = S.linear_stackup(mech, spec, times=(1.0,))
    n_h = mech.n_hinges
    for e, pair in enumerate(mech.cut_faces.tolist()):
        key = frozenset(pair)
        per_end = []
        for k, (_, j) in enumerate(jac_ref[key]):
            reach = []
            for c in range(3):
                corner = np.sign(j[c]) * bounds
                errs = corner[:S.N_KINDS * n_h].reshape(n_h, S.N_KINDS)
                angles = errs[:, 0] + hand @ corner[S.N_KINDS * n_h:]
                moved = ref.diffs(errs, angles)[key][k][1] - base[key][k][1]
                reach.append(abs(moved[c]))
                assert abs(moved[c]) == pytest.approx(np.abs(j[c]) @ bounds, rel=2e-3)
            per_end.append(np.linalg.norm(base[key][k][1]) + np.linalg.norm(reach))
        assert lin.gap_bound[0, e] == pytest.approx(max(per_end), rel=2e-3)
    mc = S.monte_carlo(mech, spec, samples=3000, seed=2, times=(1.0,), keep=True)
    assert (mc.gaps[:, 0] <= lin.gap_bound[0] * (1 + 1e-3)).all()
    assert (mc.tips[:, 0] <= lin.tip_bound[0] * (1 + 1e-3)).all()
    # ... and the sampled maximum is a good part of it, not vanishingly small.
    assert (mc.gap_max[0] > 0.2 * lin.gap_bound[0]).all()


@PROPERTY
@given(scale=st.floats(1e-6, 1e-4), seed=st.integers(0, 2**16))
def test_worst_case_bounds_every_sample_on_a_geared_dodecahedron(scale, seed):
    from foldsim import solids

    mech = mechanism_from_solid(solids.dodecahedron(), couplings="chain")
    rng = np.random.default_rng(seed)
    spec = S.PlaySpec(rng.uniform(0, scale, (mech.n_hinges, S.N_KINDS)), rng.uniform(0, scale, len(mech.couplings)))
    lin = S.linear_stackup(mech, spec, times=(1.0,))
    mc = S.monte_carlo(mech, spec, samples=200, seed=seed, times=(1.0,), keep=True)
    assert (mc.gaps[:, 0] <= lin.gap_bound[0] * (1 + 1e-3) + 1e-12).all()
    assert (mc.tips[:, 0] <= lin.tip_bound[0] * (1 + 1e-3) + 1e-12).all()


# ---------------------------------------------------------------- gears


@pytest.mark.parametrize("ratio", [2.0, -0.5, 3.0])
def test_backlash_along_a_two_gear_chain_by_hand(ratio):
    # Three panels in a row, hinge 1 geared to hinge 0: theta1 = ratio * theta0.
    # Backlash beta at the driven gear (hinge 1) shifts hinge 1 by beta; the drive
    # hinge is not off. Measured here from the perturbed poses: the fold angle of
    # hinge 1 is the angle between the normals of panels 1 and 2 about the hinge line.
    mech = strip(3, closed_deg=[20.0, 20.0 * ratio], couplings=[Coupling((0, 1), ratio)])
    beta = 2e-3
    errors = S.Errors(np.zeros((1, 2, S.N_KINDS)), np.array([[beta]]))
    angles = np.radians([[20.0, 20.0 * ratio]]) * 0.7
    poses = S.perturbed_poses(mech, angles, errors)[0, 0]
    corners = [poses[f, :3, :3] @ np.array(p, float).T + poses[f, :3, 3, None] for f, p in
               enumerate(mech.flat_faces)]
    normals = [normal_of(c.T) for c in corners]
    axis = corners[1].T[2] - corners[1].T[1]     # panel 1's edge x = 2, as the hinge runs in panel 1
    axis /= np.linalg.norm(axis)
    fold = math.atan2(np.dot(axis, np.cross(normals[1], normals[2])), np.dot(normals[1], normals[2]))
    assert fold == pytest.approx(angles[0, 1] + beta, abs=1e-12)
    first = math.atan2(np.dot([0, 1, 0], np.cross(normals[0], normals[1])), np.dot(normals[0], normals[1]))
    assert first == pytest.approx(angles[0, 0], abs=1e-12)


def test_backlash_accumulates_down_a_gear_chain_by_hand():
    # Four panels, couplings 0->1 ratio 2 and 1->2 written backwards (theta1 = 0.5 theta2,
    # so walking from the drive theta2 = 2 theta1). Backlash b0 at hinge 1's gear and b1
    # at hinge 2's: e1 = b0, e2 = 2 * e1 + b1 (hand).
    mech = strip(4, closed_deg=[10.0, 20.0, 40.0],
                 couplings=[Coupling((0, 1), 2.0), Coupling((2, 1), 0.5)])
    np.testing.assert_allclose(S.backlash_matrix(mech), [[0, 0], [1, 0], [2, 1]], atol=1e-15)
    b0, b1 = 1e-3, -4e-4
    errs = S.transmitted_errors(S.gear_tree(mech), np.array([[b0, b1]]), 3)
    np.testing.assert_allclose(errs, [[0.0, b0, 2 * b0 + b1]], atol=1e-18)
    assert S.longest_gear_chain(mech) == 2
    # Worst case at the far panel's tip, flat: hinge 2 (lever 1) swings by up to 2 b0 + b1
    # from the gears; hinge 1 (lever 2) by b0: bounds add as |J| b (hand):
    # tip z = 2 * e1 + 1 * e2 = 2 b0 + (2 b0 + b1) -> worst case 4 |b0| + |b1|.
    spec = S.PlaySpec(np.zeros((3, S.N_KINDS)), np.array([abs(b0), abs(b1)]))
    lin = S.linear_stackup(mech, spec, times=(0.0,))
    assert lin.tip_bound[0, 3] == pytest.approx(4 * abs(b0) + abs(b1), rel=1e-12)


def test_linear_backlash_is_turned_into_an_angle_with_the_pitch_radius():
    # angular backlash = linear backlash / pitch radius (elementary gear geometry); the
    # file gives the total, the bound is half of it.
    mech = strip(3, closed_deg=[20.0, 40.0], couplings=[Coupling((0, 1), 2.0)],
                 extras={"tolerances": {"couplings": [{"coupling": 0, "backlash": 0.2, "pitch_radius": 8.0}]}})
    assert S.play_spec(mech).mesh[0] == pytest.approx(0.2 / 8.0 / 2)
    angle = strip(3, closed_deg=[20.0, 40.0], couplings=[Coupling((0, 1), 2.0)],
                  extras={"tolerances": {"coupling": {"backlash_deg": 1.0}}})
    assert S.play_spec(angle).mesh[0] == pytest.approx(math.radians(0.5))


# ---------------------------------------------------------------- zero play, seeds, relabelling


def test_zero_play_reproduces_the_ideal_gaps_exactly():
    from foldsim import solids

    for mech in (geared_cube(1.1)[1], mechanism_from_solid(solids.icosahedron(), couplings="chain")):
        times = (0.3, 1.0)
        spec = S.PlaySpec.zeros(mech)
        mc = S.monte_carlo(mech, spec, samples=50, seed=1, times=times, keep=True)
        ideal = cut_edge_gaps(mech, poses_at(mech, fold_schedule(mech), np.array(times)))
        # Equal to round-off (the sampler builds each hinge rotation its own way).
        round_off = 1e-13 * mech.size
        np.testing.assert_allclose(mc.gaps, np.broadcast_to(ideal, mc.gaps.shape), rtol=0, atol=round_off)
        assert (mc.tips <= round_off).all()
        lin = S.linear_stackup(mech, spec, times=times)
        np.testing.assert_array_equal(lin.gap_bound, ideal)
        assert (lin.gap_rss == 0).all() and (lin.tip_bound == 0).all()


def test_seeded_runs_repeat_and_do_not_depend_on_the_chunk_size():
    _, mech, _ = geared_cube(1.0)
    spec = S.play_spec(mech, "filament")
    for dist in ("uniform", "normal"):
        a = S.monte_carlo(mech, spec, samples=500, seed=7, dist=dist, keep=True)
        b = S.monte_carlo(mech, spec, samples=500, seed=7, dist=dist, keep=True, chunk=37)
        np.testing.assert_array_equal(a.gaps, b.gaps)
        np.testing.assert_array_equal(a.tips, b.tips)
        c = S.monte_carlo(mech, spec, samples=500, seed=8, dist=dist, keep=True)
        assert not np.array_equal(a.gaps, c.gaps)
        # The same built copies at every drive value: closure alone gives the same closure numbers.
        alone = S.monte_carlo(mech, spec, samples=500, seed=7, dist=dist, times=(1.0,), keep=True)
        assert list(a.times) == [0.25, 0.5, 0.75, 1.0]
        np.testing.assert_array_equal(alone.gaps[:, 0], a.gaps[:, -1])


def relabelled(doc, face_perm, hinge_perm, coupling_perm):
    """The same mechanism with faces, hinges and couplings renumbered (new index = perm[old])."""
    out = json.loads(json.dumps(doc))
    faces = [None] * len(doc["faces"])
    for old, new in enumerate(face_perm):
        faces[new] = doc["faces"][old]
    hinges = [None] * len(doc["hinges"])
    for old, new in enumerate(hinge_perm):
        a, b = doc["hinges"][old]["faces"]
        hinges[new] = {"faces": [int(face_perm[b]), int(face_perm[a])]}
    couplings = [None] * len(doc["couplings"])
    for old, new in enumerate(coupling_perm):
        c = doc["couplings"][old]
        couplings[new] = {"hinges": [int(hinge_perm[h]) for h in c["hinges"]], "ratio": c["ratio"]}
    out.update(faces=faces, hinges=hinges, couplings=couplings, root=int(face_perm[doc.get("root", 0)]),
               drive=int(hinge_perm[doc.get("drive", 0)]))
    if "tolerances" in doc:
        tol = out["tolerances"]
        for item in tol.get("hinges", []):
            item["hinge"] = int(hinge_perm[item["hinge"]])
        for item in tol.get("couplings", []):
            item["coupling"] = int(coupling_perm[item["coupling"]])
    return out


def test_results_do_not_depend_on_how_faces_hinges_and_couplings_are_numbered():
    doc, _, _ = geared_cube(1.1)
    doc["tolerances"] = {"process": "filament", "hinges": [{"hinge": 4, "play_deg": 2.0}],
                         "couplings": [{"coupling": 1, "backlash_deg": 1.5}]}
    rng = np.random.default_rng(3)
    fp, hp, cp = rng.permutation(6), rng.permutation(5), rng.permutation(4)
    a = foldsim.loads(json.dumps(doc))
    b = foldsim.loads(json.dumps(relabelled(doc, fp, hp, cp)))
    times = (0.5, 1.0)
    la = S.linear_stackup(a, S.play_spec(a), times)
    lb = S.linear_stackup(b, S.play_spec(b), times)
    edge_b = {frozenset(p): e for e, p in enumerate(b.cut_faces.tolist())}
    order = [edge_b[frozenset(fp[p].tolist())] for p in a.cut_faces.tolist()]   # b's edge for each of a's
    for name in ("gap_bound", "gap_rss", "ideal_gaps"):
        np.testing.assert_allclose(getattr(lb, name)[:, order], getattr(la, name), rtol=1e-9, atol=1e-12)
    for name in ("tip_bound", "tip_rss"):
        np.testing.assert_allclose(getattr(lb, name)[:, fp], getattr(la, name), rtol=1e-9, atol=1e-15)

    def ranked(mech, lin, face_map, coupling_map):
        return [(r["element"], tuple(sorted(face_map[r["faces"]].tolist())) if r["element"] == "hinge"
                 else int(coupling_map[r["index"]]), round(r["share"], 9))
                for r in S._ranking(mech, lin.variance, lin.element_bound)]

    # Same shares for the same hinges and meshes (equal shares may come in either order).
    assert sorted(ranked(a, la, fp, cp)) == sorted(ranked(b, lb, np.arange(6), np.arange(4)))
    # Monte Carlo with independent draws: mean squared gaps agree within 5 combined
    # standard errors (each estimated from its own samples).
    ma = S.monte_carlo(a, S.play_spec(a), samples=4000, seed=1, times=times, keep=True)
    mb = S.monte_carlo(b, S.play_spec(b), samples=4000, seed=2, times=times, keep=True)
    qa, qb = ma.gaps**2, mb.gaps[:, :, order] ** 2
    se = np.sqrt(qa.var(axis=0) / len(qa) + qb.var(axis=0) / len(qb))
    assert (np.abs(qa.mean(axis=0) - qb.mean(axis=0)) <= 5 * se).all()


# ---------------------------------------------------------------- presets and the file


def test_presets_use_the_common_practice_clearances():
    # ../shared/REFERENCES.md, "Clearances" (common practice): sintered nylon 0.3-0.6 mm,
    # filament 0.2-0.5 mm.
    assert 0.3 <= S.PROCESSES["sintered-nylon"].clearance <= 0.6
    assert 0.2 <= S.PROCESSES["filament"].clearance <= 0.5
    assert S.PROCESSES["machined-metal"].clearance < S.PROCESSES["filament"].clearance


def test_preset_bounds_by_hand_in_model_units():
    # Strip of unit squares in cm: sintered nylon clearance 0.4 mm = 0.04 cm, lever 2 cm,
    # backlash 0.2 mm over pitch radius 10 mm. Bounds are half the free range:
    # play 0.04/2/2 = 0.01 rad; tilt 2*0.04/1/2 = 0.04 rad (hinge length 1 cm);
    # axial 0.02 cm; backlash 0.02/2 = 0.01 rad.
    mech = strip(3, closed_deg=[20.0, 40.0], couplings=[Coupling((0, 1), 2.0)])
    object.__setattr__(mech, "units", "cm")
    spec = S.play_spec(mech, "sintered-nylon")
    np.testing.assert_allclose(spec.hinge, [[0.01, 0.04, 0.04, 0.02, 0, 0]] * 2, rtol=1e-12)
    np.testing.assert_allclose(spec.mesh, [0.01], rtol=1e-12)
    assert spec.process == "sintered-nylon"


def test_file_values_override_the_preset_in_order():
    tol = {"process": "filament", "clearance": 0.1,                  # preset with its clearance changed
           "hinge": {"play_deg": 1.0},                                # default for every hinge
           "hinges": [{"hinge": 1, "play_deg": 0.2, "tilt_deg": [0.4, 0.6], "shift": 0.05}],
           "coupling": {"pitch_radius": 5.0}}                         # preset backlash 0.2 mm over 5 mm
    mech = strip(3, closed_deg=[20.0, 40.0], couplings=[Coupling((0, 1), 2.0)], extras={"tolerances": tol})
    spec = S.play_spec(mech)
    half = 0.5
    assert spec.hinge[0, 0] == pytest.approx(math.radians(1.0) * half)
    assert spec.hinge[0, 1] == pytest.approx(2 * 0.1 / 1.0 * half)        # 2 c / length, c = 0.1
    assert spec.hinge[0, 3] == pytest.approx(0.1 * half)
    assert spec.hinge[1, 0] == pytest.approx(math.radians(0.2) * half)
    assert spec.hinge[1, 1:3] == pytest.approx(np.radians([0.4, 0.6]) * half)
    assert spec.hinge[1, 4:] == pytest.approx([0.025, 0.025])
    assert spec.mesh[0] == pytest.approx(0.2 / 5.0 * half)
    # --process replaces the file's preset, but explicit file values still win.
    metal = S.play_spec(mech, "machined-metal")
    assert metal.hinge[0, 0] == pytest.approx(math.radians(1.0) * half)
    assert metal.mesh[0] == pytest.approx(0.05 / 5.0 * half)


def test_model_without_tolerances_needs_a_process():
    mech = strip(2)
    with pytest.raises(foldsim.ModelError, match="tolerances: the model gives none"):
        S.play_spec(mech)
    foreign = strip(2)
    object.__setattr__(foreign, "units", "furlong")
    with pytest.raises(foldsim.ModelError, match="units: cannot convert"):
        S.play_spec(foreign, "filament")


@pytest.mark.parametrize("tol, message", [
    ({"process": "wood"}, "tolerances.process: unknown process 'wood'"),
    ({"hinge": {"play": 1}}, "tolerances.hinge.play: unknown key"),
    ({"hinge": {"play_deg": -1}}, "tolerances.hinge.play_deg: must be non-negative"),
    ({"hinge": {"tilt_deg": [1, 2, 3]}}, r"tolerances.hinge.tilt_deg: must be a number or \[across, normal\]"),
    ({"hinges": [{"play_deg": 1}]}, r"tolerances.hinges\[0\].hinge: missing"),
    ({"hinges": [{"hinge": 9, "axial": 1}]}, r"tolerances.hinges\[0\].hinge: must be an index in 0..4"),
    ({"hinges": [{"hinge": 1}, {"hinge": 1}]}, r"tolerances.hinges\[1\].hinge: hinge 1 is listed twice"),
    ({"couplings": [{"coupling": 0, "backlash_deg": 1, "backlash": 0.1}]},
     r"tolerances.couplings\[0\]: give backlash_deg or backlash"),
    ({"coupling": {"pitch_radius": 0}}, "tolerances.coupling.pitch_radius: must be positive"),
    ({"clearance": True}, "tolerances.clearance: must be a finite number"),
    ([], "tolerances: must be an object"),
])
def test_bad_tolerances_are_rejected_naming_the_field(tmp_path, tol, message):
    doc, _, _ = geared_cube()
    doc["tolerances"] = tol
    with pytest.raises(foldsim.ModelError, match=message) as err:
        foldsim.load(write_doc(tmp_path, doc))
    assert str(err.value).startswith(str(tmp_path))


def test_old_files_stay_valid_and_tolerances_survive_a_save(tmp_path):
    doc, _, _ = geared_cube()
    assert foldsim.load(write_doc(tmp_path, doc)).extras == {}
    doc["tolerances"] = {"process": "filament", "hinges": [{"hinge": 2, "play_deg": 0.5}]}
    mech = foldsim.load(write_doc(tmp_path, doc))
    foldsim.save(mech, tmp_path / "again.mech.json")
    again = foldsim.load(tmp_path / "again.mech.json")
    assert again.extras["tolerances"] == doc["tolerances"]
    np.testing.assert_array_equal(S.play_spec(again).hinge, S.play_spec(mech).hinge)


def test_tolerances_for_a_cycle_coupling_are_not_counted():
    # A second coupling between the same two hinges closes a cycle; the breadth-first
    # mesh tree keeps the first, so the second's backlash moves nothing.
    mech = strip(3, closed_deg=[20.0, 40.0], couplings=[Coupling((0, 1), 2.0), Coupling((1, 0), 0.5)])
    np.testing.assert_array_equal(S.backlash_matrix(mech), [[0, 0], [1, 0]])


# ---------------------------------------------------------------- comparing candidates


def test_compare_reports_chains_and_gaps_of_each_candidate():
    from foldsim import solids

    cube = solids.cube(40.0)
    graph = face_adjacency(cube)
    # A BFS net from face 0, and a net that is a long path of faces (Hamiltonian path
    # found by networkx over the face graph's simple paths).
    bfs = [(int(a), int(b)) for a, b in nx.bfs_edges(graph, 0)]
    path = next(p for p in nx.all_simple_paths(graph, 0, [f for f in range(6) if f != 0]) if len(p) == 6)
    chain = list(itertools.pairwise(path))
    mechs = []
    for hinges in (bfs, chain):
        m0 = build_mechanism(cube.vertices, cube.faces, hinges)
        mechs.append(build_mechanism(cube.vertices, cube.faces, hinges, couplings=chain_couplings(hinges, m0.closed_angles)))
    rows = S.compare(mechs, names=["bfs", "path"], process="filament", samples=2000, seed=4)
    for row, hinges, mech in zip(rows, (bfs, chain), mechs):
        tree = nx.Graph(hinges)
        assert row["longest_hinge_chain"] == nx.diameter(tree)          # networkx
        # Meshes from the drive to the farthest hinge: networkx over the coupling graph.
        gears = nx.Graph([c.hinges for c in mech.couplings])
        assert row["longest_gear_chain"] == max(nx.shortest_path_length(gears, mech.drive).values())
        alone = S.stackup(mech, S.play_spec(mech, "filament"), samples=2000, seed=4, times=(1.0,))
        assert row["p95_gap"] == alone.p95_gap
    assert rows[1]["longest_hinge_chain"] == 5
    text = S.format_comparison(rows)
    assert "bfs" in text and "path" in text


# ---------------------------------------------------------------- the command line


def tolerant_cube(tmp_path, process="filament"):
    doc, _, _ = geared_cube()
    doc["vertices"] = [[40.0 * x for x in v] for v in doc["vertices"]]
    doc["tolerances"] = {"process": process}
    return write_doc(tmp_path, doc)


def test_stackup_command_prints_a_json_report(tmp_path, capsys):
    path = tolerant_cube(tmp_path)
    assert main(["stackup", str(path), "--samples", "300", "--seed", "3", "--json", "--t", "0.5,1"]) == 0
    report = json.loads(capsys.readouterr().out)
    assert report["samples"] == 300 and report["seed"] == 3 and report["process"] == "filament"
    assert [m["t"] for m in report["motion"]] == [0.5, 1.0]
    assert len(report["edges"]) == 7 and len(report["panels"]) == 6
    mech = foldsim.load(path)
    direct = S.stackup(mech, samples=300, seed=3, times=(0.5, 1.0))
    assert report["p95_gap"] == direct.p95_gap
    for edge in report["edges"]:
        assert edge["median"] <= edge["p95"] <= edge["max"]


def test_stackup_command_text_and_comparison(tmp_path, capsys):
    a = tolerant_cube(tmp_path)
    assert main(["stackup", str(a), "--samples", "200", "--compare", str(a), "--process", "machined-metal"]) == 0
    out = capsys.readouterr().out
    assert "closure (t = 1)" in out and "tighten first" in out and "side by side" in out
    assert "process machined-metal" in out


@pytest.mark.parametrize("argv, message", [
    (["--process", "wood"], "--process: unknown process"),
    (["--samples", "0"], "--samples: must be a positive integer"),
    (["--t", "0.5,x"], "--t: must be comma-separated numbers"),
    (["--t", "2"], r"--t: drive values must lie in \[-1, 1\]"),
])
def test_stackup_command_rejects_bad_options(tmp_path, capsys, argv, message):
    assert main(["stackup", str(tolerant_cube(tmp_path))] + argv) == 2
    assert re.search(message, capsys.readouterr().err)


def test_stackup_command_without_tolerances_asks_for_a_process(tmp_path, capsys):
    path = write_doc(tmp_path, cube_document())
    assert main(["stackup", str(path), "--samples", "10"]) == 2
    assert "name a process" in capsys.readouterr().err


def test_check_play_limit_passes_and_fails(tmp_path, capsys):
    path = tolerant_cube(tmp_path)
    mech = foldsim.load(path)
    p95 = S.stackup(mech, samples=400, seed=0, times=(1.0,)).p95_gap
    assert main(["check", str(path), "--json", "--play-p95-limit", str(2 * p95), "--samples", "400"]) == 0
    report = json.loads(capsys.readouterr().out)
    assert report["ok"] and report["play"]["p95_gap"] == p95 and report["play"]["ok"]
    assert main(["check", str(path), "--json", "--play-p95-limit", str(0.5 * p95), "--samples", "400"]) == 1
    report = json.loads(capsys.readouterr().out)
    assert not report["ok"] and not report["play"]["ok"]
    assert any("95th-percentile closure gap" in p for p in report["problems"])
    assert main(["check", str(path), "--play-p95-limit", str(0.5 * p95), "--samples", "400"]) == 1
    assert "OVER" in capsys.readouterr().out
    # Without the option the report is as before: no play key.
    assert main(["check", str(path), "--json"]) == 0
    assert "play" not in json.loads(capsys.readouterr().out)


@pytest.mark.parametrize("argv, message", [
    (["--process", "filament"], "--process: only used by the play check"),
    (["--play-p95-limit", "-1"], "--play-p95-limit: must be a non-negative length"),
    (["--play-p95-limit", "1", "--process", "wood"], "--process: unknown process"),
])
def test_check_play_options_are_validated(tmp_path, capsys, argv, message):
    assert main(["check", str(tolerant_cube(tmp_path))] + argv) == 2
    assert message in capsys.readouterr().err
