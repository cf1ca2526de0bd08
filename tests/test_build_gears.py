"""Gear bodies of the ``build`` object (foldsim.build.gears)."""

import json
import math

import numpy as np
import pytest

from foldsim.build.gears import ISO54_FIRST, contact_ratio, gear_pairs, gear_solids, preferred_module
from foldsim.build.spec import build_spec
from foldsim.errors import ModelError
from foldsim.io.mechanism_json import loads

from helpers import cube_document, strip_document


def strip_doc(gears, side=40.0, **build):
    """Three squares in a row, hinges 0 and 1 closing at 90 degrees, one spur coupling."""
    doc = strip_document()
    doc["vertices"] = [[side * x for x in v] for v in doc["vertices"]]
    doc["couplings"] = [{"hinges": [0, 1], "teeth": [24, 24]}]
    doc["build"] = {"thickness": 2.0, "gears": gears, **build}
    return doc


def cube_doc(gears, side=40.0):
    """The cube with its front and right sides geared on the bottom (a 90-degree bevel pair)."""
    doc = cube_document()
    doc["vertices"] = [[side * x for x in v] for v in doc["vertices"]]
    doc["couplings"] = [{"hinges": [0, 1], "teeth": [20, 20]}]
    doc["build"] = {"thickness": 2.0, "gears": gears}
    return doc


def _pairs(doc):
    mech = loads(json.dumps(doc))
    spec = build_spec(mech)
    return mech, spec, gear_pairs(mech, spec)


def _trimesh(tris):
    trimesh = pytest.importorskip("trimesh")
    mesh = trimesh.Trimesh(vertices=tris.reshape(-1, 3), faces=np.arange(len(tris) * 3).reshape(-1, 3))
    mesh.merge_vertices()
    return mesh


def test_iso54_first_choice_modules():
    # ISO 54:1996, first-choice series (from memory): 1, 1.25, 1.5, 2, 2.5, 3, 4, 5, 6, 8, 10, 12, 16, 20.
    for m in (1, 1.25, 1.5, 2, 2.5, 3, 4, 5, 6, 8, 10, 12, 16, 20):
        assert m in ISO54_FIRST
    # Second-choice values (ISO 54, from memory) are not in the first series.
    for m in (1.125, 1.375, 1.75, 2.25, 2.75, 3.5, 4.5, 5.5, 7, 9, 11, 14):
        assert m not in ISO54_FIRST
    assert preferred_module(1.8) == 1.5 and preferred_module(4.0) == 4.0
    assert preferred_module(0.1, units="cm") == 0.1  # 1 mm


def test_spur_pitch_diameters_are_module_times_teeth():
    mech, spec, (pair,) = _pairs(strip_doc([{"coupling": 0}]))
    assert pair.kind == "spur"
    # Pitch diameter d = m z (any gear handbook); the external pair's centre
    # distance is (d1 + d2) / 2, here the 40 mm between the hinge lines.
    m = pair.module
    np.testing.assert_allclose([2 * g.pitch_radius for g in pair.gears], [m * 24, m * 24], rtol=1e-12)
    np.testing.assert_allclose(m * (24 + 24) / 2, 40.0, rtol=1e-12)


def test_bevel_pitch_diameters_with_an_iso54_module():
    mech, spec, (pair,) = _pairs(cube_doc([{"coupling": 0, "module": 1.25}]))
    assert pair.kind == "bevel"
    # d = m z at the outer end (Dudley, bevel gears); equal teeth on a 90-degree
    # shaft angle give 45-degree pitch cones (standard bevel geometry, ISO 23509).
    np.testing.assert_allclose([2 * g.pitch_radius for g in pair.gears], [1.25 * 20, 1.25 * 20], rtol=1e-12)
    np.testing.assert_allclose(np.degrees(pair.cone_angles), [45.0, 45.0], atol=1e-9)
    np.testing.assert_allclose(pair.cone_distance, 1.25 * 20 / (2 * math.sin(math.radians(45))), rtol=1e-12)


def test_contact_ratio_formula():
    # Two standard 20-degree gears, z = 20 and 20, m = 1, a = 20 mm: eps ~ 1.56
    # (REFERENCES.md, from memory), written out here from the handbook formula
    # eps = (sqrt(ra1^2 - rb1^2) + sqrt(ra2^2 - rb2^2) - a sin(alpha)) / (pi m cos(alpha)).
    alpha = np.radians(20.0)
    r, ra, rb = 10.0, 11.0, 10.0 * np.cos(alpha)
    by_hand = (2 * np.sqrt(ra**2 - rb**2) - 20.0 * np.sin(alpha)) / (np.pi * np.cos(alpha))
    np.testing.assert_allclose(contact_ratio(r, r, 1.0), by_hand, rtol=1e-12)
    np.testing.assert_allclose(contact_ratio(r, r, 1.0), 1.56, atol=0.005)


@pytest.mark.parametrize("sector", [90.0, 200.0, 360.0])
def test_spur_solid_volume_matches_the_sector_cylinder(sector):
    mech, spec, (pair,) = _pairs(strip_doc([{"coupling": 0, "sector_deg": sector, "face_width": 6.0}]))
    solid = gear_solids(mech, spec, [pair])[0]
    mesh = _trimesh(solid.triangles)
    assert mesh.is_watertight and mesh.is_winding_consistent
    r, w, span = pair.gears[0].pitch_radius, 6.0, np.radians(sector)
    n = int(np.ceil(48 * span / (2 * np.pi)))
    h = span / (2 * n)
    # Sector of a cylinder: V = S r^2 w / 2 (elementary geometry); the mesh is the
    # circumscribed polygon of n facets, whose area is the sector's times tan(h) / h.
    np.testing.assert_allclose(mesh.volume, span * r**2 * w / 2 * np.tan(h) / h, rtol=1e-9)


