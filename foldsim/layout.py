"""Gear layout on a chosen net: which hinge pairs can carry gears, and which to use.

A gear pair couples two hinges that border one face, the *carrier*: the carrier
holds both axles, and each gear is fixed to the panel across its hinge, so relative
to the carrier gear ``i`` turns by ``theta[i]`` about hinge ``i``'s line. Both hinge
lines lie in the carrier's plane, so they either cross or are parallel:

- ``bevel``: the two hinge edges meet at a corner of the carrier (the cones' apex).
- ``remote-bevel``: the lines cross, but away from both edges (two non-adjacent,
  non-parallel edges of a pentagon or hexagon); a bevel pair whose apex lies off
  the panel, with larger gears. Used only where bevel and spur pairs cannot reach
  every hinge.
- ``spur``: parallel lines some distance apart.
- ``coaxial``: one line; a shared shaft, which only gives ratio 1. Never chosen.

Hinges without a common face (``apart``) and lines that do not meet at all
(``skew``, which cannot happen on one planar face) are never geared.

**Shaft angle.** Seen from outside, the neighbour across edge ``k`` of the carrier
turns by ``theta[k]`` about the edge's direction ``d[k]`` in the carrier's
counter-clockwise loop, so points on the carrier's side of the line move out of
the plane by ``theta[k]`` times their distance from it. Rolling pitch cones touch
along a line through the apex where both gears move alike: on the same side of
both hinge lines when the ratio is positive, on opposite sides when it is
negative. The shaft angle Σ is the angle of the wedge between the two axes that
holds that contact line, so ``Σ = π − angle(d[i], d[j])`` for a positive ratio
(the carrier's interior angle at a convex corner: 90° on a cube) and
``Σ = angle(d[i], d[j])`` for a negative one. The pitch cone angles δi + δj = Σ
follow from the tooth ratio (`bevel_cones`).

**Spur mesh.** For a positive ratio between antiparallel edges (opposite sides of a
convex face) the contact point lies between the lines: an ``external`` mesh with
centre distance equal to the distance between the lines. Otherwise the gears turn
opposite ways and need an ``internal`` mesh (a ring gear, or an idler).

The layout picks a spanning tree of the candidate graph over hinges whose longest
chain from the drive is as short as possible: a breadth-first tree from a center of
the graph (smallest eccentricity, then smallest sum of distances, then lowest
index). Every ratio is ``closed_angles[j] / closed_angles[i]`` so all hinges close
together.
"""

from dataclasses import dataclass, replace

import networkx as nx
import numpy as np
from scipy.sparse import csr_matrix
from scipy.sparse.csgraph import shortest_path

from .analysis.closure import cut_edge_gaps
from .errors import ModelError
from .geometry import cross as cross3
from .gearing import fold_schedule
from .kinematics import poses_at
from .model import Coupling
from .tolerances import DEFAULT

SIMPLE = ("bevel", "spur")
GEARABLE = ("bevel", "spur", "remote-bevel")


@dataclass(frozen=True)
class BevelCones:
    """Pitch cones of a straight bevel pair (radians; lengths in module units).

    Attributes
    ----------
    delta1, delta2 : float
        Pitch cone angles of gear 1 and gear 2; ``delta1 + delta2`` is the shaft angle.
    cone_distance : float or None
        Distance from the apex to the pitch circles along the contact line, when a
        module was given.
    """

    delta1: float
    delta2: float
    cone_distance: float = None


