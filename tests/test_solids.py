"""Tests of the built-in polyhedra and of the hull-and-merge construction.

Everything is checked with helpers written here from first principles (Newell
normals, edge bookkeeping), against published values or an independent mesh library.
"""

import io
from collections import Counter

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from foldsim.errors import ModelError
from foldsim.solids import (
    Polyhedron, antiprism, builtin, cube, cuboctahedron, dodecahedron, geodesic, icosahedron,
    octahedron, polyhedron_from_points, prism, tetrahedron, truncated_tetrahedron,
)

PHI = (1 + 5**0.5) / 2


# ---------------------------------------------------------------- helpers (independent)

def newell_normal(vertices, face):
    """Newell's area vector of a polygon, shape (3,): twice the area times the unit normal."""
    p = vertices[face]
    q = np.roll(p, -1, axis=0)
    return np.array([
        np.sum((p[:, 1] - q[:, 1]) * (p[:, 2] + q[:, 2])),
        np.sum((p[:, 2] - q[:, 2]) * (p[:, 0] + q[:, 0])),
        np.sum((p[:, 0] - q[:, 0]) * (p[:, 1] + q[:, 1])),
    ])


def unit_normals(poly):
    normals = np.array([newell_normal(poly.vertices, f) for f in poly.faces])
    return normals / np.linalg.norm(normals, axis=1, keepdims=True)


def directed_edges(poly):
    return [(int(a), int(b)) for f in poly.faces for a, b in zip(f, np.roll(f, -1))]


def edge_faces(poly):
    """Undirected edge -> list of indices of the faces using it."""
    table = {}
    for i, f in enumerate(poly.faces):
        for a, b in zip(f, np.roll(f, -1)):
            table.setdefault(frozenset((int(a), int(b))), []).append(i)
    return table


def dihedrals(poly):
    """(interior dihedral angle in degrees, size of face 1, size of face 2) per edge."""
    n = unit_normals(poly)
    out = []
    for i, j in edge_faces(poly).values():
        angle = np.pi - np.arccos(np.clip(n[i] @ n[j], -1, 1))
        out.append((np.degrees(angle), *sorted((len(poly.faces[i]), len(poly.faces[j])))))
    return out


def face_keys(vertices, faces, decimals=6):
    """Faces as a set of frozensets of rounded vertex coordinates (index-free)."""
    return {frozenset(tuple(np.round(vertices[i], decimals) + 0.0) for i in f) for f in faces}


def fan_triangles(poly):
    return np.array([(f[0], f[i], f[i + 1]) for f in poly.faces for i in range(1, len(f) - 1)])


# ------------------------------------------------------------------- expected counts

# (V, E, F, face sizes). Regular solids: Coxeter, Regular Polytopes, Table I (memory);
# Archimedean solids, prisms, antiprisms and geodesic spheres: elementary counting.
EXPECTED = {
    "tetrahedron": (4, 6, 4, {3: 4}),
    "cube": (8, 12, 6, {4: 6}),
    "octahedron": (6, 12, 8, {3: 8}),
    "dodecahedron": (20, 30, 12, {5: 12}),
    "icosahedron": (12, 30, 20, {3: 20}),
    "truncated-tetrahedron": (12, 18, 8, {3: 4, 6: 4}),
    "cuboctahedron": (12, 24, 14, {3: 8, 4: 6}),
}
for _n in (3, 4, 5, 6, 8, 12):
    EXPECTED[f"prism:{_n}"] = (2 * _n, 3 * _n, _n + 2, dict(Counter({_n: 2}) + Counter({4: _n})))
    EXPECTED[f"antiprism:{_n}"] = (2 * _n, 4 * _n, 2 * _n + 2, dict(Counter({_n: 2}) + Counter({3: 2 * _n})))
for _k in range(4):
    EXPECTED[f"geodesic:{_k}"] = (10 * 4**_k + 2, 30 * 4**_k, 20 * 4**_k, {3: 20 * 4**_k})

