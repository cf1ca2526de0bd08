"""Reading and writing `*.mech.json` files, and how `foldsim check` reports bad input.

Every bad-input case is checked twice over the same table: `foldsim.load` must
raise `ModelError` whose one-line message names the file and the field (with its
index where it has one), and `foldsim check FILE` must exit 2 and print exactly
that message as one line on stderr, with no traceback.
"""

import json
import os
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

import foldsim
from foldsim.errors import ModelError
from foldsim.io import mechanism_json

from helpers import cube_document, strip_document, write_doc

REPO = Path(__file__).resolve().parent.parent


# ---------------------------------------------------------------- bad-input cases
# Each maker writes one broken file into tmp_path and returns its path. The cube's
# faces are bottom, front, right, back, left, top (0..5) and its hinges are
# [0,1] [0,2] [0,3] [0,4] [3,5] (0..4); see tests/helpers.py.

def _doc_with(change):
    def make(tmp_path):
        doc = cube_document()
        change(doc)
        return write_doc(tmp_path, doc)
    return make


def _text(text):
    def make(tmp_path):
        path = tmp_path / "model.mech.json"
        path.write_text(text, encoding="utf-8")
        return path
    return make


def _cube_text_with(placeholder_change, literal):
    """The cube written as JSON with one number replaced by a raw JSON literal."""
    def make(tmp_path):
        doc = cube_document()
        placeholder_change(doc)
        path = tmp_path / "model.mech.json"
        path.write_text(json.dumps(doc).replace("424242.5", literal), encoding="utf-8")
        return path
    return make


def _directory(tmp_path):
    path = tmp_path / "model.mech.json"
    path.mkdir()
    return path


def _missing(tmp_path):
    return tmp_path / "model.mech.json"


def _set(*keys_and_value):
    *keys, value = keys_and_value

    def change(doc):
        target = doc
        for key in keys[:-1]:
            target = target[key]
        target[keys[-1]] = value
    return change


def _add_collinear_face(doc):
    doc["vertices"].append([2.0, 0.0, 0.0])
    doc["faces"].append([0, 1, 8])


def _drop_last_hinge(doc):
    del doc["hinges"][4]


def _strip_without_angle(tmp_path):
    doc = strip_document()
    del doc["hinges"][1]["closed_angle_deg"]
    return write_doc(tmp_path, doc)


# (case id, maker, field that the message must name, phrase it must contain)
CASES = [
    ("directory", _directory, None, "cannot read file"),
    ("missing-path", _missing, None, "cannot read file"),
    ("empty-file", _text(""), None, "empty"),
    ("blank-file", _text("  \n\t\n"), None, "empty"),
    ("invalid-json", _text('{"schema": "foldsim.mechanism/1", "vertices": [1, 2,'), None, "invalid JSON"),
    ("unknown-schema", _doc_with(_set("schema", "foldsim.mechanism/2")), "schema", "foldsim.mechanism/2"),
    ("missing-schema", _doc_with(lambda d: d.pop("schema")), "schema", "expected"),
    ("vertex-index-out-of-range", _doc_with(_set("faces", 1, 2, 99)), "faces[1]", "vertex index 99 out of range"),
    ("root-out-of-range", _doc_with(_set("root", 6)), "root", "face 6 out of range"),
    ("hinge-face-out-of-range", _doc_with(_set("hinges", 2, "faces", [0, 9])), "hinges[2]", "face 9 out of range"),
    ("drive-out-of-range", _doc_with(_set("drive", 5)), "drive", "hinge 5 out of range"),
    ("nan-string-coordinate", _doc_with(_set("vertices", 6, 2, "nan")), "vertices[6]", "finite number"),
    ("overflowing-coordinate", _cube_text_with(_set("vertices", 6, 2, 424242.5), "1e999"),
     "vertices[6]", "finite number"),
    ("nan-literal-coordinate", _cube_text_with(_set("vertices", 3, 0, 424242.5), "NaN"),
     "vertices[3]", "finite number"),
    ("repeated-vertex", _doc_with(_set("faces", 5, [4, 5, 6, 4])), "faces[5]", "repeats a vertex"),
    ("collinear-face", _doc_with(_add_collinear_face), "faces[6]", "degenerate"),
    # Moving vertex 6 along x bends only the right face (x = 1); back and top stay flat.
    ("non-planar-face", _doc_with(_set("vertices", 6, [1.2, 1.0, 1.0])), "faces[2]", "not planar"),
    ("hinge-faces-share-no-edge", _doc_with(_set("hinges", 4, "faces", [0, 5])), "hinges[4]", "share no edge"),
    ("duplicate-hinge", _doc_with(_set("hinges", 4, "faces", [1, 0])), "hinges[4]", "duplicate of hinges[0]"),
    ("hinge-loop", _doc_with(_set("hinges", 4, "faces", [1, 2])), "hinges[4]", "loop"),
    ("unconnected-face", _doc_with(_drop_last_hinge), "faces[5]", "not connected"),
    ("coupling-missing-hinge",
     _doc_with(_set("couplings", [{"hinges": [0, 1], "ratio": 1.0}, {"hinges": [0, 7], "ratio": 1.0}])),
     "couplings[1]", "hinge 7 out of range"),
    ("teeth-zero", _doc_with(_set("couplings", [{"hinges": [0, 1], "teeth": [0, 12]}])),
     "couplings[0].teeth", "positive integers"),
    ("teeth-fraction", _doc_with(_set("couplings", [{"hinges": [0, 1], "teeth": [1.5, 3]}])),
     "couplings[0].teeth", "positive integers"),
    ("teeth-string", _doc_with(_set("couplings", [{"hinges": [0, 1], "teeth": ["a", 2]}])),
     "couplings[0].teeth", "positive integers"),
    ("zero-ratio", _doc_with(_set("couplings", [{"hinges": [0, 1], "ratio": 0}])),
     "couplings[0].ratio", "non-zero"),
    ("overflowing-ratio", _cube_text_with(_set("couplings", [{"hinges": [0, 1], "ratio": 424242.5}]), "1e999"),
     "couplings[0].ratio", "finite"),
    ("flat-hinge-without-angle", _strip_without_angle, "hinges[1]", "closed_angle_deg"),
]

