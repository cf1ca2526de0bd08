"""`foldsim export`: glTF, SVG flat pattern, CSV/JSON tables, HTML report, STL/OBJ.

Every check names its outside reference beside it:

- "Khronos validator": the npm package gltf-validator run under node (skipped
  with the reason when node or the package is missing; set
  FOLDSIM_GLTF_VALIDATOR to the package's folder);
- "glTF reader": pygltflib reads the file; accessors, slerp and the node
  transforms are computed here, in this file, from the glTF specification;
- "SVG parser": svgelements; "renderer": cairosvg and resvg (each skipped when
  not importable);
- "mesh library": trimesh reads STL/OBJ back and measures area, volume and
  watertightness;
- "HTML parser": html5lib in strict mode, and the standard library's
  html.parser;
- "hand check": worked out on paper from the model's dimensions; "file":
  computed with numpy from the model file's own numbers.

"engine" values come from foldsim's kinematics (`poses_at`, `posed_faces`,
`fold_angles`, `cut_edge_gaps`): exports must reproduce them, and the hand
checks make sure the engine's values are the right ones.
"""

import base64
import csv
import html.parser
import io
import json
import math
import os
import shutil
import subprocess
from pathlib import Path

import networkx as nx
import numpy as np
import pytest

import foldsim
from foldsim.analysis.closure import cut_edge_gaps
from foldsim.cli import main
from foldsim.gearing import fold_angles, fold_schedule
from foldsim.kinematics import posed_faces, poses_at

from helpers import cube_document, strip_document, write_doc

ROOT = Path(__file__).resolve().parent.parent
GIFT_BOX = ROOT / "assets" / "gift-box.mech.json"
LANTERN = ROOT / "assets" / "lantern.mech.json"
# The documented axis change, model Z up to glTF Y up: (x, y, z) -> (x, z, -y).
Y_UP = np.array([[1.0, 0, 0], [0, 0, 1.0], [0, -1.0, 0]])


def colliding_strip_document():
    """Three unit squares in a flat strip, middle root, both hinges closing at 150°.

    Hand check: at fold angle θ the outer panels' free edges sit at x = 1 − cos θ
    and x = 2 + cos θ, both at height sin θ; they pass each other once
    cos θ < −1/2, θ > 120°, that is t > 0.8.
    """
    doc = strip_document()
    doc["name"] = "colliding strip"
    doc["units"] = "mm"
    doc["root"] = 1
    doc["hinges"] = [{"faces": [1, 0], "closed_angle_deg": 150.0},
                     {"faces": [1, 2], "closed_angle_deg": 150.0}]
    return doc


@pytest.fixture
def strip150(tmp_path):
    return write_doc(tmp_path, colliding_strip_document(), "strip150.mech.json")


@pytest.fixture
def inch_cube(tmp_path):
    doc = cube_document()
    doc["units"] = "in"
    return write_doc(tmp_path, doc, "inch-cube.mech.json")


def run_export(model, out, *options):
    """`foldsim export MODEL --to OUT OPTIONS...`; asserts success and returns the path."""
    code = main(["export", str(model), "--to", str(out), *map(str, options)])
    assert code == 0
    return out


def engine_faces(mech, t):
    """Engine's posed vertices of every face at drive value t."""
    return posed_faces(mech, poses_at(mech, fold_schedule(mech), np.array([t]))[0])


def file_edge_lengths(doc):
    """Perimeter of every face, from the file's own vertices (numpy only)."""
    v = np.array(doc["vertices"], float)
    return [float(np.linalg.norm(v[f] - v[np.roll(f, -1)], axis=1).sum()) for f in map(np.array, doc["faces"])]


# ================================================================= glTF

def _validator_dir():
    """The gltf-validator npm package's folder, or None."""
    candidates = [os.environ.get("FOLDSIM_GLTF_VALIDATOR", "")]
    candidates += [str(p / "node_modules" / "gltf-validator") for p in
                   (ROOT / ".cache" / "gltf-validator", Path("/tmp/gltfv"))]
    for c in candidates:
        if c and (Path(c) / "package.json").is_file():
            return Path(c)
    return None


VALIDATE_JS = """
const fs = require('fs');
const validator = require(process.argv[2]);
validator.validateBytes(new Uint8Array(fs.readFileSync(process.argv[3])), {maxIssues: 200})
  .then((r) => console.log(JSON.stringify(r.issues)), (e) => { console.error(String(e)); process.exit(3); });
"""


def khronos_validate(path, tmp_path):
    node = shutil.which("node")
    package = _validator_dir()
    if node is None:
        pytest.skip("node is not on PATH: the Khronos glTF validator (npm gltf-validator) cannot run")
    if package is None:
        pytest.skip("npm package gltf-validator not found: set FOLDSIM_GLTF_VALIDATOR to its folder "
                    "(npm install --prefix DIR gltf-validator; DIR/node_modules/gltf-validator)")
    script = tmp_path / "validate.js"
    script.write_text(VALIDATE_JS, encoding="utf-8")
    done = subprocess.run([node, str(script), str(package), str(path)], capture_output=True, text=True,
                          timeout=300)
    assert done.returncode == 0, done.stderr
    return json.loads(done.stdout)


