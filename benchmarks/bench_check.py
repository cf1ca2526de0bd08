"""Benchmark of the check pipeline on geodesic spheres unfolded along a BFS tree.

    python benchmarks/bench_check.py            # geodesic(3) and geodesic(2), ~3 min on 2 cores
    python benchmarks/bench_check.py --quick    # geodesic(2) only, fewer t values and frames

Prints tables; asserts nothing about time. See benchmarks/README.md for what each
number means. The model: `foldsim.solids.geodesic(k)` (20 * 4**k triangles, radius
100 mm), hinges on a breadth-first spanning tree of the face adjacency from face 0,
no couplings (the ideal schedule: every hinge at t times its closing angle), built
in the closed state with `build_mechanism(vertices, faces, hinges)`.

Stages:

(a) poses of all faces at T drive values, `face_poses` batched, against a reference
    that walks the tree one face at a time and multiplies 4 x 4 matrices
    (pose[child] = pose[parent] @ rotation about the hinge) for each face and each t;
    the two must agree.
(b) closure gaps of every cut edge at the same T poses (`cut_edge_gaps`).
(c) the full collision sweep `collision_intervals(mech, schedule)` over t in [0, 1],
    counting the drive values it poses and the face pairs it tests.
(d) collision detection at N single frames, t evenly spaced in [0, 1.25] (past 1
    every hinge folds beyond closing, so neighbouring panels really pass through each
    other): foldsim's `colliding_pairs` against python-fcl (one BVHModel per face
    from its flat-frame triangles, built once; a CollisionObject per face whose
    Transform is set each frame; a DynamicAABBTreeCollisionManager colliding all
    pairs; hinged pairs left out), and the two pair sets compared. fcl counts
    touching (a shared vertex or edge) as collision, foldsim calls it contact, so
    pairs only fcl reports are expected and a sample of them is verified to be
    touching; pairs only foldsim reports should not exist.
"""

import argparse
import datetime
import json
import math
import os
import platform
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import networkx as nx
import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

import fcl  # noqa: E402

from foldsim import geometry  # noqa: E402
from foldsim.analysis import collision, reference  # noqa: E402
from foldsim.analysis.closure import cut_edge_gaps  # noqa: E402
from foldsim.gearing import fold_angles, fold_schedule  # noqa: E402
from foldsim.kinematics import face_poses  # noqa: E402
from foldsim.model import build_mechanism  # noqa: E402
from foldsim.solids import geodesic, icosahedron, prism  # noqa: E402
from foldsim.tolerances import DEFAULT  # noqa: E402

RADIUS = 100.0  # mm
SAMPLE = 200    # fcl-only pairs verified per model


def sphere_mechanism(level):
    """Geodesic sphere with a BFS spanning tree of its face adjacency as hinges."""
    solid = geodesic(level, radius=RADIUS)
    return bfs_mechanism(solid.vertices, [f.tolist() for f in solid.faces], f"geodesic({level})")


def bfs_mechanism(vertices, faces, name):
    """A closed solid with a BFS spanning tree of its face adjacency (from face 0) as hinges."""
    owners = {}
    for f, face in enumerate(faces):
        for k in range(len(face)):
            u, v = face[k], face[(k + 1) % len(face)]
            owners.setdefault((min(u, v), max(u, v)), []).append(f)
    graph = nx.Graph()
    graph.add_nodes_from(range(len(faces)))
    graph.add_edges_from(tuple(pair) for pair in owners.values() if len(pair) == 2)
    hinges = [list(e) for e in nx.bfs_edges(graph, 0, sort_neighbors=sorted)]
    return build_mechanism(vertices, faces, hinges, name=name)


def frequency_sphere(n):
    """Class I geodesic sphere: every icosahedron face cut into n * n triangles, the
    vertices pushed out onto the sphere (20 n^2 triangles; n = 22 gives 9,680)."""
    ico = icosahedron()
    unit_v = ico.vertices / np.linalg.norm(ico.vertices, axis=1, keepdims=True)
    index, vertices, faces = {}, [], []

    def vid(p):
        p = p / np.linalg.norm(p)
        key = tuple(np.round(p * 1e9).astype(np.int64))
        if key not in index:
            index[key] = len(vertices)
            vertices.append(p * RADIUS)
        return index[key]

    for i, j, k in ico.faces:
        a, b, c = unit_v[i], unit_v[j], unit_v[k]
        ids = {(x, y): vid(a + (b - a) * x / n + (c - a) * y / n)
               for x in range(n + 1) for y in range(n + 1 - x)}
        for x in range(n):
            for y in range(n - x):
                faces.append([ids[x, y], ids[x + 1, y], ids[x, y + 1]])
                if x + y + 2 <= n:
                    faces.append([ids[x + 1, y], ids[x + 1, y + 1], ids[x, y + 1]])
    return bfs_mechanism(np.array(vertices), faces, f"sphere frequency {n}")


