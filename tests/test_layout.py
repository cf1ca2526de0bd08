"""Gear layout: bevel cones, pair classification, shortest chains, teeth and their gaps.

Reference values: the bevel pitch-cone relations and hand checks of ../shared
REFERENCES.md (ISO 23509, memory); polygon angles by elementary geometry; chain
lengths against a brute force over every spanning tree of a candidate graph built
here from vertex ids and numpy; teeth against a brute-force search; closure gaps
against faces turned with scipy's Rotation (tests/helpers.py).
"""

import itertools

import networkx as nx
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.spatial.transform import Rotation

from foldsim import solids
from foldsim.errors import ModelError
from foldsim.gearing import fold_schedule
from foldsim.layout import (bevel_cones, closure_gap, gear_candidates, gear_layout, teeth_pairs,
                            toothed_couplings)
from foldsim.model import Coupling, build_mechanism
from foldsim.nets import bfs_net, face_graph, min_diameter_net

from helpers import face_adjacency, turn_subtrees

PROPERTY = settings(derandomize=True, max_examples=60, deadline=None)
PHI = (1 + 5 ** 0.5) / 2


def net_mechanism(spec, net="min-diameter", couplings=()):
    poly = solids.builtin(spec)
    graph = face_graph(poly.faces)
    if net == "min-diameter":
        choice = min_diameter_net(graph)
        hinges, root = choice.hinges, choice.root
    else:
        hinges, root = bfs_net(graph, 0), 0
    return poly, build_mechanism(poly.vertices, poly.faces, hinges, root=root, couplings=couplings)


# ---------------------------------------------------------------- bevel pitch cones

def test_bevel_cones_right_angle_20_40():
    c = bevel_cones(np.radians(90.0), 20, 40, module=2.0)
    # REFERENCES.md: Σ = 90° gives tan δ1 = z1/z2; z = 20/40 -> δ1 = 26.56505° (ISO 23509, memory)
    np.testing.assert_allclose(np.degrees(c.delta1), 26.56505, rtol=0, atol=1e-5)
    np.testing.assert_allclose(np.degrees(c.delta2), 90.0 - 26.56505, rtol=0, atol=1e-5)
    # R = d2 / (2 sin δ2), d2 = m z2 = 80; at Σ = 90° that is (m/2) sqrt(z1² + z2²) (hand check)
    np.testing.assert_allclose(c.cone_distance, np.hypot(20.0, 40.0), rtol=1e-12)


@pytest.mark.parametrize("shaft_deg", [30.0, 60.0, 90.0, 108.0, 120.0, 150.0])
def test_equal_teeth_split_the_shaft_angle(shaft_deg):
    c = bevel_cones(np.radians(shaft_deg), 17, 17)
    # REFERENCES.md: equal teeth give δ1 = δ2 = Σ/2
    np.testing.assert_allclose(np.degrees([c.delta1, c.delta2]), [shaft_deg / 2] * 2, rtol=0, atol=1e-12)
    assert c.cone_distance is None


def test_crown_gear_at_120_degrees():
    c = bevel_cones(np.radians(120.0), 15, 30)
    # REFERENCES.md: Σ = 120°, z2/z1 = 2 gives δ2 = 90° (a crown gear), so δ1 = 30°
    np.testing.assert_allclose(np.degrees([c.delta1, c.delta2]), [30.0, 90.0], rtol=0, atol=1e-12)


@PROPERTY
@given(st.floats(5.0, 175.0), st.integers(5, 200), st.integers(5, 200), st.floats(0.1, 10.0))
def test_pitch_circles_meet_on_the_cone(shaft_deg, z1, z2, module):
    c = bevel_cones(np.radians(shaft_deg), z1, z2, module=module)
    # the cones share the apex and the contact line: δ1 + δ2 = Σ, and each pitch radius
    # m z / 2 equals R sin δ (standard bevel geometry, ISO 23509, memory)
    np.testing.assert_allclose(c.delta1 + c.delta2, np.radians(shaft_deg), rtol=0, atol=1e-12)
    np.testing.assert_allclose(c.cone_distance * np.sin([c.delta1, c.delta2]),
                               [module * z1 / 2, module * z2 / 2], rtol=1e-9)