@pytest.mark.parametrize("suffix", [".glb", ".gltf"])
@pytest.mark.parametrize("model, options", [
    ("gift-box", []), ("lantern", ["--frames", "7"]), ("strip150", ["--from", "-1", "--to-t", "1"])])
def test_gltf_passes_the_khronos_validator(tmp_path, strip150, suffix, model, options):
    source = {"gift-box": GIFT_BOX, "lantern": LANTERN, "strip150": strip150}[model]
    out = run_export(source, tmp_path / f"m{suffix}", *options)
    issues = khronos_validate(out, tmp_path)  # Khronos validator
    assert issues["numErrors"] == 0, issues["messages"]
    assert issues["numWarnings"] == 0, issues["messages"]


def _load_gltf(path):
    """Document and binary buffer, read with pygltflib (buffer decoded here)."""
    import pygltflib

    gltf = pygltflib.GLTF2.load(str(path))
    assert len(gltf.buffers) == 1
    uri = gltf.buffers[0].uri
    if uri:
        head, data = uri.split(",", 1)
        assert head == "data:application/octet-stream;base64"
        blob = base64.b64decode(data)
    else:
        blob = gltf.binary_blob()
    assert len(blob) >= gltf.buffers[0].byteLength
    return gltf, blob


def _accessor(gltf, blob, index):
    """An accessor's values as float64 (glTF 2.0 §5.1: tightly packed unless byteStride)."""
    acc = gltf.accessors[index]
    view = gltf.bufferViews[acc.bufferView]
    dtype = {5126: "<f4", 5125: "<u4", 5123: "<u2"}[acc.componentType]
    width = {"SCALAR": 1, "VEC3": 3, "VEC4": 4}[acc.type]
    assert view.byteStride in (None, width * np.dtype(dtype).itemsize)
    start = (view.byteOffset or 0) + (acc.byteOffset or 0)
    values = np.frombuffer(blob, dtype, count=acc.count * width, offset=start).astype(float)
    return values.reshape(acc.count, width) if width > 1 else values


def _slerp(q0, q1, s):
    """Spherical linear interpolation of unit quaternions (x, y, z, w), shortest arc."""
    d = float(q0 @ q1)
    if d < 0:
        q1, d = -q1, -d
    if d > 1 - 1e-12:
        q = q0 + s * (q1 - q0)
        return q / np.linalg.norm(q)
    angle = math.acos(d)
    return (math.sin((1 - s) * angle) * q0 + math.sin(s * angle) * q1) / math.sin(angle)


def _quat_matrix(q):
    x, y, z, w = q / np.linalg.norm(q)
    return np.array([[1 - 2 * (y * y + z * z), 2 * (x * y - z * w), 2 * (x * z + y * w)],
                     [2 * (x * y + z * w), 1 - 2 * (x * x + z * z), 2 * (y * z - x * w)],
                     [2 * (x * z - y * w), 2 * (y * z + x * w), 1 - 2 * (x * x + y * y)]])


def _local(node, rotation=None):
    """A node's local matrix T * R * S (glTF 2.0 §3.5.3)."""
    if node.matrix:
        return np.array(node.matrix, float).reshape(4, 4).T
    m = np.eye(4)
    q = np.array(rotation if rotation is not None else (node.rotation or [0, 0, 0, 1]), float)
    m[:3, :3] = _quat_matrix(q) * np.array(node.scale or [1, 1, 1], float)
    m[:3, 3] = node.translation or [0, 0, 0]
    return m


def sample_gltf(gltf, blob, time=None):
    """World vertex positions of every mesh node: {face: (k, 3)}.

    With ``time`` the first animation is sampled (LINEAR = slerp between the
    bracketing keys); without it the nodes' static rotations are used.
    """
    animated = {}
    if time is not None:
        anim = gltf.animations[0]
        for channel in anim.channels:
            sampler = anim.samplers[channel.sampler]
            assert sampler.interpolation == "LINEAR" and channel.target.path == "rotation"
            keys = _accessor(gltf, blob, sampler.input)
            values = _accessor(gltf, blob, sampler.output)
            k = int(np.clip(np.searchsorted(keys, time, side="right") - 1, 0, len(keys) - 2))
            s = float(np.clip((time - keys[k]) / (keys[k + 1] - keys[k]), 0.0, 1.0))
            animated[channel.target.node] = _slerp(values[k], values[k + 1], s)
    out = {}

    def walk(index, parent):
        node = gltf.nodes[index]
        world = parent @ _local(node, animated.get(index))
        if node.mesh is not None:
            mesh = gltf.meshes[node.mesh]
            pts = _accessor(gltf, blob, mesh.primitives[0].attributes.POSITION)
            face = int(node.name.split()[-1])
            out[face] = pts @ world[:3, :3].T + world[:3, 3]
        for child in node.children or []:
            walk(child, world)

    for index in gltf.scenes[gltf.scene or 0].nodes:
        walk(index, np.eye(4))
    return out


