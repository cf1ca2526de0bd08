"""Hostile input: a seeded mutation fuzz of the demo files (issue 13, issue 15).

Every mutated file must give one of two results: it loads and its check gives a
valid JSON report with nothing on stderr, or loading raises `ModelError` (the CLI's
exit 2) with at most three short lines naming the file. Never another exception,
never a warning. On a failure the test prints the seed and the mutation, so
``python -m pytest tests/test_fuzz.py -k <case>`` or `mutate(seed)` reruns it.
The rule itself is the project's bad-input rule (docs/format.md, Errors).
"""

import copy
import json
import math
import random
import subprocess
import sys
import warnings
from pathlib import Path

import numpy as np
import pytest

from foldsim.analysis.closure import cut_edge_gaps
from foldsim.report import check, hinge_table
from foldsim.errors import FoldsimError
from foldsim.gearing import fold_schedule
from foldsim.io.mechanism_json import loads
from foldsim.kinematics import poses_at

REPO = Path(__file__).resolve().parent.parent
DEMOS = sorted((REPO / "assets").glob("*.mech.json"))
SOURCE = "fuzz.mech.json"
IN_PROCESS_CASES = 10_000
FULL_CHECKS = 25  # valid cases that also get the full check report in-process
CLI_CASES = 150

_TOLERANCES = {"process": "sintered-nylon", "hinge": {"play_deg": 0.8, "tilt_deg": [0.4, 0.2]},
               "hinges": [{"hinge": 0, "play_deg": 2.0}], "coupling": {"backlash": 0.15, "pitch_radius": 8},
               "couplings": [{"coupling": 0, "backlash_deg": 0.5}]}
_ODD_VALUES = [None, True, "x", "", [], {}, [[]], float("nan"), float("inf"), -float("inf"), 1e308, -1e308,
               5e-324, 10**400, -(10**30), 10**30, 2**63, -1, 0, 1.5, "\ud800", "é" * 5, "x" * 20_000,
               [1, 2, 3], {"a": 1}, 1e300, -0.0]


def _paths(value, prefix=()):
    """Every (path, value) inside a parsed JSON document."""
    yield prefix, value
    if isinstance(value, dict):
        for k, v in value.items():
            yield from _paths(v, prefix + (k,))
    elif isinstance(value, list):
        for i, v in enumerate(value):
            yield from _paths(v, prefix + (i,))


def _set(doc, path, value):
    target = doc
    for key in path[:-1]:
        target = target[key]
    target[path[-1]] = value


def _deep(depth):
    return json.loads("[" * depth + "]" * depth) if depth < 900 else None