@pytest.mark.parametrize("args, field", [((0.0, 20, 40), "shaft_angle"), ((np.pi, 20, 40), "shaft_angle"),
                                         ((1.0, -3, 40), "z1"), ((1.0, 20, 0), "z2")])
def test_bevel_cones_rejects_bad_input(args, field):
    with pytest.raises(ModelError, match=f"^{field}: "):
        bevel_cones(*args)


def test_bevel_cones_rejects_a_bad_module():
    with pytest.raises(ModelError, match="^module: "):
        bevel_cones(1.0, 20, 40, module=-1.0)


# ---------------------------------------------------------------- classification

def edge_ids(poly, a, b):
    """Vertex ids of the edge faces a and b share (from the face lists)."""
    return set(poly.faces[a].tolist()) & set(poly.faces[b].tolist())


def test_cube_pairs_meeting_at_a_corner_are_right_angle_bevels():
    poly, mech = net_mechanism("cube")
    candidates = gear_candidates(mech)
    assert len(candidates) > 0
    for p in candidates:
        ei = edge_ids(poly, *mech.hinge_faces[p.hinges[0]])
        ej = edge_ids(poly, *mech.hinge_faces[p.hinges[1]])
        carrier = set(mech.hinge_faces[p.hinges[0]].tolist()) & set(mech.hinge_faces[p.hinges[1]].tolist())
        assert carrier == {p.face}
        # every fold closes at 90° (REFERENCES.md: cube dihedral 90°), so every ratio is 1
        assert p.ratio == pytest.approx(1.0, abs=1e-12)
        if ei & ej:
            # edges of a square meeting at a corner: a bevel pair at the corner, at the
            # square's 90° interior angle (elementary geometry)
            assert p.kind == "bevel"
            np.testing.assert_allclose(np.degrees(p.shaft_angle), 90.0, rtol=0, atol=1e-9)
            corner = list(poly.faces[p.face]).index((ei & ej).pop())
            np.testing.assert_allclose(p.apex, mech.flat_faces[p.face][corner], rtol=0, atol=1e-12)
            assert p.apex_reach == 0.0
            cones = p.cones()
            # equal teeth split the shaft angle (REFERENCES.md)
            np.testing.assert_allclose(np.degrees([cones.delta1, cones.delta2]), [45.0, 45.0],
                                       rtol=0, atol=1e-9)
        else:
            # opposite sides of a unit square: parallel, 1 apart, turning alike -> external
            assert p.kind == "spur"
            np.testing.assert_allclose(p.centre_distance, 1.0, rtol=1e-12)
            assert p.mesh == "external"


def test_bevel_apex_is_the_shared_corner_in_the_flat_layout():
    poly, mech = net_mechanism("icosahedron")
    for p in gear_candidates(mech):
        assert p.kind == "bevel"  # every pair of edges of a triangle meets at a corner
        f = p.face
        ei = edge_ids(poly, *mech.hinge_faces[p.hinges[0]])
        ej = edge_ids(poly, *mech.hinge_faces[p.hinges[1]])
        corner = list(poly.faces[f]).index((ei & ej).pop())
        np.testing.assert_allclose(p.apex, mech.flat_faces[f][corner], rtol=0, atol=1e-12)
        # equilateral triangles: 60° (elementary geometry)
        np.testing.assert_allclose(np.degrees(p.shaft_angle), 60.0, rtol=0, atol=1e-9)


def test_pentagon_pairs_are_corner_bevels_or_remote_bevels():
    _, mech = net_mechanism("dodecahedron")
    kinds = set()
    for p in gear_candidates(mech):
        kinds.add(p.kind)
        if p.kind == "bevel":
            # a regular pentagon's interior angle is 108° (elementary geometry)
            np.testing.assert_allclose(np.degrees(p.shaft_angle), 108.0, rtol=0, atol=1e-9)
        else:
            # non-adjacent sides of a regular pentagon meet at a pentagram point: 36°,
            # at distance φ × edge beyond both sides (the golden triangle; elementary geometry)
            assert p.kind == "remote-bevel"
            np.testing.assert_allclose(np.degrees(p.shaft_angle), 36.0, rtol=0, atol=1e-9)
            np.testing.assert_allclose(p.apex_reach, PHI, rtol=1e-9)
    assert kinds == {"bevel", "remote-bevel"}