def _time_of(t, t_from, t_to, seconds):
    return seconds * (t - t_from) / (t_to - t_from)


@pytest.mark.parametrize("suffix", [".glb", ".gltf"])
@pytest.mark.parametrize("model, t_from, t_to", [
    ("gift-box", 0.0, 1.0), ("lantern", 0.0, 1.0), ("strip150", -1.0, 1.0), ("lantern", 1.0, -1.0)])
def test_gltf_animation_sampled_back_gives_the_engines_panels(tmp_path, strip150, suffix, model, t_from, t_to):
    source = {"gift-box": GIFT_BOX, "lantern": LANTERN, "strip150": strip150}[model]
    out = run_export(source, tmp_path / f"m{suffix}", "--from", t_from, "--to-t", t_to, "--seconds", 3)
    gltf, blob = _load_gltf(out)  # glTF reader
    mech = foldsim.load(source)
    scale = 1e-3  # mm -> m
    # Keys themselves and values between keys, where only exact slerp gets it right.
    for t in np.unique(np.r_[np.linspace(t_from, t_to, 5), t_from + (t_to - t_from) * np.array([0.13, 0.61, 0.97])]):
        got = sample_gltf(gltf, blob, _time_of(t, t_from, t_to, 3.0))
        want = engine_faces(mech, t)
        assert sorted(got) == list(range(mech.n_faces))
        for f in range(mech.n_faces):
            np.testing.assert_allclose(got[f], scale * want[f] @ Y_UP.T, rtol=0,
                                       atol=1e-5 * mech.size * scale, err_msg=f"face {f} at t={t}")


def test_gltf_rest_pose_is_the_requested_t(tmp_path):
    out = run_export(LANTERN, tmp_path / "m.glb", "--t", "0.3")
    gltf, blob = _load_gltf(out)  # glTF reader, static node rotations
    mech = foldsim.load(LANTERN)
    got, want = sample_gltf(gltf, blob), engine_faces(mech, 0.3)
    for f in range(mech.n_faces):
        np.testing.assert_allclose(got[f], 1e-3 * want[f] @ Y_UP.T, atol=1e-8 * mech.size)


def test_gltf_rest_pose_read_by_a_general_mesh_library(tmp_path):
    import trimesh

    out = run_export(GIFT_BOX, tmp_path / "m.glb", "--t", "0.7")
    scene = trimesh.load(out, force="scene")  # mesh library (its own glTF reader; no animation)
    mech = foldsim.load(GIFT_BOX)
    want = np.concatenate(engine_faces(mech, 0.7)) * 1e-3 @ Y_UP.T
    got = scene.to_geometry().vertices if hasattr(scene, "to_geometry") else scene.dump(concatenate=True).vertices
    # every engine corner is a mesh vertex and the other way round.
    d = np.linalg.norm(got[:, None] - want[None], axis=-1)
    assert d.min(axis=0).max() < 1e-7 and d.min(axis=1).max() < 1e-7
    assert len(scene.geometry) == mech.n_faces


def test_gltf_is_in_metres_with_y_up(tmp_path, inch_cube):
    out = run_export(inch_cube, tmp_path / "m.glb")
    gltf, blob = _load_gltf(out)  # glTF reader
    closed = np.concatenate(list(sample_gltf(gltf, blob, 4.0).values()))
    # hand check: the closed cube of edge 1 in = 0.0254 m sits on z = 0 in the file
    # (x, y, z in [0, 1]); Y up maps it to x in [0, a], y in [0, a], z in [-a, 0].
    a = 0.0254
    np.testing.assert_allclose(closed.min(axis=0), [0, 0, -a], atol=1e-9)
    np.testing.assert_allclose(closed.max(axis=0), [a, a, 0], atol=1e-9)
    # the top face (file face 5, z = 1) is the one at height y = a.
    top = sample_gltf(gltf, blob, 4.0)[5]
    np.testing.assert_allclose(top[:, 1], a, atol=1e-9)


def test_gltf_node_tree_follows_the_hinge_tree(tmp_path):
    out = run_export(LANTERN, tmp_path / "m.gltf")
    gltf, _ = _load_gltf(out)  # glTF reader
    doc = json.loads(LANTERN.read_text())
    # file: the hinge tree oriented from the root, by networkx.
    graph = nx.Graph()
    for h, hinge in enumerate(doc["hinges"]):
        graph.add_edge(*hinge["faces"], hinge=h)
    want = {(graph.edges[a, b]["hinge"], a, b) for a, b in nx.bfs_edges(graph, doc["root"])}
    got = set()
    names = [n.name for n in gltf.nodes]
    for node in gltf.nodes:
        if node.name.startswith("hinge "):
            parent = next(n for n in gltf.nodes if names.index(node.name) in (n.children or []))
            (child,) = node.children
            got.add((int(node.name.split()[1]), int(parent.name.split()[1]),
                     int(gltf.nodes[child].name.split()[1])))
            # the child panel node is translated back by the hinge point.
            np.testing.assert_allclose(gltf.nodes[child].translation, -np.array(node.translation), atol=0)
    assert got == want
    material = {m.name: m for m in gltf.materials}
    assert all(m.doubleSided for m in gltf.materials) and material