def test_bevel_solid_volume_matches_the_frustum():
    mech, spec, (pair,) = _pairs(cube_doc([{"coupling": 0, "module": 1.0, "face_width": 4.0,
                                            "sector_deg": 120.0}]))
    solid = gear_solids(mech, spec, [pair])[0]
    mesh = _trimesh(solid.triangles)
    assert mesh.is_watertight and mesh.is_winding_consistent
    R, b, d = pair.cone_distance, 4.0, np.radians(45.0)
    r0, r1, height = (R - b) * np.sin(d), R * np.sin(d), b * np.cos(d)
    span = np.radians(120.0)
    n = int(np.ceil(48 * span / (2 * np.pi)))
    h = span / (2 * n)
    # Frustum: V = pi H (r0^2 + r0 r1 + r1^2) / 3, times S / 2pi for a sector
    # (elementary geometry), times tan(h) / h for the circumscribed facets.
    exact = span * height * (r0**2 + r0 * r1 + r1**2) / 6
    np.testing.assert_allclose(mesh.volume, exact * np.tan(h) / h, rtol=1e-9)


def test_gear_solids_ride_on_their_panels():
    from foldsim.build.gears import posed_solid_meshes
    from foldsim.gearing import fold_schedule

    mech, spec, (pair,) = _pairs(strip_doc([{"coupling": 0, "sector_deg": 360}]))
    t = np.linspace(0, 1, 5)
    posed, owner, solids = posed_solid_meshes(mech, spec, fold_schedule(mech), t)
    assert posed.shape == (5, len(owner), 3, 3)
    # Each gear turns about its own hinge line: its axis points stay on that line.
    g0 = pair.gears[0]
    index = [k for k, s in enumerate(solids) if s.kind == "gear"][0]
    pts = posed[:, owner == index].reshape(5, -1, 3)
    a0, a1 = mech.axes[g0.hinge]
    assert solids[index].face == g0.face
    d = (a1 - a0) / np.linalg.norm(a1 - a0)
    # The gear on hinge 0 is carried by the root face: it does not move.
    np.testing.assert_allclose(pts, pts[:1].repeat(5, axis=0), atol=1e-9)
    radial = pts[0] - a0 - ((pts[0] - a0) @ d)[:, None] * d
    assert np.linalg.norm(radial, axis=1).max() <= g0.pitch_radius / np.cos(np.pi / 48) + 1e-9


@pytest.mark.parametrize("gears, message", [
    ([{"coupling": 0, "kind": "bevel"}], "build.gears[0].kind: hinges 0 and 1 make a spur pair, not bevel"),
    ([{"coupling": 0, "module": 2.0}], "build.gears[0].module: hinges 0 and 1 lie 40 apart"),
    ([{"coupling": 0, "teeth": [20, 30]}], "build.gears[0].teeth: 20:30 make ratio 0.666667"),
    ([{"coupling": 0, "face_width": 50}], "build.gears[0].face_width: the band"),
])
def test_bad_gear_entries_name_the_field(gears, message):
    with pytest.raises(ModelError) as err:
        loads(json.dumps(strip_doc(gears)), source="strip.mech.json")
    assert message in str(err.value) and "\n" not in str(err.value)


def _needed_sector_deg(z, eps):
    """90 degrees of turn plus the arc of action, eps * 360 / z (REFERENCES.md: sector >= travel + eps * pitch angle)."""
    return 90.0 + eps * 360.0 / z


def _eps_24():
    # Handbook formula written out for z = 24, 24 on a 40 mm centre distance
    # (Dudley; ISO 21771): m = 40 * 2 / 48, ra = r + m, rb = r cos 20 deg.
    m = 80.0 / 48.0
    r = 20.0
    ra, rb, alpha = r + m, r * np.cos(np.radians(20)), np.radians(20)
    return (2 * np.sqrt(ra**2 - rb**2) - 40.0 * np.sin(alpha)) / (np.pi * m * np.cos(alpha))


def test_sector_five_degrees_short_runs_out_where_computed_by_hand(tmp_path, capsys):
    from foldsim.cli import main

    eps = _eps_24()
    short = _needed_sector_deg(24, eps) - 5.0
    doc = strip_doc([{"coupling": 0, "sector_deg": [short, 360]}])
    path = tmp_path / "strip.mech.json"
    path.write_text(json.dumps(doc))
    assert main(["check", str(path), "--json"]) == 1
    report = json.loads(capsys.readouterr().out)
    (row,) = report["sector_coverage"]
    np.testing.assert_allclose(row["contact_ratio_full"], eps, rtol=1e-12)
    # Hand case: the gear turns 90 degrees over t in [0, 1] and its sector is 5
    # degrees short, so the arc of action reaches the sector's end 5 degrees
    # before closing: t = 85 / 90. At t = 1, 5 degrees of the eps * 15 degree arc
    # are bare: eps_eff = eps - 5 / 15.
    np.testing.assert_allclose(row["runs_out_at_t"], 85.0 / 90.0, atol=1e-12)
    np.testing.assert_allclose(row["min_contact_ratio"], eps - 5.0 / 15.0, atol=1e-12)
    assert any("runs out of teeth" in p for p in report["problems"])
    # The needed sector exactly: in mesh to the end.
    doc["build"]["gears"][0]["sector_deg"] = [short + 5.0, 360]
    path.write_text(json.dumps(doc))
    assert main(["check", str(path), "--json"]) == 0
    (row,) = json.loads(capsys.readouterr().out)["sector_coverage"]
    assert row["runs_out_at_t"] is None
    np.testing.assert_allclose(row["min_contact_ratio"], eps, rtol=1e-12)


