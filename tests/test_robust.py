"""Issue 15 items 2-12 and issue 13's mesh and limit cases, each from the issue's reproduction.

The rule checked is the project's bad-input rule (docs/format.md, Errors): one short
line naming the file and field, exit 2, no traceback.
"""

import json
import os
import signal
import struct
import subprocess
import sys
import time
from pathlib import Path

import pytest

from foldsim.cli import main
from foldsim.errors import ModelError
from foldsim.io import mechanism_json
from foldsim.io.mesh import load_mesh
from foldsim import limits

REPO = Path(__file__).resolve().parent.parent
GIFT = REPO / "assets" / "gift-box.mech.json"
TRAY = REPO / "assets" / "tray.mech.json"


def _doc(path=GIFT):
    return json.loads(path.read_text())


def _one_line_exit_2(capsys, argv, phrase):
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and phrase in err, err
    return err


def _write(tmp_path, doc, name="m.mech.json"):
    path = tmp_path / name
    path.write_text(json.dumps(doc), encoding="utf-8")
    return path


@pytest.mark.parametrize("change, field", [
    (lambda d: d["couplings"].__setitem__(0, {"hinges": [2, 0], "teeth": [10**400, 1]}), "line 1"),
    (lambda d: d["faces"][0].__setitem__(0, 10**30), "faces[0]: vertex index"),
    (lambda d: d["vertices"][0].__setitem__(0, 10**400), "line 1"),
])
def test_15_2_huge_integers(tmp_path, capsys, change, field):
    doc = _doc()
    change(doc)
    _one_line_exit_2(capsys, ["check", str(_write(tmp_path, doc))], field)


def test_15_2_huge_integers_through_the_python_api():
    doc = _doc()
    doc["vertices"][0][0] = 10**400
    with pytest.raises(ModelError, match=r"vertices\[0\]: must be a finite number"):
        mechanism_json.from_document(doc)


def test_15_3_two_vertices_at_one_point_in_a_flat_file(tmp_path, capsys):
    doc = _doc(TRAY)
    face = doc["faces"][0]
    doc["vertices"][face[1]] = list(doc["vertices"][face[0]])
    _one_line_exit_2(capsys, ["check", str(_write(tmp_path, doc))], "are at one point")


def test_15_4_self_crossing_face_is_refused_naming_the_face(tmp_path, capsys):
    # A bow-tie quad in a flat strip: swapping two corners makes its edges cross.
    doc = {"schema": "foldsim.mechanism/1", "state": "flat",
           "vertices": [[0, 0, 0], [1, 0, 0], [2, 0, 0], [0, 1, 0], [1, 1, 0], [2, 1, 0]],
           "faces": [[0, 1, 4, 3], [1, 2, 4, 5]],
           "hinges": [{"faces": [0, 1], "closed_angle_deg": 90}]}
    _one_line_exit_2(capsys, ["check", str(_write(tmp_path, doc))], "faces[1]")


@pytest.mark.parametrize("ratio", [5e-324, -1e308, 1e7])
def test_15_5_ratios_outside_the_sane_range(tmp_path, capsys, ratio):
    doc = _doc()
    doc["couplings"][0]["ratio"] = ratio
    _one_line_exit_2(capsys, ["check", "--json", str(_write(tmp_path, doc))], "couplings[0].ratio")


def test_15_5_and_13_a_chain_that_spins_a_hinge_is_refused(tmp_path, capsys):
    # Each ratio alone is in range; the chain 2 -> 3 -> 4 multiplies them.
    doc = _doc()
    doc["couplings"] = [{"hinges": [2, 0], "ratio": 1.0}, {"hinges": [2, 1], "ratio": 1.0},
                        {"hinges": [2, 3], "ratio": 300.0}, {"hinges": [3, 4], "ratio": 300.0}]
    _one_line_exit_2(capsys, ["check", str(_write(tmp_path, doc))], "turns")