SPECS = sorted(EXPECTED)
EDGE_EQUAL = [s for s in SPECS if not s.startswith("geodesic")]


@pytest.fixture(scope="module", params=SPECS)
def solid(request):
    return request.param, builtin(request.param)


# ------------------------------------------------------------------ combinatorics

def test_counts_and_euler(solid):
    spec, poly = solid
    v, e, f, sizes = EXPECTED[spec]
    assert poly.name == spec
    assert poly.vertices.shape == (v, 3) and poly.vertices.dtype == np.float64
    assert len(edge_faces(poly)) == e
    assert len(poly.faces) == f
    assert dict(Counter(len(face) for face in poly.faces)) == sizes
    assert v - e + f == 2  # Euler's polyhedron formula
    assert all(face.dtype == np.int64 and face.ndim == 1 for face in poly.faces)
    assert sorted({int(i) for face in poly.faces for i in face}) == list(range(v))  # no stray vertex


def test_closed_and_consistently_oriented(solid):
    # Common practice: an oriented closed surface uses each directed edge once and its reverse once.
    _, poly = solid
    edges = Counter(directed_edges(poly))
    assert max(edges.values()) == 1
    assert all(edges[(b, a)] == 1 for a, b in edges)
    assert all(len(fs) == 2 for fs in edge_faces(poly).values())


def test_faces_planar_and_outward(solid):
    # Elementary geometry: a convex solid's face normals point away from an interior point.
    _, poly = solid
    centre = poly.vertices.mean(axis=0)
    size = np.ptp(poly.vertices, axis=0).max()
    for face, normal in zip(poly.faces, unit_normals(poly)):
        pts = poly.vertices[face]
        assert np.abs((pts - pts.mean(axis=0)) @ normal).max() < 1e-9 * size
        assert normal @ (pts.mean(axis=0) - centre) > 0


def test_convex_every_vertex_behind_every_face(solid):
    # Elementary geometry: a convex polyhedron lies in the inner half-space of each face.
    _, poly = solid
    for face, normal in zip(poly.faces, unit_normals(poly)):
        heights = (poly.vertices - poly.vertices[face[0]]) @ normal
        assert heights.max() < 1e-9


@pytest.mark.parametrize("spec", EDGE_EQUAL)
@pytest.mark.parametrize("size", [None, 2.5])
def test_all_edges_have_the_requested_length(spec, size):
    poly = builtin(spec, size)
    lengths = [np.linalg.norm(np.subtract(*poly.vertices[list(e)])) for e in edge_faces(poly)]
    np.testing.assert_allclose(lengths, 1.0 if size is None else size, rtol=1e-12)