def prism_mechanism(n):
    """prism:n (two n-gons and n squares, edge 20 mm) with a BFS net."""
    solid = prism(n, edge=20.0)
    return bfs_mechanism(solid.vertices, [list(f) for f in solid.faces], f"prism:{n}")


def best_of(repeat, fn):
    """Smallest wall time of `repeat` calls and the last result."""
    best, out = math.inf, None
    for _ in range(repeat):
        start = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - start)
    return best, out


def reference_poses(mech, angles):
    """Poses (T, F, 4, 4) one face at a time: a 4 x 4 product per face per t."""
    order = np.concatenate(mech.levels)
    axes = []
    for h in range(mech.n_hinges):
        a, b = mech.axes[h]
        u = (b - a) / np.linalg.norm(b - a)
        k = np.array([[0.0, -u[2], u[1]], [u[2], 0.0, -u[0]], [-u[1], u[0], 0.0]])
        axes.append((a, k, np.outer(u, u)))
    eye3 = np.eye(3)
    out = np.empty((len(angles), mech.n_faces, 4, 4))
    for ti, theta in enumerate(angles):
        out[ti, mech.root] = np.eye(4)
        for h in order:
            a, k, uu = axes[h]
            c, s = math.cos(theta[h]), math.sin(theta[h])
            rot = c * eye3 + s * k + (1.0 - c) * uu
            step = np.eye(4)
            step[:3, :3] = rot
            step[:3, 3] = a - rot @ a
            out[ti, mech.child[h]] = out[ti, mech.parent[h]] @ step
    return out


def stage_poses(mech, schedule, n_t, rows):
    """(a): batched poses against the per-face reference loop."""
    t = np.linspace(0.0, 1.0, n_t)
    angles = fold_angles(schedule, t)
    fast, poses = best_of(3, lambda: face_poses(mech, angles))
    start = time.perf_counter()
    ref = reference_poses(mech, angles)
    slow = time.perf_counter() - start
    error = float(np.abs(ref - poses).max())
    rows.append(("(a) poses, batched face_poses", f"{fast * 1e3:.1f} ms",
                 f"{fast / n_t * 1e6:.1f} us per t ({n_t} t values)"))
    rows.append(("(a) poses, per-face 4x4 loop", f"{slow * 1e3:.0f} ms",
                 f"{slow / n_t * 1e6:.0f} us per t; batched is {slow / fast:.0f}x faster; "
                 f"max |difference| {error:.1e}"))
    return t, poses, error


def stage_gaps(mech, t, poses, rows):
    """(b): closure gaps of every cut edge at every pose."""
    elapsed, gaps = best_of(3, lambda: cut_edge_gaps(mech, poses))
    rows.append(("(b) closure gaps, cut_edge_gaps", f"{elapsed * 1e3:.1f} ms",
                 f"{gaps.shape[1]} cut edges x {len(t)} t; largest gap at t = 1: {gaps[-1].max():.1e} mm"))
    return gaps


def stage_sweep(mech, schedule, pan, rows):
    """(c): the full collision sweep, with its own counts of posed drive values and tested pairs."""
    counts = {}
    start = time.perf_counter()
    found = collision.collision_intervals(mech, schedule, pan=pan, stats=counts)
    elapsed = time.perf_counter() - start
    start = time.perf_counter()
    ref_found = reference.collision_intervals(mech, schedule, pan=pan)
    ref_elapsed = time.perf_counter() - start
    same = [c["faces"] for c in found] == [c["faces"] for c in ref_found]
    rows.append(("(c) collision sweep, t in [0, 1]", f"{elapsed:.2f} s",
                 f"{counts['t_values']} drive values posed, {elapsed / counts['t_values'] * 1e3:.2f} ms each; "
                 f"{counts['pair_tests']} face-pair tests; {counts['candidates']} candidate stretches on "
                 f"{counts['grid_steps']} steps; {len(found)} collision interval(s)"))
    rows.append(("(c) collision sweep, reference", f"{ref_elapsed:.2f} s",
                 f"analysis/reference.py; reference / fast = {ref_elapsed / elapsed:.1f}; "
                 f"same colliding pairs: {same}"))
    return found, elapsed, counts, same