def test_gltf_uses_few_keyframes_and_honours_frames(tmp_path, strip150):
    # hand check: t from -1 to 1 turns each hinge 300°; steps of at most 90° need
    # ceil(300 / 90) + 1 = 5 keys.
    gltf, blob = _load_gltf(run_export(strip150, tmp_path / "a.glb", "--from", "-1", "--to-t", "1"))
    sampler = gltf.animations[0].samplers[0]
    assert gltf.accessors[sampler.input].count == 5
    quats = _accessor(gltf, blob, sampler.output)
    assert (np.einsum("ij,ij->i", quats[:-1], quats[1:]) > 0).all()
    np.testing.assert_allclose(_accessor(gltf, blob, sampler.input), np.linspace(0, 4, 5), atol=1e-6)
    gltf, _ = _load_gltf(run_export(strip150, tmp_path / "b.glb", "--frames", "9"))
    assert gltf.accessors[gltf.animations[0].samplers[0].input].count == 9


# ================================================================= SVG flat pattern

def parse_svg(path):
    """svgelements document at 25.4 px per inch, so one user pixel is one millimetre."""
    import svgelements

    return svgelements.SVG.parse(str(path), ppi=25.4)


def path_points(path):
    """Corner points of a parsed path: the end of each of its segments (one per corner)."""
    pts = np.array([(seg.end.x, seg.end.y) for seg in path])
    return pts[:-1] if len(pts) > 2 and np.allclose(pts[0], pts[-1]) else pts


def svg_paths(doc, cls):
    import svgelements

    def classes(e):
        return (e.values.get("class") or "").split()

    # the legend's sample lines carry the class too: leave them out.
    return [e for e in doc.elements() if isinstance(e, svgelements.Path)
            and cls in classes(e) and "legend" not in classes(e)]


@pytest.mark.parametrize("model", ["gift-box", "inch-cube", "strip90"])
def test_svg_outlines_match_the_models_edges_at_true_scale(tmp_path, inch_cube, model):
    source = {"gift-box": GIFT_BOX, "inch-cube": inch_cube,
              "strip90": write_doc(tmp_path, strip_document(), "strip.mech.json")}[model]
    doc = json.loads(Path(source).read_text())
    mm = {"mm": 1.0, "in": 25.4}[doc.get("units", "mm")]
    svg = parse_svg(run_export(source, tmp_path / "net.svg"))  # SVG parser
    panels = {int(p.values["data-face"]): p for p in svg_paths(svg, "panel")}
    perimeters = file_edge_lengths(doc)  # file
    assert sorted(panels) == list(range(len(doc["faces"])))
    for f, path in panels.items():
        assert path.length() == pytest.approx(perimeters[f] * mm, rel=1e-5), f
    # every hinge drawn once, as long as the edge its two faces share (file).
    v = np.array(doc["vertices"], float)
    hinges = {int(p.values["data-hinge"]): p for p in svg_paths(svg, "hinge")}
    assert sorted(hinges) == list(range(len(doc["hinges"])))
    for h, hinge in enumerate(doc["hinges"]):
        a, b = (set(doc["faces"][f]) for f in hinge["faces"])
        u, w = sorted(a & b)
        assert hinges[h].length() == pytest.approx(np.linalg.norm(v[u] - v[w]) * mm, rel=1e-5)
    # hand check: a cube net has 7 cut edges, each drawn on both of its panels;
    # the three-panel strip has none.
    cuts = svg_paths(svg, "cut")
    assert len(cuts) == {"gift-box": 14, "inch-cube": 14, "strip90": 0}[model]
    # the page is the viewBox at true scale.
    assert svg.width == pytest.approx(svg.viewbox.width * mm, rel=1e-5)
    assert svg.height == pytest.approx(svg.viewbox.height * mm, rel=1e-5)