def test_sector_coverage_counts_the_play():
    from foldsim.build.sectors import sector_coverage

    eps = _eps_24()
    doc = strip_doc([{"coupling": 0, "sector_deg": [_needed_sector_deg(24, eps), 360]}])
    doc["tolerances"] = {"hinge": {"play_deg": 1.0}}  # total range 1 degree: +-0.5 (docs/stackup.md)
    mech = loads(json.dumps(doc))
    (row,) = sector_coverage(mech, build_spec(mech))
    # Hand case: the sector holds the nominal travel exactly; 0.5 degree of play at
    # each end eats 1 degree of it, so the mesh thins from t = 89 / 90.
    np.testing.assert_allclose(row["runs_out_at_t"], 89.0 / 90.0, atol=1e-12)


def test_default_sectors_stay_in_mesh_on_every_kind():
    from foldsim.build.sectors import effective_contact_ratio, sector_coverage
    from foldsim.gearing import fold_schedule

    doc = json.load(open("assets/lantern.mech.json"))
    doc["build"] = {"thickness": 2.0, "gears": [{"coupling": k} for k in range(6)]}
    mech = loads(json.dumps(doc))
    spec = build_spec(mech)
    pairs = gear_pairs(mech, spec)
    assert sorted({p.kind for p in pairs}) == ["bevel", "remote", "spur"]
    rates = fold_schedule(mech).rates
    for p, row in zip(pairs, sector_coverage(mech, spec)):
        assert row["runs_out_at_t"] is None
        # Rolling without slip: both pitch points move the same arc length.
        g0, g1 = p.gears
        np.testing.assert_allclose(g0.pitch_radius * g0.sign * rates[g0.hinge],
                                   p.kappa * g1.pitch_radius * g1.sign * rates[g1.hinge], rtol=1e-9)
        dense = effective_contact_ratio(p, rates, np.linspace(0, 1, 401))
        np.testing.assert_allclose(dense, p.contact_ratio, rtol=1e-12)


def _fcl_model(fcl, tris):
    verts = tris.reshape(-1, 3)
    model = fcl.BVHModel()
    model.beginModel(len(verts), len(tris))
    model.addSubModel(verts, np.arange(len(verts)).reshape(-1, 3))
    model.endModel()
    return model


def _fcl_distance(fcl, ta, tb):
    a, b = fcl.CollisionObject(_fcl_model(fcl, ta)), fcl.CollisionObject(_fcl_model(fcl, tb))
    hit = fcl.collide(a, b, fcl.CollisionRequest(), fcl.CollisionResult())
    return 0.0 if hit else fcl.distance(a, b, fcl.DistanceRequest(), fcl.DistanceResult())


@pytest.mark.parametrize("doc", [cube_doc([{"coupling": 0, "module": 1.0, "face_width": 4.0}]),
                                 strip_doc([{"coupling": 0, "sector_deg": 360}])])
def test_exact_solid_distances_agree_with_python_fcl(doc):
    fcl = pytest.importorskip("fcl")
    from foldsim.build.gears import build_solids
    from foldsim.build.sweep import body_pairs, row_distances
    from foldsim.gearing import fold_schedule
    from foldsim.geometry import transform_points
    from foldsim.kinematics import poses_at

    mech, spec, pairs = _pairs(doc)
    solids = build_solids(mech, spec, tip=True)
    tested = body_pairs(solids, {p.coupling: p.carrier for p in pairs})
    assert len(tested)
    t = np.linspace(0.0, 1.0, 7)
    poses = poses_at(mech, fold_schedule(mech), t)
    faces = np.array([s.face for s in solids])
    every = []
    for pair in tested:
        a, b = (solids[i] for i in pair)
        # One pair at every t.
        ours = row_distances(solids, np.tile(pair, (len(t), 1)), np.stack([poses[:, a.face], poses[:, b.face]], axis=1))
        # python-fcl (a general-purpose collision library) on the same posed meshes.
        theirs = [_fcl_distance(fcl, transform_points(poses[k, a.face], a.triangles),
                                transform_points(poses[k, b.face], b.triangles)) for k in range(len(t))]
        np.testing.assert_allclose(ours, theirs, atol=1e-6 * mech.size)
        every += theirs
    # All pairs at all t as rows of one call (rows of different solids mixed).
    rows = np.repeat(tested, len(t), axis=0)
    k = np.tile(np.arange(len(t)), len(tested))
    mixed = row_distances(solids, rows, np.stack([poses[k, faces[rows[:, 0]]], poses[k, faces[rows[:, 1]]]], axis=1))
    np.testing.assert_allclose(mixed, every, atol=1e-6 * mech.size)


def test_gear_clearance_sweep_is_within_its_resolution_of_dense_fcl_samples():
    fcl = pytest.importorskip("fcl")
    from foldsim.build.gears import build_solids
    from foldsim.build.sweep import RESOLUTION, body_pairs, gear_clearance
    from foldsim.gearing import fold_schedule
    from foldsim.geometry import transform_points
    from foldsim.kinematics import poses_at

    mech, spec, pairs = _pairs(cube_doc([{"coupling": 0, "module": 1.0, "face_width": 4.0}]))
    (row,) = gear_clearance(mech, spec)
    solids = build_solids(mech, spec, tip=True)
    t = np.linspace(0.0, 1.0, 101)
    poses = poses_at(mech, fold_schedule(mech), t)
    dense = np.inf
    for i, j in body_pairs(solids, {p.coupling: p.carrier for p in pairs}):
        a, b = solids[i], solids[j]
        for k in range(len(t)):
            dense = min(dense, _fcl_distance(fcl, transform_points(poses[k, a.face], a.triangles),
                                             transform_points(poses[k, b.face], b.triangles)))
    # The sweep's guarantee (docs/build.md): the true least distance lies at most
    # RESOLUTION * size below what it reports, so no sample can be nearer.
    assert dense >= row["min_clearance"] - RESOLUTION * mech.size - 1e-9
    assert row["guaranteed_min"] <= dense + 1e-9
    # With a pass/fail target the sweep proves at least min(found - resolution, target).
    (coarse,) = gear_clearance(mech, spec, enough=1.0)
    assert coarse["guaranteed_min"] <= dense + 1e-9
    if coarse["min_clearance"] is None:
        # Nothing came within the target: the dense samples must agree.
        assert coarse["guaranteed_min"] == 1.0 and dense >= 1.0
    else:
        assert coarse["guaranteed_min"] >= min(coarse["min_clearance"] - RESOLUTION * mech.size, 1.0) - 1e-9


