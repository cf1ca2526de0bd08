"""The demo mechanisms in assets/: they load, check as documented, and regenerate.

Each check names its source in a comment: "hand check" (worked out on paper from
the model's dimensions), "elementary geometry", or "design rule" (what
scripts/make_demos.py promises about every demo's gearing).
"""

import json
import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from foldsim.cli import main
from foldsim.io.mechanism_json import load
from foldsim.report import check

ROOT = Path(__file__).resolve().parent.parent
ASSETS = ROOT / "assets"
DEMOS = ["gift-box", "lantern", "tray", "tray-overfold"]


def demo_path(stem):
    return ASSETS / f"{stem}.mech.json"


@pytest.fixture(scope="module")
def reports():
    """Check reports of every demo, computed once."""
    return {stem: check(load(demo_path(stem))) for stem in DEMOS}


def closing_degrees(report):
    return {tuple(row["faces"]): row["closed_angle_deg"] for row in report["hinge_table"]}


@pytest.mark.parametrize("stem", DEMOS)
def test_demo_loads(stem):
    mech = load(demo_path(stem))
    # hand check: the face and hinge counts the script's docstring lists.
    faces, hinges = {"gift-box": (6, 5), "lantern": (8, 7), "tray": (9, 8), "tray-overfold": (9, 8)}[stem]
    assert (mech.n_faces, mech.n_hinges) == (faces, hinges)
    assert mech.units == "mm"
    # hand check: the couplings form a tree over the hinges (one degree of freedom),
    # and a tree over H nodes has H - 1 edges.
    assert len(mech.couplings) == mech.n_hinges - 1


@pytest.mark.parametrize("stem", DEMOS)
def test_gears_sit_on_a_face_both_hinges_share(stem):
    mech = load(demo_path(stem))
    # design rule: a gear pair is carried by one face, so its two hinges share it.
    for c in mech.couplings:
        i, j = c.hinges
        assert set(mech.hinge_faces[i].tolist()) & set(mech.hinge_faces[j].tolist()), c


@pytest.mark.parametrize("stem", ["gift-box", "lantern", "tray"])
def test_good_demos_check_ok(stem, reports, capsys):
    report = reports[stem]
    # design rule: a spanning tree of couplings from the drive leaves one degree of
    # freedom; the expected verdicts are those in scripts/make_demos.py's docstring.
    assert report["dof"] == 1
    assert report["schedule"] == "geared"
    assert report["closure"]["meets"]
    assert report["collisions"] == []
    assert report["ok"], report["problems"]
    # design rule: ratio = closed[j] / closed[i], so every hinge closes at t = 1.
    for row in report["hinge_table"]:
        assert row["end_angle_deg"] == pytest.approx(row["closed_angle_deg"], abs=1e-9)
    assert main(["check", str(demo_path(stem))]) == 0
    assert capsys.readouterr().out.rstrip().endswith("OK")


@pytest.mark.parametrize("stem", DEMOS)
def test_hinge_table_lists_each_hinges_couplings_from_the_file(stem, reports):
    # the file itself (docs/format.md): coupling k names its two hinges in "hinges".
    doc = json.loads(demo_path(stem).read_text())
    expected = {h: [k for k, c in enumerate(doc["couplings"]) if h in c["hinges"]]
                for h in range(len(doc["hinges"]))}
    assert any(expected.values())
    assert {row["hinge"]: row["couplings"] for row in reports[stem]["hinge_table"]} == expected


def test_gift_box_angles_and_cut_edges(reports):
    report = reports["gift-box"]
    # hand check: every dihedral angle of a cuboid is 90 degrees.
    for angle in closing_degrees(report).values():
        assert angle == pytest.approx(90.0, abs=1e-9)
    # hand check: a cuboid has 12 edges; 5 are hinges, so 7 are cut edges.
    assert len(report["closure"]["edges"]) == 7
    # hand check: the lid (face 5) hangs on the back wall (face 3), a 120 mm long wall.
    mech = load(demo_path("gift-box"))
    assert [3, 5] in mech.hinge_faces.tolist()
    hinge = mech.hinge_faces.tolist().index([3, 5])
    a, b = mech.axes[hinge]
    assert np.linalg.norm(b - a) == pytest.approx(120.0)


def test_gift_box_dimensions():
    mech = load(demo_path("gift-box"))
    # hand check: 120 x 80 x 60 mm, as specified.
    assert np.ptp(mech.vertices, axis=0).tolist() == pytest.approx([120.0, 80.0, 60.0])


def test_lantern_angles(reports):
    angles = closing_degrees(reports["lantern"])
    sides = set(range(1, 7))
    for (a, b), angle in angles.items():
        if a in sides and b in sides:
            # elementary geometry: a regular hexagon's interior angle is 120 degrees,
            # so neighbouring sides of the prism fold 180 - 120 = 60 degrees.
            assert angle == pytest.approx(60.0, abs=1e-6)
        else:
            # elementary geometry: a right prism's sides stand square on its bases.
            assert angle == pytest.approx(90.0, abs=1e-6)
    assert sum(a in sides and b in sides for a, b in angles) == 3
    # hand check: 6 + 6 + 6 = 18 edges, 7 hinges, so 11 cut edges.
    assert len(reports["lantern"]["closure"]["edges"]) == 11


def test_lantern_shape_and_short_chains():
    mech = load(demo_path("lantern"))
    verts = mech.vertices
    # hand check: side 40 mm (a regular hexagon's circumradius equals its side), height 90 mm.
    assert np.linalg.norm(verts[0] - verts[1]) == pytest.approx(40.0, abs=1e-8)
    assert np.ptp(verts[:, 2]) == pytest.approx(90.0)
    # hand check: no face is more than two hinges from the base.
    assert len(mech.levels) == 2