def test_hexagon_pairs():
    poly, mech = net_mechanism("truncated-tetrahedron")
    seen = {}
    for p in gear_candidates(mech):
        if len(poly.faces[p.face]) != 6:
            continue
        seen.setdefault(p.kind, set()).add(round(float(np.degrees(p.shaft_angle or 0.0)), 9))
        if p.kind == "spur":
            # opposite sides of a regular hexagon of edge 1 are sqrt(3) apart (elementary geometry)
            np.testing.assert_allclose(p.centre_distance, np.sqrt(3.0), rtol=1e-12)
    # interior angle 120°; sides two apart meet at 60° outside the hexagon (elementary geometry)
    assert seen == {"bevel": {120.0}, "remote-bevel": {60.0}, "spur": {0.0}}


def flat_corner(closed, interior_deg=60.0):
    """A flat root triangle (or wedge) with square panels on two edges meeting at a corner.

    The root is a triangle with corner angle ``interior_deg`` at the origin between
    its edges along x and along the direction at that angle; each of those edges
    carries a unit square panel outside the triangle.
    """
    a = np.radians(interior_deg)
    u = np.array([1.0, 0.0, 0.0])
    w = np.array([np.cos(a), np.sin(a), 0.0])
    o = np.zeros(3)
    down = np.array([0.0, -1.0, 0.0])
    beyond = np.cross(np.array([0.0, 0.0, 1.0]), w)  # right of the direction w: outside the triangle
    pts = np.array([o, u, w, u + down, o + down, w + beyond, o + beyond])
    faces = [[0, 1, 2], [0, 4, 3, 1], [0, 2, 5, 6]]
    return build_mechanism(pts, faces, [(0, 1), (0, 2)], state="flat", closed_angles=closed)


def contact_directions(mech, pair, rates):
    """In-plane directions from the apex along which both gears' points move alike.

    Each panel turns about its hinge line relative to the root (the carrier) by its
    rate, right-handed about the edge as it runs in the root (docs/format.md), using
    scipy's Rotation; a point at the apex + g moves out of the plane by v·n. Returns
    the unit directions g (two opposite ones) where gear i's and gear j's points move
    the same.
    """
    carrier = mech.flat_faces[pair.face]
    n = np.array([0.0, 0.0, 1.0])
    lines = []
    for h in pair.hinges:
        ring = list(mech.faces[pair.face])
        other = set(mech.faces[mech.child[h]].tolist())
        k = next(i for i in range(len(ring)) if ring[i] in other and ring[(i + 1) % len(ring)] in other)
        a, b = carrier[k], carrier[(k + 1) % len(ring)]
        lines.append((a, (b - a) / np.linalg.norm(b - a)))

    def lift(g, line, rate):
        a, d = line
        p = pair.apex + g
        eps = 1e-6
        moved = Rotation.from_rotvec(eps * rate * d).apply(p - a) + a
        return (moved - p) @ n / eps

    phis = np.linspace(0, 2 * np.pi, 3601)
    diff = np.array([lift(np.array([np.cos(t), np.sin(t), 0.0]), lines[0], rates[0])
                     - lift(np.array([np.cos(t), np.sin(t), 0.0]), lines[1], rates[1]) for t in phis])
    roots = np.flatnonzero(np.sign(diff[:-1]) != np.sign(diff[1:]))
    out = []
    for r in roots:
        t = phis[r] - diff[r] * (phis[r + 1] - phis[r]) / (diff[r + 1] - diff[r])
        out.append(np.array([np.cos(t), np.sin(t), 0.0]))
    return out, [d for _, d in lines]


def angle(u, v):
    return float(np.degrees(np.arccos(np.clip(np.dot(u, v), -1, 1))))


