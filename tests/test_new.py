"""`foldsim new`: every built-in solid makes a mechanism that `foldsim check` passes.

References: net diameters and dihedral angles from ../shared/REFERENCES.md; sizes
and cut edges from the written file's own vertices with numpy and networkx; teeth
against a brute-force search; closure gaps against faces turned with scipy's
Rotation (tests/helpers.py).
"""

import json

import networkx as nx
import numpy as np
import pytest

from foldsim.cli import main
from foldsim.io.mechanism_json import from_document, load
from foldsim.parts import part_types

from helpers import Shape, face_adjacency, turn_subtrees

SOLIDS = ["tetrahedron", "cube", "octahedron", "dodecahedron", "icosahedron", "prism:3", "prism:5",
          "prism:6", "antiprism:4", "antiprism:6", "truncated-tetrahedron", "cuboctahedron", "geodesic:1"]


def run(capsys, *argv):
    code = main(list(argv))
    out = capsys.readouterr()
    return code, out.out, out.err


def new_json(capsys, tmp_path, *argv, name="model.mech.json"):
    path = tmp_path / name
    code, out, err = run(capsys, "new", *argv, "-o", str(path), "--json")
    assert code == 0, err
    return path, json.loads(out)


def relabelled_document(doc, seed):
    """The document with faces, vertices and hinges renumbered (and couplings to match)."""
    rng = np.random.default_rng(seed)
    n_f, n_v, n_h = len(doc["faces"]), len(doc["vertices"]), len(doc["hinges"])
    f_new, v_new, h_new = rng.permutation(n_f), rng.permutation(n_v), rng.permutation(n_h)
    out = dict(doc)
    vertices = [None] * n_v
    for v, p in enumerate(doc["vertices"]):
        vertices[v_new[v]] = p
    faces = [None] * n_f
    for f, face in enumerate(doc["faces"]):
        faces[f_new[f]] = [int(v_new[v]) for v in np.roll(face, rng.integers(len(face)))]
    hinges = [None] * n_h
    for h, entry in enumerate(doc["hinges"]):
        hinges[h_new[h]] = {"faces": [int(f_new[f]) for f in entry["faces"]][::-1]}
    couplings = [dict(c, hinges=[int(h_new[h]) for h in c["hinges"]]) for c in doc["couplings"]]
    out.update(vertices=vertices, faces=faces, hinges=hinges, couplings=couplings,
               root=int(f_new[doc["root"]]), drive=int(h_new[doc["drive"]]))
    return out, f_new


@pytest.mark.parametrize("spec", SOLIDS)
def test_new_then_check_round_trip(capsys, tmp_path, spec):
    path, made = new_json(capsys, tmp_path, spec)
    code, out, _ = run(capsys, "check", str(path), "--json")
    report = json.loads(out)
    assert code == 0, report["problems"]
    assert report["dof"] == made["dof"] == 1
    assert report["schedule"] == "geared" and made["unreachable_hinges"] == []
    doc = json.loads(path.read_text())
    size = float(np.linalg.norm(np.ptp(np.array(doc["vertices"]), axis=0)))
    # a consistent gearing closes every cut edge to round-off (DESIGN.md: t = 1
    # reproduces the input shell)
    assert report["closure"]["max_gap"] <= 1e-9 * size
    assert made["closure_gap"] <= 1e-9 * size
    # the file's cut edges are the shell's unhinged shared edges (networkx, from the file)
    graph = face_adjacency(Shape(doc["vertices"], doc["faces"]))
    assert len(report["closure"]["edges"]) == graph.number_of_edges() - len(doc["hinges"])
    assert report["part_type_count"] == made["part_type_count"] == len(report["part_types"])
    # the same file renumbered has the same part types
    for seed in (3, 4):
        moved, f_new = relabelled_document(doc, seed)
        groups = part_types(from_document(moved))
        assert len(groups) == report["part_type_count"]
        assert sorted(sorted(g) for g in groups) == sorted(
            sorted(int(f_new[f]) for f in g) for g in report["part_types"])


# REFERENCES.md, "Shortest hinge chains": minimum possible net diameter in hinges
MIN_DIAMETER = {"tetrahedron": 2, "cube": 3, "octahedron": 5, "dodecahedron": 5, "icosahedron": 9}