def fcl_world(mech):
    """One BVHModel per face from its flat-frame triangles, and their collision objects."""
    models, objects, owner = [], [], {}
    for f, poly in enumerate(mech.flat_faces):
        tris = np.array([[0, k, k + 1] for k in range(1, len(poly) - 1)])  # faces are convex
        model = fcl.BVHModel()
        model.beginModel(len(poly), len(tris))
        model.addSubModel(np.asarray(poly, float), tris)
        model.endModel()
        models.append(model)
        objects.append(fcl.CollisionObject(model, fcl.Transform()))
        owner[id(model)] = f
    manager = fcl.DynamicAABBTreeCollisionManager()
    manager.registerObjects(objects)
    manager.setup()
    return models, objects, owner, manager


def fcl_pairs(objects, owner, manager, poses, hinged):
    """Face pairs fcl finds colliding at one pose set, hinged pairs removed."""
    for obj, pose in zip(objects, poses):
        obj.setTransform(fcl.Transform(pose[:3, :3], pose[:3, 3]))
    manager.update()
    request = fcl.CollisionRequest(num_max_contacts=10**7, enable_contact=False)
    data = fcl.CollisionData(request=request)
    manager.collide(data, fcl.defaultCollisionCallback)
    pairs = {tuple(sorted((owner[id(c.o1)], owner[id(c.o2)]))) for c in data.result.contacts}
    return pairs - hinged


def _fan(poly):
    """Triangles (k - 2, 3, 3) of a convex polygon (k, 3)."""
    return np.array([[poly[0], poly[k], poly[k + 1]] for k in range(1, len(poly) - 1)])


def crossing_length(a, b, eps):
    """Length of the segment along which triangles a and b (3, 3) pass through each
    other: 0 when they only touch (at a point, along an edge) or are apart, None when
    they are coplanar. Worked out here from the two planes' intersection line,
    independently of foldsim's narrow phase."""
    na, nb = np.cross(a[1] - a[0], a[2] - a[0]), np.cross(b[1] - b[0], b[2] - b[0])
    na, nb = na / np.linalg.norm(na), nb / np.linalg.norm(nb)
    da, db = (a - b[0]) @ nb, (b - a[0]) @ na
    da, db = np.where(np.abs(da) <= eps, 0.0, da), np.where(np.abs(db) <= eps, 0.0, db)
    if not (da.any() or db.any()):
        return None
    if da.min() >= 0 or da.max() <= 0 or db.min() >= 0 or db.max() <= 0:
        return 0.0  # one triangle stays on one side of the other's plane
    line = np.cross(na, nb)
    line /= np.linalg.norm(line)

    def chord(tri, d):
        s = []
        for i in range(3):
            j = (i + 1) % 3
            if d[i] == 0.0:
                s.append(tri[i] @ line)
            if d[i] * d[j] < 0.0:
                s.append((tri[i] + d[i] / (d[i] - d[j]) * (tri[j] - tri[i])) @ line)
        return min(s), max(s)

    (lo_a, hi_a), (lo_b, hi_b) = chord(a, da), chord(b, db)
    return max(0.0, min(hi_a, hi_b) - max(lo_a, lo_b))