@pytest.mark.parametrize("closed_deg, interior", [((50.0, 100.0), 60.0), ((50.0, -100.0), 60.0),
                                                  ((80.0, 40.0), 108.0), ((80.0, -40.0), 108.0)])
def test_shaft_angle_is_the_wedge_where_the_gears_roll(closed_deg, interior):
    mech = flat_corner(np.radians(closed_deg), interior)
    (pair,) = gear_candidates(mech)
    assert pair.kind == "bevel"
    ratio = closed_deg[1] / closed_deg[0]
    # the shaft angle is the carrier's interior angle for folds the same way, the
    # supplement for opposite folds (module docstring; checked by rolling below)
    want = interior if ratio > 0 else 180.0 - interior
    np.testing.assert_allclose(np.degrees(pair.shaft_angle), want, rtol=0, atol=1e-9)
    contacts, axes = contact_directions(mech, pair, np.radians(closed_deg))
    assert len(contacts) == 2
    cones = pair.cones()
    # Rolling cones touch along the line where the gears' points move alike: it lies
    # between two axis rays that are Σ apart, δi from axis i and δj from axis j.
    found = False
    for g in contacts:
        for si, sj in itertools.product((1, -1), repeat=2):
            ui, uj = si * axes[0], sj * axes[1]
            if abs(angle(ui, g) + angle(g, uj) - angle(ui, uj)) < 1e-6 and abs(
                    angle(ui, uj) - np.degrees(pair.shaft_angle)) < 1e-6:
                np.testing.assert_allclose([angle(ui, g), angle(g, uj)],
                                           np.degrees([cones.delta1, cones.delta2]), rtol=0, atol=1e-3)
                found = True
    assert found


def strip(closed):
    """Flat row of unit squares along x; hinge k joins squares k and k+1."""
    n = len(closed) + 1
    pts = [(float(x), y, 0.0) for y in (0.0, 1.0) for x in range(n + 1)]
    faces = [[k, k + 1, n + 2 + k, n + 1 + k] for k in range(n)]
    return build_mechanism(pts, faces, [(k, k + 1) for k in range(n - 1)], state="flat", closed_angles=closed)


def test_spur_mesh_follows_the_sense_of_turning():
    same, opposite = strip([0.5, 1.0]), strip([0.5, -1.0])
    (p,) = gear_candidates(same)
    (q,) = gear_candidates(opposite)
    # opposite sides of the middle square, 1 apart; alike -> the contact point lies
    # between the axes (external mesh), opposite -> outside them (internal, or an idler)
    assert (p.kind, p.mesh, q.kind, q.mesh) == ("spur", "external", "spur", "internal")
    np.testing.assert_allclose([p.centre_distance, q.centre_distance], [1.0, 1.0], rtol=1e-12)
    assert (p.ratio, q.ratio) == (2.0, -2.0)


def u_shape():
    """A flat U-shaped root whose two top edges lie on one line, each with a square panel,
    plus a square panel on its right side.

    Root (face 0): (0,0) (3,0) (3,2) (2,2) (2,1) (1,1) (1,2) (0,2). Top edges
    (3,2)-(2,2) and (1,2)-(0,2) are collinear (coaxial hinges); the right side meets
    the right top edge at a corner (bevel) and the line of the left one away from it
    (a remote bevel).
    """
    pts = [(0, 0), (3, 0), (3, 2), (2, 2), (2, 1), (1, 1), (1, 2), (0, 2),
           (3, 3), (2, 3), (1, 3), (0, 3), (4, 0), (4, 2)]
    pts = [(x, y, 0.0) for x, y in pts]
    faces = [[0, 1, 2, 3, 4, 5, 6, 7], [3, 2, 8, 9], [7, 6, 10, 11], [1, 12, 13, 2]]
    return build_mechanism(pts, faces, [(0, 1), (0, 2), (0, 3)], state="flat",
                           closed_angles=np.radians([90.0, 60.0, 45.0]))


def test_coaxial_and_remote_pairs_are_classified():
    mech = u_shape()
    kinds = {p.hinges: p.kind for p in gear_candidates(mech)}
    # hand check from the drawing in u_shape's docstring
    assert kinds == {(0, 1): "coaxial", (0, 2): "bevel", (1, 2): "remote-bevel"}


