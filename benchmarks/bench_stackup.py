"""Benchmark of the play stack-up: batched Monte Carlo against a one-sample-at-a-time loop.

    python benchmarks/bench_stackup.py            # icosahedron (20 panels) and geodesic(3) (1,280)
    python benchmarks/bench_stackup.py --quick    # icosahedron only, 2,000 samples

Prints a table; asserts nothing about time. Exits 1 only if the batched sampler and
the reference loop disagree on the same draws.

Models (closed state, built with `build_mechanism`):

* icosahedron, edge 40 mm: 20 panels;
* `foldsim.solids.geodesic(3, radius=100)`: 1,280 panels.

Hinges: a breadth-first net from face 0 (`foldsim.nets.bfs_net` over
`foldsim.nets.face_graph`). Gears: every hinge geared to the hinge that brought its
parent face into the tree (a root hinge to hinge 0), with the ratio of their closing
angles, so one drive closes everything and backlash piles up along the gear tree.

Stages per model:

(a) `monte_carlo`, N samples at t = 1, batched over samples and hinges; time per sample.
(b) reference: the same draws, one sample at a time, walking the hinge tree one
    hinge at a time (4 x 4 matrices from scipy rotations, gears propagated hinge by
    hinge), then the same gap and panel-deviation formulas; time per sample over a
    subset, and the largest difference from (a).
(c) `linear_stackup` at t = 1: analytic Jacobian, worst case and RSS of every cut edge
    and panel.
"""

import argparse
import datetime
import platform
import sys
import time
from pathlib import Path

import numpy as np
from scipy.spatial.transform import Rotation

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from foldsim import nets, solids  # noqa: E402
from foldsim import stackup as S  # noqa: E402
from foldsim.gearing import coupling_graph, fold_schedule  # noqa: E402
from foldsim.kinematics import face_poses  # noqa: E402
from foldsim.model import Coupling, build_mechanism  # noqa: E402


def geared_net(poly, name):
    """BFS net from face 0, every hinge geared to its parent's entry hinge."""
    hinges = nets.bfs_net(nets.face_graph(poly.faces))
    plain = build_mechanism(poly.vertices, poly.faces, hinges)
    entry = {child: k for k, (_, child) in enumerate(hinges)}
    closed = plain.closed_angles
    couplings = []
    for k, (parent, _) in enumerate(hinges):
        if k:
            i = 0 if parent == 0 else entry[parent]
            couplings.append(Coupling((i, k), float(closed[k] / closed[i])))
    return build_mechanism(poly.vertices, poly.faces, hinges, couplings=couplings, name=name)


def reference_sample(mech, order, gear_steps, frames, theta, hinge_err, mesh_err, ideal, padded):
    """Gaps (E,) and panel deviations (F,) of one sample, one hinge at a time."""
    dirs, mids = frames
    eps = hinge_err[:, 0].copy()
    transmitted = np.zeros(mech.n_hinges)
    for driver, driven, factor, c in gear_steps:            # breadth-first: drivers come first
        transmitted[driven] = factor * transmitted[driver] + mesh_err[c]
    eps += transmitted
    poses = np.zeros((mech.n_faces, 4, 4))
    poses[mech.root] = np.eye(4)
    for h in order:
        u, w, n = dirs[h]
        a = mech.axes[h, 0]
        rot = np.eye(4)
        r = Rotation.from_rotvec((theta[h] + eps[h]) * u).as_matrix()
        rot[:3, :3], rot[:3, 3] = r, a - r @ a
        e = hinge_err[h]
        off = np.eye(4)
        t = Rotation.from_rotvec(e[1] * w + e[2] * n).as_matrix()
        off[:3, :3] = t
        off[:3, 3] = mids[h] - t @ mids[h] + e[3] * u + e[4] * w + e[5] * n
        poses[mech.child[h]] = poses[mech.parent[h]] @ off @ rot
    gaps = np.zeros(len(mech.cut_faces))
    for k, (fa, fb) in enumerate(mech.cut_faces):
        pa = mech.cut_points[k, 0] @ poses[fa, :3, :3].T + poses[fa, :3, 3]
        pb = mech.cut_points[k, 1] @ poses[fb, :3, :3].T + poses[fb, :3, 3]
        gaps[k] = np.linalg.norm(pa - pb, axis=1).max()
    tips = np.zeros(mech.n_faces)
    for f in range(mech.n_faces):
        moved = padded[f] @ (poses[f, :3, :3] - ideal[f, :3, :3]).T + (poses[f, :3, 3] - ideal[f, :3, 3])
        tips[f] = np.linalg.norm(moved, axis=1).max()
    return gaps, tips