def touching(mech, objects, poses, pair, eps):
    """How an fcl-only pair touches: 'vertex' (a shared corner), 'depth' (fcl's
    distance 0 and penetration depth at most eps), 'edge' (fcl's distance 0 and the
    panels cross along no more than eps: edges meeting at a point or lying on the
    other panel), or 'no' (none of these: a real disagreement)."""
    a, b = pair
    pa = geometry.transform_points(poses[a], mech.flat_faces[a])
    pb = geometry.transform_points(poses[b], mech.flat_faces[b])
    if np.linalg.norm(pa[:, None] - pb[None], axis=-1).min() <= eps:
        return "vertex"
    for f in (a, b):  # the objects still hold the last frame's poses: set this frame's
        objects[f].setTransform(fcl.Transform(poses[f][:3, :3], poses[f][:3, 3]))
    distance = fcl.distance(objects[a], objects[b], fcl.DistanceRequest(), fcl.DistanceResult())
    if abs(distance) > eps:
        return "no"
    request = fcl.CollisionRequest(num_max_contacts=100, enable_contact=True)
    result = fcl.CollisionResult()
    fcl.collide(objects[a], objects[b], request, result)
    if max((c.penetration_depth for c in result.contacts), default=0.0) <= eps:
        return "depth"
    lengths = [crossing_length(ta, tb, eps) for ta in _fan(pa) for tb in _fan(pb)]
    if all(x is not None and x <= eps for x in lengths):
        return "edge"
    return "no"


def stage_frames(mech, schedule, pan, n_frames, rows, rng):
    """(d): per-frame collisions, foldsim against python-fcl, and the pair sets compared."""
    t = np.linspace(0.0, 1.25, n_frames)
    poses = face_poses(mech, fold_angles(schedule, t))
    eps = DEFAULT.contact * mech.size
    hinged = {tuple(sorted(p)) for p in mech.hinge_faces.tolist()}

    start = time.perf_counter()
    ours = [{tuple(p) for p in collision.colliding_pairs(mech, poses[k], pan=pan).tolist()}
            for k in range(n_frames)]
    t_ours = (time.perf_counter() - start) / n_frames

    start = time.perf_counter()
    models, objects, owner, manager = fcl_world(mech)
    t_setup = time.perf_counter() - start
    start = time.perf_counter()
    theirs = [fcl_pairs(objects, owner, manager, poses[k], hinged) for k in range(n_frames)]
    t_fcl = (time.perf_counter() - start) / n_frames

    both = sum(len(o & f) for o, f in zip(ours, theirs))
    only_ours = [(t[k], p) for k in range(n_frames) for p in sorted(ours[k] - theirs[k])]
    only_fcl = [(k, p) for k in range(n_frames) for p in sorted(theirs[k] - ours[k])]
    pick = rng.choice(len(only_fcl), size=min(SAMPLE, len(only_fcl)), replace=False) if only_fcl else []
    verdicts = {"vertex": 0, "depth": 0, "edge": 0, "no": 0}
    untouched = []
    for i in pick:
        k, pair = only_fcl[i]
        how = touching(mech, objects, poses[k], pair, eps)
        verdicts[how] += 1
        if how == "no":
            untouched.append((t[k], pair))

    rows.append(("(d) per frame, foldsim colliding_pairs", f"{t_ours * 1e3:.1f} ms",
                 f"per frame, {n_frames} frames t in [0, 1.25]"))
    rows.append(("(d) per frame, python-fcl", f"{t_fcl * 1e3:.1f} ms",
                 f"per frame (+ {t_setup * 1e3:.0f} ms once for the BVH models); "
                 f"fcl / foldsim = {t_fcl / t_ours:.2f}"))
    rows.append(("(d) pairs both report", f"{both}", "colliding (face pair, frame) rows"))
    rows.append(("(d) pairs only fcl reports", f"{len(only_fcl)}",
                 f"sample of {len(pick)} checked: {verdicts['vertex']} share a vertex, "
                 f"{verdicts['depth']} distance 0 and fcl depth <= {eps:.0e} mm, "
                 f"{verdicts['edge']} distance 0 and crossing length <= {eps:.0e} mm, "
                 f"{verdicts['no']} none of these"))
    rows.append(("(d) pairs only foldsim reports", f"{len(only_ours)}", "expected 0"))
    return {"both": both, "only_fcl": len(only_fcl), "only_ours": only_ours, "verdicts": verdicts,
            "untouched": untouched, "t_ours": t_ours, "t_fcl": t_fcl}