def test_edge_keyword_scales():
    for make in (tetrahedron, cube, octahedron, dodecahedron, icosahedron, truncated_tetrahedron, cuboctahedron):
        np.testing.assert_allclose(make(edge=3.0).vertices, 3.0 * make().vertices, rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(prism(5, edge=0.5).vertices, 0.5 * prism(5).vertices, atol=1e-12)
    np.testing.assert_allclose(antiprism(7, edge=4).vertices, 4 * antiprism(7).vertices, atol=1e-12)


# ---------------------------------------------------------------- metric references

def deg(x):
    return np.degrees(x)


# Coxeter, Regular Polytopes, Table I (memory); CRC Standard Mathematical Tables.
REGULAR_DIHEDRAL = {
    "tetrahedron": (70.528779, np.arccos(1 / 3), 3, 3),
    "cube": (90.0, np.pi / 2, 4, 3),
    "octahedron": (109.471221, np.arccos(-1 / 3), 3, 4),
    "dodecahedron": (116.565051, np.arccos(-1 / np.sqrt(5)), 5, 3),
    "icosahedron": (138.189685, np.arccos(-np.sqrt(5) / 3), 3, 5),
}


@pytest.mark.parametrize("spec", sorted(REGULAR_DIHEDRAL))
def test_regular_dihedral_angles(spec):
    table_deg, closed_form, _, _ = REGULAR_DIHEDRAL[spec]
    assert deg(closed_form) == pytest.approx(table_deg, abs=1e-6)
    angles = [a for a, _, _ in dihedrals(builtin(spec))]
    np.testing.assert_allclose(angles, table_deg, atol=1e-6)


@pytest.mark.parametrize("spec", sorted(REGULAR_DIHEDRAL))
def test_regular_dihedral_matches_schlafli_formula(spec):
    # Coxeter, Regular Polytopes, 2.4 (memory): sin(theta/2) = cos(pi/q) / sin(pi/p) for {p, q}.
    _, _, p, q = REGULAR_DIHEDRAL[spec]
    theta = 2 * np.arcsin(np.cos(np.pi / q) / np.sin(np.pi / p))
    poly = builtin(spec)
    assert {len(f) for f in poly.faces} == {p}
    assert set(Counter(int(i) for f in poly.faces for i in f).values()) == {q}  # q faces at a vertex
    np.testing.assert_allclose([a for a, _, _ in dihedrals(poly)], deg(theta), atol=1e-9)


def test_truncated_tetrahedron_dihedrals():
    # CRC Standard Mathematical Tables (memory): 109.4712 deg tri-hex, 70.5288 deg hex-hex.
    by_kind = {}
    for angle, a, b in dihedrals(truncated_tetrahedron()):
        by_kind.setdefault((a, b), []).append(angle)
    assert set(by_kind) == {(3, 6), (6, 6)}
    np.testing.assert_allclose(by_kind[(3, 6)], 109.4712206, atol=1e-6)
    np.testing.assert_allclose(by_kind[(6, 6)], 70.5287794, atol=1e-6)


def test_cuboctahedron_dihedral():
    # CRC Standard Mathematical Tables (memory): arccos(-1/sqrt(3)) = 125.264390 deg.
    angles = dihedrals(cuboctahedron())
    assert {(a, b) for _, a, b in angles} == {(3, 4)}
    np.testing.assert_allclose([a for a, _, _ in angles], 125.264390, atol=1e-6)
    assert deg(np.arccos(-1 / np.sqrt(3))) == pytest.approx(125.264390, abs=1e-6)


@pytest.mark.parametrize("n", [3, 5, 6, 9, 16])
def test_prism_dihedrals(n):
    # Elementary geometry: side-side = interior angle of the n-gon, base-side = 90 deg.
    kinds = Counter()
    for angle, a, b in dihedrals(prism(n)):
        kinds[(a, b)] += 1
        expected = (n - 2) * 180.0 / n if (a, b) == (4, 4) else 90.0
        assert angle == pytest.approx(expected, abs=1e-9)
    assert kinds == {(4, 4): n, tuple(sorted((4, n))): 2 * n}


def test_small_antiprism_and_prism_are_octahedron_and_cube():
    # Elementary geometry: the equilateral 3-antiprism is the regular octahedron; the
    # square prism with equal edges is the cube.
    np.testing.assert_allclose([a for a, _, _ in dihedrals(antiprism(3))], 109.471221, atol=1e-6)
    np.testing.assert_allclose([a for a, _, _ in dihedrals(prism(4))], 90.0, atol=1e-9)


# CRC Standard Mathematical Tables (memory): circumradius / edge.
CIRCUMRADIUS = {
    "tetrahedron": np.sqrt(6) / 4,
    "cube": np.sqrt(3) / 2,
    "octahedron": np.sqrt(2) / 2,
    "dodecahedron": np.sqrt(3) * PHI / 2,
    "icosahedron": np.sqrt(PHI * np.sqrt(5)) / 2,
    "truncated-tetrahedron": np.sqrt(22) / 4,
    "cuboctahedron": 1.0,
}


@pytest.mark.parametrize("spec", sorted(CIRCUMRADIUS))
def test_centred_with_tabulated_circumradius(spec):
    poly = builtin(spec)
    np.testing.assert_allclose(poly.vertices.mean(axis=0), 0, atol=1e-12)
    np.testing.assert_allclose(np.linalg.norm(poly.vertices, axis=1), CIRCUMRADIUS[spec], rtol=1e-12)


# ------------------------------------------------------ independent mesh library

# CRC Standard Mathematical Tables (memory): volume / edge^3.
VOLUME = {
    "tetrahedron": np.sqrt(2) / 12,
    "cube": 1.0,
    "octahedron": np.sqrt(2) / 3,
    "dodecahedron": (15 + 7 * np.sqrt(5)) / 4,
    "icosahedron": 5 * (3 + np.sqrt(5)) / 12,
    "truncated-tetrahedron": 23 * np.sqrt(2) / 12,
    "cuboctahedron": 5 * np.sqrt(2) / 3,
}


@pytest.mark.parametrize("spec", sorted(VOLUME))
def test_trimesh_agrees_closed_outward_and_volume(spec):
    trimesh = pytest.importorskip("trimesh")
    poly = builtin(spec)
    mesh = trimesh.Trimesh(poly.vertices, fan_triangles(poly), process=False)
    assert mesh.is_watertight and mesh.is_winding_consistent
    assert mesh.volume == pytest.approx(VOLUME[spec], rel=1e-12)  # positive only if outward


@pytest.mark.parametrize("spec", ["cube", "dodecahedron", "truncated-tetrahedron", "cuboctahedron", "prism:7"])
def test_trimesh_round_trip_remerges_to_same_faces(spec):
    trimesh = pytest.importorskip("trimesh")
    poly = builtin(spec)
    hull = trimesh.Trimesh(poly.vertices, fan_triangles(poly)).convex_hull
    loaded = trimesh.load(io.BytesIO(hull.export(file_type="obj").encode()), file_type="obj", process=False)
    remerged = polyhedron_from_points(loaded.vertices, "again")
    assert face_keys(remerged.vertices, remerged.faces) == face_keys(poly.vertices, poly.faces)
    # trimesh's own grouping of coplanar triangles names the same polygons.
    grouped = [np.unique(loaded.faces[g]) for g in loaded.facets]
    singles = set(range(len(loaded.faces))) - {i for g in loaded.facets for i in g}
    grouped += [loaded.faces[i] for i in singles]
    assert face_keys(loaded.vertices, grouped) == face_keys(poly.vertices, poly.faces)


# --------------------------------------------------------------------- geodesic

@pytest.mark.parametrize("k", [0, 1, 2, 3])
@pytest.mark.parametrize("radius", [1.0, 0.3])
def test_geodesic_on_sphere_closed_and_outward(k, radius):
    poly = geodesic(k, radius=radius)
    np.testing.assert_allclose(np.linalg.norm(poly.vertices, axis=1), radius, rtol=1e-12)
    assert len(poly.faces) == 20 * 4**k
    edges = Counter(directed_edges(poly))
    assert max(edges.values()) == 1 and all(edges[(b, a)] == 1 for a, b in edges)
    for face, normal in zip(poly.faces, unit_normals(poly)):
        assert normal @ poly.vertices[face].mean(axis=0) > 0  # sphere centre is the origin


def test_geodesic_not_merged_and_edges_shorten():
    # Elementary geometry: every edge of level k+1 is about half an edge of level k
    # (a bit longer because of the projection), and no two faces are coplanar.
    previous = None
    for k in range(4):
        poly = geodesic(k)
        lengths = np.array([np.linalg.norm(np.subtract(*poly.vertices[list(e)])) for e in edge_faces(poly)])
        if previous is not None:
            assert lengths.max() < previous.max() and lengths.min() > 0.5 * previous.min() * 0.99
        previous = lengths
        angles = [a for a, _, _ in dihedrals(poly)]
        assert max(angles) < 180.0 - 1e-3
    # The level-0 sphere is the icosahedron: edge = R / sin(2 pi / 5) (CRC tables, memory).
    ico = geodesic(0)
    assert np.linalg.norm(np.subtract(*ico.vertices[list(next(iter(edge_faces(ico))))])) == pytest.approx(
        1 / np.sin(2 * np.pi / 5), rel=1e-12)


def test_geodesic_high_level_via_builtin():
    poly = builtin("geodesic:5", size=2.0)
    assert len(poly.faces) == 20 * 4**5 and len(poly.vertices) == 10 * 4**5 + 2
    np.testing.assert_allclose(np.linalg.norm(poly.vertices, axis=1), 2.0, rtol=1e-12)


# ------------------------------------------------------------ general point sets

def test_points_inside_faces_edges_and_volume_are_dropped():
    corners = cube().vertices
    extra = np.vstack([
        np.zeros((1, 3)),                                     # centre
        np.eye(3) * 0.5, -np.eye(3) * 0.5,                    # face centres
        [[0.5, 0.5, 0.0], [0.0, -0.5, 0.5], [-0.5, 0.0, -0.5]],  # edge midpoints
    ])
    poly = polyhedron_from_points(np.vstack([extra, corners]), "busy cube")
    assert len(poly.vertices) == 8 and len(poly.faces) == 6
    assert face_keys(poly.vertices, poly.faces) == face_keys(cube().vertices, cube().faces)


@pytest.mark.parametrize("eps", [1e-12, 1e-9, 1e-7])
def test_nearly_coplanar_and_nearly_collinear_points_merge_away(eps):
    # Points pushed out of a face or off an edge by far less than the tolerance are not
    # corners (elementary geometry: the face stays the square through the 4 corners).
    corners = cube().vertices
    off_edges = np.array([[0.5, 0.5, 0.0], [0.0, -0.5, 0.5], [-0.5, 0.0, -0.5]]) * (1 + eps)
    off_faces = np.array([[0.5, 0.1, 0.2], [0.0, 0.0, -0.5]]) + eps * np.array([[1, 0, 0], [0, 0, -1]])
    poly = polyhedron_from_points(np.vstack([off_edges, corners, off_faces]), "noisy cube")
    np.testing.assert_array_equal(poly.vertices, corners)
    assert face_keys(poly.vertices, poly.faces) == face_keys(cube().vertices, cube().faces)


def test_tolerance_controls_merging():
    # A unit cube whose top is a roof 1e-3 high: distinct faces at the default tolerance,
    # one flat face when the tolerance is coarser (elementary geometry).
    base = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0], [1, 1, 0]], dtype=float)
    pts = np.vstack([base, base + [0, 0, 1], [[0.5, 0.5, 1.001]]])
    assert len(polyhedron_from_points(pts, "roof").faces) == 9
    coarse = polyhedron_from_points(pts, "roof", tol=1e-2)
    assert len(coarse.faces) == 6 and len(coarse.vertices) == 8