def test_svg_scale_bar_and_line_styles(tmp_path):
    svg = parse_svg(run_export(GIFT_BOX, tmp_path / "net.svg"))  # SVG parser
    # the gift box's boundary is all cut edges; the strip's outer edges are free.
    strip = parse_svg(run_export(write_doc(tmp_path, strip_document()), tmp_path / "strip.svg"))
    (bar,) = [e for e in svg.elements() if getattr(e, "id", None) == "scale-bar"]
    label = next(e for e in svg.elements() if "scale-label" in (e.values.get("class") or ""))
    length_mm = float(label.text.split()[0])
    assert bar.length() == pytest.approx(length_mm, rel=1e-5)
    assert float(bar.values["data-length-mm"]) == length_mm
    # hinges dashed, cut and outline edges solid, each in its own colour.
    styles = {cls: {(str(p.stroke), p.values.get("stroke-dasharray")) for p in svg_paths(doc, cls)}
              for doc, cls in ((svg, "hinge"), (svg, "cut"), (strip, "outline"))}
    assert len(svg_paths(strip, "outline")) == 8  # hand check: 3 + 1 + 3 + 1 sides
    assert all(len(s) == 1 for s in styles.values()), styles
    (hinge,), (cut,), (outline,) = styles["hinge"], styles["cut"], styles["outline"]
    assert hinge[1] not in (None, "none") and cut[1] in (None, "none") and outline[1] in (None, "none")
    assert len({hinge[0], cut[0], outline[0]}) == 3


def test_svg_labels_every_face_hinge_and_cut_edge(tmp_path):
    import svgelements

    svg = parse_svg(run_export(GIFT_BOX, tmp_path / "net.svg"))  # SVG parser
    texts = [e.text for e in svg.elements() if isinstance(e, svgelements.Text)]
    assert {str(f) for f in range(6)} <= set(texts)
    assert {f"h{h}" for h in range(5)} <= set(texts)
    assert sorted(t for t in texts if t.startswith("c") and t[1:].isdigit()) == \
        sorted(f"c{e}" for e in range(7) for _ in range(2))
    svg = parse_svg(run_export(GIFT_BOX, tmp_path / "bare.svg", "--no-labels"))
    assert not [e for e in svg.elements() if isinstance(e, svgelements.Text) and e.text in ("h0", "c0")]


def test_svg_seam_gap_trims_every_cut_edge(tmp_path):
    doc = json.loads(GIFT_BOX.read_text())
    gap = 2.0
    svg = parse_svg(run_export(GIFT_BOX, tmp_path / "net.svg", "--seam-gap", gap))  # SVG parser
    # hand check: moving one side of a rectangle in by gap/2 shortens its two
    # neighbours by gap/2 each, so each trimmed side takes `gap` off the perimeter.
    hinged = {frozenset(h["faces"]) for h in doc["hinges"]}
    adjacency = {}
    for f, face in enumerate(doc["faces"]):
        for k in range(len(face)):
            adjacency.setdefault(frozenset((face[k], face[(k + 1) % len(face)])), []).append(f)
    for path in svg_paths(svg, "panel"):
        f = int(path.values["data-face"])
        face = doc["faces"][f]
        n_cut = sum(frozenset(adjacency[frozenset((face[k], face[(k + 1) % len(face)]))]) not in hinged
                    for k in range(len(face)))
        assert path.length() == pytest.approx(file_edge_lengths(doc)[f] - gap * n_cut, rel=1e-6)


def test_svg_tabs_on_one_side_of_every_cut_edge(tmp_path):
    width = 8.0
    svg = parse_svg(run_export(GIFT_BOX, tmp_path / "net.svg", "--tabs", width))  # SVG parser
    tabs = svg_paths(svg, "tab")
    assert sorted(int(t.values["data-edge"]) for t in tabs) == list(range(7))
    # hand check: a tab on an edge of length L is a trapezoid of height w with
    # 45° ends, area w (L - w); the gift box's cut edges are 60, 80 or 120 mm.
    for tab in tabs:
        pts = path_points(tab)  # B, B', A', A
        x, y = pts[:, 0], pts[:, 1]
        area = 0.5 * abs(np.sum(x * np.roll(y, -1) - np.roll(x, -1) * y))
        edge = float(np.linalg.norm(pts[3] - pts[0]))
        assert any(edge == pytest.approx(e, rel=1e-6) for e in (60.0, 80.0, 120.0)), edge
        assert area == pytest.approx(width * (edge - width), rel=1e-6)
    # the tabbed side of each cut edge becomes a tab fold, the other stays a cut.
    assert len(svg_paths(svg, "cut")) == 7 and len(svg_paths(svg, "tab-fold")) == 7


def optional(module, what):
    """Import an outside reference, or skip saying what is missing (a missing C library too)."""
    try:
        return __import__(module)
    except (ImportError, OSError) as exc:
        pytest.skip(f"{what} is not available: {exc}")


def _render_cairo(path, dpi):
    cairosvg = optional("cairosvg", "cairosvg (independent SVG renderer)")
    return cairosvg.svg2png(url=str(path), dpi=dpi, background_color="white")


def _render_resvg(path, dpi):
    resvg = optional("resvg_py", "resvg-py (independent SVG renderer)")
    return bytes(resvg.svg_to_bytes(svg_path=str(path), dpi=dpi, background="#ffffff"))