def test_simple_gearing_reports_what_it_cannot_reach():
    mech = u_shape()
    layout = gear_layout(mech, kinds="simple")
    # only hinges 0 and 2 can be geared simply (bevel at (3, 2)); hinge 1 is on its own
    assert [p.hinges for p in layout.pairs] == [(0, 2)] or [p.hinges for p in layout.pairs] == [(2, 0)]
    assert (layout.unreachable, layout.dof) == ((1,), 2)
    assert all(p.kind in ("bevel", "spur") for p in layout.pairs)
    geared = build_mechanism(mech.vertices, mech.faces, mech.hinge_faces, state="flat",
                             closed_angles=mech.closed_angles, couplings=layout.couplings(),
                             drive=layout.drive)
    # the engine's own count of degrees of freedom agrees
    s = fold_schedule(geared)
    assert (s.dof, s.free_hinges) == (2, (1,))


def test_auto_gearing_falls_back_to_a_remote_bevel_and_never_a_coaxial_pair():
    layout = gear_layout(u_shape())
    kinds = sorted(p.kind for p in layout.pairs)
    assert kinds == ["bevel", "remote-bevel"]
    assert (layout.unreachable, layout.dof, layout.drive, layout.chain) == ((), 1, 2, 1)


@pytest.mark.parametrize("spec", ["cube", "octahedron", "icosahedron", "prism:5", "cuboctahedron",
                                  "antiprism:4"])
def test_no_remote_bevel_where_simple_pairs_reach_everything(spec):
    _, mech = net_mechanism(spec)
    layout = gear_layout(mech)
    assert layout.dof == 1
    assert {p.kind for p in layout.pairs} <= {"bevel", "spur"}


def test_dodecahedron_needs_remote_bevels():
    _, mech = net_mechanism("dodecahedron")
    simple = gear_layout(mech, kinds="simple")
    # every ring-two face of a face-centred dodecahedron net hangs off an edge of its
    # pentagon that is not next to the pentagon's own hinge (face adjacency by hand)
    assert simple.dof > 1 and len(simple.unreachable) > 0
    auto = gear_layout(mech)
    assert auto.dof == 1 and auto.unreachable == ()
    assert "remote-bevel" in {p.kind for p in auto.pairs}


def test_a_flat_hinge_is_rejected():
    mech = strip([0.5, 0.0])
    with pytest.raises(ModelError, match=r"^hinges\[1\]: "):
        gear_layout(mech)


def test_bad_kinds_are_rejected():
    with pytest.raises(ModelError, match="^gears: "):
        gear_layout(strip([0.5, 1.0]), kinds="fancy")


# ---------------------------------------------------------------- shortest chains

def reference_candidates(poly, mech, allowed):
    """Candidate graph over hinges, built from vertex ids and numpy only.

    Two hinges are joined when they border a common face and their edges share a
    vertex (bevel) or are parallel (spur); with ``allowed`` containing "remote", also
    when the edges' lines cross elsewhere.
    """
    graph = nx.Graph()
    graph.add_nodes_from(range(mech.n_hinges))
    edges = [edge_ids(poly, a, b) for a, b in mech.hinge_faces.tolist()]
    for i, j in itertools.combinations(range(mech.n_hinges), 2):
        if not set(mech.hinge_faces[i].tolist()) & set(mech.hinge_faces[j].tolist()):
            continue
        pi, pj = (poly.vertices[sorted(e)] for e in (edges[i], edges[j]))
        di, dj = pi[1] - pi[0], pj[1] - pj[0]
        parallel = np.linalg.norm(np.cross(di, dj)) < 1e-9 * np.linalg.norm(di) * np.linalg.norm(dj)
        if edges[i] & edges[j] or parallel or "remote" in allowed:
            graph.add_edge(i, j)
    return graph


def brute_force_chain(graph):
    """Smallest longest chain over every spanning tree and every drive hinge."""
    best = None
    for tree in nx.SpanningTreeIterator(graph):
        depth = min(max(nx.single_source_shortest_path_length(tree, d).values()) for d in tree)
        best = depth if best is None else min(best, depth)
    return best