@pytest.mark.parametrize("spec", sorted(MIN_DIAMETER))
def test_the_default_net_has_the_smallest_diameter(capsys, tmp_path, spec):
    _, made = new_json(capsys, tmp_path, spec)
    net = made["net"]
    assert net["method"] == "min-diameter"
    assert net["diameter_hinges"] == net["lower_bound"] == MIN_DIAMETER[spec]
    assert net["diameter_faces"] == MIN_DIAMETER[spec] + 1
    # no edge unfolding of a Platonic solid overlaps itself (Horiyama & Shoji, CCCG 2011)
    assert made["flat_overlap"] is False


def test_the_report_lists_every_coupling_with_its_geometry(capsys, tmp_path):
    path, made = new_json(capsys, tmp_path, "cube", "--size", "10")
    doc = json.loads(path.read_text())
    assert len(made["couplings"]) == len(doc["couplings"]) == len(doc["hinges"]) - 1
    assert made["longest_gear_chain"] == 1
    for row, c in zip(made["couplings"], doc["couplings"]):
        assert row["hinges"] == c["hinges"] and row["ratio"] == pytest.approx(1.0)
        if row["type"] == "bevel":
            # square corners: Σ = 90°, equal teeth split it (REFERENCES.md)
            assert row["shaft_angle_deg"] == pytest.approx(90.0)
            assert row["cone_angles_deg"] == pytest.approx([45.0, 45.0])
        else:
            # opposite sides of a 10 mm square
            assert row["type"] == "spur" and row["centre_distance"] == pytest.approx(10.0)
            assert row["pitch_radii"] == pytest.approx([5.0, 5.0])
    assert doc["units"] == "mm"


def test_gears_none_gives_the_ideal_schedule(capsys, tmp_path):
    path, made = new_json(capsys, tmp_path, "octahedron", "--gears", "none")
    doc = json.loads(path.read_text())
    assert doc["couplings"] == [] and made["couplings"] == []
    code, out, _ = run(capsys, "check", str(path), "--json")
    report = json.loads(out)
    assert code == 0 and report["schedule"] == "ideal" and report["dof"] == 1
    # the ideal schedule reaches every closing angle: 180° − 109.471221° (REFERENCES.md)
    for row in report["hinge_table"]:
        assert row["end_angle_deg"] == pytest.approx(180.0 - 109.471221, abs=1e-6)


def test_gears_simple_leaves_the_dodecahedron_loose(capsys, tmp_path):
    path = tmp_path / "d.mech.json"
    code, out, _ = run(capsys, "new", "dodecahedron", "-o", str(path), "--gears", "simple", "--json")
    made = json.loads(out)
    # pentagon edges that are not neighbours cannot carry a simple pair: some hinges
    # are out of reach, the file is written and the exit code says so
    assert code == 1 and made["dof"] > 1 and made["unreachable_hinges"]
    assert all(r["type"] in ("bevel", "spur") for r in made["couplings"])
    code, out, _ = run(capsys, "check", str(path), "--json")
    report = json.loads(out)
    assert code == 1 and report["dof"] == made["dof"]
    assert report["free_hinges"] == made["unreachable_hinges"]


def test_cut_chooses_the_net(capsys, tmp_path):
    from foldsim.solids import cube

    poly = cube()
    graph = face_adjacency(poly)
    tree = nx.Graph(nx.dfs_edges(graph, 2))  # a spanning tree, picked by networkx
    cuts = sorted(tuple(sorted(e)) for e in graph.edges() if not tree.has_edge(*e))
    text = ",".join(f"{a}-{b}" for a, b in cuts)
    path, made = new_json(capsys, tmp_path, "cube", "--cut", text, "--root", "2")
    doc = json.loads(path.read_text())
    assert sorted(tuple(sorted(h["faces"])) for h in doc["hinges"]) == sorted(
        tuple(sorted(e)) for e in tree.edges())
    assert doc["root"] == 2 and made["net"]["method"] == "cut"
    assert made["net"]["diameter_hinges"] == max(
        max(nx.single_source_shortest_path_length(tree, f).values()) for f in tree)