@pytest.mark.parametrize("key", ["name", "units"])
def test_15_6_lone_surrogate(tmp_path, capsys, key):
    doc = _doc()
    doc[key] = "\ud800"
    path = tmp_path / "m.mech.json"
    path.write_text(json.dumps(doc), encoding="utf-8")  # json.dumps escapes it as \ud800
    _one_line_exit_2(capsys, ["check", str(path)], f"{key}: not valid Unicode")


@pytest.mark.parametrize("argv", [["check", str(REPO / "assets" / "tray.mech.json")],
                                  ["new", "geodesic:4", "-o", "OUT"]])  # about 15 s: interrupted mid-run
def test_15_7_ctrl_c_exits_130_without_traceback(tmp_path, argv):
    argv = [str(tmp_path / "o.mech.json") if a == "OUT" else a for a in argv]
    proc = subprocess.Popen([sys.executable, "-m", "foldsim", *argv], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, cwd=REPO)
    time.sleep(2.5)
    proc.send_signal(signal.SIGINT)
    out, err = proc.communicate(timeout=60)
    if proc.returncode == 0:
        pytest.skip("the command finished before the interrupt")
    assert proc.returncode == 130 and "Traceback" not in err and err.strip() == "foldsim: interrupted", err


def _cube_mesh():
    trimesh = pytest.importorskip("trimesh")
    from foldsim.solids import cube

    c = cube()
    tris = [t for f in c.faces for t in ([f[0], f[1], f[2]], [f[0], f[2], f[3]])]
    return trimesh.Trimesh(c.vertices, tris, process=False)


def _refused(path, phrase):
    with pytest.raises(ModelError) as info:
        load_mesh(path)
    message = str(info.value)
    assert "\n" not in message and str(path) in message and phrase in message, message


def test_15_8_latin1_comment_in_obj(tmp_path):
    path = tmp_path / "cube.obj"
    path.write_bytes(b"# caf\xe9 cr\xe8me\n" + _cube_mesh().export(file_type="obj").encode())
    assert len(load_mesh(path).faces) == 6


def test_15_8_directory_is_not_no_such_file(tmp_path):
    path = tmp_path / "d.stl"
    path.mkdir()
    _refused(path, "directory")


def test_15_8_byte_flipped_ascii_stl_prints_nothing(tmp_path):
    data = bytearray(_cube_mesh().export(file_type="stl_ascii").encode())
    data[200] ^= 0x55
    path = tmp_path / "flip.stl"
    path.write_bytes(bytes(data))
    run = subprocess.run([sys.executable, "-m", "foldsim", "new", str(path), "-o", str(tmp_path / "o.mech.json")],
                         capture_output=True, text=True, cwd=REPO)
    assert "Traceback" not in run.stderr and len(run.stderr.splitlines()) <= 1, run.stderr


def test_13_4_binary_stl_claims_more_triangles(tmp_path):
    data = bytearray(_cube_mesh().export(file_type="stl"))
    data[80:84] = struct.pack("<I", 99)
    path = tmp_path / "short.stl"
    path.write_bytes(bytes(data))
    _refused(path, "header says 99 triangles")


@pytest.mark.parametrize("encoding", ["ascii", "binary"])
def test_13_4_ply_with_wrong_element_count(tmp_path, encoding):
    data = _cube_mesh().export(file_type="ply", encoding=encoding)
    path = tmp_path / "bad.ply"
    path.write_bytes(data.replace(b"element face 12", b"element face 20"))
    _refused(path, "20 face")


@pytest.mark.parametrize("index, phrase", [("99", "out of range"), ("-99", "counting back"), ("0", "does not name")])
def test_13_4_obj_face_index_out_of_range(tmp_path, index, phrase):
    text = _cube_mesh().export(file_type="obj").replace("f 1", f"f {index}", 1)
    path = tmp_path / "bad.obj"
    path.write_text(text)
    _refused(path, phrase)


@pytest.mark.parametrize("suffix", ["stl", "obj", "off", "ply"])
def test_13_4_zero_byte_mesh(tmp_path, suffix):
    path = tmp_path / f"empty.{suffix}"
    path.write_bytes(b"")
    _refused(path, "empty")