def random_rotation(q):
    w, x, y, z = np.asarray(q) / np.linalg.norm(q)
    # Common practice: rotation matrix of a unit quaternion.
    return np.array([
        [1 - 2 * (y * y + z * z), 2 * (x * y - w * z), 2 * (x * z + w * y)],
        [2 * (x * y + w * z), 1 - 2 * (x * x + z * z), 2 * (y * z - w * x)],
        [2 * (x * z - w * y), 2 * (y * z + w * x), 1 - 2 * (x * x + y * y)],
    ])


@settings(max_examples=40, deadline=None)
@given(
    q=st.lists(st.floats(-1, 1), min_size=4, max_size=4).filter(lambda v: np.linalg.norm(v) > 0.1),
    shift=st.lists(st.floats(-100, 100), min_size=3, max_size=3),
    spec=st.sampled_from(["cube", "dodecahedron", "cuboctahedron", "truncated-tetrahedron", "antiprism:5"]),
)
def test_merge_is_invariant_under_rigid_motion(q, shift, spec):
    poly = builtin(spec)
    moved = poly.vertices @ random_rotation(q).T + np.asarray(shift)
    again = polyhedron_from_points(moved, spec)
    assert np.array_equal(again.vertices, moved)  # every point is a corner: kept, in order
    assert {tuple(np.roll(f, -int(np.argmin(f)))) for f in again.faces} == {tuple(f) for f in poly.faces}


