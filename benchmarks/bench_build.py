"""Benchmark of the build layer: posed solids, the thick check and the gear clearance sweep.

    python benchmarks/bench_build.py            # the lantern demo and a thick geodesic(2)
    python benchmarks/bench_build.py --quick    # the lantern demo only

Prints a table; asserts nothing about time. Exits 1 only if a correctness
comparison fails (the batched posed solids against the per-t reference).

Rows:

(a) posed triangles of every prism and gear body at T drive values,
    `build.gears.posed_solid_meshes` batched over t, against a reference that poses
    each solid at each t with `geometry.transform_points`; the two must agree.
(b) `foldsim check` of the lantern with and without its `build` object
    (assets/lantern-build.mech.json against assets/lantern.mech.json): the ratio
    is what thickness, gears, sector coverage and the gear clearance sweep cost.
(c) the prisms of geodesic(2) (320 panels, BFS net, 0.5 mm thick): building them
    and posing them at T values, as the app would each frame.
(d) the build's sweeps against the thin collision sweep on `foldsim new geodesic:K`
    (its net and gear layout, 0.5 mm thick panels, a gear pair on every coupling;
    K = 2, 320 panels, and with --large also K = 3, 1,280 panels): the thin
    `collision_intervals`, then `panel_clashes` and `gear_clearance` as `check`
    runs them, and the ratio of the two build sweeps to the thin one.
(e) gear sizing (`build.sizing.size_gears`, as `foldsim new icosahedron --thickness 2
    --module 1` runs it) on the icosahedron's net.
(f) the whole `foldsim check` (`report.check`) of the models of (d), with and without
    their `build` object: what a user waits for, every build check included (stops,
    sector coverage, the gear clearance, the gear contacts it finds, the clashes).
"""

import argparse
import json
import sys
from dataclasses import replace
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "benchmarks"))

from bench_check import best_of  # noqa: E402

from foldsim.build.gears import build_solids, posed_solid_meshes  # noqa: E402
from foldsim.build.spec import build_spec  # noqa: E402
from foldsim.gearing import fold_schedule  # noqa: E402
from foldsim.geometry import transform_points  # noqa: E402
from foldsim.io.mechanism_json import load  # noqa: E402
from foldsim.kinematics import poses_at  # noqa: E402
from foldsim.report import check  # noqa: E402


def _best(fn, repeat=3):
    """Smallest wall time of `repeat` calls and the last result (`bench_check.best_of`)."""
    return best_of(repeat, fn)


def posed_rows(mech, n_t):
    spec = build_spec(mech)
    schedule = fold_schedule(mech)
    solids = build_solids(mech, spec)
    t = np.linspace(0.0, 1.0, n_t)
    fast, (posed, owner, _) = _best(lambda: posed_solid_meshes(mech, spec, schedule, t, solids=solids))

    def reference():
        poses = poses_at(mech, schedule, t)
        return [[transform_points(poses[k, s.face], s.triangles) for s in solids] for k in range(n_t)]

    slow, ref = _best(reference, repeat=1)
    ok = all(np.allclose(posed[k, owner == i], ref[k][i], atol=1e-9) for k in range(n_t) for i in range(len(solids)))
    return fast, slow, ok, int(len(owner))


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true")
    parser.add_argument("--large", action="store_true", help="also (d) at 1,280 panels (several minutes)")
    args = parser.parse_args(argv)
    ok_all = True
    lantern = load(ROOT / "assets" / "lantern-build.mech.json")
    fast, slow, ok, n_tri = posed_rows(lantern, 64)
    ok_all &= ok
    print(f"(a) lantern posed solids, 64 t, {n_tri} triangles: batched {fast * 1e3:.2f} ms, "
          f"per-t reference {slow * 1e3:.2f} ms, ratio {slow / fast:.1f}x, agree {ok}")
    thick, _ = _best(lambda: check(lantern), repeat=1)
    thin, _ = _best(lambda: check(load(ROOT / "assets" / "lantern.mech.json")), repeat=3)
    print(f"(b) check: lantern with build {thick:.2f} s, without {thin:.3f} s, ratio {thick / thin:.1f}x")
    if not args.quick:
        from foldsim.model import build_mechanism
        from foldsim.nets import bfs_net, face_graph
        from foldsim.solids import geodesic

        poly = geodesic(2, radius=100.0)
        hinges = bfs_net(face_graph(poly.faces), 0)
        mech = build_mechanism(poly.vertices, poly.faces, hinges)
        mech = replace(mech, extras={"build": {"thickness": 0.5}})
        made, _ = _best(lambda: build_solids(mech, build_spec(mech)), repeat=1)
        fast, slow, ok, n_tri = posed_rows(mech, 16)
        ok_all &= ok
        print(f"(c) geodesic(2) prisms: built in {made:.2f} s; posed at 16 t ({n_tri} triangles): batched "
              f"{fast * 1e3:.1f} ms, per-t reference {slow * 1e3:.1f} ms, ratio {slow / fast:.1f}x, agree {ok}")
        for k in (2, 3) if args.large else (2,):
            sweep_rows(k)
        sizing_row()
        for k in (2, 3) if args.large else (2,):
            check_row(k)
    return 0 if ok_all else 1


