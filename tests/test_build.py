"""The ``build`` object and thick panels (foldsim.build)."""

import json
from pathlib import Path

import numpy as np
import pytest

from foldsim.build.prisms import edge_closing_angles, panel_solids
from foldsim.build.spec import build_spec
from foldsim.errors import ModelError
from foldsim.io.mechanism_json import loads

from helpers import cube_document


def _cube(build, side=10.0):
    doc = cube_document()
    doc["vertices"] = [[side * x for x in v] for v in doc["vertices"]]
    doc["build"] = build
    return doc


def test_file_without_build_reads_as_before():
    mech = loads(json.dumps(cube_document()))
    assert build_spec(mech) is None


@pytest.mark.parametrize("build, message", [
    ({}, "build: missing \"thickness\""),
    ({"thickness": -1}, "build.thickness: must be a positive length"),
    ({"thickness": 1, "faces": [{"face": 9, "thickness": 2}]}, "build.faces[0].face: face 9 out of range"),
    ({"thickness": 1, "axis": "middle"}, "build.axis: must be one of surface, mid"),
    ({"thickness": 1, "stops": [{"hinge": 1, "stop_deg": 95}, {"hinge": 1, "stop_deg": 92}]},
     "build.stops[1].hinge: hinge 1 is given twice"),
    ({"thickness": 1, "gears": [{"coupling": 0}]}, "build.gears[0].coupling: coupling 0 out of range"),
    ({"thickness": 1, "colour": "red"}, "build: unknown key 'colour'"),
    ({"thickness": 6}, "build.thickness: panel 0 is too thick"),
    ({"thickness": 1, "faces": [{"face": 2, "thickness": 6}]}, "build.faces: panel 2 is too thick"),
])
def test_bad_build_names_the_field(build, message):
    with pytest.raises(ModelError) as err:
        loads(json.dumps(_cube(build)), source="box.mech.json")
    text = str(err.value)
    assert text.startswith("box.mech.json: ") and message in text and "\n" not in text


def test_stops_default_to_closing_plus_margin():
    mech = loads(json.dumps(_cube({"thickness": 1, "stop_margin_deg": 3,
                                   "stops": [{"hinge": 4, "stop_deg": 80}]})))
    spec = build_spec(mech)
    # cube: every hinge closes at 90 degrees (Coxeter, Regular Polytopes, Table I: dihedral 90)
    np.testing.assert_allclose(np.degrees(spec.stops), [93, 93, 93, 93, 80], atol=1e-9)


def test_cube_edges_close_at_right_angles():
    mech = loads(json.dumps(_cube({"thickness": 1})))
    for angles in edge_closing_angles(mech):
        # every edge of a cube, hinged or cut, closes at 90 degrees (elementary geometry)
        np.testing.assert_allclose(np.degrees(angles), 90.0, atol=1e-9)


def _closed_solids(mech, spec):
    from foldsim.geometry import transform_points
    from foldsim.kinematics import face_poses

    poses = face_poses(mech, mech.closed_angles[None])[0]
    return [transform_points(poses[s.face], s.triangles) for s in panel_solids(mech, spec)]


def test_tapered_cube_panel_is_a_mitred_frustum():
    # Tapered panels (Tachi 2011; Lang et al. 2018): the side face bisects the
    # 90-degree dihedral, so a 10 mm square panel 1 mm thick has an 8 mm square
    # inner face (a 45-degree mitre, common practice).
    mech = loads(json.dumps(_cube({"thickness": 1})))
    solid = panel_solids(mech, build_spec(mech))[0]
    pts = solid.vertices
    # The bottom face lies in z = 0 and faces -z, so its material lies toward +z.
    assert np.isclose(pts[:, 2].max(), 1.0) and np.isclose(pts[:, 2].min(), 0.0)
    inner = pts[np.isclose(pts[:, 2], 1.0)]
    np.testing.assert_allclose(np.ptp(inner[:, :2], axis=0), [8.0, 8.0], atol=1e-9)