def _structural(rng, doc):
    """One structural mutation of a parsed document; returns (description, doc or text)."""
    if rng.random() < 0.3:
        doc["tolerances"] = copy.deepcopy(_TOLERANCES)
    paths = [p for p, _ in _paths(doc) if p]
    path = rng.choice(paths)
    kind = rng.choice(["delete", "odd", "scale", "index", "empty", "deep", "long", "unicode", "duplicate",
                       "swap", "number"])
    if kind == "delete":
        parent = doc
        for key in path[:-1]:
            parent = parent[key]
        del parent[path[-1]]
    elif kind == "odd":
        _set(doc, path, rng.choice(_ODD_VALUES))
    elif kind == "scale":
        factor = rng.choice([1e300, 1e-300, 1e50, 1e-50, 1e7, -1.0, 0.0, 1.00001])
        for p, v in list(_paths(doc)):
            if p and p[0] == "vertices" and isinstance(v, (int, float)) and not isinstance(v, bool):
                _set(doc, p, v * factor)
        path = ("vertices", "*")
    elif kind == "index":
        _set(doc, path, rng.choice([-1, -(10**30), 10**30, 2**31, 99, 0, 1, len(doc.get("faces", []))]))
    elif kind == "empty":
        _set(doc, path, rng.choice([[], {}, ""]))
    elif kind == "deep":
        text = json.dumps(doc).replace("]", "]" + "", 1)
        depth = rng.choice([40, 200, 2000])
        text = text.replace('"schema"', '"deep": ' + "[" * depth + "]" * depth + ', "schema"', 1)
        return f"deep nesting {depth}", text
    elif kind == "long":
        _set(doc, path, rng.choice(["y" * rng.choice([500, 5000, 50_000]), list(range(5000))]))
    elif kind == "unicode":
        _set(doc, path, rng.choice(["\ud800", "\udfff x", "名前", "\u202e", "\x00", "e\u0301"]))
    elif kind == "duplicate":
        key = rng.choice(list(doc) or ["schema"])
        text = json.dumps(doc)
        return f"duplicate key {key}", text[:-1] + f', {json.dumps(key)}: {json.dumps(rng.choice(_ODD_VALUES[:12]))}}}'
    elif kind == "swap":
        other = rng.choice(paths)
        a, b = _get(doc, path), _get(doc, other)
        try:
            _set(doc, path, copy.deepcopy(b))
            _set(doc, other, copy.deepcopy(a))
        except (KeyError, IndexError, TypeError):
            pass
    else:
        literal = rng.choice(["1" * 5000, "9" * 101, "1e999", "-1e999", "NaN", "Infinity", "1e-400",
                              "123456789012345678901234567890"])
        _set(doc, path, 424242.125)
        return f"number {literal[:12]} at {path}", json.dumps(doc).replace("424242.125", literal)
    return f"{kind} at {path}", doc


def _get(doc, path):
    for key in path:
        doc = doc[key]
    return doc


def _textual(rng, text):
    kind = rng.choice(["truncate", "flip", "insert", "delete"])
    data = bytearray(text.encode("utf-8"))
    at = rng.randrange(len(data))
    if kind == "truncate":
        data = data[:at]
    elif kind == "flip":
        for _ in range(rng.choice([1, 1, 2, 8])):
            at = rng.randrange(len(data))
            data[at] ^= 1 << rng.randrange(8)
    elif kind == "insert":
        data[at:at] = rng.choice([b"[", b"{", b"]", b",", b'"', b"\\u", b"-", b"e9", b"\xff", b"\xc3"])
    else:
        del data[at:at + rng.randrange(1, 20)]
    return f"{kind} at byte {at}", bytes(data)


def mutate(seed):
    """The mutated file of one seed: (demo name, description, bytes)."""
    rng = random.Random(seed)
    demo = DEMOS[seed % len(DEMOS)]
    text = demo.read_text(encoding="utf-8")
    if rng.random() < 0.35:
        what, data = _textual(rng, text)
        return demo.name, what, data
    what, out = _structural(rng, json.loads(text))
    if isinstance(out, dict):
        out = json.dumps(out)
    return demo.name, what, out.encode("utf-8", "surrogatepass")


# The reproductions of issue 15 (items 2-6, 9), built on the gift box.
def _gift():
    return json.loads((REPO / "assets" / "gift-box.mech.json").read_text())


def _issue_15_cases():
    cases = []
    d = _gift(); d["couplings"][0] = {"hinges": [2, 0], "teeth": [10**400, 1]}; cases.append(("teeth 10**400", d))
    d = _gift(); d["faces"][0][0] = 10**30; cases.append(("face index 10**30", d))
    d = _gift(); d["vertices"][0][0] = 10**400; cases.append(("coordinate 10**400", d))
    d = _gift(); d["couplings"][0]["ratio"] = 5e-324; cases.append(("ratio 5e-324", d))
    d = _gift(); d["couplings"][0]["ratio"] = -1e308; cases.append(("ratio -1e308", d))
    d = _gift(); d["name"] = "\ud800"; cases.append(("lone surrogate name", d))
    d = _gift(); d["units"] = "\udc80"; cases.append(("lone surrogate units", d))
    d = _gift(); d["vertices"] = [[x * 1e300 for x in v] for v in d["vertices"]]; cases.append(("coords 1e300", d))
    d = _gift(); d["vertices"][6] = list(d["vertices"][5]); cases.append(("corner onto neighbour", d))
    d = _gift(); d["state"] = "s" * 1000; cases.append(("1000-character state", d))
    return [(name, json.dumps(doc).encode("utf-8", "surrogatepass")) for name, doc in cases]