def designed(k):
    """`foldsim new geodesic:k --size 100` with 0.5 mm panels and a gear pair on every coupling."""
    from foldsim.design import build, shape_args

    mech = build(shape_args(f"geodesic:{k}", size=100.0))[0]
    gears = [{"coupling": c} for c in range(len(mech.couplings))]
    return replace(mech, extras={**mech.extras, "build": {"thickness": 0.5, "gears": gears}})


def sweep_rows(k):
    import time

    from foldsim.analysis.collision import collision_intervals, panels
    from foldsim.build.sweep import RESOLUTION, gear_clearance, panel_clashes

    mech = designed(k)
    spec = build_spec(mech)
    schedule = fold_schedule(mech)
    start = time.perf_counter()
    pan = panels(mech)
    thin = collision_intervals(mech, schedule, pan=pan)
    thin_s = time.perf_counter() - start
    # As `check` runs them: on the thin panels its own sweep made.
    start = time.perf_counter()
    clashes = panel_clashes(mech, spec, schedule, thin=pan)
    clash_s = time.perf_counter() - start
    floor = RESOLUTION * mech.size
    start = time.perf_counter()
    rows = gear_clearance(mech, spec, schedule, enough=max(2.0 * spec.clearance, spec.clearance + 2.0 * floor),
                          thin=pan)
    gear_s = time.perf_counter() - start
    near = sum(r["min_clearance"] is not None for r in rows)
    print(f"(d) geodesic:{k}, {mech.n_faces} panels, {len(rows)} gear pairs: thin sweep {thin_s:.2f} s "
          f"({len(thin)} intervals); thick-panel clashes {clash_s:.2f} s ({len(clashes)}); gear clearance "
          f"{gear_s:.2f} s ({near} pairs with something within the threshold); build / thin = "
          f"{(clash_s + gear_s) / thin_s:.1f}x")


def check_row(k):
    import time

    mech = designed(k)
    thin_mech = replace(mech, extras={key: v for key, v in mech.extras.items() if key != "build"})
    start = time.perf_counter()
    thin = check(thin_mech)
    thin_s = time.perf_counter() - start
    start = time.perf_counter()
    built = check(mech)
    build_s = time.perf_counter() - start
    print(f"(f) check of geodesic:{k} ({mech.n_faces} panels): thin {thin_s:.2f} s ({len(thin['collisions'])} "
          f"collisions); with the build {build_s:.2f} s ({len(built['gear_contacts'])} gear contact stretches, "
          f"{len(built['panel_clashes'])} clashes); ratio {build_s / thin_s:.1f}x")


def sizing_row():
    import time

    from foldsim.build.sizing import size_gears
    from foldsim.design import build, shape_args

    mech = build(shape_args("icosahedron", size=60.0))[0]
    start = time.perf_counter()
    _, rows = size_gears(mech, 2.0, 1.0)
    took = time.perf_counter() - start
    print(f"(e) gear sizing, icosahedron net (edge 60 mm, 2 mm panels, module 1): {len(rows)} pairs sized in "
          f"{took:.1f} s")


if __name__ == "__main__":
    sys.exit(main())