def run(level, n_t, n_frames, rng):
    start = time.perf_counter()
    mech = sphere_mechanism(level)
    schedule = fold_schedule(mech)
    pan = collision.panels(mech)
    built = time.perf_counter() - start
    rows = [("model", f"{mech.n_faces} faces",
             f"{mech.n_hinges} hinges, tree depth {len(mech.levels)}, {len(mech.cut_faces)} cut edges; "
             f"build + triangulate {built:.2f} s")]
    t, poses, error = stage_poses(mech, schedule, n_t, rows)
    stage_gaps(mech, t, poses, rows)
    del poses
    found, _, _, same = stage_sweep(mech, schedule, pan, rows)
    frames = stage_frames(mech, schedule, pan, n_frames, rows, rng)
    width = max(len(r[0]) for r in rows)
    print(f"\n== geodesic({level}): {mech.n_faces} faces ==")
    for name, value, note in rows:
        print(f"{name:<{width}}  {value:>12}  {note}")
    problems = []
    if error > 1e-9 * RADIUS:
        problems.append(f"batched and reference poses differ by {error:.1e}")
    if frames["only_ours"]:
        problems.append(f"foldsim-only pairs (t, pair): {frames['only_ours'][:10]}")
    if not same:
        problems.append("fast and reference sweeps report different colliding pairs")
    if frames["untouched"]:
        problems.append(f"fcl-only pairs that do not touch (t, pair): {frames['untouched'][:10]}")
    if found:
        print(f"collisions found by the sweep: {found[:5]}{' ...' if len(found) > 5 else ''}")
    return problems


def per_frame_table(models, n_frames, rng):
    """(e): colliding_pairs against python-fcl on several models; rows and problems."""
    out, problems = [], []
    for mech in models:
        schedule = fold_schedule(mech)
        start = time.perf_counter()
        pan = collision.panels(mech)
        built = time.perf_counter() - start
        rows = []
        frames = stage_frames(mech, schedule, pan, n_frames, rows, rng)
        out.append((mech.name, mech.n_faces, len(pan.tri_face), built, frames))
        if frames["only_ours"]:
            problems.append(f"{mech.name}: foldsim-only pairs (t, pair): {frames['only_ours'][:10]}")
        if frames["untouched"]:
            problems.append(f"{mech.name}: fcl-only pairs that do not touch: {frames['untouched'][:10]}")
    print("\n== (e) per-frame collision query against python-fcl ==")
    print(f"{'model':<22} {'panels':>7} {'triangles':>9} {'panels()':>9} {'foldsim':>9} {'fcl':>9} "
          f"{'foldsim/fcl':>11}  pairs both / only fcl (sampled: touching) / only foldsim")
    for name, faces, tris, built, f in out:
        v = f["verdicts"]
        print(f"{name:<22} {faces:>7} {tris:>9} {built:>8.2f}s {f['t_ours'] * 1e3:>7.1f}ms "
              f"{f['t_fcl'] * 1e3:>7.1f}ms {f['t_ours'] / f['t_fcl']:>11.2f}  {f['both']} / {f['only_fcl']} "
              f"({v['vertex'] + v['depth'] + v['edge']} of {sum(v.values())}) / {len(f['only_ours'])}")
    return problems


# Peak memory is each child's VmHWM (/proc/self/status): the high-water mark of its own
# address space, which a child does not inherit from its parent (ru_maxrss does).
CHECK = """
import runpy, sys
sys.path.insert(0, {root!r})
sys.argv = ["foldsim", "check", {path!r}]
try:
    runpy.run_module("foldsim", run_name="__main__")
finally:
    with open("/proc/self/status") as status:
        peak = [int(line.split()[1]) * 1024 for line in status if line.startswith("VmHWM:")]
    sys.stderr.write(f"PEAK {{peak[0]}}\\n")
"""

CHILD = """
import json, sys, time
sys.path.insert(0, {root!r})
from foldsim.io.mechanism_json import load
from foldsim.gearing import fold_schedule
from foldsim.analysis import collision
mech = load({path!r})
start = time.perf_counter()
pan = collision.panels(mech)
built = time.perf_counter() - start
start = time.perf_counter()
found = collision.collision_intervals(mech, fold_schedule(mech), pan=pan)
sweep = time.perf_counter() - start
with open("/proc/self/status") as status:
    peak = [int(line.split()[1]) * 1024 for line in status if line.startswith("VmHWM:")]
print(json.dumps({{"panels": built, "sweep": sweep, "found": len(found), "rss": peak[0]}}))
"""


def _child(argv):
    """Run a command; wall time, stdout, stderr and exit code."""
    start = time.perf_counter()
    done = subprocess.run(argv, capture_output=True, text=True)
    return time.perf_counter() - start, done.stdout, done.stderr, done.returncode


