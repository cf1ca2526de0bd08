"""Benchmark of net studies on the icosahedron (`foldsim study`).

    python benchmarks/bench_study.py            # 240 nets per stage table, 400 per throughput run
    python benchmarks/bench_study.py --quick    # 40 and 100

Prints tables; asserts nothing about time. Exits 1 only if a correctness
comparison fails: the early-exit sweep must report the same first collision as the
full sweep (`collision_intervals`) on every timed net, and the Dask rows must equal
the serial rows.

(a) Per-net cost of each stage of a row without --mc, over nets spread evenly
    through the census (ordered by diameter): the unfolding, the gear layout,
    closure, the triangulation, the collision sweep with its early exit against the
    full sweep (the reference path; the ratio is what the early exit saves), the
    flat-layout test, part types, the linearised stack-up.
(b) Throughput of whole studies of the same nets: serial in this process, then on
    local Dask clusters of 1 and 2 worker processes (cluster start-up excluded), and
    the projected time for all 43,380 nets (Buekenhout & Parker 1998) at each rate,
    with the ideal scaling to more workers from the 1-worker rate and the measured
    2-worker efficiency.
"""

import argparse
import os
import shutil
import sys
import tempfile
import time
from pathlib import Path

# One thread per process, as Dask's workers run (distributed sets these for its
# worker processes): the stage table then times what one worker does.
for _name in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_name, "1")

import numpy as np  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from foldsim.analysis.closure import cut_edge_gaps
from foldsim.analysis.collision import collision_intervals, flat_overlaps, panels
from foldsim.gearing import fold_schedule
from foldsim.kinematics import poses_at
from foldsim.layout import gear_layout
from foldsim.model import build_mechanism
from foldsim.netcount import tree_pairs
from foldsim.nets import central_face, hinges_from
from foldsim.parts import part_types
from foldsim.stackup import linear_stackup, play_spec
from foldsim.study import table
from foldsim.study.evaluate import StudySpec, shape_of
from foldsim.study.run import make_plan, run_study
from foldsim.study.sweep import first_collision

ALL_NETS = 43_380  # icosahedron, Buekenhout & Parker, Discrete Math. 186 (1998)
GOAL_MINUTES = 30


def spread(trees, n):
    """n trees evenly spaced through the list."""
    idx = np.linspace(0, len(trees) - 1, min(n, len(trees))).round().astype(int)
    return [trees[i] for i in idx]


def stage_table(spec, trees):
    from dataclasses import replace

    shape = shape_of(spec)
    poly = shape.poly
    stages = ["unfold", "gear layout", "closure", "triangulate", "sweep, early exit", "sweep, full (reference)",
              "flat layout", "part types", "stack-up (linear)"]
    cost = dict.fromkeys(stages, 0.0)
    colliding, mismatches = 0, 0
    cpu = 0.0
    for tree in trees:
        cpu_start = time.process_time()
        t = time.perf_counter()

        def tick(name):
            nonlocal t
            now = time.perf_counter()
            cost[name] += now - t
            t = now

        hinges = tree_pairs(tree, shape.pairs)
        root = central_face(len(poly.faces), hinges)
        plain = build_mechanism(poly.vertices, poly.faces, hinges_from(root, hinges), root=root)
        tick("unfold")
        layout = gear_layout(plain)
        mech = replace(plain, drive=layout.drive, couplings=layout.couplings())
        tick("gear layout")
        schedule = fold_schedule(mech)
        cut_edge_gaps(mech, poses_at(mech, schedule, np.array([1.0])))
        tick("closure")
        pan = panels(mech)
        tick("triangulate")
        early = first_collision(mech, schedule, pan=pan)
        tick("sweep, early exit")
        cpu -= time.process_time()
        full = collision_intervals(mech, schedule, pan=pan)
        cpu += time.process_time()
        tick("sweep, full (reference)")
        flat_overlaps(mech, pan=pan)
        tick("flat layout")
        part_types(mech)
        tick("part types")
        linear_stackup(mech, play_spec(mech, spec.process), times=(1.0,), schedule=schedule)
        tick("stack-up (linear)")
        cpu += time.process_time() - cpu_start
        colliding += bool(full)
        first = min(full, key=lambda c: (c["first_t"], c["faces"])) if full else None
        if (first and {"faces": first["faces"], "first_t": first["first_t"]}) != (early or None):
            mismatches += 1
    n = len(trees)
    print(f"(a) per-net cost on the icosahedron, {n} nets spread through the census "
          f"({colliding} collide on the way)")
    print(f"    {'stage':<26} {'ms per net':>10}")
    for name in stages:
        print(f"    {name:<26} {1000 * cost[name] / n:>10.2f}")
    row = sum(v for k, v in cost.items() if k != "sweep, full (reference)")
    with_full = row - cost["sweep, early exit"] + cost["sweep, full (reference)"]
    print(f"    {'row (early exit)':<26} {1000 * row / n:>10.2f}")
    print(f"    {'row (full sweep)':<26} {1000 * with_full / n:>10.2f}")
    print(f"    {'row, CPU time':<26} {1000 * cpu / n:>10.2f}")
    print(f"    all 43,380 nets at this row time on 2 workers scaling ideally: {ALL_NETS * row / n / 2 / 60:.1f} min")
    print(f"    early exit / full sweep: {cost['sweep, early exit'] / cost['sweep, full (reference)']:.2f} "
          f"of the sweep's time; first collisions that disagree: {mismatches}")
    return mismatches