CASE_IDS = [c[0] for c in CASES]


def _load_error(path):
    with pytest.raises(ModelError) as info:
        foldsim.load(path)
    return str(info.value)


@pytest.mark.parametrize(("case", "make", "field", "phrase"), CASES, ids=CASE_IDS)
def test_load_rejects_bad_input_with_one_line_naming_file_and_field(tmp_path, case, make, field, phrase):
    # Source: docs/format.md and STYLE.md (errors name the file, the field and the index).
    path = make(tmp_path)
    message = _load_error(path)
    assert "\n" not in message
    assert message.startswith(f"{path}: ")
    assert phrase in message
    if field is not None:
        assert f" {field}" in message


@pytest.mark.parametrize(("case", "make", "field", "phrase"), CASES, ids=CASE_IDS)
def test_check_exits_2_with_the_load_message_on_stderr(tmp_path, capsys, case, make, field, phrase):
    # Source: DESIGN.md, `foldsim check` exit codes (2 = bad input, one line, no traceback).
    from foldsim.cli import main

    path = make(tmp_path)
    message = _load_error(path)
    code = main(["check", str(path)])
    out, err = capsys.readouterr()
    assert code == 2
    assert out == ""
    assert "Traceback" not in err
    lines = err.strip().splitlines()
    assert len(lines) == 1
    assert message in lines[0]


def test_check_as_a_subprocess_prints_no_traceback(tmp_path):
    # Source: DESIGN.md (bad input: exit 2, one clear line on stderr, no traceback).
    (tmp_path / "bad.json").write_text('{"schema": "foldsim.mechanism/1", "faces": [', encoding="utf-8")
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join(p for p in (str(REPO), env.get("PYTHONPATH")) if p)
    result = subprocess.run(
        [sys.executable, "-m", "foldsim", "check", "bad.json"], cwd=tmp_path, env=env,
        capture_output=True, text=True, timeout=120)
    assert result.returncode == 2
    assert "Traceback" not in result.stderr
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1
    assert "bad.json" in lines[0]
    assert "invalid JSON" in lines[0]


# ---------------------------------------------------------------- accepted input

def _negative_ratio_cube(tmp_path):
    doc = cube_document()
    doc["couplings"] = [{"hinges": [0, 1], "ratio": -1.5}]
    return write_doc(tmp_path, doc)


def test_negative_ratio_is_accepted_by_load(tmp_path):
    # Source: docs/format.md (a negative ratio turns the second hinge the other way).
    mech = foldsim.load(_negative_ratio_cube(tmp_path))
    assert mech.couplings[0].hinges == (0, 1)
    assert mech.couplings[0].ratio == -1.5
    assert mech.couplings[0].teeth is None