def test_allowed_contacts_are_the_mate_and_the_carrier():
    from foldsim.build.gears import build_solids
    from foldsim.build.sweep import body_pairs

    mech, spec, (pair,) = _pairs(cube_doc([{"coupling": 0}]))
    solids = build_solids(mech, spec, tip=True)
    tested = {tuple(sorted((solids[i].label, solids[j].label))) for i, j in body_pairs(solids, {0: pair.carrier})}
    gears = [s.label for s in solids if s.kind == "gear"]
    # The cube's bottom (panel 0) carries the pair; the gears ride on panels 1 and 2.
    assert pair.carrier == 0 and [g.face for g in pair.gears] == [1, 2]
    assert tuple(sorted(gears)) not in tested
    assert not any("panel 0" in p for p in tested)
    expected = {tuple(sorted((g, f"panel {f}"))) for g, own in zip(gears, (1, 2)) for f in range(1, 6) if f != own}
    assert tested == expected


def test_sizing_picks_the_largest_cone_pair_that_keeps_its_clearance():
    from foldsim.build.sizing import size_gears
    from foldsim.build.sweep import gear_clearance

    mech = loads(json.dumps(cube_doc([])))
    build, (row,) = size_gears(mech, 2.0, 1.0, clearance=0.5)
    assert row["kind"] == "bevel" and row["passes"] and row["limited_by"].startswith("panel")
    z = row["teeth"][0]

    def nearest(teeth):
        doc = cube_doc([{"coupling": 0, "module": 1.0, "teeth": [teeth, teeth]}])
        m = loads(json.dumps(doc))
        return gear_clearance(m, build_spec(m))[0]

    # The chosen size keeps the clearance over the whole motion, one tooth more does not
    # (checked with the check's own, finer sweep).
    assert nearest(z)["min_clearance"] >= 0.5 - 5e-3 * mech.size
    bigger = nearest(z + 1)
    assert bigger["min_clearance"] < 0.5 + 5e-3 * mech.size
    assert build["gears"] == [{"coupling": 0, "module": 1.0, "teeth": [z, z]}]