def test_bfs_net_from_a_root(capsys, tmp_path):
    path, made = new_json(capsys, tmp_path, "prism:5", "--net", "bfs", "--root", "3")
    doc = json.loads(path.read_text())
    assert doc["root"] == 3 and made["net"]["method"] == "bfs"
    graph = face_adjacency(Shape(doc["vertices"], doc["faces"]))
    depth = nx.single_source_shortest_path_length(graph, 3)
    tree = nx.Graph([h["faces"] for h in doc["hinges"]])
    # breadth-first: every face hangs at its graph distance from the root
    assert nx.single_source_shortest_path_length(tree, 3) == depth


def brute_teeth(ratio, zmin, zmax):
    pairs = [(abs(a / b - ratio), a + b, a, b) for a in range(zmin, zmax + 1) for b in range(zmin, zmax + 1)]
    return min(pairs)[2:]


def truncated_tetrahedron_closing(doc):
    """Hinge -> closing angle of a truncated tetrahedron's file.

    REFERENCES.md: dihedrals 109.4712° (tri–hex) and 70.5288° (hex–hex); a hinge
    closes at 180° minus its dihedral.
    """
    tri_hex, hex_hex = np.pi - np.arccos(-1 / 3), np.pi - np.arccos(1 / 3)
    faces = doc["faces"]

    def closing(h):
        return tri_hex if sorted(len(faces[f]) for f in doc["hinges"][h]["faces"]) == [3, 6] else hex_hex

    return closing


def test_teeth_report_ratio_errors_and_the_gap_they_cause(capsys, tmp_path):
    path, made = new_json(capsys, tmp_path, "truncated-tetrahedron", "--teeth", "12:40")
    assert made["teeth_range"] == [12, 40]
    doc = json.loads(path.read_text())
    faces = doc["faces"]
    closing = truncated_tetrahedron_closing(doc)
    angles = np.full(len(doc["hinges"]), np.nan)
    angles[doc["drive"]] = closing(doc["drive"])
    errors = []
    for row, c in zip(made["couplings"], doc["couplings"]):
        i, j = row["hinges"]
        ideal = closing(j) / closing(i)
        assert row["ratio"] == pytest.approx(ideal, rel=1e-12)
        zi, zj = row["teeth"]
        assert c["teeth"] == [zi, zj] and 12 <= zi <= 40 and 12 <= zj <= 40
        assert (zi, zj) == brute_teeth(ideal, 12, 40)
        assert row["ratio_error"] == pytest.approx(zi / zj / ideal - 1.0, abs=1e-15)
        errors.append(row["ratio_error"])
        angles[j] = angles[i] * zi / zj  # couplings run from the drive outwards
    assert any(abs(e) > 1e-4 for e in errors)
    # the gap the teeth leave, with faces turned by scipy from the file's flat layout
    mech = load(path)
    hinge_list = [h["faces"] for h in doc["hinges"]]
    now = turn_subtrees(list(mech.flat_faces), faces, hinge_list, doc["root"], angles)
    graph = face_adjacency(Shape(doc["vertices"], faces))
    hinged = {tuple(sorted(h["faces"])) for h in doc["hinges"]}
    gap = 0.0
    for a, b in graph.edges():
        if tuple(sorted((a, b))) not in hinged:
            for v in set(faces[a]) & set(faces[b]):
                gap = max(gap, float(np.linalg.norm(now[a][faces[a].index(v)] - now[b][faces[b].index(v)])))
    assert gap > 1e-4
    assert made["closure_gap"] == pytest.approx(gap, rel=1e-9)
    _, out, _ = run(capsys, "check", str(path), "--json")
    assert json.loads(out)["closure"]["max_gap"] == pytest.approx(gap, rel=1e-9)