def test_15_9_size_messages_name_the_limit(tmp_path, capsys):
    doc = _doc()
    doc["vertices"] = [[x * 1e300 for x in v] for v in doc["vertices"]]
    _one_line_exit_2(capsys, ["check", str(_write(tmp_path, doc))], "limit")
    _one_line_exit_2(capsys, ["new", "cube", "--size", "1e300", "-o", str(tmp_path / "c.mech.json")], "--size")
    _one_line_exit_2(capsys, ["nets", "antiprism:2000"], f"N in 3..{limits.MAX_SIDES}")
    _one_line_exit_2(capsys, ["check", str(GIFT), "--clearance", "inf"], "--clearance")


def test_15_10_huge_requests_are_capped(tmp_path, capsys):
    _one_line_exit_2(capsys, ["export", str(GIFT), "--to", str(tmp_path / "x.csv"), "--frames", "100000000"],
                     "--frames")
    _one_line_exit_2(capsys, ["new", "prism:100000", "-o", str(tmp_path / "p.mech.json")], "prism:N")


def test_15_11_stale_temporaries_are_removed_on_the_next_save(tmp_path):
    mech = mechanism_json.load(GIFT)
    stale = tmp_path / ".box.mech.json.abcd1234.tmp"
    fresh = tmp_path / ".box.mech.json.wxyz5678.tmp"
    other = tmp_path / "notes.tmp"
    for p in (stale, fresh, other):
        p.write_text("partial")
    old = time.time() - 2 * mechanism_json.STALE_SECONDS
    os.utime(stale, (old, old))
    os.utime(other, (old, old))
    mechanism_json.save(mech, tmp_path / "box.mech.json")
    # The stale one goes; a save that may still be running keeps its file; others stay.
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted([fresh.name, other.name, "box.mech.json"])


def test_13_limits_are_named(tmp_path, capsys):
    doc = _doc()
    doc["faces"] = [[0, 1, 2]] * (limits.MAX_FACES + 1)
    _one_line_exit_2(capsys, ["check", str(_write(tmp_path, doc))], f"limit of {limits.MAX_FACES:,}")
    doc = _doc()
    doc["state"] = "x" * 1000
    err = _one_line_exit_2(capsys, ["check", str(_write(tmp_path, doc))], "state")
    assert len(err) < 200 and "..." in err
    text = GIFT.read_text().replace('"drive": 2', '"drive": ' + "[" * 1000 + "]" * 1000)
    path = tmp_path / "deep.mech.json"
    path.write_text(text)
    _one_line_exit_2(capsys, ["check", str(path)], f"limit of {limits.MAX_DEPTH} levels")
    path.write_text(GIFT.read_text().replace("120.0", "1" * 5000, 1))
    _one_line_exit_2(capsys, ["check", str(path)], f"limit of {limits.MAX_NUMBER_CHARS}")


def test_15_12_symmetry_tolerance_is_an_option_and_reported(tmp_path, capsys):
    trimesh = pytest.importorskip("trimesh")
    path = tmp_path / "box.stl"
    trimesh.creation.box([1.0, 1.0, 1.00001]).export(str(path))
    assert main(["nets", str(path), "--json"]) == 0
    loose = json.loads(capsys.readouterr().out)
    assert main(["nets", str(path), "--json", "--symmetry-tol", "1e-8"]) == 0
    exact = json.loads(capsys.readouterr().out)
    # The cube has 11 nets (OEIS A103606 counts them for the Platonic solids); a
    # square prism that is not a cube has the group D4h of order 16 and 29 nets
    # (from memory; the cube face graph has 384 spanning trees by the matrix-tree theorem).
    assert (loose["nets"], loose["symmetry_order"], loose["symmetry_tolerance"]) == (11, 48, 1e-5)
    assert (exact["nets"], exact["symmetry_order"], exact["symmetry_tolerance"]) == (29, 16, 1e-8)
    _one_line_exit_2(capsys, ["nets", "cube", "--symmetry-tol", "inf"], "--symmetry-tol")
