"""Measure how fast the 3D view follows the drive on a large model.

Run ``python -m foldsim.gui.bench [SUBDIVISIONS]`` under a display (Xvfb works).
It folds a geodesic sphere (20 * 4**k triangular panels, k = 3 by default: 1,280
panels) on a breadth-first net and prints updates per second for

- the core's share of a frame (poses, collisions at this t, gaps),
- a whole frame: that plus moving every panel and drawing the scene, first with a
  collision query per frame, then with collisions read from the sweep's
  intervals as the app does once its background sweep has passed,
- drawing alone, with the panels standing still, and with no panels at all (what
  every frame costs: clearing, resolving the samples, the overlays),
- a whole frame with the panels drawn as prisms (a build's thick panels),
- on the same sphere designed as `foldsim new` does (its net and gear layout), a
  whole frame with the prisms and every gear body against the thin frame of that
  model (the build's goal: a scrub stays smooth),

and the same whole frame for a two-panel flap, with the ratio of the sphere's frame
to the flap's (the app's goal: at most 1.5): from the rates measured apart, and
from the two frames taking turns at every t in two views of their own (the median
frame of each), which exposes both to the same load of the machine.

It asserts nothing; compare the numbers between versions and machines.
"""

import sys
import time

import numpy as np

from .. import nets, solids
from ..analysis.closure import cut_edge_gaps
from ..analysis.collision import colliding_pairs, collision_intervals, panels
from ..gearing import fold_schedule
from ..kinematics import poses_at
from ..model import build_mechanism


def sphere_mechanism(k):
    """A geodesic sphere of subdivision level k on a breadth-first net."""
    shape = solids.geodesic(k)
    hinges = nets.bfs_net(nets.face_graph(shape.faces), root=0)
    return build_mechanism(shape.vertices, shape.faces, hinges, root=0, name=shape.name)


def flap_mechanism():
    """Two unit squares on one hinge that closes at 90 degrees."""
    v = np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0], [-1, 0, 0], [-1, 1, 0]], float)
    return build_mechanism(v, [[0, 1, 2, 3], [4, 0, 3, 5]], [(0, 1)], root=0, state="flat",
                           closed_angles=np.radians([90.0]), name="flap")


def thick_solids(mech, share=0.05):
    """The mechanism's panels as prisms a ``share`` of its shortest edge thick."""
    from dataclasses import replace

    from ..build.prisms import panel_solids
    from ..build.spec import build_spec

    edges = np.concatenate([np.linalg.norm(np.roll(p, -1, axis=0) - p, axis=1) for p in mech.flat_faces])
    built = replace(mech, extras={**mech.extras, "build": {"thickness": share * float(edges.min())}})
    return panel_solids(built, build_spec(built))


def geared_model(k):
    """`foldsim new geodesic:k` (its net and gears) with a build: prisms and a gear pair per coupling.

    Returns the mechanism, its schedule and its solids (prisms, then gear bodies).
    """
    from dataclasses import replace

    from ..build.gears import build_solids
    from ..build.spec import build_spec
    from ..design import build, shape_args
    from .window.model import DETAIL_PAIRS

    mech = build(shape_args(f"geodesic:{k}", size=100.0))[0]
    gears = [{"coupling": c} for c in range(len(mech.couplings))]
    mech = replace(mech, extras={**mech.extras, "build": {"thickness": 0.5, "gears": gears}})
    # As the app draws them (`window.model.Model.solids`).
    solids = build_solids(mech, build_spec(mech), coarse=len(gears) > DETAIL_PAIRS)
    return mech, fold_schedule(mech), solids


def _rate(step, values, budget=4.0):
    """Calls per second of step(t) over the values, for at most `budget` seconds."""
    start = time.perf_counter()
    done = 0
    for t in values:
        step(t)
        done += 1
        if time.perf_counter() - start > budget:
            break
    return done / (time.perf_counter() - start)


def _paired_times(steps, values, budget=6.0):
    """Median seconds per call of each step(t), the steps taking turns at every t.

    Taking turns exposes every step to the same load of the machine (a shared
    machine's load swings by more than the ratio being measured within seconds);
    the median keeps one stalled frame from counting.
    """
    times = [[] for _ in steps]
    start = time.perf_counter()
    while time.perf_counter() - start < budget:
        for t in values:
            for out, step in zip(times, steps):
                begin = time.perf_counter()
                step(t)
                out.append(time.perf_counter() - begin)
            if time.perf_counter() - start > budget:
                break
    return [float(np.median(x)) for x in times]