def test_module_without_teeth_gives_whole_teeth_first(capsys, tmp_path):
    # The truncated tetrahedron's couplings have irrational ratios (REFERENCES.md
    # dihedrals, as above). Gears of a module have whole teeth, so `--module`
    # without `--teeth` first gives every coupling the integer pair nearest its
    # ratio in 12:60 (a brute-force search, as above), and every sized gear entry
    # keeps that ratio exactly, so the file loads and `check` reads it.
    path = tmp_path / "tt.mech.json"
    code, out, err = run(capsys, "new", "truncated-tetrahedron", "--size", "40", "--thickness", "1", "--module",
                         "0.5", "-o", str(path), "--json")
    assert code in (0, 1), err  # 1: a pair that cannot clear is reported, not hidden
    made = json.loads(out)
    assert made["teeth_range"] == [12, 60]
    doc = json.loads(path.read_text())
    closing = truncated_tetrahedron_closing(doc)
    entries = {g["coupling"]: g for g in doc["build"]["gears"]}
    for k, c in enumerate(doc["couplings"]):
        i, j = c["hinges"]
        assert tuple(c["teeth"]) == brute_teeth(closing(j) / closing(i), 12, 60)
        zi, zj = entries[k]["teeth"]
        assert zi * c["teeth"][1] == zj * c["teeth"][0]
    code, _, err = run(capsys, "check", str(path), "--json")
    assert code in (0, 1) and "teeth" not in err


def test_a_mesh_file_makes_a_mechanism(capsys, tmp_path):
    trimesh = pytest.importorskip("trimesh")
    stl = tmp_path / "brick.stl"
    trimesh.creation.box(extents=(20, 30, 40)).export(str(stl))
    path, made = new_json(capsys, tmp_path, str(stl), "--units", "cm")
    assert made["model"] == "brick" and made["faces"] == 6 and made["units"] == "cm"
    code, out, _ = run(capsys, "check", str(path), "--json")
    assert code == 0 and json.loads(out)["dof"] == 1


def test_text_output(capsys, tmp_path):
    code, out, _ = run(capsys, "new", "cube", "-o", str(tmp_path / "c.mech.json"), "--teeth", "12:30")
    assert code == 0
    assert "longest gear chain 1" in out and "part types: 4" in out and "12:12" in out


@pytest.mark.parametrize("argv, field", [
    (["dodecagon"], "unknown built-in solid"),
    (["cube", "--teeth", "30:12"], "--teeth: "),
    (["cube", "--teeth", "many"], "--teeth: "),
    (["cube", "--teeth", "12:20", "--gears", "none"], "--teeth: "),
    (["cube", "--cut", "0-1,x"], "--cut: "),
    (["cube", "--cut", "0-1", "--net", "bfs"], "--cut: "),
    (["cube", "--cut", "0-1"], "cut: "),
    (["cube", "--root", "6"], "--root: "),
    (["cube", "--size", "-2"], "size must be a positive number"),
    (["missing.obj"], "cannot read file"),
    (["cube", "--clearance", "-1"], "--clearance: "),
    (["cube", "--clearance", "nan"], "--clearance: "),
])
def test_bad_input_exits_2_with_one_line(capsys, tmp_path, argv, field):
    out_path = tmp_path / "x.mech.json"
    code, out, err = run(capsys, "new", *argv, "-o", str(out_path))
    assert code == 2 and out == ""
    assert err.startswith("foldsim: ") and err.count("\n") == 1 and field in err
    assert not out_path.exists()


def test_size_is_refused_for_a_mesh_file(capsys, tmp_path):
    trimesh = pytest.importorskip("trimesh")
    stl = tmp_path / "box.stl"
    trimesh.creation.box().export(str(stl))
    code, _, err = run(capsys, "new", str(stl), "--size", "2", "-o", str(tmp_path / "x.mech.json"))
    assert code == 2 and "--size: " in err


def star_prism(path, points=4, inner=0.5, height=0.3):
    """An OBJ of a star-shaped tray: a 2*points-gon star extruded by height.

    Its caps are concave, so side panels hinged to neighbouring edges of a notch lie
    over each other in the flat layout: a net that must collide on the way.
    """
    angles = np.pi * np.arange(2 * points) / points
    radii = np.where(np.arange(2 * points) % 2 == 0, 1.0, inner)
    ring = np.column_stack([radii * np.cos(angles), radii * np.sin(angles)])
    m = len(ring)
    lines = [f"v {x:.12g} {y:.12g} {z:.12g}" for z in (0.0, height) for x, y in ring]
    lines += ["v 0 0 0", f"v 0 0 {height}"]
    bottom, top = 2 * m + 1, 2 * m + 2
    for i in range(m):
        j = (i + 1) % m
        lines += [f"f {bottom} {j + 1} {i + 1}", f"f {top} {m + i + 1} {m + j + 1}",
                  f"f {i + 1} {j + 1} {m + j + 1}", f"f {i + 1} {m + j + 1} {m + i + 1}"]
    path.write_text("\n".join(lines) + "\n")
    return path