@pytest.mark.parametrize("thickness", [0.5, 1.5])
def test_closed_thick_cube_volume_matches_trimesh(thickness):
    trimesh = pytest.importorskip("trimesh")
    from scipy.spatial import ConvexHull, HalfspaceIntersection

    mech = loads(json.dumps(_cube({"thickness": thickness})))
    spec = build_spec(mech)
    volumes = []
    for tris in _closed_solids(mech, spec):
        mesh = trimesh.Trimesh(vertices=tris.reshape(-1, 3), faces=np.arange(len(tris) * 3).reshape(-1, 3))
        mesh.merge_vertices()
        assert mesh.is_watertight
        volumes.append(mesh.volume)
    # Reference: outer cube minus the inner polyhedron whose faces sit `thickness`
    # inside every face plane, from scipy's half-space intersection.
    planes = []
    for f, face in enumerate(mech.faces):
        p = mech.vertices[face]
        n = np.cross(p[1] - p[0], p[2] - p[0])
        n /= np.linalg.norm(n)
        planes.append(np.append(n, -(n @ p[0]) + thickness))
    inner = HalfspaceIntersection(np.array(planes), mech.vertices.mean(axis=0)).intersections
    expected = 10.0 ** 3 - ConvexHull(inner).volume
    np.testing.assert_allclose(sum(volumes), expected, rtol=1e-9)
    assert all(v > 0 for v in volumes)


def test_outer_surface_points():
    from foldsim.analysis.closure import cut_edge_gaps
    from foldsim.build.prisms import outer_surface_points
    from foldsim.kinematics import face_poses
    from dataclasses import replace

    back = loads(json.dumps(_cube({"thickness": 1})))
    np.testing.assert_allclose(outer_surface_points(back, build_spec(back)), back.cut_points, atol=1e-12)
    front = loads(json.dumps(_cube({"thickness": 1, "material": "front"})))
    pts = outer_surface_points(front, build_spec(front))
    # Bottom face (root) faces -z in the flat frame: its outer surface is 1 mm further out.
    np.testing.assert_allclose(np.abs(pts - front.cut_points).max(), 1.0, atol=1e-12)
    # Material outside a closed cube: the square outer edges of two panels at a
    # right angle stand apart by T * sqrt(2) (elementary geometry).
    closed = face_poses(front, front.closed_angles[None])
    gaps = cut_edge_gaps(replace(front, cut_points=pts), closed)[0]
    np.testing.assert_allclose(gaps, np.sqrt(2.0), atol=1e-9)


