"""Planning a study and running it: serially, on a local Dask cluster, or on one given.

The nets are cut into chunks of consecutive nets; a chunk is one Dask task (a call
of `foldsim.study.evaluate.evaluate_chunk` on a worker). The client writes each
chunk's rows to its own file as soon as the chunk is done, so an interrupted study
keeps every finished chunk and ``resume`` runs only the others. A chunk file is
written once, by the client, atomically: when a worker dies, the scheduler hands
its chunk to another worker and that chunk is written when it is done, so no net is
lost or written twice. dask and distributed load only when a study runs on them.
"""

import math
import os
import time

from ..errors import ModelError
from . import table
from .evaluate import evaluate_chunk, shape_of
from .sampling import sample_nets

DEFAULT_CHUNK = 25
"""Nets per chunk at most: a few seconds of work per task on an icosahedron."""


def parse_nets(text):
    """``"all"`` -> ("all", None); ``"sample:N"`` -> ("sample", N)."""
    text = str(text).strip().lower()
    if text == "all":
        return "all", None
    kind, sep, number = text.partition(":")
    if kind == "sample" and sep and number.isdigit() and int(number) >= 1:
        return "sample", int(number)
    raise ModelError(f"--nets: expected 'all' or 'sample:N' with N >= 1, not {text!r}")


def default_chunk(n_nets):
    """Nets per chunk: up to `DEFAULT_CHUNK`, and at least 16 chunks when there are enough nets."""
    return max(1, min(DEFAULT_CHUNK, math.ceil(n_nets / 16)))


def make_plan(spec, nets="all", seed=0, chunk=None, limit=None):
    """The plan of a new study: which nets, in what order, in what chunks.

    Parameters
    ----------
    spec : StudySpec
    nets : str
        ``all`` (every net up to symmetry, as `foldsim.netcount` lists them: by
        diameter, then bitmask) or ``sample:N`` (N trees by Wilson's algorithm,
        symmetric duplicates removed, in the order drawn).
    seed : int
        Seed of the sample.
    chunk : int, optional
        Nets per chunk (default `default_chunk`).
    limit : int, optional
        Spanning trees that ``all`` may list (default `foldsim.limits.DEFAULT_LIMIT`).

    Returns
    -------
    dict
        JSON-ready; `foldsim.study.table.write_plan` stores it.
    """
    from dataclasses import asdict

    from ..limits import DEFAULT_LIMIT
    from ..netcount import nets_up_to_symmetry, number_of_spanning_trees
    from ..nets import face_graph
    from ..symmetry import symmetry_group

    kind, count = parse_nets(nets)
    if chunk is not None and chunk < 1:
        raise ModelError(f"--chunk: must be at least 1 net, not {chunk}")
    poly = shape_of(spec).poly
    graph = face_graph(poly.faces)
    limit = DEFAULT_LIMIT if limit is None else limit
    if kind == "all":
        census = nets_up_to_symmetry(poly, limit=limit)
        if not census.enumerated:
            raise ModelError(f"--nets: {poly.name} has {census.spanning_trees:,} spanning trees, more than "
                             f"the {limit:,} that can be listed; draw a sample with --nets sample:N")
        trees, total_trees = list(census.representatives), census.spanning_trees
    else:
        group = symmetry_group(poly)
        trees = sample_nets(graph, shape_of(spec).pairs, group.edges, count, seed)
        total_trees = number_of_spanning_trees(graph)
    return {
        "format": table.FORMAT, "version": table.VERSION,
        "spec": asdict(spec), "shape": poly.name, "faces": len(poly.faces),
        "nets": nets.strip().lower(), "seed": int(seed), "spanning_trees": int(total_trees),
        "chunk": int(chunk or default_chunk(len(trees))),
        "trees": [format(t, "x") for t in trees],
    }


