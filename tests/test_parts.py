"""Part types: hand-counted cases, mirror images, and invariance under relabelling.

The expected groupings are worked out by hand from the pictures described beside
each test; invariance is checked by renumbering faces, vertices and hinges (and
turning each face's vertex list) and by moving the input rigidly.
"""

import numpy as np
import pytest

from foldsim import solids
from foldsim.io.mechanism_json import from_document
from foldsim.layout import gear_layout
from foldsim.model import Coupling, build_mechanism
from foldsim.nets import face_graph, min_diameter_net
from foldsim.parts import part_types

from helpers import built_in_solids, cube_document, moved


def as_sets(groups):
    return sorted(sorted(g) for g in groups)


def test_cube_cross_net_without_gears():
    mech = from_document(cube_document())
    # Hand count. Bottom (0): four hinges to children. Front, right, left (1, 2, 4):
    # a hinge to the parent and three cut edges. Top (5): the same, a hinge to its
    # parent (the back) and three cut edges. Back (3): hinge to the parent opposite a
    # hinge to a child, two cut edges. All squares, every edge closing at 90°.
    assert part_types(mech) == [[0], [1, 2, 4, 5], [3]]


def geared_cube():
    poly = solids.cube()
    choice = min_diameter_net(face_graph(poly.faces))
    plain = build_mechanism(poly.vertices, poly.faces, choice.hinges, root=choice.root)
    layout = gear_layout(plain)
    return build_mechanism(poly.vertices, poly.faces, choice.hinges, root=choice.root,
                           couplings=layout.couplings(), drive=layout.drive), layout


def test_cube_min_diameter_net_with_gears():
    mech, layout = geared_cube()
    # The net is a cross (diameter 3): the root with four sides, the top on one side S.
    # The drive is S's hinge; on the root it gears two bevels (sides B1, B2 next to S)
    # and one spur (side P opposite S), and on S one spur to the top T.
    root = mech.root
    s = mech.child[layout.drive]
    top = next(int(c) for c, p in zip(mech.child, mech.parent) if p == s)
    bevel_sides = sorted(int(mech.child[p.hinges[1]]) for p in layout.pairs if p.kind == "bevel")
    spur_side = next(int(mech.child[p.hinges[1]]) for p in layout.pairs
                     if p.kind == "spur" and p.face == root)
    assert len(bevel_sides) == 2 and layout.chain == 1
    # Hand count: the root carries three pairs; S holds the drive gear and carries a
    # pair; B1 and B2 each hold a bevel gear at one end of their hinge, at mirrored
    # ends (one part with mirror images allowed); P and T each hold a spur gear
    # centred on their hinge with three cut edges: one part.
    want = [[root], [s], bevel_sides, sorted([spur_side, top])]
    assert as_sets(part_types(mech)) == as_sets(want)
    # Without mirror images B1 and B2 are two parts.
    want_rotations = [[root], [s], bevel_sides[:1], bevel_sides[1:], sorted([spur_side, top])]
    assert as_sets(part_types(mech, mirror=False)) == as_sets(want_rotations)


def strip(closed, couplings=()):
    """Three unit squares in a row, the middle one the root; hinges to the left and right."""
    pts = [(x, y, 0.0) for y in (0.0, 1.0) for x in range(4)]
    return build_mechanism(pts, [[0, 1, 5, 4], [1, 2, 6, 5], [2, 3, 7, 6]], [(1, 0), (1, 2)], root=1,
                           state="flat", closed_angles=np.radians(closed), couplings=couplings)


def test_gear_ratio_tells_parts_apart():
    # Hand check: the two end squares are turned copies of each other (a half turn about
    # the middle); geared 1:1 they hold the same gear, geared 2:1 they do not.
    assert part_types(strip([90, 90], [Coupling((0, 1), 1.0)])) == [[0, 2], [1]]
    assert part_types(strip([45, 90], [Coupling((0, 1), 2.0)])) == [[0], [1], [2]]
    # the same ratio either way round is the same pair of gears
    assert part_types(strip([90, 90], [Coupling((1, 0), 1.0)])) == [[0, 2], [1]]


def test_closing_angle_tells_parts_apart():
    # identical squares whose hinges close at different angles need different stops
    assert part_types(strip([90, 90])) == [[0, 2], [1]]
    assert part_types(strip([90, 60])) == [[0], [1], [2]]


def mirrored_pair(left, right=None):
    """A unit-square root with a panel on its left edge and the mirror image on its right.

    ``left`` lists the left panel's extra corners (x <= 0) after (0, 1) and before
    (0, 0), counter-clockwise; the right panel is its reflection in x = 1/2 unless
    ``right`` is given.
    """
    left = [np.array(p, float) for p in left]
    right = [np.array([1.0 - x, y]) for x, y in left[::-1]] if right is None else [
        np.array(p, float) for p in right]
    pts = [(0, 0), (1, 0), (1, 1), (0, 1)] + [tuple(p) for p in left] + [tuple(p) for p in right]
    n_left = len(left)
    left_face = [0, 3] + list(range(4, 4 + n_left))
    right_face = [2, 1] + list(range(4 + n_left, 4 + n_left + len(right)))
    pts = [(x, y, 0.0) for x, y in pts]
    return build_mechanism(pts, [[0, 1, 2, 3], left_face, right_face], [(0, 1), (0, 2)], state="flat",
                           closed_angles=np.radians([90.0, 90.0]))


