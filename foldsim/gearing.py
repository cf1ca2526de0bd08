"""Gear couplings between hinges: degrees of freedom and the fold schedule.

A coupling ``theta[j] = r * theta[i]`` is an edge of the coupling graph over hinges.
Each connected component moves as one; a component that the drive does not reach
adds a degree of freedom (its hinges are free), and a cycle whose ratios multiply
to anything but 1 locks its component. Gear ratios are constant, so every fold
angle is linear in the drive parameter t.
"""

from dataclasses import dataclass

import networkx as nx
import numpy as np

from . import limits
from .errors import ModelError
from .tolerances import DEFAULT


@dataclass(frozen=True)
class Schedule:
    """Fold angle of every hinge as a linear function of the drive t.

    Attributes
    ----------
    rates : (H,) float
        ``theta_h(t) = rates[h] * t`` (radians).
    kind : str
        "geared" (from couplings) or "ideal" (no couplings: every hinge moves as t
        times its own closing angle).
    dof : int
        Degrees of freedom the gearing leaves.
    free_hinges : tuple of int
        Hinges the drive does not reach through the gears.
    locked_cycles : tuple of tuple of int
        Hinges around each coupling cycle whose ratio product is not 1.
    """

    rates: np.ndarray
    kind: str
    dof: int
    free_hinges: tuple
    locked_cycles: tuple


def coupling_graph(mech):
    """Graph over hinges with one edge per coupled pair.

    Returns
    -------
    networkx.Graph
        Nodes are hinge indices; edge (i, j) carries ``source`` and ``ratio`` of the
        first coupling of that pair: ``theta[other] = ratio * theta[source]``.
    """
    graph = nx.Graph()
    graph.add_nodes_from(range(mech.n_hinges))
    for k, c in enumerate(mech.couplings):
        i, j = c.hinges
        if not graph.has_edge(i, j):
            graph.add_edge(i, j, source=i, ratio=c.ratio, coupling=k)
    return graph


def _factor(edge, frm):
    """Multiplier from theta[frm] to theta[other end] along one coupling edge."""
    return edge["ratio"] if edge["source"] == frm else 1.0 / edge["ratio"]


def fold_schedule(mech, tol=DEFAULT):
    """The schedule the gearing imposes.

    Parameters
    ----------
    mech : Mechanism
    tol : Tolerances

    Returns
    -------
    Schedule

    Examples
    --------
    Three hinges, hinge 1 geared 2:1 to hinge 0, hinge 2 not geared:

    >>> from types import SimpleNamespace
    >>> from foldsim.model import Coupling
    >>> m = SimpleNamespace(n_hinges=3, drive=0, closed_angles=np.array([0.5, 1.0, 0.2]),
    ...                     couplings=(Coupling((0, 1), 2.0),))
    >>> s = fold_schedule(m)
    >>> s.rates.tolist(), s.dof, s.free_hinges
    ([0.5, 1.0, 0.2], 2, (2,))
    """
    closed = np.asarray(mech.closed_angles, dtype=float)
    if not mech.couplings:
        return Schedule(closed.copy(), "ideal", 1, (), ())
    graph = coupling_graph(mech)
    factor = np.full(mech.n_hinges, np.nan)
    free, locked, dof = [], [], 0
    for comp in nx.connected_components(graph):
        start = mech.drive if mech.drive in comp else min(comp)
        if start != mech.drive:
            free.extend(comp)
        factor[start] = closed[start]
        tree = nx.bfs_tree(graph, start).to_undirected()
        for a, b in nx.bfs_edges(graph, start):
            factor[b] = factor[a] * _factor(graph.edges[a, b], a)
        cycles = []
        for c in mech.couplings:
            i, j = c.hinges
            want = factor[i] * c.ratio
            if i in comp and abs(factor[j] - want) > tol.ratio * max(abs(want), abs(factor[j])):
                cycles.append(tuple(int(h) for h in nx.shortest_path(tree, i, j)))
        locked.extend(cycles)
        dof += 0 if cycles else 1
    return Schedule(factor, "geared", dof, tuple(sorted(int(h) for h in free)), tuple(sorted(locked)))


def check_rates(mech):
    """Refuse gearing whose ratios leave the range float arithmetic and the sweep can handle.

    Every ``|ratio|`` must lie in [1 / `limits.MAX_RATIO`, `limits.MAX_RATIO`]; along
    the gear chains from the drive (or from a free component's first hinge) no
    hinge may turn more than `limits.MAX_FOLD_TURNS` full turns by t = 1, nor less
    than `limits.MIN_RATE_FACTOR` of the start hinge's rate. The collision sweep's
    work grows with the fastest hinge's rate, so this also bounds its time.

    Parameters
    ----------
    mech : Mechanism

    Raises
    ------
    ModelError
        Naming the coupling (docs/format.md, Limits).

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> from foldsim.model import Coupling
    >>> m = SimpleNamespace(n_hinges=2, drive=0, closed_angles=np.array([1.5, 1.5]),
    ...                     couplings=(Coupling((0, 1), 1e3),))
    >>> check_rates(m)
    Traceback (most recent call last):
    ...
    foldsim.errors.ModelError: couplings[0]: the gear chain from hinge 0 turns hinge 1 ...
    """
    for k, c in enumerate(mech.couplings):
        if not 1.0 / limits.MAX_RATIO <= abs(c.ratio) <= limits.MAX_RATIO:
            raise ModelError(f"couplings[{k}].ratio: {c.ratio:.3g} is outside the limit of "
                             f"{1.0 / limits.MAX_RATIO:g}..{limits.MAX_RATIO:g} in size (docs/format.md, Limits)")
    if not mech.couplings:
        return
    closed = np.asarray(mech.closed_angles, dtype=float)
    graph = coupling_graph(mech)
    most = 2.0 * np.pi * limits.MAX_FOLD_TURNS
    for comp in nx.connected_components(graph):
        start = mech.drive if mech.drive in comp else min(comp)
        factor = {start: 1.0}
        for a, b in nx.bfs_edges(graph, start):
            edge = graph.edges[a, b]
            factor[b] = factor[a] * _factor(edge, a)
            rate = abs(factor[b] * closed[start])
            where = f"couplings[{edge['coupling']}]: the gear chain from hinge {start} turns hinge {b}"
            if rate > most:
                raise ModelError(f"{where} {np.degrees(rate):.3g}° by t = 1, more than the limit of "
                                 f"{limits.MAX_FOLD_TURNS} turns (docs/format.md, Limits)")
            if abs(factor[b]) < limits.MIN_RATE_FACTOR:
                raise ModelError(f"{where} only {abs(factor[b]):.3g} times as fast, below the limit of "
                                 f"{limits.MIN_RATE_FACTOR:g} (docs/format.md, Limits)")


def fold_angles(schedule, t):
    """Fold angles at drive values t.

    Parameters
    ----------
    schedule : Schedule
    t : (T,) float

    Returns
    -------
    (T, H) float
        Radians.
    """
    return np.asarray(t, dtype=float)[:, None] * schedule.rates[None, :]


def hinge_angles(schedule, t, hinges):
    """Fold angle of hinge ``hinges[r]`` at drive value ``t[r]``, (n,) radians (as `fold_angles`)."""
    return np.asarray(t, dtype=float) * schedule.rates[np.asarray(hinges, np.int64)]