def test_tray_is_flat_and_closes_at_right_angles(reports):
    mech = load(demo_path("tray"))
    assert mech.state == "flat"
    assert np.ptp(mech.vertices[:, 2]) == 0.0
    # design rule: walls fold up 90 degrees, flaps 90 degrees relative to their wall.
    assert all(a == 90.0 for a in closing_degrees(reports["tray"]).values())
    # hand check: each of the 4 flaps meets the base along its lower edge and the
    # side wall along its outer edge: 8 cut edges.
    pairs = sorted(tuple(e["faces"]) for e in reports["tray"]["closure"]["edges"])
    assert pairs == sorted([(0, 5), (0, 6), (0, 7), (0, 8), (2, 5), (2, 7), (4, 6), (4, 8)])


# The over-folded tray, worked by hand. Faces: 0 base, 1-4 front, right, back, left
# walls, 5 and 6 front flaps, 7 and 8 back flaps; every hinge closes at 90 degrees and
# the back wall (hinge 0-3) is geared 1.2:1 to the drive, so at t it stands at
# alpha = 1.2 * 90 t degrees, and its flaps, geared 1:1 to it, at beta = alpha.
#
# Local frame at one back corner (the other is its mirror image): origin at the
# corner, x along the base edge outward (the side the flap lies on in the flat
# sheet), y into the tray, z up. The wall's up direction is e = (0, -cos a, sin a)
# and its inner normal n = (0, sin a, cos a); a flap point u along the flap and s up
# the wall sits at s e + u (cos b, 0, 0) + u sin b n. Its lower edge (s = 0) runs
# along d = (cos b, sin b sin a, sin b cos a): below the base (d_z < 0) once the wall
# passes vertical, and then inside the base's corner (d_x < 0, d_y > 0), so the back
# flaps cut through the base from 1.2 * 90 t = 90, t = 5/6, to t = 1. The front
# flaps and the side walls stay at 90t and never touch the base or each other.
OVERFOLD_RATIO = 1.2
FIRST_T = 90.0 / (OVERFOLD_RATIO * 90.0)  # hand check: 5/6


def _overfold_gaps(width=30.0, height=30.0, ratio=OVERFOLD_RATIO):
    """Hand check: gaps of a back flap's lower and outer cut edges at t = 1."""
    a = b = math.radians(ratio * 90.0)
    e = np.array([0.0, -math.cos(a), math.sin(a)])
    d = np.array([math.cos(b), math.sin(b) * math.sin(a), math.sin(b) * math.cos(a)])
    low = width * d                 # should meet the base corner at (0, w, 0)
    high = height * e + width * d   # should meet the side wall's top corner (0, w, H)
    lower = np.linalg.norm(low - [0.0, width, 0.0])
    outer = max(lower, np.linalg.norm(high - [0.0, width, height]))
    return lower, outer


def test_overfold_collides_with_the_base(reports, capsys):
    report = reports["tray-overfold"]
    # design rule: one wrong ratio changes no degree of freedom.
    assert report["dof"] == 1
    hits = {tuple(c["faces"]): c for c in report["collisions"]}
    # hand check (above): the back flaps 7 and 8 collide with the base 0, nothing else.
    assert sorted(hits) == [(0, 7), (0, 8)]
    for c in hits.values():
        # hand check: the wall passes vertical at t = 90 / (1.2 * 90) = 5/6.
        assert c["first_t"] == pytest.approx(FIRST_T, abs=2e-3)
        assert c["last_t"] == pytest.approx(1.0, abs=2e-3)
    assert not report["ok"]
    assert main(["check", str(demo_path("tray-overfold"))]) == 1
    out = capsys.readouterr().out
    assert "faces 0 and 7" in out and "OPEN" in out


def test_overfold_back_wall_reaches_108_degrees(reports):
    table = {tuple(r["faces"]): r for r in reports["tray-overfold"]["hinge_table"]}
    # hand check: 1.2 * 90 = 108 degrees for the back wall and its two flaps.
    for faces in [(0, 3), (3, 7), (3, 8)]:
        assert table[faces]["end_angle_deg"] == pytest.approx(108.0)
    for faces in [(0, 1), (0, 2), (0, 4), (1, 5), (1, 6)]:
        assert table[faces]["end_angle_deg"] == pytest.approx(90.0)


def test_overfold_open_edges(reports):
    closure = reports["tray-overfold"]["closure"]
    assert not closure["meets"]
    gaps = {tuple(e["faces"]): e for e in closure["edges"]}
    lower, outer = _overfold_gaps()
    # hand check: 13.11 mm at the base, 15.26 mm at the side walls (formula above).
    assert lower == pytest.approx(13.11, abs=5e-3) and outer == pytest.approx(15.26, abs=5e-3)
    for faces, gap in [((0, 7), lower), ((0, 8), lower), ((2, 7), outer), ((4, 8), outer)]:
        assert not gaps[faces]["meets"]
        assert gaps[faces]["gap"] == pytest.approx(gap, abs=1e-6)
    for faces in [(0, 5), (0, 6), (2, 5), (4, 6)]:
        assert gaps[faces]["meets"]


def test_regenerating_gives_the_committed_files(tmp_path):
    script = ROOT / "scripts" / "make_demos.py"
    done = subprocess.run([sys.executable, str(script), "--out", str(tmp_path)],
                          capture_output=True, text=True, check=False)
    assert done.returncode == 0, done.stderr
    written = sorted(p.name for p in tmp_path.glob("*.mech.json"))
    assert written == sorted(f"{stem}.mech.json" for stem in DEMOS)
    for name in written:
        assert (tmp_path / name).read_bytes() == (ASSETS / name).read_bytes(), name
