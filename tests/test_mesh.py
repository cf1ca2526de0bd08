"""Mesh import: files written by trimesh or by hand become the expected polygon faces,
and broken surfaces are refused with one clear line.

References: trimesh's own box and icosphere generators (an independent source of
the solids), OBJ text typed in by hand, and the built-in solids compared face by
face as sets of corner coordinates.
"""

import numpy as np
import pytest

from foldsim import solids
from foldsim.cli import main
from foldsim.errors import ModelError
from foldsim.io.mesh import load_mesh

trimesh = pytest.importorskip("trimesh")

FORMATS = ["obj", "off", "stl", "ply"]


def corner_sets(poly, digits=9):
    """Each face as a frozenset of rounded corner coordinates, plus its outward test."""
    out = set()
    centre = poly.vertices.mean(axis=0)
    for face in poly.faces:
        pts = poly.vertices[face]
        normal = np.cross(pts - pts.mean(axis=0), np.roll(pts, -1, axis=0) - pts.mean(axis=0)).sum(axis=0)
        outward = bool(normal @ (pts.mean(axis=0) - centre) > 0)
        out.add((frozenset(map(tuple, np.round(pts, digits) + 0.0)), outward, len(face)))
    return out


def write(mesh, tmp_path, name, kind):
    path = tmp_path / f"{name}.{kind}"
    mesh.export(str(path), file_type=kind)
    return path


@pytest.mark.parametrize("kind", FORMATS)
def test_a_trimesh_box_is_the_cube(tmp_path, kind):
    poly = load_mesh(write(trimesh.creation.box(extents=(1, 1, 1)), tmp_path, "box", kind))
    # twelve triangles merge into six outward squares, each the cube's (solids.cube is
    # the unit cube centred at the origin, like trimesh's box)
    assert corner_sets(poly) == corner_sets(solids.cube())
    assert all(outward for _, outward, _ in corner_sets(poly))
    assert poly.name == "box" and len(poly.vertices) == 8


@pytest.mark.parametrize("kind", FORMATS)
def test_a_trimesh_icosphere_is_the_icosahedron(tmp_path, kind):
    poly = load_mesh(write(trimesh.creation.icosphere(subdivisions=0, radius=1.0), tmp_path, "ico", kind))
    # circumradius R = a/4 sqrt(10 + 2 sqrt 5) for edge a (CRC Standard Mathematical
    # Tables, icosahedron; memory): R = 1 gives the edge
    edge = 4.0 / np.sqrt(10.0 + 2.0 * np.sqrt(5.0))
    assert corner_sets(poly, 6) == corner_sets(solids.icosahedron(edge), 6)
    assert len(poly.faces) == 20


CUBE_OBJ = """\
# a unit cube typed in by hand: quads, counter-clockwise seen from outside
v -0.5 -0.5 -0.5
v  0.5 -0.5 -0.5
v  0.5  0.5 -0.5
v -0.5  0.5 -0.5
v -0.5 -0.5  0.5
v  0.5 -0.5  0.5
v  0.5  0.5  0.5
v -0.5  0.5  0.5
f 1 4 3 2
f 5 6 7 8
f 1 2 6 5
f 2 3 7 6
f 3 4 8 7
f 4 1 5 8
"""


def test_hand_written_obj_quads(tmp_path):
    path = tmp_path / "cube.obj"
    path.write_text(CUBE_OBJ)
    assert corner_sets(load_mesh(path)) == corner_sets(solids.cube())


def test_an_inside_out_file_is_turned_outward(tmp_path):
    text = "\n".join(line if not line.startswith("f ") else "f " + " ".join(line.split()[1:][::-1])
                     for line in CUBE_OBJ.splitlines())
    path = tmp_path / "inside-out.obj"
    path.write_text(text + "\n")
    assert corner_sets(load_mesh(path)) == corner_sets(solids.cube())


def test_coplanar_triangles_merge_and_straight_edge_vertices_go(tmp_path):
    box = trimesh.creation.box(extents=(1, 1, 1)).subdivide()
    assert len(box.faces) == 48 and len(box.vertices) > 8
    poly = load_mesh(write(box, tmp_path, "fine", "stl"))
    # 48 triangles, edge midpoints and face centres in the file; six squares with
    # only the corners come back (hand check)
    assert corner_sets(poly) == corner_sets(solids.cube())
    assert len(poly.vertices) == 8


def test_a_prism_with_a_hexagon_made_of_many_triangles(tmp_path):
    ref = solids.prism(6)
    triangles = []
    for face in ref.faces:
        for k in range(1, len(face) - 1):
            triangles.append([face[0], face[k], face[k + 1]])
    mesh = trimesh.Trimesh(ref.vertices, np.array(triangles), process=False)
    poly = load_mesh(write(mesh, tmp_path, "hex", "ply"))
    # PLY stores 32-bit floats: compare to 6 digits
    assert corner_sets(poly, 6) == corner_sets(ref, 6)
    assert sorted(len(f) for f in poly.faces) == [4] * 6 + [6] * 2