def bevel_cones(shaft_angle, z1, z2, module=None):
    """Pitch cone angles of a bevel pair from the shaft angle and the tooth counts.

    ``tan δ1 = sin Σ / (z2/z1 + cos Σ)``, ``δ2 = Σ − δ1``, cone distance
    ``R = d2 / (2 sin δ2)`` with pitch diameter ``d2 = module · z2``.

    Parameters
    ----------
    shaft_angle : float
        Σ, radians, in (0, π).
    z1, z2 : float
        Tooth counts (any positive numbers in the ratio of the teeth will do for the
        angles).
    module : float, optional
        Tooth size (pitch diameter per tooth) for the cone distance.

    Returns
    -------
    BevelCones

    Examples
    --------
    >>> c = bevel_cones(np.radians(90.0), 20, 40, module=2.0)
    >>> round(float(np.degrees(c.delta1)), 5), round(float(np.degrees(c.delta2)), 5)
    (26.56505, 63.43495)
    >>> round(c.cone_distance, 6)  # 80 / (2 sin 63.43°)
    44.72136
    """
    shaft_angle = float(shaft_angle)
    if not 0.0 < shaft_angle < np.pi:
        raise ModelError(f"shaft_angle: must lie strictly between 0 and 180 degrees, not "
                         f"{np.degrees(shaft_angle):.6g}")
    for name, z in (("z1", z1), ("z2", z2)):
        if not (np.isfinite(z) and z > 0):
            raise ModelError(f"{name}: tooth count must be a positive number, not {z}")
    delta1 = float(np.arctan2(np.sin(shaft_angle), z2 / z1 + np.cos(shaft_angle)))
    delta2 = shaft_angle - delta1
    if module is None:
        return BevelCones(delta1, delta2)
    if not (np.isfinite(module) and module > 0):
        raise ModelError(f"module: must be a positive length, not {module}")
    return BevelCones(delta1, delta2, float(module * z2 / (2.0 * np.sin(delta2))))


def teeth_pairs(ratio, zmin, zmax):
    """The tooth pair that best approximates a gear ratio.

    Parameters
    ----------
    ratio : float
        Wanted ``theta[j] / theta[i]``; only its size is used (teeth are positive).
    zmin, zmax : int
        Allowed tooth counts, ``1 <= zmin <= zmax``.

    Returns
    -------
    (int, int, float)
        ``zi, zj`` with ``zi / zj`` closest to ``|ratio|`` (then fewest teeth in
        total, then fewer on hinge i), and the relative ratio error
        ``(zi / zj) / |ratio| - 1``.

    Examples
    --------
    >>> teeth_pairs(0.5, 12, 40)
    (12, 24, 0.0)
    >>> z1, z2, err = teeth_pairs(np.sqrt(2.0), 10, 30)
    >>> (z1, z2), round(err, 6)
    ((24, 17), -0.001732)
    """
    if isinstance(zmin, bool) or isinstance(zmax, bool) or int(zmin) != zmin or int(zmax) != zmax:
        raise ModelError(f"teeth: tooth limits must be integers, not {zmin}:{zmax}")
    zmin, zmax = int(zmin), int(zmax)
    if not 1 <= zmin <= zmax:
        raise ModelError(f"teeth: need 1 <= MIN <= MAX, not {zmin}:{zmax}")
    target = abs(float(ratio))
    if not (np.isfinite(target) and target > 0):
        raise ModelError(f"ratio: must be a finite non-zero number, not {ratio}")
    zj = np.arange(zmin, zmax + 1)
    # For each zj the best zi is next to ratio * zj; try both neighbours, clipped.
    near = np.floor(target * zj)
    zi = np.clip(np.stack([near, near + 1]), zmin, zmax).astype(np.int64)
    zj = np.broadcast_to(zj, zi.shape)
    error = np.abs(zi / zj - target)
    order = np.lexsort((zi.ravel(), (zi + zj).ravel(), error.ravel()))
    best = order[0]
    a, b = int(zi.ravel()[best]), int(zj.ravel()[best])
    return a, b, float(a / b / target - 1.0)


@dataclass(frozen=True, eq=False)
class GearPair:
    """One gear pair between two hinges, ``theta[j] = ratio * theta[i]``.

    Attributes
    ----------
    hinges : (int, int)
        ``(i, j)``.
    face : int
        The carrier: the face both hinges border (-1 when there is none).
    kind : str
        ``bevel``, ``remote-bevel``, ``spur``, ``coaxial`` or ``apart`` (module
        docstring).
    ratio : float
    shaft_angle : float or None
        Σ in radians, for the bevel kinds.
    apex : (3,) float or None
        Where the hinge lines cross, in the flat frame (bevel kinds).
    apex_reach : float or None
        How far the apex lies beyond the nearer hinge edge: 0 for ``bevel``.
    centre_distance : float or None
        Distance between the lines, for ``spur``.
    mesh : str or None
        ``external`` or ``internal``, for ``spur``.
    """

    hinges: tuple
    face: int
    kind: str
    ratio: float
    shaft_angle: float = None
    apex: np.ndarray = None
    apex_reach: float = None
    centre_distance: float = None
    mesh: str = None

    def cones(self, teeth=None):
        """Pitch cones (`BevelCones`) of a bevel pair, from ``teeth`` or the ratio."""
        if self.shaft_angle is None:
            return None
        zi, zj = teeth if teeth is not None else (abs(self.ratio), 1.0)
        return bevel_cones(self.shaft_angle, zi, zj)