def chunks(plan):
    """(chunk number, first net, trees) of every chunk of a plan."""
    trees = [int(t, 16) for t in plan["trees"]]
    size = plan["chunk"]
    return [(k, start, trees[start:start + size]) for k, start in enumerate(range(0, len(trees), size))]


def _client(scheduler, workers):
    """A distributed Client, and the LocalCluster it owns (None for a given address)."""
    import logging
    import warnings

    from distributed import Client, LocalCluster

    if scheduler not in (None, "local"):
        if workers is not None:
            raise ModelError("--workers: sets the size of the local cluster; an existing cluster keeps its own")
        try:
            return Client(scheduler, timeout="10s"), None
        except (OSError, TimeoutError, ValueError) as exc:
            raise ModelError(f"--scheduler: cannot reach a Dask scheduler at {scheduler!r}: {exc}") from None
    n = workers or os.cpu_count() or 1
    with warnings.catch_warnings():
        # Without a dashboard the scheduler still serves its health page, on another
        # port when another cluster holds the usual one: nothing to warn about.
        warnings.filterwarnings("ignore", message="Port .* is already in use")
        cluster = LocalCluster(n_workers=n, threads_per_worker=1, processes=True, dashboard_address=None,
                               silence_logs=logging.ERROR)
    return Client(cluster), cluster


def run_study(study, scheduler="local", workers=None, progress=None, on_client=None):
    """Evaluate every chunk of a study that has no file yet; write the chunks and the table.

    Parameters
    ----------
    study : path
        A study directory with its plan written.
    scheduler : str or None
        ``local`` (a LocalCluster of ``workers`` processes, one thread each; default
        the machine's cores), ``none`` (serial, in this process) or the address of a
        running ``distributed`` scheduler.
    workers : int, optional
        Size of the local cluster.
    progress : callable, optional
        Called as ``progress(done, todo)`` with nets done so far in this run and the
        nets this run has to do.
    on_client : callable, optional
        Called with the Client once the work is submitted (the tests use it to stop
        a worker mid-study).

    Returns
    -------
    dict
        ``nets`` (in the plan), ``evaluated_now``, ``skipped`` (already on disk), ``seconds``.
    """
    if workers is not None and workers < 1:
        raise ModelError(f"--workers: must be at least 1, not {workers}")
    plan = table.read_plan(study)
    spec = table.plan_spec(plan)
    done = table.done_chunks(study)
    todo = [c for c in chunks(plan) if c[0] not in done]
    n_todo = sum(len(c[2]) for c in todo)
    start_time = time.perf_counter()
    finished = 0
    if progress is not None:
        progress(0, n_todo)
    if str(scheduler).lower() == "none":
        for k, start, trees in todo:
            table.write_chunk(study, k, evaluate_chunk(spec, start, trees))
            finished += len(trees)
            if progress is not None:
                progress(finished, n_todo)
    elif todo:
        finished = _run_dask(study, spec, todo, scheduler, workers, progress, on_client, n_todo)
    table.write_table(study, csv=plan.get("csv", False))
    return {"nets": len(plan["trees"]), "evaluated_now": finished, "skipped": len(plan["trees"]) - n_todo,
            "seconds": time.perf_counter() - start_time}


def _run_dask(study, spec, todo, scheduler, workers, progress, on_client, n_todo):
    import uuid

    from distributed import as_completed

    client, cluster = _client(scheduler, workers)
    run_id = uuid.uuid4().hex[:12]
    try:
        sizes, futures = {}, []
        for k, start, trees in todo:
            future = client.submit(evaluate_chunk, spec, start, trees, key=f"foldsim-study-{run_id}-{k}")
            sizes[future.key] = (k, len(trees))
            futures.append(future)
        if on_client is not None:
            on_client(client)
        finished = 0
        for future in as_completed(futures):
            k, n = sizes[future.key]
            table.write_chunk(study, k, future.result())
            finished += n
            if progress is not None:
                progress(finished, n_todo)
            future.release()
        return finished
    finally:
        client.close()
        if cluster is not None:
            cluster.close()