def bench(mech, process, samples, reference_samples, seed=0):
    spec = S.play_spec(mech, process)
    print(f"== {mech.name}: {mech.n_faces} panels, {mech.n_hinges} hinges, {len(mech.cut_faces)} cut edges, "
          f"{len(mech.couplings)} gear meshes; longest hinge chain {S.longest_hinge_chain(mech)}, "
          f"longest gear chain {S.longest_gear_chain(mech)}; process {process} ==")
    t0 = time.perf_counter()
    mc = S.monte_carlo(mech, spec, samples=samples, seed=seed, times=(1.0,), keep=True)
    batched = time.perf_counter() - t0
    print(f"(a) Monte Carlo, batched        {batched:9.2f} s   {1e3 * batched / samples:8.3f} ms per sample "
          f"({samples} samples, chunks of {S._chunk_size(mech)})")

    schedule = fold_schedule(mech)
    theta = schedule.rates
    ideal = face_poses(mech, theta[None])[0]
    frames = S.hinge_frames(mech)
    padded = S._padded_faces(mech)
    order = np.concatenate(mech.levels)
    graph = coupling_graph(mech)
    tree = S.gear_tree(mech)
    gear_steps = list(zip(tree.driver, tree.driven, tree.factor, tree.coupling))
    assert len(gear_steps) == graph.number_of_edges()
    errors = S.draw_errors(spec, reference_samples, np.random.default_rng(seed))
    t0 = time.perf_counter()
    worst = 0.0
    for i in range(reference_samples):
        gaps, tips = reference_sample(mech, order, gear_steps, frames, theta, errors.hinge[i], errors.mesh[i],
                                      ideal, padded)
        worst = max(worst, np.abs(gaps - mc.gaps[i, 0]).max(initial=0.0), np.abs(tips - mc.tips[i, 0]).max())
    loop = (time.perf_counter() - t0) / reference_samples
    print(f"(b) reference, one at a time    {loop * samples:9.2f} s   {1e3 * loop:8.3f} ms per sample "
          f"(timed over {reference_samples}, scaled to {samples}); batched is {loop * samples / batched:.0f}x "
          f"faster; max |difference| {worst:.1e} {mech.units}")

    t0 = time.perf_counter()
    lin = S.linear_stackup(mech, spec, times=(1.0,))
    linear = time.perf_counter() - t0
    print(f"(c) linearised (analytic J)     {linear:9.2f} s   {6 * mech.n_hinges + len(mech.couplings)} sources x "
          f"{len(mech.cut_faces)} cut edges + {sum(len(f) for f in mech.flat_faces)} vertices")
    p95 = mc.gap_p95[0].max(initial=0.0)
    print(f"    closure: p95 gap {p95:.4g} {mech.units}, largest sampled {mc.gap_max[0].max(initial=0.0):.4g}, "
          f"worst case {lin.gap_bound[0].max(initial=0.0):.4g}, RSS {lin.gap_rss[0].max(initial=0.0):.4g}; "
          f"largest p95 panel deviation {mc.tip_p95[0].max():.4g}")
    print()
    tol = 1e-9 * mech.size
    return worst <= tol


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="icosahedron only, 2,000 samples")
    parser.add_argument("--samples", type=int, default=10_000)
    args = parser.parse_args(argv)
    samples = 2000 if args.quick else args.samples
    print(f"{datetime.date.today()}, {platform.machine()} {platform.system()}, Python {platform.python_version()}, "
          f"numpy {np.__version__}")
    print()
    ok = bench(geared_net(solids.icosahedron(40.0), "icosahedron"), "sintered-nylon", samples, 500)
    if not args.quick:
        ok &= bench(geared_net(solids.geodesic(3, radius=100.0), "geodesic(3)"), "machined-metal", samples, 40)
    print("summary: " + ("batched samples match the reference loop" if ok else "MISMATCH between batched and reference"))
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