def hinge_edge(mech, h, face):
    """Local index k of hinge h's edge in a face: the edge runs ``face[k] -> face[k+1]``.

    Parameters
    ----------
    mech : Mechanism
    h : int
        Hinge index.
    face : int
        One of the hinge's two faces.

    Returns
    -------
    int
    """
    a, b = (int(f) for f in mech.hinge_faces[h])
    other = b if face == a else a
    ring = mech.faces[face]
    others = set(mech.faces[other].tolist())
    n = len(ring)
    for k in range(n):
        if int(ring[k]) in others and int(ring[(k + 1) % n]) in others:
            return k
    raise ModelError(f"hinges[{h}]: faces {a} and {b} share no edge")


def _segment_distance(p, a, b):
    """Distance from point p (3,) to the segment a-b."""
    ab = b - a
    s = np.clip(np.dot(p - a, ab) / np.dot(ab, ab), 0.0, 1.0)
    return float(np.linalg.norm(p - (a + s * ab)))


def pair_geometry(mech, i, j, ratio=None, tol=DEFAULT):
    """Classify the gear pair between hinges i and j and give its geometry.

    Parameters
    ----------
    mech : Mechanism
    i, j : int
        Hinge indices.
    ratio : float, optional
        ``theta[j] / theta[i]``; default the ratio that closes both together,
        ``closed_angles[j] / closed_angles[i]``.
    tol : Tolerances

    Returns
    -------
    GearPair
    """
    if ratio is None:
        ratio = float(mech.closed_angles[j] / mech.closed_angles[i])
    common = set(mech.hinge_faces[i].tolist()) & set(mech.hinge_faces[j].tolist())
    if not common:
        return GearPair((int(i), int(j)), -1, "apart", ratio)
    f = common.pop()
    pts = mech.flat_faces[f]
    n = len(pts)
    ki, kj = hinge_edge(mech, i, f), hinge_edge(mech, j, f)
    ai, bi = pts[ki], pts[(ki + 1) % n]
    aj, bj = pts[kj], pts[(kj + 1) % n]
    di = (bi - ai) / np.linalg.norm(bi - ai)
    dj = (bj - aj) / np.linalg.norm(bj - aj)
    cross = cross3(di, dj)
    sine = float(np.linalg.norm(cross))
    base = GearPair((int(i), int(j)), int(f), "", ratio)
    if sine <= tol.coincident:
        offset = (aj - ai) - np.dot(aj - ai, di) * di
        distance = float(np.linalg.norm(offset))
        if distance <= tol.coincident * mech.size:
            return replace(base, kind="coaxial")
        antiparallel = float(np.dot(di, dj)) < 0
        mesh = "external" if (ratio > 0) == antiparallel else "internal"
        return replace(base, kind="spur", centre_distance=distance, mesh=mesh)
    between = float(np.arctan2(sine, np.dot(di, dj)))  # angle(d_i, d_j) in (0, pi)
    shaft = np.pi - between if ratio > 0 else between
    # Lines a_i + s d_i and a_j + u d_j in one plane: least-squares crossing point.
    s, u = np.linalg.lstsq(np.column_stack([di, -dj]), aj - ai, rcond=None)[0]
    apex = 0.5 * ((ai + s * di) + (aj + u * dj))
    adjacent = (kj - ki) % n in (1, n - 1)
    if adjacent:
        return replace(base, kind="bevel", shaft_angle=float(shaft), apex=apex, apex_reach=0.0)
    reach = min(_segment_distance(apex, ai, bi), _segment_distance(apex, aj, bj))
    return replace(base, kind="remote-bevel", shaft_angle=float(shaft), apex=apex, apex_reach=reach)