def test_negative_ratio_is_not_bad_input_to_check(tmp_path, capsys):
    # Source: DESIGN.md exit codes: 2 is for bad input only; this file is valid.
    from foldsim.cli import main

    code = main(["check", str(_negative_ratio_cube(tmp_path))])
    _, err = capsys.readouterr()
    assert code in (0, 1)
    assert "couplings" not in err


def test_teeth_give_the_ratio_of_first_to_second(tmp_path):
    # Hand check: teeth [12, 24] -> r = 12 / 24 = 0.5, theta[1] = 0.5 * theta[0].
    doc = cube_document()
    doc["couplings"] = [{"hinges": [0, 1], "teeth": [12, 24]}]
    mech = foldsim.load(write_doc(tmp_path, doc))
    assert mech.couplings[0].ratio == 0.5
    assert mech.couplings[0].teeth == (12, 24)


def test_defaults_of_optional_keys(tmp_path):
    # Source: docs/format.md defaults (state closed, root 0, drive 0, units mm, couplings []).
    doc = cube_document()
    for key in ("name", "units", "state", "root", "couplings", "drive"):
        del doc[key]
    mech = foldsim.load(write_doc(tmp_path, doc))
    assert (mech.state, mech.root, mech.drive, mech.units, mech.name) == ("closed", 0, 0, "mm", "")
    assert mech.couplings == ()


def test_closed_cube_closing_angles_and_cut_edges(tmp_path):
    # Hand check: a box folds every side up by +90 degrees toward its back; of the
    # cube's 12 edges, 5 are hinges and the other 7 are cut edges.
    mech = foldsim.load(write_doc(tmp_path, cube_document()))
    np.testing.assert_allclose(np.degrees(mech.closed_angles), [90.0] * 5, atol=1e-12)
    assert len(mech.cut_faces) == 7


def _assert_same_mechanism(a, b):
    for name in ("vertices", "hinge_faces", "closed_angles", "parent", "child", "axes",
                 "face_hinge", "cut_faces", "cut_points"):
        np.testing.assert_array_equal(getattr(a, name), getattr(b, name), err_msg=name)
    assert len(a.faces) == len(b.faces)
    for fa, fb, pa, pb in zip(a.faces, b.faces, a.flat_faces, b.flat_faces):
        np.testing.assert_array_equal(fa, fb)
        np.testing.assert_array_equal(pa, pb)
    assert (a.name, a.units, a.state, a.root, a.drive) == (b.name, b.units, b.state, b.root, b.drive)
    assert a.couplings == b.couplings
    assert a.extras == b.extras


@pytest.mark.parametrize("builder", [cube_document, strip_document], ids=["closed-cube", "flat-strip"])
def test_save_then_load_gives_identical_arrays(tmp_path, builder):
    # Common practice: a writer's output read back equals what was written.
    doc = builder()
    doc["couplings"] = [{"hinges": [0, 1], "teeth": [18, 30]}]
    doc["notes"] = {"author": "test", "revision": 3}
    first = foldsim.load(write_doc(tmp_path, doc, "first.mech.json"))
    again = tmp_path / "again.mech.json"
    mechanism_json.save(first, again)
    second = foldsim.load(again)
    _assert_same_mechanism(first, second)
    assert second.extras == {"notes": {"author": "test", "revision": 3}}
    assert json.loads(again.read_text(encoding="utf-8"))["notes"] == {"author": "test", "revision": 3}


def test_save_is_atomic_when_the_rename_fails(tmp_path, monkeypatch):
    # Common practice: write a temporary file and rename it, so a failure leaves the
    # old file whole and no debris behind.
    path = write_doc(tmp_path, cube_document())
    before = path.read_bytes()
    doc = cube_document()
    doc["name"] = "changed"
    mech = mechanism_json.from_document(doc)

    def refuse(src, dst):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(os, "replace", refuse)
    with pytest.raises(OSError):
        mechanism_json.save(mech, path)
    assert path.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == [path.name]


def test_example_in_format_doc_loads(tmp_path):
    # Source: docs/format.md, "A complete example" (keeps the document true).
    text = (REPO / "docs" / "format.md").read_text(encoding="utf-8")
    section = text.split("## A complete example", 1)[1]
    block = re.search(r"```json\n(.*?)```", section, re.S).group(1)
    path = tmp_path / "hinge.mech.json"
    path.write_text(block, encoding="utf-8")
    mech = foldsim.load(path)
    assert (mech.state, mech.n_faces, mech.n_hinges) == ("flat", 2, 1)
    # Hand check: the example closes its one hinge at 90 degrees.
    np.testing.assert_allclose(np.degrees(mech.closed_angles), [90.0], atol=1e-12)