@pytest.mark.parametrize("seed", range(5))
def test_random_points_give_a_closed_outward_triangulated_hull(seed):
    # Generic points on a sphere are all corners and no four are coplanar (common practice).
    rng = np.random.default_rng(seed)
    pts = rng.normal(size=(30, 3))
    pts /= np.linalg.norm(pts, axis=1, keepdims=True)
    poly = polyhedron_from_points(pts, "random")
    v, f = len(poly.vertices), len(poly.faces)
    assert v == 30 and f == 2 * v - 4 and {len(face) for face in poly.faces} == {3}
    edges = Counter(directed_edges(poly))
    assert max(edges.values()) == 1 and all(edges[(b, a)] == 1 for a, b in edges)
    for face, normal in zip(poly.faces, unit_normals(poly)):
        assert normal @ poly.vertices[face].mean(axis=0) > 0


@pytest.mark.parametrize("points", [
    np.zeros((0, 3)),
    np.eye(3),
    [[0, 0, 0], [1, 0, 0], [0, 1, 0], [1, 1, 0], [2, 3, 0]],   # flat
    [[0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, np.nan]],
    [[0, 0, 0], [1, 0, 0], [0, 1, 0], [1, 1, 0], [0.5, 0.5, 1e-9]],  # flat within tolerance
    np.ones((5, 2)),
])
def test_degenerate_point_sets_raise_model_error(points):
    with pytest.raises(ModelError, match="sliver"):
        polyhedron_from_points(points, "sliver")