def _assert_short_error(message, label):
    lines = message.splitlines()
    assert 1 <= len(lines) <= 3, f"{label}: {len(lines)} lines: {message[:300]!r}"
    assert all(len(line) <= 300 for line in lines), f"{label}: long line {message[:400]!r}"
    assert lines[0].startswith(SOURCE), f"{label}: does not name the file: {message[:300]!r}"


def _strict_json(report):
    return json.dumps(report, allow_nan=False)


def _one(data, label, full):
    """Apply the two-results rule in-process to one file's bytes; return True if it loaded."""
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            text = data.decode("utf-8")
        except UnicodeDecodeError:
            return False  # `load` reads the file as UTF-8 and refuses it (tests/test_io.py)
        try:
            mech = loads(text, source=SOURCE)
        except FoldsimError as exc:
            _assert_short_error(f"{SOURCE}: {exc}" if not str(exc).startswith(SOURCE) else str(exc), label)
            return False
        except Exception as exc:  # noqa: BLE001 - the test's whole point
            pytest.fail(f"{label}: {type(exc).__name__}: {str(exc)[:300]}")
        try:
            if full:
                report = check(mech)
            else:
                schedule = fold_schedule(mech)
                poses = poses_at(mech, schedule, np.array([0.0, 0.5, 1.0]))
                gaps = cut_edge_gaps(mech, poses)
                report = {"hinges": hinge_table(mech, schedule), "gaps": gaps.tolist(),
                          "poses_finite": bool(np.isfinite(poses).all())}
            _strict_json(report)
            ("%s" % mech.name).encode("utf-8")
        except Exception as exc:  # noqa: BLE001
            pytest.fail(f"{label}: loaded, then {type(exc).__name__}: {str(exc)[:300]}")
    assert not caught, f"{label}: warning {caught[0].message!s:.200}"
    return True


def test_issue_15_reproductions_hold_to_the_two_results_rule():
    for name, data in _issue_15_cases():
        assert not _one(data, name, full=False), f"{name}: should be refused"


def test_ten_thousand_mutations_in_process():
    loaded = 0
    for seed in range(IN_PROCESS_CASES):
        demo, what, data = mutate(seed)
        ok = _one(data, f"seed {seed} ({demo}: {what})", full=loaded < FULL_CHECKS)
        loaded += ok
    # The mutator must exercise both results, or it tests nothing.
    assert 0 < loaded < IN_PROCESS_CASES


def _cli(path, label):
    run = subprocess.run([sys.executable, "-m", "foldsim", "check", str(path), "--json"],
                         capture_output=True, text=True, timeout=120, cwd=REPO)
    if run.returncode in (0, 1):
        assert run.stderr == "", f"{label}: stderr {run.stderr[:300]!r}"
        json.loads(run.stdout, parse_constant=lambda c: pytest.fail(f"{label}: {c} in JSON output"))
    else:
        assert run.returncode == 2, f"{label}: exit {run.returncode}: {run.stderr[-300:]!r}"
        assert "Traceback" not in run.stderr, f"{label}: {run.stderr[-300:]!r}"
        lines = run.stderr.splitlines()
        assert 1 <= len(lines) <= 3 and all(len(x) <= 320 for x in lines), f"{label}: {run.stderr[:400]!r}"
        assert str(path) in lines[0], f"{label}: {run.stderr[:300]!r}"


@pytest.mark.slow
def test_mutations_through_the_real_command_line(tmp_path):
    cases = _issue_15_cases() + [(f"seed {s} ({mutate(s)[0]}: {mutate(s)[1]})", mutate(s)[2])
                                 for s in range(100_000, 100_000 + CLI_CASES)]
    for n, (label, data) in enumerate(cases):
        path = tmp_path / f"case{n}.mech.json"
        path.write_bytes(data)
        _cli(path, label)