@pytest.mark.parametrize("renderer", [_render_cairo, _render_resvg], ids=["cairosvg", "resvg"])
def test_svg_renders_in_an_independent_renderer(tmp_path, renderer):
    from PIL import Image

    out = run_export(GIFT_BOX, tmp_path / "net.svg")
    px = 4  # pixels per millimetre
    image = Image.open(io.BytesIO(renderer(out, 25.4 * px))).convert("RGB")
    svg = parse_svg(out)  # SVG parser, for the page size in mm
    assert image.size == (round(svg.width * px), round(svg.height * px))
    pixels = np.asarray(image).astype(int)
    # Each panel's fill shows a quarter of the way from its centre to a corner
    # (away from the label); the margin is blank.
    fills = {"panel": (0xF6, 0xEC, 0xD6), "panel root": (0xDD, 0xE6, 0xF2)}
    for path in svg_paths(svg, "panel"):
        pts = path_points(path)
        probe = 0.75 * pts.mean(axis=0) + 0.25 * pts[0]
        colour = pixels[int(probe[1] * px), int(probe[0] * px)]
        want = fills["panel root" if "root" in path.values["class"] else "panel"]
        assert np.abs(colour - want).max() <= 3, (path.values["data-face"], colour)
    assert (pixels[2, 2] == 255).all()
    # hinge lines are dashed: along one, both the dash colour and the fill show.
    hinge = svg_paths(svg, "hinge")[0]
    a, b = path_points(hinge)
    line = [pixels[int(y * px), int(x * px)] for x, y in
            (a + s * (b - a) for s in np.linspace(0.1, 0.9, 400))]
    # a 0.25 mm line is one pixel wide here: count pixels darkened by the blue
    # line (both panel fills have red above 0xdd, the line 0x1f).
    blue = [c[0] < 180 and c[2] > c[0] for c in line]
    assert 0.2 < np.mean(blue) < 0.9, np.mean(blue)
    cut = svg_paths(svg, "cut")[0]
    a, b = path_points(cut)
    line = [pixels[int(y * px), int(x * px)] for x, y in (a + s * (b - a) for s in np.linspace(0.1, 0.9, 400))]
    # solid red: every pixel darkened in green (fill 0xec, line 0x39) but not in red.
    assert np.mean([c[1] < 200 and c[0] > c[1] + 40 for c in line]) > 0.95


# ================================================================= CSV / JSON tables

def test_csv_values_are_the_engines_at_those_t(tmp_path):
    out = run_export(GIFT_BOX, tmp_path / "motion.csv", "--frames", 6, "--from", "-0.5", "--to-t", "1")
    rows = list(csv.reader(out.open(newline="")))
    header, body = rows[0], np.array(rows[1:], float)
    mech = foldsim.load(GIFT_BOX)
    t = np.linspace(-0.5, 1.0, 6)
    assert header == ["t"] + [f"hinge_{h}_deg" for h in range(5)] + [f"cut_{e}_gap_mm" for e in range(7)]
    np.testing.assert_array_equal(body[:, 0], t)
    angles = fold_angles(fold_schedule(mech), t)
    np.testing.assert_array_equal(body[:, 1:6], np.degrees(angles))  # engine
    np.testing.assert_array_equal(body[:, 6:], cut_edge_gaps(mech, poses_at(mech, fold_schedule(mech), t)))
    # hand check: every hinge of the box closes at 90°, the gearing is 1:1, and
    # at t = 1 every cut edge meets.
    np.testing.assert_allclose(body[:, 1:6], np.repeat(90.0 * t[:, None], 5, axis=1), atol=1e-9)
    np.testing.assert_allclose(body[-1, 6:], 0.0, atol=1e-9)


def test_json_table_holds_the_same_numbers(tmp_path, strip150):
    out = run_export(strip150, tmp_path / "motion.json", "--frames", 5)
    doc = json.loads(out.read_text())
    assert doc["schema"] == "foldsim.motion-table/1" and doc["units"] == "mm"
    assert doc["t"] == [0.0, 0.25, 0.5, 0.75, 1.0]
    # hand check: both hinges move as 150° t.
    for hinge in doc["hinges"]:
        np.testing.assert_allclose(hinge["angle_deg"], 150.0 * np.array(doc["t"]), atol=1e-9)
    assert doc["cut_edges"] == []


# ================================================================= STL / OBJ

def test_posed_stl_reloads_with_the_engines_vertices(tmp_path):
    import trimesh

    mech = foldsim.load(LANTERN)
    t = 0.55
    mesh = trimesh.load(run_export(LANTERN, tmp_path / "m.stl", "--t", t), process=False)  # mesh library
    want = engine_faces(mech, t)
    triangles = mesh.triangles
    start = 0
    for f, pts in enumerate(want):
        k = len(pts)
        got = triangles[start:start + k - 2].reshape(-1, 3)
        start += k - 2
        # every triangle corner is a corner of its panel, and every corner is used.
        d = np.linalg.norm(got[:, None] - pts[None], axis=-1)
        assert d.min(axis=1).max() < 1e-4 and d.min(axis=0).max() < 1e-4, f
        # outward: triangle normals agree with the panel's normal (file order, Newell).
        n = np.cross(pts, np.roll(pts, -1, axis=0)).sum(axis=0)
        assert (mesh.face_normals[start - (k - 2):start] @ (n / np.linalg.norm(n)) > 0.999).all()
    assert start == len(triangles)