def main(argv=None):
    """Print the rates; return 0."""
    from OpenGL import GL
    from PySide6 import QtWidgets

    from .view.viewport import FoldView

    argv = sys.argv[1:] if argv is None else argv
    k = int(argv[0]) if argv else 3
    app = QtWidgets.QApplication.instance() or QtWidgets.QApplication([])
    mech = sphere_mechanism(k)
    schedule = fold_schedule(mech)
    pan = panels(mech)
    view = FoldView()
    view.resize(960, 720)
    view.show()
    app.processEvents()
    view.set_mechanism(mech, schedule, pan)
    view.set_view("iso")
    app.processEvents()
    values = np.linspace(0.0, 1.0, 401)[1:]

    def core(t):
        poses = poses_at(mech, schedule, np.array([t]))
        colliding_pairs(mech, poses[0], pan=pan)
        cut_edge_gaps(mech, poses)

    def draw(target=view):
        target.makeCurrent()
        target.paintGL()
        GL.glFinish()
        target.doneCurrent()

    def frame(t, target=view):
        target.set_t(t)
        draw(target)

    print(f"{mech.name}: {mech.n_faces} panels, {mech.n_hinges} hinges, {len(mech.cut_faces)} cut edges")
    print(f"core only                 {_rate(core, values):8.1f} updates/s")
    queried = _rate(frame, values)
    print(f"whole frame, query        {queried:8.1f} updates/s")
    found = collision_intervals(mech, schedule, 0.0, 1.0, pan=pan)
    view.set_known_collisions(found, (0.0, 1.0))
    swept = _rate(frame, values)
    print(f"whole frame, swept        {swept:8.1f} updates/s")
    # The flap in a view of its own, its frames taking turns with the sphere's.
    flap_view = FoldView()
    flap_view.resize(960, 720)
    flap_view.show()
    app.processEvents()
    flap = flap_mechanism()
    flap_view.set_mechanism(flap)
    flap_view.set_view("iso")
    app.processEvents()

    sphere_time, flap_time = _paired_times([frame, lambda t: frame(t, flap_view)], values)
    flap_view.close()
    print(f"drawing only              {_rate(lambda t: draw(), values):8.1f} frames/s")
    view._layer.setVisible(False)
    print(f"  no panels (the floor)   {_rate(lambda t: draw(), values):8.1f} frames/s")
    view._layer.setVisible(True)
    solids = thick_solids(mech)
    view.set_solids(solids)
    thick = _rate(frame, values)
    print(f"thick panels, swept       {thick:8.1f} updates/s  ({sum(len(s.triangles) for s in solids)} "
          f"triangles; {swept / thick:.2f} times the thin frame)")
    view.set_solids(None)
    geared, geared_schedule, parts = geared_model(k)
    view.set_mechanism(geared, geared_schedule)
    view.set_view("iso")
    app.processEvents()
    view.set_known_collisions(collision_intervals(geared, geared_schedule, 0.0, 1.0, pan=view.pan), (0.0, 1.0))
    thin_geared = _rate(frame, values)
    view.set_solids(parts)
    built = _rate(frame, values)
    n_gears = sum(s.kind != "panel" for s in parts)
    print(f"designed sphere, thin     {thin_geared:8.1f} updates/s  ({len(geared.couplings)} gear pairs)")
    print(f"  prisms and gear bodies  {built:8.1f} updates/s  ({n_gears} gear bodies, "
          f"{sum(len(s.triangles) for s in parts)} triangles; {thin_geared / built:.2f} times the thin frame)")
    view.set_solids(None)
    flap = flap_mechanism()
    view.set_mechanism(flap)
    view.set_view("iso")
    app.processEvents()
    small = _rate(frame, values)
    print(f"flap (2 panels), frame    {small:8.1f} updates/s")
    print(f"frame ratio {mech.n_faces} panels / 2 panels: {small / queried:.2f} with a query per frame, "
          f"{small / swept:.2f} from the sweep, measured apart")
    print(f"  taking turns frame by frame: {1e3 * sphere_time:.2f} ms against {1e3 * flap_time:.2f} ms, "
          f"ratio {sphere_time / flap_time:.2f} from the sweep (goal <= 1.5)")
    view.close()
    return 0


if __name__ == "__main__":
    sys.exit(main())