def test_mirror_images_are_one_part_only_when_reflections_count():
    # A right trapezoid on the left edge, (0,0) (0,1) (-1,1) (-0.5,0) walking clockwise
    # from the hinge; its reflection in x = 1/2 on the right edge. The trapezoid has
    # no mirror symmetry (parallel sides 0.5 and 1, one leg square to them).
    mech = mirrored_pair([(-1.0, 1.0), (-0.5, 0.0)])
    assert part_types(mech) == [[0], [1, 2]]
    assert part_types(mech, mirror=False) == [[0], [1], [2]]


def test_a_mirror_symmetric_panel_needs_no_reflection():
    # An isosceles trapezoid is its own mirror image, so its reflection is also a turned
    # copy: one part either way (hand check).
    mech = mirrored_pair([(-1.0, 1.25), (-1.0, -0.25)])
    assert part_types(mech) == [[0], [1, 2]]
    assert part_types(mech, mirror=False) == [[0], [1, 2]]


def test_a_reflection_that_is_not_a_congruence_is_no_match():
    # the right panel is the trapezoid turned over *and* stretched: never the same part
    mech = mirrored_pair([(-1.0, 1.0), (-0.5, 0.0)], right=[(1.5, 0.0), (2.2, 1.0)])
    assert part_types(mech) == [[0], [1], [2]]


# ---------------------------------------------------------------- relabelling

def geared(poly):
    choice = min_diameter_net(face_graph(poly.faces))
    plain = build_mechanism(poly.vertices, poly.faces, choice.hinges, root=choice.root)
    layout = gear_layout(plain)
    return build_mechanism(poly.vertices, poly.faces, choice.hinges, root=choice.root,
                           couplings=layout.couplings(), drive=layout.drive)


def relabelled(mech, seed):
    """The same mechanism with faces, vertices and hinges renumbered at random.

    Each face's vertex list is also turned to start elsewhere, each hinge lists its
    faces in random order, and some couplings are written the other way round (with
    the inverse ratio). Returns the new mechanism and the new index of each old face.
    """
    rng = np.random.default_rng(seed)
    f_new = rng.permutation(mech.n_faces)  # old face -> new face
    v_new = rng.permutation(len(mech.vertices))
    h_new = rng.permutation(mech.n_hinges)
    vertices = np.empty_like(mech.vertices)
    vertices[v_new] = mech.vertices
    faces = [None] * mech.n_faces
    for f, face in enumerate(mech.faces):
        faces[f_new[f]] = list(np.roll(v_new[face], rng.integers(len(face))))
    hinges = [None] * mech.n_hinges
    for h, (a, b) in enumerate(mech.hinge_faces.tolist()):
        pair = [int(f_new[a]), int(f_new[b])]
        hinges[h_new[h]] = pair[::-1] if rng.random() < 0.5 else pair
    couplings = []
    for c in mech.couplings:
        i, j = (int(h_new[h]) for h in c.hinges)
        couplings.append(Coupling((j, i), 1.0 / c.ratio) if rng.random() < 0.5 else Coupling((i, j), c.ratio))
    order = rng.permutation(len(couplings))
    closed = None if mech.state == "closed" else mech.closed_angles[np.argsort(h_new)]
    new = build_mechanism(vertices, faces, hinges, root=int(f_new[mech.root]), drive=int(h_new[mech.drive]),
                          couplings=[couplings[k] for k in order], state=mech.state, closed_angles=closed)
    return new, f_new


@pytest.mark.parametrize("name", sorted(built_in_solids()))
def test_part_types_do_not_depend_on_numbering(name):
    mech = geared(built_in_solids()[name]())
    groups = part_types(mech)
    for seed in (1, 2):
        new, f_new = relabelled(mech, seed)
        mapped = as_sets([[int(f_new[f]) for f in g] for g in groups])
        assert as_sets(part_types(new)) == mapped
        assert as_sets(part_types(new, mirror=False)) == as_sets(
            [[int(f_new[f]) for f in g] for g in part_types(mech, mirror=False)])


@pytest.mark.parametrize("name", ["cube", "dodecahedron", "truncated-tetrahedron", "geodesic:1"])
def test_part_types_do_not_depend_on_where_the_model_is(name):
    poly = built_in_solids()[name]()
    here = part_types(geared(poly))
    there = part_types(geared(moved(poly, seed=7, shift=(3.0, -1.0, 2.0))))
    # the same net is chosen (it depends on the face graph only), and a rigid motion
    # keeps every length and angle (hand check)
    assert there == here


def test_a_mirrored_model_has_as_many_part_types():
    poly = solids.truncated_tetrahedron()
    mech = geared(poly)
    # reflect through the plane x = 0 and reverse every face to keep them outward
    mirror = build_mechanism(poly.vertices * [-1.0, 1.0, 1.0], [f[::-1] for f in poly.faces],
                             mech.hinge_faces, root=mech.root, drive=mech.drive, couplings=mech.couplings)
    assert part_types(mirror) == part_types(mech)
    assert part_types(mirror, mirror=False) == part_types(mech, mirror=False)