@pytest.mark.parametrize("spec, net, allowed", [
    ("tetrahedron", "min-diameter", ()), ("cube", "min-diameter", ()), ("cube", "bfs", ()),
    ("octahedron", "min-diameter", ()), ("prism:5", "min-diameter", ()), ("prism:6", "bfs", ()),
    ("dodecahedron", "min-diameter", ("remote",))])
def test_longest_chain_is_minimal(spec, net, allowed):
    poly, mech = net_mechanism(spec, net)
    graph = reference_candidates(poly, mech, allowed)
    layout = gear_layout(mech)
    assert layout.dof == 1
    # the chosen pairs are a spanning tree of the reference candidate graph ...
    tree = nx.Graph([p.hinges for p in layout.pairs])
    tree.add_nodes_from(range(mech.n_hinges))
    assert nx.is_tree(tree)
    assert all(graph.has_edge(*p.hinges) for p in layout.pairs)
    # ... whose depth from the drive is the least any spanning tree and drive allow
    assert layout.chain == brute_force_chain(graph)
    depth = nx.single_source_shortest_path_length(tree, layout.drive)
    assert layout.chain == max(depth.values())
    np.testing.assert_array_equal(layout.depth, [depth[h] for h in range(mech.n_hinges)])


def test_ratios_close_every_hinge_together():
    poly, mech = net_mechanism("truncated-tetrahedron")
    layout = gear_layout(mech)
    # REFERENCES.md: truncated tetrahedron dihedrals 109.4712° (tri–hex) and 70.5288°
    # (hex–hex); a hinge closes at 180° minus its dihedral
    tri_hex, hex_hex = np.pi - np.arccos(-1 / 3), np.pi - np.arccos(1 / 3)

    def closing(h):
        sizes = sorted(len(poly.faces[f]) for f in mech.hinge_faces[h])
        return tri_hex if sizes == [3, 6] else hex_hex

    for p in layout.pairs:
        i, j = p.hinges
        np.testing.assert_allclose(p.ratio, closing(j) / closing(i), rtol=1e-12)


# ---------------------------------------------------------------- teeth

def brute_teeth(ratio, zmin, zmax):
    best = None
    for zi in range(zmin, zmax + 1):
        for zj in range(zmin, zmax + 1):
            key = (abs(zi / zj - abs(ratio)), zi + zj, zi)
            best = key if best is None or key < best else best
    return best[2], best[1] - best[2]


@PROPERTY
@given(st.floats(0.05, 20.0), st.integers(1, 30), st.integers(0, 40), st.booleans())
def test_teeth_pairs_match_a_brute_force_search(ratio, zmin, span, negative):
    zmax = zmin + span
    ratio = -ratio if negative else ratio
    zi, zj, error = teeth_pairs(ratio, zmin, zmax)
    assert (zi, zj) == brute_teeth(ratio, zmin, zmax)
    np.testing.assert_allclose(error, zi / zj / abs(ratio) - 1.0, rtol=0, atol=1e-15)


def test_teeth_pairs_hand_cases():
    # 1/2 with at least 12 teeth: 12:24 exactly; 2/3 from 10..20: 10:15 (fewest teeth)
    assert teeth_pairs(0.5, 12, 40) == (12, 24, 0.0)
    assert teeth_pairs(2 / 3, 10, 20)[:2] == (10, 15)
    # a ratio beyond reach takes the extreme pair: 100 from 10..20 -> 20:10, error 2/100 - 1
    zi, zj, error = teeth_pairs(100.0, 10, 20)
    assert (zi, zj) == (20, 10)
    np.testing.assert_allclose(error, 0.02 - 1.0, rtol=1e-12)


@pytest.mark.parametrize("args", [(0.5, 0, 10), (0.5, 12, 11), (0.0, 10, 20), (np.nan, 10, 20),
                                  (0.5, 1.5, 10)])
def test_teeth_pairs_reject_bad_input(args):
    with pytest.raises(ModelError, match="^(teeth|ratio): "):
        teeth_pairs(*args)