def crossing_pairs_fcl(mech, pose, shrink=1e-3):
    """Pairs of panels that cross at one pose, by python-fcl.

    Each panel is scaled about its centroid by (1 - shrink) first, so panels that
    only touch (along a hinge or at a shared corner) are apart and only real
    crossings remain.
    """
    fcl = pytest.importorskip("fcl")
    from foldsim.analysis.collision import panels

    pan = panels(mech)
    objects = []
    for f in range(mech.n_faces):
        tri = pan.tri_points[pan.tri_face == f]
        centre = mech.flat_faces[f].mean(axis=0)
        tri = centre + (1 - shrink) * (tri - centre)
        tri = tri @ pose[f, :3, :3].T + pose[f, :3, 3]
        model = fcl.BVHModel()
        model.beginModel(3 * len(tri), len(tri))
        model.addSubModel(tri.reshape(-1, 3), np.arange(3 * len(tri)).reshape(-1, 3))
        model.endModel()
        objects.append(fcl.CollisionObject(model, fcl.Transform()))
    return {(a, b) for a in range(mech.n_faces) for b in range(a + 1, mech.n_faces)
            if fcl.collide(objects[a], objects[b], fcl.CollisionRequest(), fcl.CollisionResult())}


def test_new_sweeps_what_it_wrote_and_fails_on_a_collision(capsys, tmp_path):
    # The star tray's minimum-diameter net folds side panels through each other.
    # `new` still writes the file (as for more than one degree of freedom), names the
    # collisions in its report and exits 1, as `foldsim check` does on the file.
    # Reference: python-fcl at t = 0.5 finds exactly the pairs whose reported
    # collision interval holds t = 0.5.
    from foldsim.gearing import fold_schedule
    from foldsim.kinematics import poses_at

    obj = star_prism(tmp_path / "star.obj")
    path = tmp_path / "star.mech.json"
    code, out, _ = run(capsys, "new", str(obj), "-o", str(path), "--json")
    made = json.loads(out)
    assert code == 1 and path.exists()
    assert made["collision_free"] is False and made["collisions"] and made["dof"] == 1
    code, out, _ = run(capsys, "check", str(path), "--json")
    checked = json.loads(out)
    assert code == 1 and checked["collisions"] == made["collisions"]
    mech = load(path)
    pose = poses_at(mech, fold_schedule(mech), np.array([0.5]))[0]
    inside = {tuple(c["faces"]) for c in made["collisions"] if c["first_t"] <= 0.5 <= c["last_t"]}
    assert inside and crossing_pairs_fcl(mech, pose) == inside
    code, out, _ = run(capsys, "new", str(obj), "-o", str(path))
    assert code == 1 and f"motion: {len(made['collisions'])} collision(s) between panels" in out


def test_new_reports_a_clean_motion_and_the_clearance(capsys, tmp_path):
    # A cube folds clean (every net of a cube does, with all hinges at 90 degrees:
    # common practice). With a 10 mm cube and an 11 mm clearance, opposite faces (10 mm
    # apart when closed) come too near, as `foldsim check --clearance 11` also says.
    path, made = new_json(capsys, tmp_path, "cube", "--size", "10")
    assert made["collision_free"] is True and made["collisions"] == [] and made["clearance"] == 0.0
    code, out, _ = run(capsys, "new", "cube", "--size", "10", "--clearance", "11",
                       "-o", str(tmp_path / "near.mech.json"), "--json")
    near = json.loads(out)
    assert code == 1 and near["collisions"]
    _, out, _ = run(capsys, "check", str(tmp_path / "near.mech.json"), "--clearance", "11", "--json")
    assert json.loads(out)["collisions"] == near["collisions"]
