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
import math
import os
import platform
import sys
import time
from pathlib import Path

import networkx as nx
import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

import fcl  # noqa: E402

from foldsim import geometry  # noqa: E402
from foldsim.analysis import collision  # noqa: E402
from foldsim.analysis.closure import cut_edge_gaps  # noqa: E402
from foldsim.gearing import fold_angles, fold_schedule  # noqa: E402
from foldsim.kinematics import face_poses  # noqa: E402
from foldsim.model import build_mechanism  # noqa: E402
from foldsim.solids import geodesic  # noqa: E402
from foldsim.tolerances import DEFAULT  # noqa: E402

RADIUS = 100.0  # mm
SAMPLE = 200    # fcl-only pairs verified per model


def sphere_mechanism(level):
    """Geodesic sphere with a BFS spanning tree of its face adjacency as hinges."""
    solid = geodesic(level, radius=RADIUS)
    faces = [f.tolist() for f in solid.faces]
    owners = {}
    for f, face in enumerate(faces):
        for k in range(len(face)):
            u, v = face[k], face[(k + 1) % len(face)]
            owners.setdefault((min(u, v), max(u, v)), []).append(f)
    graph = nx.Graph()
    graph.add_nodes_from(range(len(faces)))
    graph.add_edges_from(tuple(pair) for pair in owners.values() if len(pair) == 2)
    hinges = [list(e) for e in nx.bfs_edges(graph, 0, sort_neighbors=sorted)]
    return build_mechanism(solid.vertices, faces, hinges, name=f"geodesic({level})")


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
    """(c): the full collision sweep, counting posed drive values and tested pairs."""
    counts = {"t": 0, "pairs": 0}
    poses_fn, state_fn = collision.face_poses, collision.pair_state

    def counting_poses(m, angles):
        counts["t"] += len(angles)
        return poses_fn(m, angles)

    def counting_state(*args, **kwargs):
        counts["pairs"] += len(kwargs["pairs"] if "pairs" in kwargs else args[4])
        return state_fn(*args, **kwargs)

    collision.face_poses, collision.pair_state = counting_poses, counting_state
    try:
        start = time.perf_counter()
        found = collision.collision_intervals(mech, schedule, pan=pan)
        elapsed = time.perf_counter() - start
    finally:
        collision.face_poses, collision.pair_state = poses_fn, state_fn
    rows.append(("(c) collision sweep, t in [0, 1]", f"{elapsed:.2f} s",
                 f"{counts['t']} drive values posed, {elapsed / counts['t'] * 1e3:.2f} ms each; "
                 f"{counts['pairs']} face-pair tests; {len(found)} collision interval(s)"))
    return found, elapsed, counts


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
    found, _, _ = stage_sweep(mech, schedule, pan, rows)
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
    if frames["untouched"]:
        problems.append(f"fcl-only pairs that do not touch (t, pair): {frames['untouched'][:10]}")
    if found:
        print(f"collisions found by the sweep: {found[:5]}{' ...' if len(found) > 5 else ''}")
    return problems


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--quick", action="store_true",
                        help="geodesic(2) only, 100 t values, 10 frames")
    parser.add_argument("--seed", type=int, default=1, help="seed of the fcl-only pair sample")
    args = parser.parse_args(argv)
    levels, n_t, n_frames = ([2], 100, 10) if args.quick else ([3, 2], 1000, 50)
    rng = np.random.default_rng(args.seed)
    print(f"foldsim check benchmark, {datetime.date.today()}, {platform.machine()} "
          f"{platform.processor() or platform.system()}, {os.cpu_count()} cores, "
          f"Python {platform.python_version()}, numpy {np.__version__}, python-fcl {fcl.__version__}")
    problems = []
    for level in levels:
        problems += [f"geodesic({level}): {p}" for p in run(level, n_t, n_frames, rng)]
    print("\nsummary: " + ("agreement: batched poses match the reference; fcl reports every pair "
                           "foldsim reports; every sampled fcl-only pair is touching, not crossing"
                           if not problems else "DISAGREEMENT\n  " + "\n  ".join(problems)))
    return 1 if problems else 0


if __name__ == "__main__":
    sys.exit(main())