def test_flap_swept_past_its_stop(tmp_path, capsys):
    # Hand case: a two-panel flap closing at 90 degrees with its stop at 80,
    # swept flat to closed, passes the stop by 10 degrees from t = 80/90.
    from foldsim.cli import main

    doc = {"schema": "foldsim.mechanism/1", "state": "flat",
           "vertices": [[0, 0, 0], [40, 0, 0], [40, 40, 0], [0, 40, 0], [80, 0, 0], [80, 40, 0]],
           "faces": [[0, 1, 2, 3], [1, 4, 5, 2]], "hinges": [{"faces": [0, 1], "closed_angle_deg": 90}],
           "build": {"thickness": 2, "stops": [{"hinge": 0, "stop_deg": 80}]}}
    path = tmp_path / "flap.mech.json"
    path.write_text(json.dumps(doc))
    assert main(["check", str(path), "--json"]) == 1
    report = json.loads(capsys.readouterr().out)
    row = report["stops"][0]
    np.testing.assert_allclose([row["stop_deg"], row["overrun_deg"], row["at_t"]], [80.0, 10.0, 80.0 / 90.0],
                               atol=1e-9)
    assert any("pass their stop" in p for p in report["problems"])
    doc["build"]["stops"] = []  # default: closing plus 2 degrees, never reached
    path.write_text(json.dumps(doc))
    assert main(["check", str(path), "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    assert report["stops"][0]["overrun_deg"] == 0.0 and report["stops"][0]["at_t"] is None
    assert report["build"]["thickness"] == [2.0, 2.0]


def test_outer_closure_in_the_check_report(tmp_path, capsys):
    # Material inside a closed cube: the file's polygons are the outer surface, so
    # its outer cut edges meet; material outside: the square outer edges of two
    # panels at a right angle stand T * sqrt(2) apart (elementary geometry).
    from foldsim.cli import main

    path = tmp_path / "box.mech.json"
    path.write_text(json.dumps(_cube({"thickness": 1})))
    assert main(["check", str(path), "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    assert report["outer_closure"]["meets"] and report["outer_closure"]["max_gap"] < 1e-9
    path.write_text(json.dumps(_cube({"thickness": 1, "material": "front"})))
    assert main(["check", str(path), "--json"]) == 1
    report = json.loads(capsys.readouterr().out)
    np.testing.assert_allclose(report["outer_closure"]["max_gap"], np.sqrt(2.0), atol=1e-9)
    assert report["closure"]["meets"]  # the thin-panel closure is unchanged
    assert any("outer surface" in p for p in report["problems"])


def _flap(stop_deg, play_deg=2.0):
    return {"schema": "foldsim.mechanism/1", "state": "flat",
            "vertices": [[0, 0, 0], [40, 0, 0], [40, 40, 0], [0, 40, 0], [80, 0, 0], [80, 40, 0]],
            "faces": [[0, 1, 2, 3], [1, 4, 5, 2]], "hinges": [{"faces": [0, 1], "closed_angle_deg": 90}],
            "tolerances": {"hinge": {"play_deg": play_deg}},
            "build": {"thickness": 2, "stops": [{"hinge": 0, "stop_deg": stop_deg}]}}


def test_stackup_play_stops_at_the_stop():
    # Hand case: a flap held against its stop at 90 degrees with +-1 degree of
    # play can only fall back: its angle is 90 + min(e, 0) for every draw e.
    from dataclasses import replace

    from foldsim.kinematics import face_poses
    from foldsim.stackup import play_spec
    from foldsim.stackup.sampling import draw_errors, perturbed_poses

    mech = loads(json.dumps(_flap(90.0)))
    spec = replace(play_spec(mech), stops=build_spec(mech).stops)
    errors = draw_errors(spec, 200, np.random.default_rng(1))
    theta = np.radians([[90.0]])
    held = perturbed_poses(mech, theta, errors, stops=spec.stops)[:, 0]
    e = errors.hinge[:, 0, 0]
    assert (e > 0).any() and (e < 0).any()
    expected = face_poses(mech, (np.radians(90.0) + np.minimum(e, 0.0))[:, None])
    np.testing.assert_allclose(held, expected, atol=1e-12)
    # Short of the stop by more than the play, both directions stay open.
    free = perturbed_poses(mech, np.radians([[80.0]]), errors, stops=spec.stops)[:, 0]
    np.testing.assert_allclose(free, face_poses(mech, (np.radians(80.0) + e)[:, None]), atol=1e-12)


def test_stackup_command_reads_the_stops(tmp_path, capsys):
    from foldsim.cli import main

    path = tmp_path / "flap.mech.json"
    path.write_text(json.dumps(_flap(90.0)))
    assert main(["stackup", str(path), "--json", "--samples", "200"]) == 0
    report = json.loads(capsys.readouterr().out)
    np.testing.assert_allclose(report["stops_deg"], [90.0], atol=1e-12)


def test_lantern_build_demo_passes_every_build_check_but_one_clash(capsys):
    # The demo of docs/build.md: the lantern in 1.5 mm panels with three bevel pairs.
    # Its gears, sectors, stops and outer surface pass; its thick top and side 6 run
    # into each other just before closing (see test_panel_clashes_agree_with_fcl).
    from pathlib import Path

    from foldsim.cli import main

    path = Path(__file__).resolve().parent.parent / "assets" / "lantern-build.mech.json"
    assert main(["check", str(path), "--json"]) == 1
    report = json.loads(capsys.readouterr().out)
    assert report["collisions"] == [] and [c["faces"] for c in report["panel_clashes"]] == [[6, 7]]
    assert report["problems"] == [p for p in report["problems"] if "thick panels run into each other" in p]
    assert len(report["problems"]) == 1
    bodies = report["build"]["gear_bodies"]
    assert [b["kind"] for b in bodies] == ["bevel"] * 3
    for body in bodies:
        # d = m z (any gear handbook) with the ISO 54 module 0.5
        np.testing.assert_allclose(body["pitch_diameters"], [0.5 * z for z in body["teeth"]], rtol=1e-12)
        # side to base closes at 90 degrees, side to side at 60 (hexagonal prism,
        # REFERENCES.md: (n - 2) 180 / n = 120 dihedral), so teeth 24:36 make the
        # 60 / 90 ratio and the shaft angle is the carrier's 90-degree corner:
        # tan(delta1) = z1 / z2 (ISO 23509, memory).
        np.testing.assert_allclose(body["cone_angles_deg"][0], np.degrees(np.arctan(24 / 36)), atol=1e-9)
    for row in report["gear_clearance"]:
        # Nothing nearer than the clearance: either the nearest approach found, or,
        # when nothing comes within twice the clearance, the proven floor.
        nearest = row["min_clearance"] if row["min_clearance"] is not None else row["guaranteed_min"]
        assert nearest >= report["build"]["clearance"]
    for row in report["sector_coverage"]:
        assert row["runs_out_at_t"] is None and row["min_contact_ratio"] >= 1.2  # 1.2: common-practice floor
    assert all(row["overrun_deg"] == 0 for row in report["stops"])
    assert report["outer_closure"]["meets"]


def test_text_report_shows_the_build(tmp_path, capsys):
    # The text summary says what --json says: the hand-case flap (stop 80°, closing
    # 90°) passes its stop by 10° from t = 80/90, and the lantern demo's sectors and
    # gear clearances are listed per coupling with the JSON's numbers.
    from pathlib import Path

    from foldsim.cli import main

    doc = {"schema": "foldsim.mechanism/1", "state": "flat",
           "vertices": [[0, 0, 0], [40, 0, 0], [40, 40, 0], [0, 40, 0], [80, 0, 0], [80, 40, 0]],
           "faces": [[0, 1, 2, 3], [1, 4, 5, 2]], "hinges": [{"faces": [0, 1], "closed_angle_deg": 90}],
           "build": {"thickness": 2, "stops": [{"hinge": 0, "stop_deg": 80}]}}
    path = tmp_path / "flap.mech.json"
    path.write_text(json.dumps(doc))
    assert main(["check", str(path)]) == 1
    out = capsys.readouterr().out
    assert "build: panels 2 mm thick, 0 gear pair(s) as solids" in out
    assert "stops: hinge 0 passes 80.00° by 10° from t = 0.8889" in out
    lantern = Path(__file__).resolve().parent.parent / "assets" / "lantern-build.mech.json"
    assert main(["check", str(lantern), "--json"]) == 1
    report = json.loads(capsys.readouterr().out)
    assert main(["check", str(lantern)]) == 1
    out = capsys.readouterr().out
    for row in report["sector_coverage"]:
        assert f"coupling {row['coupling']}: contact ratio down to {row['min_contact_ratio']:.3g}" in out
    for row in report["gear_clearance"]:
        if row["min_clearance"] is None:
            assert f"coupling {row['coupling']}: nothing within {row['guaranteed_min']:.4g} mm" in out
        else:
            assert f"coupling {row['coupling']}: nearest {row['min_clearance']:.4g} mm" in out
    assert "outer surface at t = 1: largest gap" in out and "-> meets" in out
    assert "thick panels run into each other: faces 6 and 7 from t = 0.98" in out


def _fcl_crossing(fcl, tri_a, pose_a, tri_b, pose_b):
    objects = []
    for tri, pose in ((tri_a, pose_a), (tri_b, pose_b)):
        t = tri @ pose[:3, :3].T + pose[:3, 3]
        model = fcl.BVHModel()
        model.beginModel(3 * len(t), len(t))
        model.addSubModel(t.reshape(-1, 3), np.arange(3 * len(t)).reshape(-1, 3))
        model.endModel()
        objects.append(fcl.CollisionObject(model, fcl.Transform()))
    return fcl.collide(objects[0], objects[1], fcl.CollisionRequest(), fcl.CollisionResult())


@pytest.mark.parametrize("name, thickness", [("lantern-build", None), ("gift-box", 2.0)])
def test_panel_clashes_agree_with_fcl(name, thickness):
    # Reference: python-fcl's collide on the same shrunk prisms of every pair that is
    # not a hinge's own two panels, at 201 drive values from 0.9 to 1 and 41 from 0
    # to 0.9 (the clash of the lantern lasts about 0.012 in t). The first t of each
    # clash must agree to the grid step.
    fcl = pytest.importorskip("fcl")
    from pathlib import Path

    from foldsim.build.prisms import panel_solids
    from foldsim.build.sweep import ERODE, panel_clashes
    from foldsim.gearing import fold_schedule
    from foldsim.io.mechanism_json import loads
    from foldsim.kinematics import poses_at

    doc = json.loads((Path(__file__).resolve().parent.parent / "assets" / f"{name}.mech.json").read_text())
    if thickness is not None:
        doc["build"] = {"thickness": thickness}
    mech = loads(json.dumps(doc), source=name)
    spec = build_spec(mech)
    schedule = fold_schedule(mech)
    got = {tuple(c["faces"]): c["first_t"] for c in panel_clashes(mech, spec, schedule)}
    solids = panel_solids(mech, spec, erode=ERODE * mech.size)
    hinged = {tuple(sorted(h)) for h in mech.hinge_faces.tolist()}
    ts = np.unique(np.concatenate([np.linspace(0.0, 0.9, 41), np.linspace(0.9, 1.0, 201)]))
    poses = poses_at(mech, schedule, ts)
    want = {}
    for a in range(mech.n_faces):
        for b in range(a + 1, mech.n_faces):
            if (a, b) in hinged:
                continue
            hits = [t for t, p in zip(ts, poses)
                    if _fcl_crossing(fcl, solids[a].triangles, p[a], solids[b].triangles, p[b])]
            if hits:
                want[(a, b)] = (min(hits), max(hits))
    assert set(got) == set(want)
    last = {tuple(c["faces"]): c["last_t"] for c in panel_clashes(mech, spec, schedule)}
    for pair, (first, end) in want.items():
        assert got[pair] == pytest.approx(first, abs=1e-3)
        assert last[pair] == pytest.approx(end, abs=1e-3)


def _sampled_cone_angle(ga, gb, rng, n=4000):
    """Least angle between random directions of two cones (conic combinations of generators)."""
    wa = rng.exponential(size=(n, len(ga))) ** 3
    wb = rng.exponential(size=(n, len(gb))) ** 3
    ua = wa @ ga
    ub = wb @ gb
    ua /= np.linalg.norm(ua, axis=1, keepdims=True)
    ub /= np.linalg.norm(ub, axis=1, keepdims=True)
    ua = np.concatenate([ua, ga])
    ub = np.concatenate([ub, gb])
    return float(np.arccos(np.clip(ua @ ub.T, -1, 1)).min())


def test_cone_separation_is_a_lower_bound_on_the_angle_between_cones():
    from foldsim.analysis.narrowphase import _cone_separation

    # Hand case: the positive and the negative octant are 90 degrees apart (x against
    # -y); the bound from the plane normal to (1, 1, 1) is 2 asin(1/sqrt 3) = 70.5
    # degrees (elementary geometry, common practice).
    octant = np.eye(3)[None]
    got = _cone_separation(octant, -octant)[0]
    assert got == pytest.approx(2 * np.arcsin(1 / np.sqrt(3)))
    assert got <= np.pi / 2
    # Random triangular cones against dense sampling of their directions: never above
    # the sampled least angle, and 0 where they overlap.
    rng = np.random.default_rng(7)
    for _ in range(60):
        axis_a, axis_b = rng.normal(size=(2, 3))
        ga = axis_a + 0.6 * rng.normal(size=(3, 3))
        gb = axis_b + 0.6 * rng.normal(size=(3, 3))
        ga /= np.linalg.norm(ga, axis=1, keepdims=True)
        gb /= np.linalg.norm(gb, axis=1, keepdims=True)
        bound = _cone_separation(ga[None], gb[None])[0]
        sampled = _sampled_cone_angle(ga, gb, rng)
        assert bound <= sampled + 1e-9
        if sampled < 1e-3:
            assert bound == 0.0


def test_pivoting_prisms_take_the_cone_and_the_weighted_separation():
    # The lantern's prisms: pairs that pivot about a shared vertex are marked, their
    # corner cones hold the shrunk prisms (every corner of the shrunk prism is inside
    # the cone of the full one), and the sweep finds the same clash with or without
    # the pivot measures (python-fcl confirms it, test above).
    from foldsim.analysis.panels import panels
    from foldsim.analysis.sweep import collision_intervals
    from foldsim.build.bodies import body_panels, body_speed_profile
    from foldsim.build.prisms import panel_solids
    from foldsim.build.sweep import ERODE
    from foldsim.gearing import fold_schedule
    from foldsim.io.mechanism_json import load

    mech = load(Path(__file__).resolve().parent.parent / "assets" / "lantern-build.mech.json")
    spec = build_spec(mech)
    shrunk = panel_solids(mech, spec, erode=ERODE * mech.size)
    full = panel_solids(mech, spec)
    pan = body_panels(mech, shrunk, skip=mech.hinge_faces, pivots=panels(mech), cone_solids=full)
    assert len(pan.pivot_keys) and not np.isnan(pan.pivot_cones[:, :, 0, 0]).all()
    for key, point, cones in zip(pan.pivot_keys, pan.pivot_points, pan.pivot_cones):
        for side, item in enumerate(divmod(int(key), pan.n)):
            if np.isnan(cones[side, 0, 0]):
                continue
            corners = shrunk[item].triangles.reshape(-1, 3) - point
            # Inside the cone: a conic combination of the generators (least squares
            # with non-negative weights; scipy's nnls).
            from scipy.optimize import nnls

            for c in corners[:: max(1, len(corners) // 12)]:
                _, residual = nnls(cones[side].T, c)
                assert residual <= 1e-9 * mech.size
    schedule = fold_schedule(mech)
    profile = body_speed_profile(mech, schedule.rates, shrunk)
    plain = body_panels(mech, shrunk, skip=mech.hinge_faces)
    found = collision_intervals(mech, schedule, pan=pan, profile=profile)
    reference = collision_intervals(mech, schedule, pan=plain, profile=profile)
    assert [c["faces"] for c in found] == [c["faces"] for c in reference] == [[6, 7]]
    assert found[0]["first_t"] == pytest.approx(reference[0]["first_t"], abs=1e-3)
    assert found[0]["last_t"] == pytest.approx(reference[0]["last_t"], abs=1e-3)


def test_a_long_list_of_problems_is_one_a_line_and_says_how_many(tmp_path, capsys):
    # A geodesic sphere (80 panels) with a default gear pair on every coupling has
    # dozens of pairs too near (their gears share hinges): the text report lists the
    # first problems one a line, counts them all as --json does, and says where the
    # rest are.
    from dataclasses import replace

    from foldsim.cli import main
    from foldsim.commands.check import SHOWN_PROBLEMS
    from foldsim.design import build, shape_args
    from foldsim.io.mechanism_json import save

    mech = build(shape_args("geodesic:1", size=100.0))[0]
    gears = [{"coupling": c} for c in range(len(mech.couplings))]
    path = tmp_path / "crowded.mech.json"
    save(replace(mech, extras={**mech.extras, "build": {"thickness": 0.5, "gears": gears}}), path)
    assert main(["check", str(path), "--json"]) == 1
    problems = json.loads(capsys.readouterr().out)["problems"]
    assert len(problems) > SHOWN_PROBLEMS
    assert main(["check", str(path)]) == 1
    lines = capsys.readouterr().out.rstrip("\n").split("\n")
    head = lines.index(f"PROBLEMS ({len(problems)}):")
    assert lines[head + 1:head + 1 + SHOWN_PROBLEMS] == [f"  - {p}" for p in problems[:SHOWN_PROBLEMS]]
    assert lines[-1] == f"  ... and {len(problems) - SHOWN_PROBLEMS} more (`foldsim check --json` lists them all)"