def throughput(spec, plan, trees, workers_list):
    from distributed import LocalCluster

    base = tempfile.mkdtemp(prefix="bench-study-")
    rates, serial_rows, bad = {}, None, 0
    try:
        runs = [("serial (this process)", None)] + [(f"Dask, {w} worker(s)", w) for w in workers_list]
        for label, workers in runs:
            path = Path(base) / label.replace(" ", "_").replace(",", "").replace("(", "").replace(")", "")
            sub = dict(plan, trees=[format(t, "x") for t in trees])
            table.write_plan(path, sub)
            if workers is None:
                stats = run_study(path, scheduler="none")
            else:
                with LocalCluster(n_workers=workers, threads_per_worker=1, processes=True,
                                  dashboard_address=None, silence_logs=40) as cluster:
                    # warm the workers (imports, the shape) outside the timing
                    warm = Path(base) / f"warm{workers}"
                    table.write_plan(warm, dict(sub, trees=sub["trees"][:2 * workers], chunk=1))
                    run_study(warm, scheduler=cluster.scheduler_address)
                    stats = run_study(path, scheduler=cluster.scheduler_address)
            rows = table.read_table(path)
            if serial_rows is None:
                serial_rows = rows
            elif rows != serial_rows:
                bad += 1
                print(f"    {label}: rows differ from the serial run")
            rates[label] = len(trees) / stats["seconds"]
    finally:
        shutil.rmtree(base, ignore_errors=True)
    print(f"(b) throughput, {len(trees)} icosahedron nets, chunks of {plan['chunk']}")
    print(f"    {'run':<24} {'nets/s':>8} {'ms per net':>10} {'all 43,380 nets':>16}")
    for label, rate in rates.items():
        minutes = ALL_NETS / rate / 60
        print(f"    {label:<24} {rate:>8.2f} {1000 / rate:>10.1f} {minutes:>12.1f} min")
    one, two = rates.get("Dask, 1 worker(s)"), rates.get("Dask, 2 worker(s)")
    if one and two:
        efficiency = two / (2 * one)
        print(f"    2 workers: {two / one:.2f} x one worker ({efficiency:.0%} of ideal); "
              f"goal <= {GOAL_MINUTES} min on 2 cores: {'met' if ALL_NETS / two / 60 <= GOAL_MINUTES else 'NOT met'}")
        print(f"    {'workers':>8} {'all nets, ideal':>16} {'at the 2-worker efficiency':>28}")
        for w in (1, 2, 4, 8, 16, 32):
            ideal = ALL_NETS / (w * one) / 60
            real = ALL_NETS / (w * one * (efficiency if w > 1 else 1.0)) / 60
            print(f"    {w:>8} {ideal:>12.1f} min {real:>24.1f} min")
    return bad


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true")
    parser.add_argument("--shape", default="icosahedron")
    args = parser.parse_args()
    spec = StudySpec(shape=args.shape)
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    print(f"{os.cpu_count()} cores, load average {load:.2f} at the start (other work slows every wall time)")
    t = time.perf_counter()
    plan = make_plan(spec, "all")
    print(f"plan: {len(plan['trees']):,} nets of the {args.shape} listed in {time.perf_counter() - t:.1f} s")
    trees = [int(x, 16) for x in plan["trees"]]
    bad = stage_table(spec, spread(trees, 40 if args.quick else 240))
    bad += throughput(spec, plan, spread(trees, 100 if args.quick else 400), [1, 2])
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main())