def _slope(x, y):
    return float(np.polyfit(np.log(x), np.log(y), 1)[0])


def scaling_table(levels):
    """(f): `foldsim check` and the sweep alone on `foldsim new geodesic:K` designs, fresh processes."""
    root = str(Path(__file__).resolve().parent.parent)
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        for k in levels:
            path = str(Path(tmp) / f"g{k}.mech.json")
            # `new` exits 1 when the design it wrote collides (geodesic:4 does); the file is written.
            made = subprocess.run([sys.executable, "-m", "foldsim", "new", f"geodesic:{k}", "-o", path],
                                  stdout=subprocess.DEVNULL, cwd=root)
            if made.returncode not in (0, 1) or not Path(path).exists():
                raise RuntimeError(f"foldsim new geodesic:{k} failed (exit {made.returncode})")
            wall, _, err, code = _child([sys.executable, "-c", CHECK.format(root=root, path=path)])
            rss = int(err.rsplit("PEAK ", 1)[1].split()[0])
            _, out, _, _ = _child([sys.executable, "-c", CHILD.format(root=root, path=path)])
            child = json.loads(out)
            rows.append((20 * 4 ** k, wall, rss, code, child))
    print("\n== (f) scaling: `foldsim check` on `foldsim new geodesic:K` (min-diameter net, gears), "
          "fresh process each ==")
    print(f"{'panels':>7} {'check wall':>11} {'check peak':>11} {'exit':>5} {'sweep':>8} {'sweep peak':>11} "
          f"{'panels()':>9} {'collisions':>10}")
    for n, wall, rss, code, c in rows:
        print(f"{n:>7} {wall:>10.2f}s {rss / 2 ** 30:>9.2f}GB {code:>5} {c['sweep']:>7.2f}s "
              f"{c['rss'] / 2 ** 30:>9.2f}GB {c['panels']:>8.2f}s {c['found']:>10}")
    big = [r for r in rows if r[0] >= 320]
    if len(big) >= 2:
        n = [r[0] for r in big]
        print(f"fitted exponent (least squares of log time on log panels, {n[0]} to {n[-1]} panels): "
              f"check {_slope(n, [r[1] for r in big]):.2f}, sweep {_slope(n, [r[4]['sweep'] for r in big]):.2f}")
    last = {r[0]: r for r in rows}
    if 1280 in last and 5120 in last:
        a, b = last[1280], last[5120]
        print(f"slope 1,280 -> 5,120 panels: check {math.log(b[1] / a[1]) / math.log(4):.2f}, "
              f"sweep {math.log(b[4]['sweep'] / a[4]['sweep']) / math.log(4):.2f}")
    return [f"geodesic:{int(round(math.log(r[0] / 20, 4)))}: check exit {r[3]}" for r in rows
            if r[3] not in (0, 1)]


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--quick", action="store_true",
                        help="geodesic(2) only, 100 t values, 10 frames, small tables")
    parser.add_argument("--seed", type=int, default=1, help="seed of the fcl-only pair sample")
    args = parser.parse_args(argv)
    levels, n_t, n_frames = ([2], 100, 10) if args.quick else ([3], 1000, 50)
    rng = np.random.default_rng(args.seed)
    print(f"foldsim check benchmark, {datetime.date.today()}, {platform.machine()} "
          f"{platform.processor() or platform.system()}, {os.cpu_count()} cores, "
          f"Python {platform.python_version()}, numpy {np.__version__}, python-fcl {fcl.__version__}")
    problems = []
    for level in levels:
        problems += [f"geodesic({level}): {p}" for p in run(level, n_t, n_frames, rng)]
    models = ([sphere_mechanism(3), prism_mechanism(100)] if args.quick else
              [sphere_mechanism(3), sphere_mechanism(4), frequency_sphere(22), prism_mechanism(500)])
    problems += per_frame_table(models, 5 if args.quick else 20, rng)
    problems += scaling_table(range(0, 4) if args.quick else range(0, 5))
    print("\nsummary: " + ("agreement: batched poses match the reference; fcl reports every pair "
                           "foldsim reports; every sampled fcl-only pair is touching, not crossing; "
                           "fast and reference sweeps report the same pairs"
                           if not problems else "DISAGREEMENT\n  " + "\n  ".join(problems)))
    return 1 if problems else 0


if __name__ == "__main__":
    sys.exit(main())