def test_closed_stl_is_the_solid_box(tmp_path):
    import trimesh

    mesh = trimesh.load(run_export(GIFT_BOX, tmp_path / "m.stl"), process=False)  # mesh library
    # hand check: a 120 x 80 x 60 mm box.
    assert mesh.area == pytest.approx(2 * (120 * 80 + 120 * 60 + 80 * 60), rel=1e-9)
    mesh.merge_vertices()
    assert mesh.is_watertight
    assert mesh.volume == pytest.approx(120 * 80 * 60, rel=1e-9)


def test_obj_has_one_named_object_per_panel_in_mm(tmp_path, inch_cube):
    import trimesh

    scene = trimesh.load(run_export(inch_cube, tmp_path / "m.obj", "--t", 1), force="scene",
                         process=False, split_objects=True, group_material=False)  # mesh library
    mech = foldsim.load(inch_cube)
    want = engine_faces(mech, 1.0)
    assert sorted(scene.geometry) == sorted(f"panel {f}" for f in range(6))
    for f in range(6):
        got = scene.geometry[f"panel {f}"].vertices
        np.testing.assert_allclose(np.sort(got, axis=0), np.sort(25.4 * want[f], axis=0), atol=1e-6)
    # hand check: a closed cube of 1 in = 25.4 mm.
    np.testing.assert_allclose(np.ptp(scene.bounds, axis=0), 25.4, atol=1e-6)


# ================================================================= HTML report