def test_faces_feed_the_mechanism_builder(tmp_path):
    from foldsim.model import build_mechanism
    from foldsim.nets import bfs_net, face_graph

    poly = load_mesh(write(trimesh.creation.box(extents=(2, 3, 4)), tmp_path, "brick", "off"))
    mech = build_mechanism(poly.vertices, poly.faces, bfs_net(face_graph(poly.faces)))
    # every fold of a box closes at 90° (elementary geometry)
    np.testing.assert_allclose(np.degrees(mech.closed_angles), 90.0, rtol=0, atol=1e-9)


# ---------------------------------------------------------------- broken surfaces

def refused(path, pattern):
    with pytest.raises(ModelError, match=pattern) as info:
        load_mesh(path)
    message = str(info.value)
    assert "\n" not in message and message.startswith(str(path))
    return message


def test_a_box_with_a_missing_face_is_not_closed(tmp_path):
    box = trimesh.creation.box()
    open_box = trimesh.Trimesh(box.vertices, box.faces[2:], process=False)
    refused(write(open_box, tmp_path, "open", "stl"), "not closed: 4 edge")


def test_two_cubes_sharing_an_edge_are_not_manifold(tmp_path):
    a, b = trimesh.creation.box(), trimesh.creation.box()
    b.apply_translation((1.0, 1.0, 0.0))
    refused(write(trimesh.util.concatenate([a, b]), tmp_path, "pair", "obj"),
            "not a manifold surface: the edge .* belongs to 4 triangles")


def test_two_cubes_sharing_a_corner_are_not_manifold(tmp_path):
    a, b = trimesh.creation.box(), trimesh.creation.box()
    b.apply_translation((1.0, 1.0, 1.0))
    refused(write(trimesh.util.concatenate([a, b]), tmp_path, "corner", "obj"),
            r"touches itself at the vertex \(0.5, 0.5, 0.5\)")


def test_a_flipped_triangle_is_inconsistent_winding(tmp_path):
    box = trimesh.creation.box()
    faces = box.faces.copy()
    faces[5] = faces[5][::-1]
    refused(write(trimesh.Trimesh(box.vertices, faces, process=False), tmp_path, "flip", "ply"),
            "inconsistent winding")


def test_overlapping_cubes_self_intersect(tmp_path):
    a, b = trimesh.creation.box(), trimesh.creation.box()
    b.apply_translation((0.5, 0.3, 0.2))
    refused(write(trimesh.util.concatenate([a, b]), tmp_path, "overlap", "stl"), "self-intersecting")


def test_a_corner_pushed_through_the_far_side_self_intersects(tmp_path):
    box = trimesh.creation.box()
    v = box.vertices.copy()
    top = int(np.argmax(v.sum(axis=1)))  # the corner (0.5, 0.5, 0.5)
    v[top] = (-0.2, -0.2, -1.2)  # through the bottom face, z = -0.5
    refused(write(trimesh.Trimesh(v, box.faces, process=False), tmp_path, "poke", "obj"), "self-intersecting")


def test_two_separate_cubes_are_two_pieces(tmp_path):
    a, b = trimesh.creation.box(), trimesh.creation.box()
    b.apply_translation((3.0, 0.0, 0.0))
    refused(write(trimesh.util.concatenate([a, b]), tmp_path, "apart", "off"), "2 separate pieces")


def test_a_sliver_triangle_is_degenerate(tmp_path):
    path = tmp_path / "sliver.obj"
    path.write_text(CUBE_OBJ + "v 0.0 -0.5 -0.5\nf 1 9 2\n")
    refused(path, "degenerate triangle")


@pytest.mark.parametrize("content", [b"", b"\x00\x01\x02garbage" * 20, b"solid x\nfacet normal 0 0\n"])
def test_unreadable_files(tmp_path, content):
    path = tmp_path / "bad.stl"
    path.write_bytes(content)
    refused(path, "(cannot read|no triangles)")


def test_a_missing_file_and_an_unknown_format(tmp_path):
    refused(tmp_path / "nothing.obj", "cannot read file")
    other = tmp_path / "model.xyz"
    other.write_text("1 2 3\n")
    refused(other, "unsupported mesh format")


def test_the_cli_exits_2_on_a_broken_mesh(tmp_path, capsys):
    box = trimesh.creation.box()
    path = write(trimesh.Trimesh(box.vertices, box.faces[2:], process=False), tmp_path, "open", "stl")
    assert main(["new", str(path), "-o", str(tmp_path / "out.mech.json")]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "not closed" in err and "Traceback" not in err
    assert not (tmp_path / "out.mech.json").exists()