def test_polyhedron_arrays_are_read_only_copies():
    poly = cube()
    with pytest.raises(ValueError):
        poly.vertices[0, 0] = 9.0
    with pytest.raises(ValueError):
        poly.faces[0][0] = 3
    source = np.array(cube().vertices)
    made = Polyhedron("c", source, cube().faces)
    source[0] = 5.0
    assert made.vertices[0, 0] != 5.0


# -------------------------------------------------------------------------- specs

def test_builtin_accepts_case_and_whitespace():
    assert builtin(" Prism:5 ").name == "prism:5"
    assert len(builtin("CUBE").faces) == 6


@pytest.mark.parametrize("spec", [
    "cubes", "", "prism", "prism:", "prism:2", "prism:x", "prism:3:4", "prism:-3", "antiprism:1",
    "geodesic:6", "geodesic:-1", "cube:3", "truncated_tetrahedron", "hexahedron",
])
def test_bad_spec_raises_model_error_naming_it(spec):
    with pytest.raises(ModelError) as info:
        builtin(spec)
    message = str(info.value)
    assert repr(spec) in message and "\n" not in message


@pytest.mark.parametrize("size", [0, -1.0, float("nan"), float("inf"), "big"])
def test_bad_size_raises_model_error(size):
    with pytest.raises(ModelError, match="cube"):
        builtin("cube", size)


def test_direct_constructors_reject_bad_arguments():
    for call in (lambda: prism(2), lambda: antiprism(3.5), lambda: geodesic(-1), lambda: cube(edge=0),
                 lambda: geodesic(1, radius=-2.0), lambda: icosahedron(edge=float("nan"))):
        with pytest.raises(ValueError):
            call()


def test_out_of_range_spec_says_what_is_allowed():
    with pytest.raises(ModelError, match=r"'geodesic:9'.*0\.\.5"):
        builtin("geodesic:9")


def test_non_string_spec_raises_model_error():
    with pytest.raises(ModelError, match="42"):
        builtin(42)