def gear_candidates(mech, tol=DEFAULT):
    """Every pair of hinges that border a common face, classified.

    Parameters
    ----------
    mech : Mechanism
    tol : Tolerances

    Returns
    -------
    list of GearPair
        One per pair ``i < j``, ordered by carrier face then hinges.
    """
    on_face = [[] for _ in range(mech.n_faces)]
    for h, (a, b) in enumerate(mech.hinge_faces.tolist()):
        on_face[a].append(h)
        on_face[b].append(h)
    out = []
    for hinges in on_face:
        for x, i in enumerate(sorted(hinges)):
            for j in sorted(hinges)[x + 1:]:
                out.append(pair_geometry(mech, i, j, tol=tol))
    return out


@dataclass(frozen=True, eq=False)
class GearLayout:
    """A chosen gear layout.

    Attributes
    ----------
    drive : int
        The driven hinge (a center of its part of the candidate graph).
    pairs : tuple of GearPair
        Chosen pairs, each from a hinge nearer the drive (``hinges[0]``) to one
        farther (``hinges[1]``), ordered by depth then hinge.
    depth : (H,) int
        Gear pairs between each hinge and the driving hinge of its component.
    chain : int
        Longest gear chain from the drive, in gear pairs.
    unreachable : tuple of int
        Hinges that no gear chain from the drive reaches (each component of the
        candidate graph without the drive is geared from its own center and adds a
        degree of freedom).
    dof : int
        Degrees of freedom left: the number of components.
    kinds : tuple of str
        Gear kinds the layout was allowed to use.
    candidates : tuple of GearPair
        Every classified pair (see `gear_candidates`).
    """

    drive: int
    pairs: tuple
    depth: np.ndarray
    chain: int
    unreachable: tuple
    dof: int
    kinds: tuple
    candidates: tuple

    def couplings(self):
        """The pairs as couplings with exact ratios (tuple of `Coupling`)."""
        return tuple(Coupling(p.hinges, p.ratio) for p in self.pairs)


def _center(graph, nodes, chunk=256):
    """Center of a connected node set: smallest eccentricity, distance sum, index.

    Breadth-first distances come from scipy, ``chunk`` sources at a time.
    """
    nodes = sorted(nodes)
    index = {h: k for k, h in enumerate(nodes)}
    edges = np.array([(index[a], index[b]) for a, b in graph.subgraph(nodes).edges()], dtype=np.int64)
    edges = edges.reshape(-1, 2)
    n = len(nodes)
    adjacency = csr_matrix((np.ones(len(edges)), (edges[:, 0], edges[:, 1])), shape=(n, n))
    best = None
    for start in range(0, n, chunk):
        dist = shortest_path(adjacency, directed=False, unweighted=True,
                             indices=np.arange(start, min(start + chunk, n)))
        for row, k in zip(dist, range(start, n)):
            key = (int(row.max()), int(row.sum()), nodes[k])
            best = key if best is None or key < best else best
    return best[2]


def _bfs_pairs(graph, start, depth):
    """Shortest-path tree from start: each hinge takes a parent one step nearer.

    A parent joined by a bevel pair wins over a spur pair, and either over a remote
    bevel; then the lowest hinge index. A bevel pair sits at a corner of its carrier
    and is as large as its module and edge allow; a spur pair's pitch radii add up
    to the distance between its hinges, so its gears span the carrier, and two spur
    pairs across one face cross each other there.
    """
    dist = nx.single_source_shortest_path_length(graph, start)
    chosen = []
    for h in sorted(dist, key=lambda k: (dist[k], k)):
        depth[h] = dist[h]
        if h == start:
            continue
        options = [g for g in graph.neighbors(h) if dist.get(g) == dist[h] - 1]
        parent = min(options, key=lambda g: (graph.edges[g, h]["pair"].kind not in SIMPLE,
                                             graph.edges[g, h]["pair"].kind != "bevel", g))
        chosen.append((parent, h, graph.edges[parent, h]["pair"]))
    return chosen