def test_toothed_couplings_keep_a_negative_sign():
    layout = gear_layout(strip([0.5, -1.0]))
    ((coupling, teeth, error),) = toothed_couplings(layout, 10, 30)
    assert teeth == (20, 10) and error == 0.0
    assert coupling.ratio == -2.0 and coupling.teeth is None


# ---------------------------------------------------------------- closure gaps of teeth

def folded_from_flat(poly, mech, angles):
    """Face vertices after folding the flat layout by the given angles (scipy)."""
    start = [mech.flat_faces[f] for f in range(mech.n_faces)]
    return turn_subtrees(start, poly.faces, mech.hinge_faces.tolist(), mech.root, angles)


def cut_gap(poly, mech, faces_now):
    adjacency = face_adjacency(poly)
    hinged = {tuple(sorted(h)) for h in mech.hinge_faces.tolist()}
    gap = 0.0
    for a, b in adjacency.edges():
        if tuple(sorted((a, b))) in hinged:
            continue
        for v in edge_ids(poly, a, b):
            pa = faces_now[a][list(poly.faces[a]).index(v)]
            pb = faces_now[b][list(poly.faces[b]).index(v)]
            gap = max(gap, float(np.linalg.norm(pa - pb)))
    return gap


def test_one_mis_geared_leaf_opens_by_its_chord():
    poly, mech = net_mechanism("cube")
    layout = gear_layout(mech)
    leaf = max(layout.pairs, key=lambda p: p.hinges[1])
    couplings = [Coupling(p.hinges, 20 / 21, (20, 21)) if p is leaf else Coupling(p.hinges, p.ratio)
                 for p in layout.pairs]
    geared = build_mechanism(poly.vertices, poly.faces, mech.hinge_faces, root=mech.root,
                             drive=layout.drive, couplings=couplings)
    gap = closure_gap(geared)
    h = leaf.hinges[1]
    assert not any(p.hinges[0] == h for p in layout.pairs)  # nothing hangs off it
    # hand check: the leaf square stops 90°/21 short; its far corners, 1 from the hinge
    # line, are then a chord 2 sin(Δθ/2) away from where its neighbours expect them
    dtheta = np.pi / 2 / 21
    np.testing.assert_allclose(gap, 2 * np.sin(dtheta / 2), rtol=1e-9)
    # and scipy's rotations of the flat layout give the same gap
    angles = np.full(mech.n_hinges, np.pi / 2)
    angles[h] *= 20 / 21
    np.testing.assert_allclose(gap, cut_gap(poly, mech, folded_from_flat(poly, mech, angles)), rtol=1e-9)


def test_closure_gap_of_exact_ratios_is_round_off():
    _, mech = net_mechanism("icosahedron")
    layout = gear_layout(mech)
    assert closure_gap(mech, layout.couplings()) <= 1e-12 * mech.size


def test_teeth_closure_gap_matches_scipy():
    poly, mech = net_mechanism("truncated-tetrahedron")
    layout = gear_layout(mech)
    toothed = toothed_couplings(layout, 10, 25)
    assert any(abs(error) > 1e-4 for _, _, error in toothed)
    couplings = [c for c, _, _ in toothed]
    gap = closure_gap(mech, couplings)
    # angles from the drive's closing angle (REFERENCES.md dihedrals) through the teeth
    tri_hex, hex_hex = np.pi - np.arccos(-1 / 3), np.pi - np.arccos(1 / 3)

    def sizes(h):
        return sorted(len(poly.faces[f]) for f in mech.hinge_faces[h])

    angles = np.full(mech.n_hinges, np.nan)
    drive = layout.drive
    angles[drive] = tri_hex if sizes(drive) == [3, 6] else hex_hex
    for c, (zi, zj), _ in toothed:  # parents come before children
        angles[c.hinges[1]] = angles[c.hinges[0]] * zi / zj
    want = cut_gap(poly, mech, folded_from_flat(poly, mech, angles))
    assert want > 1e-4
    np.testing.assert_allclose(gap, want, rtol=1e-9)