class _Collect(html.parser.HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags, self.ids, self.refs = [], [], []

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        self.tags.append(tag)
        if "id" in attrs:
            self.ids.append(attrs["id"])
        for key in ("src", "href", "xlink:href"):
            if key in attrs:
                self.refs.append(attrs[key])


def parse_html(text):
    """html5lib in strict mode (raises on any parse error) and html.parser."""
    html5lib = optional("html5lib", "html5lib (HTML parser)")
    tree = html5lib.HTMLParser(strict=True, namespaceHTMLElements=False).parse(text)
    collect = _Collect()
    collect.feed(text)
    return tree, collect


SVG = "{http://www.w3.org/2000/svg}"


def _text(el):
    return "".join(el.itertext()).strip()


def test_report_of_the_colliding_strip(tmp_path, strip150):
    out = run_export(strip150, tmp_path / "review.html")
    tree, collect = parse_html(out.read_text(encoding="utf-8"))  # HTML parser
    verdict = tree.find(".//*[@id='verdict']")
    assert verdict.get("class") == "problems" and _text(verdict).startswith("PROBLEMS")
    problems = [_text(li) for li in tree.find(".//*[@id='problems']")]
    assert any("collision" in p for p in problems)
    rows = tree.findall(".//tr[@class='collision']")
    report = foldsim.check(foldsim.load(strip150))
    assert [r.get("data-faces") for r in rows] == [f"{a}-{b}" for a, b in (c["faces"] for c in report["collisions"])]
    # hand check: the outer panels 0 and 2 collide from t = 0.8 to the end.
    assert [r.get("data-faces") for r in rows] == ["0-2"]
    cells = [_text(td) for td in rows[0].findall("td")]
    assert cells[0] == "0 and 2"
    assert float(cells[1]) == pytest.approx(0.8, abs=2e-3) and float(cells[2]) == pytest.approx(1.0, abs=1e-9)
    # pictures at t = 0, 0.5, 1; at t = 1 both outer panels are marked.
    renders = tree.findall(f".//{SVG}svg[@class='render']")
    assert [r.get("data-t") for r in renders] == ["0", "0.5", "1"]
    marked = [p.get("data-face") for p in renders[2].findall(f".//{SVG}polygon") if "colliding" in p.get("class")]
    assert sorted(marked) == ["0", "2"]
    assert not [p for p in renders[1].findall(f".//{SVG}polygon") if "colliding" in p.get("class")]
    # self-contained: no script, no link, no outside reference; ids unique.
    assert "script" not in collect.tags and "link" not in collect.tags and collect.refs == []
    assert len(collect.ids) == len(set(collect.ids))


def test_report_of_the_gift_box(tmp_path):
    out = run_export(GIFT_BOX, tmp_path / "review.html", "--frames", 21)
    text = out.read_text(encoding="utf-8")
    tree, _ = parse_html(text)  # HTML parser
    verdict = tree.find(".//*[@id='verdict']")
    assert verdict.get("class") == "ok" and _text(verdict).startswith("OK")
    assert tree.findall(".//tr[@class='collision']") == []
    assert len(tree.findall(".//tr[@class='cut-edge']")) == 7
    plot = tree.find(f".//{SVG}svg[@id='gap-plot']")
    lines = plot.findall(f".//{SVG}polyline")
    assert len(lines) == 7 and all(len(p.get("points").split()) == 21 for p in lines)
    # painter's order, hand check: seen from front-right-above, the closed box's
    # front (1), right (2) and top (5) panels are the nearest, so drawn last.
    closed = tree.findall(f".//{SVG}svg[@class='render']")[2]
    order = [p.get("data-face") for p in closed.findall(f".//{SVG}polygon")]
    assert sorted(order[-3:]) == ["1", "2", "5"]
    cautions = _text(tree.find(".//*[@id='cautions']")).lower()
    for words in ("pinch", "strength", "tolerances", "manufacturer", "rules"):
        assert words in cautions


def test_report_pictures_render_in_an_independent_renderer(tmp_path, strip150):
    import xml.etree.ElementTree as ET

    cairosvg = optional("cairosvg", "cairosvg (independent SVG renderer)")
    from PIL import Image

    tree, _ = parse_html(run_export(strip150, tmp_path / "review.html").read_text())  # HTML parser
    ET.register_namespace("", SVG[1:-1])
    pictures = tree.findall(f".//{SVG}svg")
    assert len(pictures) == 3  # no cut edges, so no gap plot
    for svg in pictures:
        for key in [k for k in svg.attrib if k.startswith("{http://www.w3.org/2000/xmlns/}")]:
            del svg.attrib[key]  # html5lib keeps xmlns as an attribute; ElementTree writes its own
        png = cairosvg.svg2png(bytestring=ET.tostring(svg))
        image = np.asarray(Image.open(io.BytesIO(png)).convert("RGB"))
        # something is drawn that is neither white nor black.
        assert ((image.max(axis=2) - image.min(axis=2)) > 40).mean() > 0.01


def test_report_shows_part_types_when_the_check_has_them(tmp_path):
    from foldsim.export import report_html

    mech = foldsim.load(GIFT_BOX)
    report = foldsim.check(mech)
    tree, _ = parse_html(report_html.build(mech, report=report))  # HTML parser
    if report.get("part_types") is not None:
        rows = [r.get("data-faces") for r in tree.iter("tr") if r.get("class") == "part-type"]
        assert rows == [",".join(map(str, g)) for g in report["part_types"]]
        assert "Part types" in [_text(h) for h in tree.iter("h2")]
    report = {k: v for k, v in report.items() if k != "part_types"}
    tree, _ = parse_html(report_html.build(mech, report=report))
    assert "Part types" not in [_text(h) for h in tree.iter("h2")]


# ================================================================= command line

def test_bad_suffix_unknown_units_and_bad_range_exit_2(tmp_path, capsys):
    doc = cube_document()
    doc["units"] = "cubit"
    odd = write_doc(tmp_path, doc, "odd.mech.json")
    cases = [([str(GIFT_BOX), "--to", str(tmp_path / "x.dwg")], ".dwg"),
             ([str(odd), "--to", str(tmp_path / "x.glb")], "units"),
             ([str(odd), "--to", str(tmp_path / "x.svg")], "units"),
             ([str(GIFT_BOX), "--to", str(tmp_path / "x.csv"), "--to-t", "2"], "--to-t"),
             ([str(GIFT_BOX), "--to", str(tmp_path / "x.csv"), "--frames", "1"], "--frames"),
             ([str(GIFT_BOX), "--to", str(tmp_path / "x.glb"), "--seconds", "0"], "--seconds"),
             ([str(GIFT_BOX), "--to", str(tmp_path / "x.svg"), "--seam-gap", "-1"], "--seam-gap"),
             ([str(GIFT_BOX), "--to", str(tmp_path / "nowhere" / "x.csv")], "cannot write")]
    for argv, phrase in cases:
        assert main(["export", *argv]) == 2, argv
        err = capsys.readouterr().err
        assert err.startswith("foldsim: ") and err.count("\n") == 1 and phrase in err, err
    # a unit-free table does not need a known unit.
    assert main(["export", str(odd), "--to", str(tmp_path / "ok.csv")]) == 0


def test_a_failed_write_leaves_the_old_file_whole(tmp_path, monkeypatch, capsys):
    target = tmp_path / "m.glb"
    target.write_bytes(b"old contents")

    def broken(fd):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(os, "fsync", broken)
    assert main(["export", str(GIFT_BOX), "--to", str(target)]) == 2
    assert "No space left on device" in capsys.readouterr().err
    assert target.read_bytes() == b"old contents"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["m.glb"]


def test_export_prints_what_it_wrote(tmp_path, capsys):
    out = tmp_path / "m.html"
    assert main(["export", str(GIFT_BOX), "-o", str(out)]) == 0
    assert capsys.readouterr().out.startswith(f"wrote {out}: review report; verdict OK")