def gear_layout(mech, kinds="auto", tol=DEFAULT):
    """Choose gear pairs that drive every hinge from one with the shortest chains.

    Parameters
    ----------
    mech : Mechanism
        The net (its couplings and drive are ignored).
    kinds : {"auto", "simple"}
        ``simple``: only bevel and spur pairs. ``auto``: the same, unless they leave
        some hinge unreached; then remote bevels may be used too.
    tol : Tolerances

    Returns
    -------
    GearLayout

    Raises
    ------
    ModelError
        If a hinge does not fold (closing angle 0): its faces are one panel.

    Examples
    --------
    Three squares in a row, folding 90° and 45°: one spur pair, 1 apart.

    >>> from foldsim.model import build_mechanism
    >>> pts = [(x, y, 0.0) for y in (0.0, 1.0) for x in range(4)]
    >>> m = build_mechanism(pts, [[0, 1, 5, 4], [1, 2, 6, 5], [2, 3, 7, 6]], [(0, 1), (1, 2)],
    ...                     state="flat", closed_angles=[np.pi / 2, np.pi / 4])
    >>> g = gear_layout(m)
    >>> p = g.pairs[0]
    >>> g.drive, p.hinges, p.kind, p.ratio, p.centre_distance, p.mesh, g.chain, g.dof
    (0, (0, 1), 'spur', 0.5, 1.0, 'external', 1, 1)
    """
    if kinds not in ("auto", "simple"):
        raise ModelError(f"gears: must be 'auto' or 'simple', not {kinds!r}")
    flat = np.flatnonzero(np.abs(mech.closed_angles) <= tol.coincident)
    if len(flat):
        a, b = mech.hinge_faces[flat[0]]
        raise ModelError(f"hinges[{flat[0]}]: faces {a} and {b} lie in one plane (closing angle 0); "
                         "make them one face")
    candidates = tuple(gear_candidates(mech, tol))

    def graph_of(allowed):
        graph = nx.Graph()
        graph.add_nodes_from(range(mech.n_hinges))
        for p in candidates:
            if p.kind in allowed:
                graph.add_edge(*p.hinges, pair=p)
        return graph

    allowed = SIMPLE
    graph = graph_of(allowed)
    if kinds == "auto" and not nx.is_connected(graph):
        allowed = GEARABLE
        graph = graph_of(allowed)
    components = sorted(nx.connected_components(graph), key=lambda c: (-len(c), min(c)))
    depth = np.full(mech.n_hinges, -1)
    chosen = []
    starts = [_center(graph, comp) for comp in components]
    for start in starts:
        for parent, h, pair in _bfs_pairs(graph, start, depth):
            if pair.hinges != (parent, h):
                pair = replace(pair, hinges=(parent, h),
                               ratio=float(mech.closed_angles[h] / mech.closed_angles[parent]))
            chosen.append(pair)
    chosen.sort(key=lambda p: (depth[p.hinges[1]], p.hinges[1]))
    drive_part = components[0]
    unreachable = tuple(sorted(int(h) for c in components[1:] for h in c))
    chain = int(depth[sorted(drive_part)].max())
    depth.setflags(write=False)
    return GearLayout(drive=int(starts[0]), pairs=tuple(chosen), depth=depth, chain=chain,
                      unreachable=unreachable, dof=len(components), kinds=allowed, candidates=candidates)


def toothed_couplings(layout, zmin, zmax):
    """Couplings with integer teeth for every pair of a layout.

    Parameters
    ----------
    layout : GearLayout
    zmin, zmax : int
        Allowed tooth counts.

    Returns
    -------
    list of (Coupling, (int, int), float)
        Each coupling, its teeth ``(zi, zj)`` and its relative ratio error. A
        negative ratio keeps its sign in the coupling's ``ratio`` and carries no
        ``teeth`` (a file's ``teeth`` always mean a positive ratio).
    """
    out = []
    for p in layout.pairs:
        zi, zj, error = teeth_pairs(p.ratio, zmin, zmax)
        if p.ratio > 0:
            out.append((Coupling(p.hinges, zi / zj, (zi, zj)), (zi, zj), error))
        else:
            out.append((Coupling(p.hinges, -zi / zj), (zi, zj), error))
    return out


def closure_gap(mech, couplings=None):
    """Largest cut-edge gap at t = 1 when the hinges follow some couplings.

    Parameters
    ----------
    mech : Mechanism
    couplings : sequence of Coupling, optional
        Used in place of the mechanism's own.

    Returns
    -------
    float
        Length in the model's units.
    """
    if couplings is not None:
        mech = replace(mech, couplings=tuple(couplings))
    gaps = cut_edge_gaps(mech, poses_at(mech, fold_schedule(mech), np.array([1.0])))[0]
    return float(np.max(gaps, initial=0.0))