def test_new_writes_a_build_object(tmp_path, capsys):
    from foldsim.cli import main

    out = tmp_path / "box.mech.json"
    assert main(["new", "cube", "--size", "40", "-o", str(out), "--gears", "none", "--thickness", "1.5",
                 "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    assert report["build"] == {"thickness": 1.5, "clearance": 0.0} and report["gear_sizing"] == []
    assert json.loads(out.read_text())["build"]["thickness"] == 1.5
    assert main(["new", "cube", "-o", str(tmp_path / "x.mech.json"), "--module", "1"]) == 2
    assert "--module: sizes gears on thick panels; give --thickness too" in capsys.readouterr().err


def test_new_refuses_a_module_too_large_for_the_edges(tmp_path, capsys):
    # The cube's corner bevel pairs have ratio 1, so their fewest teeth are 12:12
    # (sizing's MIN_TEETH). At module 1 each pitch radius is m z / 2 = 6 (pitch
    # diameter = m z, ISO 54 / any gear handbook), and a 90-degree bevel pair's pitch
    # cones are 45 degrees, so each gear reaches r / tan(45) = 6 along its hinge
    # (worked by hand): past a 5 mm edge, within a 7 mm one.
    from foldsim.cli import main

    out = tmp_path / "small.mech.json"
    assert main(["new", "cube", "--size", "5", "--thickness", "0.5", "--module", "1", "-o", str(out)]) == 2
    err = capsys.readouterr().err.strip()
    assert err.count("\n") == 0 and err.startswith("foldsim: --module: ")
    assert "(12:12)" in err and "reaches 6 along its hinge" in err and "length 5" in err
    assert not out.exists()
    # At 7 mm the pairs fit; the spur pairs, sized by their hinges' distance, come
    # too near, which `check` also fails (exit 1), so `new` exits 1 as well.
    out = tmp_path / "fits.mech.json"
    code = main(["new", "cube", "--size", "7", "--thickness", "0.5", "--module", "1", "-o", str(out), "--json"])
    rows = json.loads(capsys.readouterr().out)["gear_sizing"]
    assert out.exists()
    assert code == (0 if all(r["passes"] for r in rows) else 1)
    assert main(["check", str(out)]) == code


def _write(tmp_path, doc, name="m.mech.json"):
    path = tmp_path / name
    path.write_text(json.dumps(doc))
    return path


def test_posed_stl_carries_the_thick_panels_and_gears(tmp_path):
    trimesh = pytest.importorskip("trimesh")
    from scipy.spatial import ConvexHull, HalfspaceIntersection

    from foldsim.cli import main

    doc = cube_document()
    doc["vertices"] = [[10.0 * x for x in v] for v in doc["vertices"]]
    doc["build"] = {"thickness": 1.0}
    src = _write(tmp_path, doc)
    assert main(["export", str(src), "-o", str(tmp_path / "box.stl")]) == 0
    mesh = trimesh.load(tmp_path / "box.stl")
    # The closed thick cube: outer cube minus the polyhedron one thickness inside
    # every face (scipy half-space intersection), as in the prism volume test.
    planes = [[0, 0, -1, 1.0], [0, 0, 1, -10 + 1.0], [-1, 0, 0, 1.0], [1, 0, 0, -10 + 1.0],
              [0, -1, 0, 1.0], [0, 1, 0, -10 + 1.0]]
    inner = HalfspaceIntersection(np.array(planes, float), np.array([5.0, 5, 5])).intersections
    np.testing.assert_allclose(abs(mesh.volume), 1000.0 - ConvexHull(inner).volume, rtol=1e-9)

    gears = cube_doc([{"coupling": 0, "module": 1.0}])
    src = _write(tmp_path, gears, "geared.mech.json")
    assert main(["export", str(src), "-o", str(tmp_path / "geared.obj")]) == 0
    text = (tmp_path / "geared.obj").read_text()
    assert "o coupling 0 gear on hinge 0" in text and "o coupling 0 gear on hinge 1" in text
    assert "o panel 5" in text


def test_gltf_and_svg_carry_the_build(tmp_path):
    pygltflib = pytest.importorskip("pygltflib")
    import re

    from foldsim.cli import main

    doc = cube_doc([{"coupling": 0, "module": 1.0}], side=10.0)
    doc["build"]["gears"][0]["face_width"] = 2.0
    doc["build"]["thickness"] = 1.0
    src = _write(tmp_path, doc)
    assert main(["export", str(src), "-o", str(tmp_path / "box.glb")]) == 0
    gltf = pygltflib.GLTF2().load(str(tmp_path / "box.glb"))
    assert [m.name for m in gltf.materials][-1] == "gear body"
    gear_prims = [p for m in gltf.meshes for p in m.primitives if p.material == 2]
    assert len(gltf.meshes) == 6 and len(gear_prims) == 2  # the gears ride on panels 1 and 2
    assert main(["export", str(src), "-o", str(tmp_path / "box.svg")]) == 0
    svg = (tmp_path / "box.svg").read_text()
    assert svg.count('class="bevel"') == 6
    # Tapered panels (Tachi 2011; Lang et al. 2018): on a cube every edge closes at
    # 90 degrees, so a 10 mm panel 1 mm thick has an 8 mm far face (45-degree mitre).
    d = re.search(r'id="bevel-0"[^>]* d="([^"]+)"', svg).group(1)
    pts = np.array([[float(x) for x in pair.split()] for pair in re.findall(r"[-\d.]+ [-\d.]+", d)])
    np.testing.assert_allclose(np.ptp(pts, axis=0), [8.0, 8.0], atol=1e-6)


def _dense_fcl(fcl, mech, solids, pair, t):
    from foldsim.gearing import fold_schedule
    from foldsim.geometry import transform_points
    from foldsim.kinematics import poses_at

    poses = poses_at(mech, fold_schedule(mech), t)
    a, b = (solids[i] for i in pair)
    return np.array([_fcl_distance(fcl, transform_points(poses[k, a.face], a.triangles),
                                   transform_points(poses[k, b.face], b.triangles)) for k in range(len(t))])


def test_screened_gear_clearance_agrees_with_the_exact_one_and_python_fcl():
    # The two-stage sweep (a screen at the threshold, then the exact stage) against
    # the exact stage alone and against python-fcl at dense drive values.
    fcl = pytest.importorskip("fcl")
    from foldsim.build.gears import build_solids
    from foldsim.build.sweep import RESOLUTION, body_pairs, gear_clearance

    mech, spec, pairs = _pairs(cube_doc([{"coupling": 0, "teeth": [20, 20], "face_width": 4.0,
                                          "corner_distance": 8.0}]))
    (exact,) = gear_clearance(mech, spec)
    res = RESOLUTION * mech.size
    solids = build_solids(mech, spec, tip=True)
    t = np.linspace(0.0, 1.0, 201)
    dense = min(_dense_fcl(fcl, mech, solids, p, t).min() for p in body_pairs(solids, {0: pairs[0].carrier}))
    # A threshold above the least distance: the same nearest approach, to the resolution.
    (above,) = gear_clearance(mech, spec, enough=2.0 * exact["min_clearance"])
    assert above["min_clearance"] == pytest.approx(exact["min_clearance"], abs=res)
    assert above["body"] == exact["body"] and above["with"] == exact["with"]
    assert dense >= above["min_clearance"] - res - 1e-9
    # A threshold below it: nothing within it, and no fcl sample is nearer either.
    low = 0.5 * exact["min_clearance"]
    (below,) = gear_clearance(mech, spec, enough=low)
    assert below["min_clearance"] is None and below["guaranteed_min"] == low
    assert dense >= low


def test_gear_contacts_are_where_python_fcl_finds_the_body_too_near():
    fcl = pytest.importorskip("fcl")
    from foldsim.build.gears import build_solids
    from foldsim.report import check

    doc = cube_doc([{"coupling": 0, "teeth": [20, 20], "face_width": 4.0, "corner_distance": 8.0}])
    doc["build"]["clearance"] = 1.0
    mech, spec, pairs = _pairs(doc)
    report = check(mech)
    contacts = report["gear_contacts"]
    assert contacts and any("comes within" in p for p in report["problems"])
    solids = build_solids(mech, spec, tip=True)
    label = {s.label: i for i, s in enumerate(solids)}
    t = np.linspace(0.0, 1.0, 401)
    for row in contacts:
        pair = (label[row["body"]], label[row["with"]])
        assert [solids[i].face for i in pair] == row["faces"]
        d = _dense_fcl(fcl, mech, solids, pair, t)
        # python-fcl: nearer than the clearance inside the stretch, not outside it
        # (both ends to the sweep's t resolution, 0.001, and one sample step).
        slack = 1e-3 + 1.0 / 400
        inside = (t >= row["first_t"] + slack) & (t <= row["last_t"] - slack)
        outside = (t < row["first_t"] - slack) | (t > row["last_t"] + slack)
        assert (d[inside] < 1.0).all() and (d[outside] >= 1.0).all()
        assert d.min() < 1.0


def test_gear_contacts_without_a_clearance_are_where_bodies_touch_by_python_fcl():
    # A geodesic sphere (80 panels, `foldsim new`'s net) with a default gear pair on
    # every coupling: pairs that share a hinge put gears on top of each other. With
    # no clearance a contact is a body within the distance resolution (1/1000 of
    # the model's size) of another; python-fcl's distance at drive values inside
    # each stretch must be within it, and every coupling the clearance rows find
    # touching has a stretch.
    fcl = pytest.importorskip("fcl")
    from dataclasses import replace

    from foldsim.build.gears import build_solids
    from foldsim.build.sweep import RESOLUTION
    from foldsim.design import build, shape_args
    from foldsim.report import check

    mech = build(shape_args("geodesic:1", size=100.0))[0]
    gears = [{"coupling": c} for c in range(len(mech.couplings))]
    mech = replace(mech, extras={**mech.extras, "build": {"thickness": 0.5, "gears": gears}})
    report = check(mech)
    floor = RESOLUTION * mech.size
    contacts = report["gear_contacts"]
    touching = {r["coupling"] for r in report["gear_clearance"]
                if r["min_clearance"] is not None and r["min_clearance"] <= floor}
    solids = build_solids(mech, build_spec(mech), tip=True)
    label = {s.label: i for i, s in enumerate(solids)}
    # A stretch names the couplings of both bodies when both are gears.
    named = {solids[label[r[side]]].coupling for r in contacts for side in ("body", "with")
             if solids[label[r[side]]].kind != "panel"}
    assert touching and touching <= named
    for row in contacts[::4]:
        pair = (label[row["body"]], label[row["with"]])
        t = np.linspace(row["first_t"], row["last_t"], 5)
        assert (_dense_fcl(fcl, mech, solids, pair, t) <= floor + 1e-9).all()
    # The check sweeps only the screen's pairs (`near_bodies`): the same stretches
    # as sweeping every solid.
    from foldsim.build.sweep import gear_contacts, near_bodies

    spec = build_spec(mech)
    screened = near_bodies(mech, spec, enough=3.0 * floor)
    assert gear_contacts(mech, spec, near=screened) == gear_contacts(mech, spec) == contacts


def test_sizing_grows_past_a_pair_that_shares_its_corner():
    # foldsim new octahedron: the drive hinge carries the gears of several pairs, two
    # of them at one corner, where their smallest gears overlap when flat. Sizing
    # then tries larger sizes (docs/build.md) and keeps the first that clears, so
    # pair 0 ends larger than its smallest and keeps the clearance, which python-fcl
    # confirms at dense drive values on the sized bodies.
    fcl = pytest.importorskip("fcl")
    from dataclasses import replace

    from foldsim.build.gears import build_solids
    from foldsim.build.sizing import MIN_TEETH, size_gears
    from foldsim.build.sweep import body_pairs
    from foldsim.design import build, shape_args

    mech = build(shape_args("octahedron", size=60.0))[0]
    sized, rows = size_gears(mech, 2.0, 1.0, clearance=0.5)
    first = rows[0]
    assert first["passes"] and first["teeth"][0] > MIN_TEETH
    mech = replace(mech, extras={**mech.extras, "build": sized})
    spec = build_spec(mech)
    solids = build_solids(mech, spec, tip=True)
    carrier = {p.coupling: p.carrier for p in gear_pairs(mech, spec)}
    t = np.linspace(0.0, 1.0, 41)
    for i, j in body_pairs(solids, carrier):
        if first["coupling"] in (solids[i].coupling, solids[j].coupling):
            assert _dense_fcl(fcl, mech, solids, (i, j), t).min() >= 0.5 - 5e-3 * mech.size


def test_a_screen_of_few_bodies_finds_what_the_screen_of_all_finds():
    # The screen of one coupling's bodies first drops the solids that cannot come
    # near them (conservative advancement on spheres). Reference: the same screen
    # over every body (the collision sweep's guarantee), restricted to that
    # coupling's pairs: the same pairs and stretches, while most solids are dropped.
    from dataclasses import replace

    from foldsim.build.bodies import body_speed_profile
    from foldsim.build.gears import gear_solids
    from foldsim.build.prisms import panel_solids
    from foldsim.build.sweep import _may_come_near, near_bodies
    from foldsim.design import build, shape_args
    from foldsim.gearing import fold_schedule

    mech = build(shape_args("geodesic:1", size=100.0))[0]
    gears = [{"coupling": c} for c in range(len(mech.couplings))]
    mech = replace(mech, extras={**mech.extras, "build": {"thickness": 0.5, "gears": gears}})
    spec = build_spec(mech)
    enough = 0.05 * mech.size
    full = near_bodies(mech, spec, enough=enough)
    screen = panel_solids(mech, spec) + gear_solids(mech, spec, tip=True, coarse=True)
    profile = body_speed_profile(mech, fold_schedule(mech).rates, screen)
    for c in (0, 5, 40, 77):
        part = near_bodies(mech, spec, only=[c], enough=enough)
        want = {k: v for k, v in full.items() if any(screen[i].kind != "panel" and screen[i].coupling == c for i in k)}
        assert part == want and len(part) >= 2
        active = np.array([s.kind != "panel" and s.coupling == c for s in screen])
        kept = _may_come_near(mech, fold_schedule(mech), screen, profile, active, 0.0, 1.0, enough)
        assert kept.sum() < len(screen) / 4 and all(kept[i] for k in want for i in k)


def test_sizing_proves_a_pair_clear_by_little_more_than_the_resolution():
    # The truncated tetrahedron (40 mm edges, 1 mm panels, module 0.5): the gears of
    # pairs 0 and 1 pass within about 0.7 mm of a panel near the end of the motion,
    # a few times the check's distance resolution (1/1000 of the model's size). A
    # sizing sweep coarser than that resolution could not prove them clear and
    # failed them; they must pass, and python-fcl at dense drive values must find
    # their bodies clear of that resolution on the sized model.
    fcl = pytest.importorskip("fcl")
    from dataclasses import replace

    from foldsim.build.gears import build_solids
    from foldsim.build.sizing import size_gears
    from foldsim.build.sweep import RESOLUTION, body_pairs
    from foldsim.design import build, shape_args

    mech = build(shape_args("truncated-tetrahedron", size=40.0, teeth="12:60"))[0]
    sized, rows = size_gears(mech, 1.0, 0.5)
    bevel = [r for r in rows if r["kind"] == "bevel"]
    assert bevel and all(r["passes"] for r in bevel)
    mech = replace(mech, extras={**mech.extras, "build": sized})
    spec = build_spec(mech)
    solids = build_solids(mech, spec, tip=True)
    carrier = {p.coupling: p.carrier for p in gear_pairs(mech, spec)}
    t = np.linspace(0.9, 1.0, 41)  # where the nearest approach is
    near = min(_dense_fcl(fcl, mech, solids, (i, j), t).min() for i, j in body_pairs(solids, carrier)
               if {solids[i].coupling, solids[j].coupling} & {0, 1})
    assert RESOLUTION * mech.size < near < 1.0


def test_sizing_leaves_every_pair_of_the_icosahedron_room_and_check_agrees():
    # The icosahedron's net puts the gears of two or three pairs on some hinges; a
    # greedy pass used to grow the first so far that a later one had no room. Every
    # pair must now pass, `check` of what was written must report no gear problem,
    # and at the nearest approach it reports python-fcl must measure the same
    # distance between the same two bodies.
    fcl = pytest.importorskip("fcl")
    from dataclasses import replace

    from foldsim.build.gears import build_solids
    from foldsim.build.sizing import size_gears
    from foldsim.design import build, shape_args
    from foldsim.report import check

    mech = build(shape_args("icosahedron", size=60.0))[0]
    sized, rows = size_gears(mech, 2.0, 1.0, clearance=0.25)
    assert len(rows) == len(mech.couplings) and all(r["passes"] for r in rows)
    mech = replace(mech, extras={**mech.extras, "build": sized})
    report = check(mech)
    assert not [p for p in report["problems"] if "coupling" in p]
    assert not report["gear_contacts"]
    # The check looks no farther than twice the clearance; look farther to find the nearest.
    from foldsim.build.sweep import gear_clearance

    spec = build_spec(mech)
    nearest = min((r for r in gear_clearance(mech, spec, enough=5.0) if r["min_clearance"] is not None),
                  key=lambda r: r["min_clearance"])
    solids = build_solids(mech, spec, tip=True)
    label = {s.label: i for i, s in enumerate(solids)}
    pair = (label[nearest["body"]], label[nearest["with"]])
    d = _dense_fcl(fcl, mech, solids, pair, np.array([nearest["at_t"]]))[0]
    assert nearest["min_clearance"] == pytest.approx(d, abs=1e-6 * mech.size)
    assert d >= 0.25


def test_gear_clearance_over_a_range_shorter_than_its_resolution_still_measures():
    # A swept range of 1e-6 in t: the bodies are measured at least once, and the
    # distance is the one python-fcl finds there (the solids barely move).
    fcl = pytest.importorskip("fcl")
    from foldsim.build.gears import build_solids
    from foldsim.build.sweep import gear_clearance

    mech, spec, pairs = _pairs(cube_doc([{"coupling": 0, "teeth": [20, 20], "face_width": 4.0,
                                          "corner_distance": 8.0}]))
    (row,) = gear_clearance(mech, spec, t_from=1.0, t_to=1.0 - 1e-6, enough=1.0)
    assert row["min_clearance"] is not None and row["guaranteed_min"] <= row["min_clearance"]
    solids = build_solids(mech, spec, tip=True)
    label = {s.label: i for i, s in enumerate(solids)}
    pair = (label[row["body"]], label[row["with"]])
    d = _dense_fcl(fcl, mech, solids, pair, np.array([row["at_t"]]))[0]
    assert row["min_clearance"] == pytest.approx(d, abs=1e-6 * mech.size)


def test_first_pose_containment_matches_trimesh():
    # Items packed as the sweep packs them (trimesh's boxes): a cube of side 4, a
    # unit cube inside it, and a unit cube outside. Whether one holds a corner of
    # the other is whether that corner lies inside the box (elementary geometry).
    trimesh = pytest.importorskip("trimesh")
    import itertools

    from foldsim.analysis.panels import Panels
    from foldsim.build.sweep import _contained

    def cube(lo, side):
        box = trimesh.creation.box(extents=[side] * 3)
        box.apply_translation(np.asarray(lo) + side / 2.0)
        return box

    meshes = [cube([0, 0, 0], 4.0), cube([1, 1, 1], 1.0), cube([6, 0, 0], 1.0)]
    tri = np.concatenate([m.triangles for m in meshes])
    count = np.array([len(m.triangles) for m in meshes])
    start = np.concatenate([[0], np.cumsum(count)[:-1]])
    empty = np.zeros(0, np.int64)
    pan = Panels(tri_face=np.repeat(np.arange(3), count), tri_points=tri, start=start, count=count,
                 skip_keys=empty, touch_keys=empty, pivot_keys=empty, pivot_dirs=np.zeros((0, 2, 2, 3)),
                 pivot_path=np.zeros((0, 0), bool), centre=np.zeros((3, 3)), radius=np.ones(3))
    pairs = np.array(list(itertools.combinations(range(3), 2)))
    got = _contained(pan, np.repeat(np.eye(4)[None], 3, axis=0), pairs)
    boxes = [m.bounds for m in meshes]

    def inside(box, point):
        return bool(((point > box[0]) & (point < box[1])).all())

    want = [inside(boxes[a], tri[start[b], 0]) or inside(boxes[b], tri[start[a], 0]) for a, b in pairs]
    assert got.tolist() == want == [True, False, False]


def test_sizing_gives_spur_pairs_sharing_a_hinge_bands_of_their_own():
    # The cube's net from its bottom has two spur pairs whose gears both sit on
    # hinge 0 (coaxial). Centred on their hinges' common length, as a file without
    # positions places them, they overlap from the flat state on; sizing gives them
    # lanes of their own, and python-fcl (a general-purpose collision library) on
    # the posed meshes finds them apart all along the motion.
    fcl = pytest.importorskip("fcl")
    from dataclasses import replace

    from foldsim.design import build, shape_args

    mech, report = build(shape_args("cube", size=60.0, thickness=2.0, module=1.0))
    rows = report["gear_sizing"]
    spurs = [r["coupling"] for r in rows if r["kind"] == "spur"]
    assert len(spurs) == 2 and all(r["passes"] for r in rows)
    shared = set(mech.couplings[spurs[0]].hinges) & set(mech.couplings[spurs[1]].hinges)
    assert len(shared) == 1
    hinge = int(shared.pop())
    t = np.linspace(0.0, 1.0, 21)

    def nearest(m):
        solids = gear_solids(m, build_spec(m))
        pair = [next(k for k, s in enumerate(solids) if s.coupling == c and s.hinge == hinge) for c in spurs]
        return _dense_fcl(fcl, m, solids, pair, t)

    assert nearest(mech).min() > 0.0
    entries = [{k: v for k, v in g.items() if k not in ("corner_distance", "face_width")}
               for g in mech.extras["build"]["gears"]]
    centred = replace(mech, extras={**mech.extras, "build": {**mech.extras["build"], "gears": entries}})
    assert nearest(centred)[0] == 0.0


def test_block_rows_settled_by_oriented_boxes_are_apart_by_python_fcl(monkeypatch):
    # The gear screen first drops the (block, item, item) rows whose oriented box
    # and bounding sphere stay apart over the block (`sweep._apart_over_blocks`).
    # Every dropped row must be farther apart than the sweep's clearance at every
    # drive value of its block: python-fcl (a general-purpose collision library)
    # on the two posed meshes at nine drive values across the block, for the 150
    # dropped rows whose items come nearest (their meshes' nearest corners at the
    # block's middle), where a bound too bold would show first.
    fcl = pytest.importorskip("fcl")
    from dataclasses import replace

    from foldsim.analysis import sweep
    from foldsim.design import build, shape_args
    from foldsim.geometry import transform_points
    from foldsim.report import check

    mech = build(shape_args("geodesic:1", size=100.0))[0]
    gears = [{"coupling": c} for c in range(len(mech.couplings))]
    mech = replace(mech, extras={**mech.extras, "build": {"thickness": 0.5, "gears": gears}})
    seen = []
    real = sweep._apart_over_blocks

    def spy(ev, grid, rows, block):
        out = real(ev, grid, rows, block)
        seen.append((ev, grid, rows, block, out))
        return out

    monkeypatch.setattr(sweep, "_apart_over_blocks", spy)
    check(mech)
    ev, grid, rows, block, apart = seen[0]
    assert ev.pan.passive is not None and ev.clearance > 0
    assert 0.5 < apart.mean() < 1.0  # it settles most rows, not all
    pan = ev.pan
    dropped = rows[apart]
    middle = ev.poses(0.5 * (grid[:-block:block] + grid[block::block]))
    tris = [pan.tri_points[pan.start[i]:pan.start[i] + pan.count[i]] for i in range(pan.n)]
    near = []
    for j, a, b in dropped:
        pa = transform_points(middle[j, a], tris[a]).reshape(-1, 3)
        pb = transform_points(middle[j, b], tris[b]).reshape(-1, 3)
        near.append(np.sqrt(((pa[:, None] - pb[None]) ** 2).sum(axis=2)).min())
    for j, a, b in dropped[np.argsort(near)[:150]]:
        t = np.linspace(grid[j * block], grid[(j + 1) * block], 9)
        poses = ev.poses(t)
        for k in range(len(t)):
            d = _fcl_distance(fcl, transform_points(poses[k, a], tris[a]), transform_points(poses[k, b], tris[b]))
            assert d > ev.clearance, (j, a, b, t[k], d)


def test_layout_prefers_a_bevel_pair_to_a_second_spur_pair_across_a_face(capsys, tmp_path):
    # The truncated tetrahedron's hexagons: a hinge two steps from the drive can be
    # reached across a hexagon by a spur pair or from a neighbouring side by a bevel
    # pair, at equal chain length. Two spur pairs across one hexagon join opposite
    # sides, and two such chords cross (their ends alternate round the hexagon; hand
    # geometry), so their gears, which span the face, run into each other. The
    # layout takes the bevel pair, and the sized build folds clean.
    from foldsim.cli import main
    from foldsim.design import build, shape_args
    from foldsim.layout import gear_layout

    mech = build(shape_args("truncated-tetrahedron", size=40.0))[0]
    layout = gear_layout(mech)
    spur_faces = [p.face for p in layout.pairs if p.kind == "spur"]
    assert len(spur_faces) == len(set(spur_faces))
    assert layout.chain == 2  # still the shortest chains
    out = tmp_path / "tt.mech.json"
    assert main(["new", "truncated-tetrahedron", "--size", "40", "--thickness", "1", "--module", "0.5",
                 "-o", str(out), "--json"]) == 0
    assert all(r["passes"] for r in json.loads(capsys.readouterr().out)["gear_sizing"])
    assert main(["check", str(out)]) == 0
