"""Tolerance stack-up: how hinge play and gear backlash open the closure gaps.

Every hinge and every gear mesh of a real mechanism is a little loose. Each
looseness is an *error source*: a small extra rigid motion at one hinge, carried
by everything beyond that hinge in the hinge tree. The sources of a hinge ``h``
are measured in its parent panel's frame, about the hinge midpoint ``m``, with
unit vectors ``u`` (the fold axis), ``n`` (the parent panel's outward normal) and
``w = n x u`` (across the hinge, in the parent's plane, pointing into the parent):

=============  ===========================================================
kind           motion of the child (and all beyond it)
=============  ===========================================================
play           turn about the hinge axis (adds to the fold angle), rad
tilt_across    turn about the line through ``m`` along ``w``, rad
tilt_normal    turn about the line through ``m`` along ``n``, rad
axial          slide along ``u``, length
shift_across   slide along ``w``, length
shift_normal   slide along ``n``, length
=============  ===========================================================

A gear mesh's backlash lets the driven gear turn by a little against its driver.
Meshes are walked along the tree that the drive reaches breadth-first through the
couplings (the same walk as `foldsim.gearing.fold_schedule`): a driven hinge
inherits its driver's transmitted angle error times the factor between them, plus
its mesh's own backlash, so errors pile up along a gear chain. A hinge's own play
adds to its angle but is not passed on through the gears (it is slack between the
panel and the gear that sets it). Couplings that close a cycle are not on that
tree and carry no backlash.

Two analyses, both at several drive values t (each Monte Carlo sample is one built
copy of the mechanism, the same at every t):

* **Monte Carlo** (`monte_carlo`): every source drawn independently, uniform
  within its ± bound or normal with the bound at 3 sigma, from a seeded numpy
  Generator; the perturbed poses are built exactly (finite rotations) for all
  samples and hinges at once, a chunk of samples at a time, and the gaps come from
  `foldsim.analysis.closure.cut_edge_gaps`.
* **Linearised** (`linear_stackup`): the analytic Jacobian of every cut edge's
  endpoint difference vectors (and of every panel vertex) with respect to every
  source. A source turning by a small angle about a line through ``a`` along
  ``w`` moves a point ``p`` beyond it by ``w x (p - a)``; a slide along ``v`` moves
  it by ``v``. The worst case adds ``|J| * bound`` per coordinate; RSS is
  ``sqrt(sum (J * sigma)**2)``.

Bounds here are always ± half-ranges ("the most a source can be off either way");
the mechanism file gives total free ranges (clearance, backlash) and `play_spec`
halves them.
"""

import math
from dataclasses import dataclass, field

import networkx as nx
import numpy as np

from . import geometry
from .analysis.closure import cut_edge_gaps
from .errors import ModelError
from .gearing import coupling_graph, fold_schedule
from .kinematics import face_poses

KINDS = ("play", "tilt_across", "tilt_normal", "axial", "shift_across", "shift_normal")
N_KINDS = len(KINDS)
DISTRIBUTIONS = ("uniform", "normal")
DEFAULT_TIMES = (0.25, 0.5, 0.75, 1.0)
DEFAULT_SAMPLES = 10_000

# Millimetres per unit of the model, for converting the presets.
MM_PER_UNIT = {"mm": 1.0, "cm": 10.0, "m": 1000.0, "um": 1e-3, "µm": 1e-3, "in": 25.4, "inch": 25.4}


# ---------------------------------------------------------------- process presets


@dataclass(frozen=True)
class Process:
    """A manufacturing process's typical looseness (common practice, lengths in mm).

    Attributes
    ----------
    name : str
    clearance : float
        Diametral clearance of a pin in its bore, and end float of the knuckles.
    lever : float
        Distance from a hinge axis to the stop or tooth that holds its angle.
    backlash : float
        Linear backlash of a gear mesh (along the pitch circle).
    pitch_radius : float
        Pitch radius of the driven gear, when a coupling does not give its own.
    """

    name: str
    clearance: float
    lever: float
    backlash: float
    pitch_radius: float


# Common-practice figures, not measurements (docs/stackup.md, "Process presets").
# Clearance: sintered nylon 0.3-0.6 mm, filament 0.2-0.5 mm for moving parts.
PROCESSES = {
    "sintered-nylon": Process("sintered-nylon", clearance=0.4, lever=20.0, backlash=0.2, pitch_radius=10.0),
    "filament": Process("filament", clearance=0.3, lever=20.0, backlash=0.2, pitch_radius=10.0),
    "machined-metal": Process("machined-metal", clearance=0.03, lever=20.0, backlash=0.05, pitch_radius=10.0),
}


def process_totals(process, hinge_lengths):
    """Total free ranges a process preset gives every hinge and mesh.

    Parameters
    ----------
    process : Process
        Lengths in the model's units.
    hinge_lengths : (H,) float
        Length of every hinge edge, model units.

    Returns
    -------
    hinge : (H, 6) float
        Total free range of each kind (`KINDS`): play ``clearance / lever``; both
        tilts ``2 * clearance / length`` (a pin touching opposite sides of its bore
        at both ends); axial ``clearance``; shifts 0.
    mesh : float
        Total angular backlash at the driven gear, ``backlash / pitch_radius``.

    Examples
    --------
    >>> p = Process("x", clearance=0.4, lever=20.0, backlash=0.2, pitch_radius=10.0)
    >>> hinge, mesh = process_totals(p, np.array([40.0]))
    >>> hinge.round(4).tolist(), mesh
    ([[0.02, 0.02, 0.02, 0.4, 0.0, 0.0]], 0.02)
    """
    lengths = np.asarray(hinge_lengths, dtype=float)
    hinge = np.zeros((len(lengths), N_KINDS))
    hinge[:, 0] = process.clearance / process.lever
    hinge[:, 1] = hinge[:, 2] = 2.0 * process.clearance / lengths
    hinge[:, 3] = process.clearance
    return hinge, process.backlash / process.pitch_radius


def _mm_per_unit(units, why):
    try:
        return MM_PER_UNIT[units]
    except KeyError:
        known = ", ".join(sorted(MM_PER_UNIT))
        raise ModelError(f"units: cannot convert {why} (in mm) to {units!r} (known: {known}); "
                         "give the tolerances in the file instead") from None


def process_preset(name, units="mm", **overrides):
    """A process preset in a model's units, with any parameter overridden.

    Parameters
    ----------
    name : str
        One of `PROCESSES`.
    units : str
        The model's length unit; preset lengths (mm) are converted to it.
    **overrides : float
        ``clearance``, ``lever``, ``backlash``, ``pitch_radius`` in the model's units.

    Returns
    -------
    Process

    Examples
    --------
    >>> process_preset("sintered-nylon", units="cm", clearance=0.05).clearance
    0.05
    >>> process_preset("sintered-nylon", units="cm").lever
    2.0
    """
    if name not in PROCESSES:
        raise ModelError(f"process: unknown process {name!r} (known: {', '.join(PROCESSES)})")
    base = PROCESSES[name]
    scale = 1.0 / _mm_per_unit(units, f"the {name} preset")
    values = {k: getattr(base, k) * scale for k in ("clearance", "lever", "backlash", "pitch_radius")}
    values.update({k: float(v) for k, v in overrides.items() if v is not None})
    return Process(name, **values)


# ---------------------------------------------------------------- the tolerances key

_HINGE_KEYS = {"play_deg", "tilt_deg", "axial", "shift"}
_MESH_KEYS = {"backlash_deg", "backlash", "pitch_radius"}
_PROCESS_KEYS = ("clearance", "lever", "backlash", "pitch_radius")
_TOP_KEYS = {"process", "hinge", "hinges", "coupling", "couplings", *_PROCESS_KEYS}


def _length(value, field, positive=False):
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise ModelError(f"{field}: must be a finite number, not {value!r}")
    if value < 0 or (positive and value == 0):
        raise ModelError(f"{field}: must be {'positive' if positive else 'non-negative'}, not {value!r}")
    return float(value)


def _pair(value, field):
    """A number applied to both axes, or [across, normal]."""
    if isinstance(value, list):
        if len(value) != 2:
            raise ModelError(f"{field}: must be a number or [across, normal], not {value!r}")
        return tuple(_length(v, f"{field}[{i}]") for i, v in enumerate(value))
    v = _length(value, field)
    return v, v


def _object(value, field, allowed):
    if not isinstance(value, dict):
        raise ModelError(f"{field}: must be an object")
    unknown = sorted(set(value) - allowed)
    if unknown:
        raise ModelError(f"{field}.{unknown[0]}: unknown key (known: {', '.join(sorted(allowed))})")
    return value


def _hinge_entry(value, field):
    """Total free ranges set by one hinge object: {kind index: value}."""
    out = {}
    if "play_deg" in value:
        out[0] = math.radians(_length(value["play_deg"], f"{field}.play_deg"))
    if "tilt_deg" in value:
        a, b = _pair(value["tilt_deg"], f"{field}.tilt_deg")
        out[1], out[2] = math.radians(a), math.radians(b)
    if "axial" in value:
        out[3] = _length(value["axial"], f"{field}.axial")
    if "shift" in value:
        out[4], out[5] = _pair(value["shift"], f"{field}.shift")
    return out


def _mesh_entry(value, field):
    out = {}
    if "backlash_deg" in value:
        if "backlash" in value or "pitch_radius" in value:
            raise ModelError(f"{field}: give backlash_deg or backlash (with pitch_radius), not both")
        out["angle"] = math.radians(_length(value["backlash_deg"], f"{field}.backlash_deg"))
    if "backlash" in value:
        out["backlash"] = _length(value["backlash"], f"{field}.backlash")
    if "pitch_radius" in value:
        out["pitch_radius"] = _length(value["pitch_radius"], f"{field}.pitch_radius", positive=True)
    return out


def _indexed(items, field, key, count, parse):
    if not isinstance(items, list):
        raise ModelError(f"{field}: must be a list")
    out = {}
    allowed = (_HINGE_KEYS if key == "hinge" else _MESH_KEYS) | {key}
    for i, item in enumerate(items):
        here = f"{field}[{i}]"
        item = _object(item, here, allowed)
        if key not in item:
            raise ModelError(f"{here}.{key}: missing (which {key} this entry is for)")
        index = item[key]
        if isinstance(index, bool) or not isinstance(index, int) or not 0 <= index < count:
            raise ModelError(f"{here}.{key}: must be an index in 0..{count - 1}, not {index!r}")
        if index in out:
            raise ModelError(f"{here}.{key}: {key} {index} is listed twice")
        out[index] = parse(item, here)
    return out


@dataclass(frozen=True)
class ToleranceDoc:
    """The parsed ``tolerances`` key of a mechanism file (values as given, angles in rad).

    Attributes
    ----------
    process : str or None
    process_overrides : dict
        ``clearance``, ``lever``, ``backlash``, ``pitch_radius`` given at the top level.
    hinge : dict
        Default total ranges by kind index, for every hinge.
    hinges : dict
        Hinge index -> {kind index: total range}.
    coupling : dict
        Default mesh entry: ``angle`` (rad) or ``backlash`` / ``pitch_radius``.
    couplings : dict
        Coupling index -> mesh entry.
    """

    process: object = None
    process_overrides: dict = field(default_factory=dict)
    hinge: dict = field(default_factory=dict)
    hinges: dict = field(default_factory=dict)
    coupling: dict = field(default_factory=dict)
    couplings: dict = field(default_factory=dict)


def parse_tolerances(value, n_hinges, n_couplings, field="tolerances"):
    """Validate a ``tolerances`` object from a mechanism file.

    Parameters
    ----------
    value : dict
        The JSON object (see docs/format.md, "tolerances").
    n_hinges, n_couplings : int
    field : str
        Prefix of error messages.

    Returns
    -------
    ToleranceDoc

    Raises
    ------
    ModelError
        Naming the field, e.g. ``tolerances.hinges[1].play_deg: must be non-negative``.

    Examples
    --------
    >>> doc = parse_tolerances({"hinge": {"play_deg": 1.0}, "couplings": [
    ...     {"coupling": 0, "backlash": 0.2, "pitch_radius": 10}]}, 3, 1)
    >>> round(doc.hinge[0], 6), doc.couplings
    (0.017453, {0: {'backlash': 0.2, 'pitch_radius': 10.0}})
    """
    value = _object(value, field, _TOP_KEYS)
    process = value.get("process")
    if process is not None and process not in PROCESSES:
        raise ModelError(f"{field}.process: unknown process {process!r} (known: {', '.join(PROCESSES)})")
    overrides = {}
    for key in _PROCESS_KEYS:
        if key in value:
            overrides[key] = _length(value[key], f"{field}.{key}", positive=key in ("lever", "pitch_radius"))
    hinge = _hinge_entry(_object(value.get("hinge", {}), f"{field}.hinge", _HINGE_KEYS), f"{field}.hinge")
    coupling = _mesh_entry(_object(value.get("coupling", {}), f"{field}.coupling", _MESH_KEYS),
                           f"{field}.coupling")
    hinges = _indexed(value.get("hinges", []), f"{field}.hinges", "hinge", n_hinges, _hinge_entry)
    couplings = _indexed(value.get("couplings", []), f"{field}.couplings", "coupling", n_couplings, _mesh_entry)
    return ToleranceDoc(process, overrides, hinge, hinges, coupling, couplings)


@dataclass(frozen=True)
class PlaySpec:
    """± bound of every error source of a mechanism.

    Attributes
    ----------
    hinge : (H, 6) float
        Half-range of each kind of `KINDS` at each hinge (rad for the first three,
        model units for the rest).
    mesh : (C,) float
        Half-range of the angular backlash at the driven gear of each coupling, rad.
    process : str or None
        Preset the values started from.
    """

    hinge: np.ndarray
    mesh: np.ndarray
    process: object = None

    @classmethod
    def zeros(cls, mech):
        """No play anywhere."""
        return cls(np.zeros((mech.n_hinges, N_KINDS)), np.zeros(len(mech.couplings)))

    @property
    def bounds(self):
        """(6H + C,) float: every source's bound, hinge-major then meshes."""
        return np.concatenate([self.hinge.ravel(), self.mesh])

    def sigmas(self, dist="uniform"):
        """(6H + C,) standard deviation of every source: bound/sqrt(3) or bound/3."""
        _check_dist(dist)
        return self.bounds / (math.sqrt(3.0) if dist == "uniform" else 3.0)


def _check_dist(dist):
    if dist not in DISTRIBUTIONS:
        raise ModelError(f"dist: must be one of {', '.join(DISTRIBUTIONS)}, not {dist!r}")


def hinge_lengths(mech):
    """(H,) float: length of every hinge edge."""
    return np.linalg.norm(mech.axes[:, 1] - mech.axes[:, 0], axis=1)


def play_spec(mech, process=None, tolerances=None):
    """Resolve every source's ± bound from the file's tolerances and a process preset.

    Precedence, lowest first: the process preset (``process`` if given, else the
    file's ``tolerances.process``) with the file's top-level ``clearance`` etc.;
    the file's ``hinge`` / ``coupling`` defaults; its ``hinges`` / ``couplings``
    entries. File values are total free ranges; the bounds are half of them.

    Parameters
    ----------
    mech : Mechanism
    process : str, optional
        Preset name; replaces the one the file names.
    tolerances : dict, optional
        A ``tolerances`` object to use instead of ``mech.extras["tolerances"]``.

    Returns
    -------
    PlaySpec

    Raises
    ------
    ModelError
        When neither the file nor ``process`` says anything about tolerances, or
        the tolerances are malformed.

    Examples
    --------
    >>> from foldsim.model import build_mechanism
    >>> sq = [[0, 0, 0], [10, 0, 0], [10, 10, 0], [0, 10, 0], [20, 0, 0], [20, 10, 0]]
    >>> m = build_mechanism(sq, [[0, 1, 2, 3], [1, 4, 5, 2]], [[0, 1]], state="flat",
    ...                     closed_angles=[1.0], extras={"tolerances": {"hinge": {"axial": 0.3}}})
    >>> play_spec(m).hinge.tolist()
    [[0.0, 0.0, 0.0, 0.15, 0.0, 0.0]]
    """
    raw = mech.extras.get("tolerances") if tolerances is None else tolerances
    if raw is None and process is None:
        raise ModelError("tolerances: the model gives none; name a process "
                         f"({', '.join(PROCESSES)}) or add a \"tolerances\" key (docs/stackup.md)")
    doc = parse_tolerances(raw if raw is not None else {}, mech.n_hinges, len(mech.couplings))
    name = process if process is not None else doc.process
    n_c = len(mech.couplings)
    hinge = np.zeros((mech.n_hinges, N_KINDS))
    mesh_angle = np.zeros(n_c)
    preset = None
    if name is not None:
        preset = process_preset(name, mech.units, **doc.process_overrides)
        hinge[:], mesh_angle[:] = process_totals(preset, hinge_lengths(mech))
    elif doc.process_overrides:
        key = next(iter(doc.process_overrides))
        raise ModelError(f"tolerances.{key}: adjusts a process preset; name one in tolerances.process")
    for k, v in doc.hinge.items():
        hinge[:, k] = v
    for h, entry in doc.hinges.items():
        for k, v in entry.items():
            hinge[h, k] = v
    base_backlash = doc.process_overrides.get("backlash", preset.backlash if preset else None)
    base_radius = doc.process_overrides.get("pitch_radius", preset.pitch_radius if preset else None)
    for c in range(n_c):
        entry = doc.couplings.get(c)
        layers = [e for e in (entry, doc.coupling) if e]
        if not layers:
            continue
        top = layers[0]
        if "angle" in top:
            mesh_angle[c] = top["angle"]
            continue
        # Linear form: fill what the entry leaves out from the default, then the preset.
        rest = [e for e in layers[1:] if "angle" not in e]
        backlash = next((e["backlash"] for e in [top, *rest] if "backlash" in e), base_backlash)
        radius = next((e["pitch_radius"] for e in [top, *rest] if "pitch_radius" in e), base_radius)
        where = f"tolerances.couplings[{c}]" if entry else "tolerances.coupling"
        if backlash is None:
            raise ModelError(f"{where}.backlash: missing (no process preset to take it from)")
        if radius is None:
            raise ModelError(f"{where}.pitch_radius: needed to turn linear backlash into an angle")
        mesh_angle[c] = backlash / radius
    return PlaySpec(hinge / 2.0, mesh_angle / 2.0, name)


# ---------------------------------------------------------------- gear tree


@dataclass(frozen=True)
class GearTree:
    """Meshes walked breadth-first from the drive through the couplings.

    Attributes
    ----------
    driver, driven : (G,) int
        Hinges of each mesh on the tree, driven farther from the drive.
    factor : (G,) float
        ``d theta[driven] / d theta[driver]``.
    coupling : (G,) int
        Index in ``mech.couplings`` of the mesh.
    depth : (H,) int
        Meshes between each hinge and the start of its component (the drive, or the
        lowest hinge of a component the drive does not reach).
    levels : tuple of (g,) int
        Mesh indices grouped by the depth of their driven hinge, shallow first.
    """

    driver: np.ndarray
    driven: np.ndarray
    factor: np.ndarray
    coupling: np.ndarray
    depth: np.ndarray
    levels: tuple


def gear_tree(mech):
    """The breadth-first mesh tree (same walk as `foldsim.gearing.fold_schedule`).

    Returns
    -------
    GearTree

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> from foldsim.model import Coupling
    >>> m = SimpleNamespace(n_hinges=3, drive=0, couplings=(Coupling((1, 0), 0.5), Coupling((1, 2), 3.0)))
    >>> g = gear_tree(m)
    >>> g.driver.tolist(), g.driven.tolist(), g.factor.tolist(), g.depth.tolist()
    ([0, 1], [1, 2], [2.0, 3.0], [0, 1, 2])
    """
    graph = coupling_graph(mech)
    first = {}
    for k, c in enumerate(mech.couplings):
        first.setdefault(frozenset(c.hinges), k)
    driver, driven, factor, coupling = [], [], [], []
    depth = np.zeros(mech.n_hinges, dtype=np.int64)
    for comp in sorted(nx.connected_components(graph), key=lambda c: (mech.drive not in c, min(c))):
        start = mech.drive if mech.drive in comp else min(comp)
        for a, b in nx.bfs_edges(graph, start):
            edge = graph.edges[a, b]
            driver.append(a)
            driven.append(b)
            factor.append(edge["ratio"] if edge["source"] == a else 1.0 / edge["ratio"])
            coupling.append(first[frozenset((a, b))])
            depth[b] = depth[a] + 1
    driver = np.array(driver, dtype=np.int64)
    driven = np.array(driven, dtype=np.int64)
    mesh_depth = depth[driven]
    levels = tuple(np.flatnonzero(mesh_depth == d) for d in range(1, int(depth.max(initial=0)) + 1))
    return GearTree(driver, driven, np.array(factor, dtype=float), np.array(coupling, dtype=np.int64),
                    depth, levels)


def transmitted_errors(tree, backlash, n_hinges):
    """Angle error every hinge receives through the gears.

    Parameters
    ----------
    tree : GearTree
    backlash : (N, C) float
        Backlash angle at the driven gear of every coupling, per sample.
    n_hinges : int

    Returns
    -------
    (N, H) float
        ``e[driven] = factor * e[driver] + backlash[mesh]``, walked one depth level
        at a time; 0 at the start of each component.

    Examples
    --------
    Two meshes in a row, ratio 2 then 3: the last hinge is off by 3 * (2 * 0 + b0) + b1.

    >>> from types import SimpleNamespace
    >>> t = SimpleNamespace(driver=np.array([0, 1]), driven=np.array([1, 2]),
    ...                     factor=np.array([2.0, 3.0]), coupling=np.array([0, 1]),
    ...                     levels=(np.array([0]), np.array([1])))
    >>> transmitted_errors(t, np.array([[0.01, 0.002]]), 3).round(6).tolist()
    [[0.0, 0.01, 0.032]]
    """
    backlash = np.asarray(backlash, dtype=float)
    out = np.zeros((backlash.shape[0], n_hinges))
    for level in tree.levels:
        out[:, tree.driven[level]] = (tree.factor[level] * out[:, tree.driver[level]]
                                      + backlash[:, tree.coupling[level]])
    return out


def backlash_matrix(mech, tree=None):
    """(H, C) float: angle error at each hinge per unit backlash at each coupling."""
    tree = gear_tree(mech) if tree is None else tree
    n_c = len(mech.couplings)
    return transmitted_errors(tree, np.eye(n_c), mech.n_hinges).T.reshape(mech.n_hinges, n_c)


def _sparse_backlash(mech, tree):
    """`backlash_matrix` as a scipy.sparse CSR matrix (a mesh reaches only the hinges it drives)."""
    from scipy.sparse import csr_matrix

    return csr_matrix(backlash_matrix(mech, tree))


def longest_gear_chain(mech, tree=None):
    """Most meshes between the drive (or a component's start) and any hinge."""
    tree = gear_tree(mech) if tree is None else tree
    return int(tree.depth.max(initial=0))


def longest_hinge_chain(mech):
    """Most hinges on a path between two faces of the hinge tree (the tree's diameter)."""
    from .nets import tree_diameter

    return int(tree_diameter(mech.n_faces, [tuple(h) for h in mech.hinge_faces.tolist()]))


# ---------------------------------------------------------------- frames and samples


def hinge_frames(mech):
    """Every hinge's source directions and midpoint in the flat frame.

    Returns
    -------
    dirs : (H, 3, 3) float
        Rows ``u`` (fold axis), ``w = n x u``, ``n`` (the flat sheet's outward normal).
    mids : (H, 3) float
        Hinge midpoints.
    """
    normal = geometry.unit(geometry.newell_normals([mech.flat_faces[mech.root]])[0])
    u = geometry.unit(mech.axes[:, 1] - mech.axes[:, 0])
    n = np.broadcast_to(normal, u.shape)
    return np.stack([u, np.cross(n, u), n], axis=1), mech.axes.mean(axis=1)


@dataclass(frozen=True)
class Errors:
    """Drawn error values, one row per sample.

    Attributes
    ----------
    hinge : (N, H, 6) float
        Value of each kind of `KINDS` at each hinge.
    mesh : (N, C) float
        Backlash angle at each coupling's driven gear.
    """

    hinge: np.ndarray
    mesh: np.ndarray

    def __len__(self):
        return self.hinge.shape[0]


def draw_errors(spec, n, rng, dist="uniform"):
    """Draw n samples of every source.

    The draws come from one ``(n, 6H + C)`` block of the generator, so drawing
    samples in chunks gives the same values as drawing them at once.

    Parameters
    ----------
    spec : PlaySpec
    n : int
    rng : numpy.random.Generator
    dist : {"uniform", "normal"}
        Uniform within ± bound, or normal with sigma = bound / 3.

    Returns
    -------
    Errors
    """
    _check_dist(dist)
    bounds = spec.bounds
    if dist == "uniform":
        values = rng.uniform(-1.0, 1.0, (n, len(bounds))) * bounds
    else:
        values = rng.standard_normal((n, len(bounds))) * (bounds / 3.0)
    n_h = spec.hinge.shape[0]
    return Errors(values[:, :N_KINDS * n_h].reshape(n, n_h, N_KINDS), values[:, N_KINDS * n_h:])


def _skew(v):
    """(..., 3, 3) cross-product matrices of vectors (..., 3)."""
    k = np.zeros(v.shape[:-1] + (3, 3))
    k[..., 0, 1], k[..., 0, 2] = -v[..., 2], v[..., 1]
    k[..., 1, 0], k[..., 1, 2] = v[..., 2], -v[..., 0]
    k[..., 2, 0], k[..., 2, 1] = -v[..., 1], v[..., 0]
    return k


def _rotvec_matrices(v):
    """(..., 3, 3) rotation matrices of rotation vectors (..., 3), exact for any size.

    Examples
    --------
    >>> np.round(_rotvec_matrices(np.array([0.0, 0.0, np.pi / 2])) @ [1.0, 0, 0], 12).tolist()
    [0.0, 1.0, 0.0]
    """
    theta2 = (v**2).sum(axis=-1)[..., None, None]
    theta = np.sqrt(theta2)
    a = np.sinc(theta / np.pi)                       # sin(theta) / theta
    b = 0.5 * np.sinc(theta / (2.0 * np.pi)) ** 2     # (1 - cos(theta)) / theta**2
    outer = v[..., :, None] * v[..., None, :]
    return np.eye(3) + a * _skew(v) + b * (outer - theta2 * np.eye(3))


def _hinge_generators(mech):
    """(H, 4, 4) pair ``A, B`` with ``rotation about hinge line by phi = I + sin(phi) A + (1 - cos(phi)) B``."""
    a = mech.axes[:, 0]
    u = geometry.unit(mech.axes[:, 1] - a)
    k = _skew(u)
    q = u[:, :, None] * u[:, None, :] - np.eye(3)
    gen_a = np.zeros((mech.n_hinges, 4, 4))
    gen_b = np.zeros((mech.n_hinges, 4, 4))
    gen_a[:, :3, :3], gen_a[:, :3, 3] = k, -np.einsum("hij,hj->hi", k, a)
    gen_b[:, :3, :3], gen_b[:, :3, 3] = q, -np.einsum("hij,hj->hi", q, a)
    return gen_a, gen_b


def _offsets(mech, errors, frames):
    """(N, H, 4, 4) extra rigid motion of each hinge, in the parent's flat frame, or None if all zero."""
    dirs, mids = frames
    e = errors.hinge
    if not e[..., 1:].any():
        return None
    rotvec = e[..., 1, None] * dirs[None, :, 1] + e[..., 2, None] * dirs[None, :, 2]
    shift = (e[..., 3, None] * dirs[None, :, 0] + e[..., 4, None] * dirs[None, :, 1]
             + e[..., 5, None] * dirs[None, :, 2])
    rot = _rotvec_matrices(rotvec)
    out = np.zeros(e.shape[:2] + (4, 4))
    out[..., :3, :3] = rot
    out[..., :3, 3] = mids - (rot @ mids[..., None])[..., 0] + shift
    out[..., 3, 3] = 1.0
    return out


def perturbed_poses(mech, angles, errors, tree=None, frames=None):
    """Face poses of every sample at every set of ideal fold angles.

    Each hinge's transform becomes ``E @ R(theta + e)``: ``R`` the rotation about
    the hinge line by the ideal angle plus the hinge's play and the error its gears
    pass on, ``E`` the small rigid motion of its tilts and slides about the hinge
    midpoint. The tree is walked one depth level at a time for all samples at once.

    Parameters
    ----------
    mech : Mechanism
    angles : (T, H) float
        Ideal fold angles, radians.
    errors : Errors
        N samples.
    tree : GearTree, optional
    frames : tuple, optional
        `hinge_frames(mech)`.

    Returns
    -------
    (N, T, F, 4, 4) float

    Examples
    --------
    Zero errors give the ideal poses (to round-off); play of 0.1 rad adds to the angle:

    >>> from foldsim.model import build_mechanism
    >>> sq = [[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0], [2, 0, 0], [2, 1, 0]]
    >>> m = build_mechanism(sq, [[0, 1, 2, 3], [1, 4, 5, 2]], [[0, 1]], state="flat", closed_angles=[1.0])
    >>> zero = Errors(np.zeros((2, 1, 6)), np.zeros((2, 0)))
    >>> np.allclose(perturbed_poses(m, [[0.7]], zero), face_poses(m, np.array([[0.7]])), rtol=0, atol=1e-15)
    True
    >>> play = Errors(np.array([[[0.1, 0, 0, 0, 0, 0]]]), np.zeros((1, 0)))
    >>> np.allclose(perturbed_poses(m, [[0.7]], play)[0], face_poses(m, np.array([[0.8]])))
    True
    """
    angles = np.atleast_2d(np.asarray(angles, dtype=float))
    out = np.empty((len(errors), len(angles), mech.n_faces, 4, 4))
    for i, poses in enumerate(_pose_batches(mech, angles, errors, tree, frames)):
        out[:, i] = poses
    return out


def _pose_batches(mech, angles, errors, tree=None, frames=None):
    """Yield the (N, F, 4, 4) perturbed poses at each row of angles (T, H) in turn."""
    tree = gear_tree(mech) if tree is None else tree
    frames = hinge_frames(mech) if frames is None else frames
    gen_a, gen_b = _hinge_generators(mech)
    eps = errors.hinge[..., 0] + transmitted_errors(tree, errors.mesh, mech.n_hinges)
    offsets = _offsets(mech, errors, frames)
    for theta in angles:
        phi = theta[None] + eps
        local = (np.eye(4) + np.sin(phi)[..., None, None] * gen_a
                 + (2.0 * np.sin(0.5 * phi) ** 2)[..., None, None] * gen_b)
        if offsets is not None:
            local = offsets @ local
        poses = np.empty((len(errors), mech.n_faces, 4, 4))
        poses[:, mech.root] = np.eye(4)
        for level in mech.levels:
            poses[:, mech.child[level]] = poses[:, mech.parent[level]] @ local[:, level]
        yield poses


def _padded_faces(mech):
    """(F, k_max, 3) flat vertices of every face, short faces padded with their first vertex."""
    k_max = max(len(f) for f in mech.flat_faces)
    out = np.empty((mech.n_faces, k_max, 3))
    for f, pts in enumerate(mech.flat_faces):
        out[f, :len(pts)] = pts
        out[f, len(pts):] = pts[0]
    return out


def tip_deviations(poses, ideal, padded):
    """Largest vertex displacement of every face from its ideal pose.

    Parameters
    ----------
    poses : (..., F, 4, 4) float
    ideal : (F, 4, 4) float
    padded : (F, k, 3) float
        From `_padded_faces`.

    Returns
    -------
    (..., F) float
    """
    delta = poses - ideal
    moved = delta[..., :3, :3] @ padded.transpose(0, 2, 1) + delta[..., :3, 3, None]   # (..., F, 3, k)
    return np.sqrt((moved**2).sum(axis=-2)).max(axis=-1)


# ---------------------------------------------------------------- linearised analysis


def _paths(mech):
    """(F, D) hinges on each face's path from the root, padded with the dummy index H.

    ``D`` is the depth of the hinge tree; entry ``d`` of a face's row is the hinge at
    depth ``d + 1`` on its path (the root's row is all padding).
    """
    out = np.full((mech.n_faces, max(1, len(mech.levels))), mech.n_hinges, dtype=np.int64)
    for d, level in enumerate(mech.levels):
        out[mech.child[level]] = out[mech.parent[level]]
        out[mech.child[level], d] = level
    return out


@dataclass(frozen=True)
class _Pose:
    """What the Jacobian needs at one set of ideal angles (hinge arrays carry a zero dummy row H)."""

    poses: np.ndarray       # (F, 4, 4) ideal poses
    dirs: np.ndarray        # (H + 1, 3, 3) posed u, w, n of every hinge
    mids: np.ndarray        # (H + 1, 3) posed midpoints
    paths: np.ndarray       # (F, D) from _paths
    mesh: object            # (H, C) backlash matrix, scipy.sparse CSR


def _pose_context(mech, theta, frames, paths, mesh):
    poses = face_poses(mech, np.asarray(theta, dtype=float)[None])[0]
    dirs, mids = frames
    parent = poses[mech.parent]
    posed_dirs = np.zeros((mech.n_hinges + 1, 3, 3))
    posed_mids = np.zeros((mech.n_hinges + 1, 3))
    posed_dirs[:-1] = np.einsum("hij,hkj->hki", parent[:, :3, :3], dirs)
    posed_mids[:-1] = geometry.transform_points(parent, mids)
    return _Pose(poses, posed_dirs, posed_mids, paths, mesh)


def _path_jacobian(ctx, points, faces):
    """Derivatives of posed points w.r.t. the sources on their root paths.

    Parameters
    ----------
    ctx : _Pose
    points : (K, 3) float
        Posed points.
    faces : (K,) int
        Face each point belongs to.

    Returns
    -------
    idx : (K, D) int
        Hinges on each point's path (H = padding).
    hinge : (K, D, 6, 3) float
        ``d point / d source`` for the six kinds at each of those hinges (zero at
        padding): a turn about a line through ``a`` along ``w`` moves the point by
        ``w x (p - a)``, a slide along ``v`` by ``v``.
    mesh : (K, 3, C) float
        ``d point / d backlash``: the play columns carried through the gear tree.
    """
    idx = ctx.paths[faces]
    dirs = ctx.dirs[idx]                                          # (K, D, 3, 3)
    rel = points[:, None, :] - ctx.mids[idx]
    hinge = np.empty(idx.shape + (N_KINDS, 3))
    hinge[:, :, :3] = np.cross(dirs, rel[:, :, None, :])
    hinge[:, :, 3:] = dirs
    n_h, n_c = ctx.mesh.shape
    if n_c == 0:
        return idx, hinge, np.zeros((len(points), 3, 0))
    play = np.zeros((n_h + 1, len(points), 3))
    play[idx, np.arange(len(points))[:, None]] = hinge[:, :, 0]   # padding rows collect zeros
    mesh = np.asarray(ctx.mesh.T @ play[:n_h].reshape(n_h, -1)).reshape(n_c, len(points), 3)
    return idx, hinge, mesh.transpose(1, 2, 0)


def _dense(idx, hinge, mesh, n_hinges, sign=1.0, out=None):
    """Scatter `_path_jacobian` output into (K, 3, 6H + C), adding ``sign *`` it to ``out``."""
    k = len(idx)
    if out is None:
        out = np.zeros((k, 3, N_KINDS * n_hinges + mesh.shape[2]))
    full = np.zeros((k, n_hinges + 1, N_KINDS, 3))
    full[np.arange(k)[:, None], idx] = hinge
    out[:, :, :N_KINDS * n_hinges] += sign * full[:, :n_hinges].transpose(0, 3, 1, 2).reshape(k, 3, -1)
    out[:, :, N_KINDS * n_hinges:] += sign * mesh
    return out


def _chunks(n, size):
    return [slice(i, min(i + size, n)) for i in range(0, n, size)]


@dataclass(frozen=True)
class _Context:
    pose: _Pose
    n_hinges: int
    n_sources: int

    @property
    def poses(self):
        return self.pose.poses


def _context(mech, theta, tree=None, frames=None, paths=None, mesh=None):
    tree = gear_tree(mech) if tree is None else tree
    frames = hinge_frames(mech) if frames is None else frames
    paths = _paths(mech) if paths is None else paths
    mesh = _sparse_backlash(mech, tree) if mesh is None else mesh
    pose = _pose_context(mech, theta, frames, paths, mesh)
    return _Context(pose, mech.n_hinges, N_KINDS * mech.n_hinges + len(mech.couplings))


def _cut_posed(mech, poses):
    """Posed cut-edge endpoints on each side: two (E, 2, 3) arrays."""
    pa = geometry.transform_points(poses[mech.cut_faces[:, 0], None], mech.cut_points[:, 0])
    pb = geometry.transform_points(poses[mech.cut_faces[:, 1], None], mech.cut_points[:, 1])
    return pa, pb


def _edge_path_jacobian(ctx, mech, pa, pb, rows, k):
    """Path form (as `_path_jacobian`) of the difference vectors ``pa - pb`` at endpoint k.

    The two faces' paths share their first hinges (the common ancestors); there the
    two sides' columns are merged, so no hinge is listed twice.

    Returns
    -------
    idx : (e, 2D) int
    hinge : (e, 2D, 6, 3) float
    mesh : (e, 3, C) float
    """
    ia, ja, ma = _path_jacobian(ctx.pose, pa[rows, k], mech.cut_faces[rows, 0])
    ib, jb, mb = _path_jacobian(ctx.pose, pb[rows, k], mech.cut_faces[rows, 1])
    same = ia == ib
    ja = ja - np.where(same[..., None, None], jb, 0.0)
    jb = np.where(same[..., None, None], 0.0, -jb)
    ib = np.where(same, ctx.n_hinges, ib)
    return np.concatenate([ia, ib], axis=1), np.concatenate([ja, jb], axis=1), ma - mb


def _edge_jacobian(ctx, mech, pa, pb, rows):
    """(e, 2, 3, S) Jacobian of the difference vectors of cut edges ``rows``."""
    parts = [_dense(*_edge_path_jacobian(ctx, mech, pa, pb, rows, k), ctx.n_hinges) for k in range(2)]
    return np.stack(parts, axis=1)


def gap_jacobian(mech, theta, tree=None):
    """Jacobian of every cut edge's endpoint difference vectors.

    Parameters
    ----------
    mech : Mechanism
    theta : (H,) float
        Ideal fold angles.
    tree : GearTree, optional

    Returns
    -------
    points : (E, 2, 3) float
        Ideal posed endpoints on the first face of each cut edge (``cut_faces[:, 0]``).
    diff : (E, 2, 3) float
        Ideal difference vectors ``p_a - p_b`` between the copies of each endpoint.
    jac : (E, 2, 3, 6H + C) float
        Their derivatives w.r.t. every source (hinge-major, then couplings).
    """
    ctx = _context(mech, theta, tree)
    pa, pb = _cut_posed(mech, ctx.poses)
    return pa, pa - pb, _edge_jacobian(ctx, mech, pa, pb, slice(None))


def _vertex_table(mech):
    """Every face vertex: (K,) face index and (K, 3) flat position."""
    faces = np.concatenate([np.full(len(p), f) for f, p in enumerate(mech.flat_faces)])
    return faces, np.concatenate(mech.flat_faces)


def vertex_jacobian(mech, theta, tree=None):
    """Jacobian of every posed face vertex.

    Returns
    -------
    points : (K, 3) float
        Posed vertices, faces in order, each face's vertices in order.
    faces : (K,) int
    jac : (K, 3, 6H + C) float
    """
    ctx = _context(mech, theta, tree)
    faces, flat = _vertex_table(mech)
    points = geometry.transform_points(ctx.poses[faces], flat)
    return points, faces, _dense(*_path_jacobian(ctx.pose, points, faces), mech.n_hinges)


def _reduce_path(idx, hinge, mesh, spec, sigmas_h, sigmas_m):
    """Per point: worst-case length ``||sum |J| b||`` and RSS length ``sqrt(sum (J s)^2)``.

    Works on the path form of `_path_jacobian`, never building the dense (K, 3, S) array.
    """
    b_h = np.vstack([spec.hinge, np.zeros((1, N_KINDS))])[idx]         # (K, D, 6)
    s_h = np.vstack([sigmas_h, np.zeros((1, N_KINDS))])[idx]
    worst = (np.abs(hinge) * b_h[..., None]).sum(axis=(1, 2)) + np.abs(mesh) @ spec.mesh
    var = ((hinge * s_h[..., None]) ** 2).sum(axis=(1, 2, 3)) + ((mesh * sigmas_m) ** 2).sum(axis=(1, 2))
    return np.linalg.norm(worst, axis=-1), np.sqrt(var)


def _edge_shares(idx, hinge, mesh, spec, sigmas_h, sigmas_m):
    """Per-source variance (e, 6H + C) and per-element worst case (e, H + C) from path form."""
    e, n_h = len(idx), spec.hinge.shape[0]
    rows = np.arange(e)[:, None]
    s_h = np.vstack([sigmas_h, np.zeros((1, N_KINDS))])[idx]
    b_h = np.vstack([spec.hinge, np.zeros((1, N_KINDS))])[idx]
    var = np.zeros((e, n_h + 1, N_KINDS))
    var[rows, idx] = ((hinge * s_h[..., None]) ** 2).sum(axis=-1)
    bound = np.zeros((e, n_h + 1))
    bound[rows, idx] = np.linalg.norm((np.abs(hinge) * b_h[..., None]).sum(axis=2), axis=-1)
    mesh_var = ((mesh * sigmas_m) ** 2).sum(axis=1)
    mesh_bound = np.linalg.norm(np.abs(mesh) * spec.mesh, axis=1)
    return (np.concatenate([var[:, :n_h].reshape(e, -1), mesh_var], axis=1),
            np.concatenate([bound[:, :n_h], mesh_bound], axis=1))


@dataclass(frozen=True)
class LinearResult:
    """Linearised stack-up at several drive values.

    Attributes
    ----------
    times : (T,) float
    ideal_gaps : (T, E) float
    gap_bound : (T, E) float
        Worst case: ``max_k (|D_k| + ||sum_s |J_ks| b_s||)`` over the endpoints k.
    gap_rss : (T, E) float
        RMS length of the endpoint miss, larger endpoint.
    tip_bound, tip_rss : (T, F) float
        Same for every face's vertices (displacement from the ideal pose).
    variance : (E, 6H + C) float
        At closure (t = 1): each source's share ``sum_c (J s)^2`` of the variance of
        each edge's endpoint with the larger RSS.
    element_bound : (E, H + C) float
        At closure: each hinge's (six sources together) and each mesh's worst-case
        contribution ``||sum_s |J_s| b_s||`` at that endpoint.
    """

    times: np.ndarray
    ideal_gaps: np.ndarray
    gap_bound: np.ndarray
    gap_rss: np.ndarray
    tip_bound: np.ndarray
    tip_rss: np.ndarray
    variance: np.ndarray
    element_bound: np.ndarray


def _closure_index(times):
    return int(np.argmin(np.abs(np.asarray(times) - 1.0)))


def linear_stackup(mech, spec, times=DEFAULT_TIMES, dist="uniform", schedule=None):
    """Linearised worst case and RSS of every cut edge and every panel.

    Parameters
    ----------
    mech : Mechanism
    spec : PlaySpec
    times : sequence of float
        Drive values; t = 1 (closure) is added when missing.
    dist : {"uniform", "normal"}
        Sets sigma for the RSS (bound / sqrt(3) or bound / 3).
    schedule : Schedule, optional

    Returns
    -------
    LinearResult

    Examples
    --------
    One 10 x 10 panel on a hinge, play ± 0.001 rad: the far edge, 10 from the
    axis, moves at most 0.01.

    >>> from foldsim.model import build_mechanism
    >>> sq = [[0, 0, 0], [10, 0, 0], [10, 10, 0], [0, 10, 0], [20, 0, 0], [20, 10, 0]]
    >>> m = build_mechanism(sq, [[0, 1, 2, 3], [1, 4, 5, 2]], [[0, 1]], state="flat", closed_angles=[1.0])
    >>> spec = PlaySpec(np.array([[0.001, 0, 0, 0, 0, 0]]), np.zeros(0))
    >>> lin = linear_stackup(m, spec, times=(0.0,))
    >>> lin.tip_bound.round(12).tolist()
    [[0.0, 0.01], [0.0, 0.01]]
    """
    times = _times(times)
    schedule = fold_schedule(mech) if schedule is None else schedule
    tree = gear_tree(mech)
    frames, paths, mesh = hinge_frames(mech), _paths(mech), _sparse_backlash(mech, tree)
    bounds, sigmas = spec.bounds, spec.sigmas(dist)
    n_t, n_e, n_h = len(times), len(mech.cut_faces), mech.n_hinges
    sig_h, sig_m = sigmas[:N_KINDS * n_h].reshape(n_h, N_KINDS), sigmas[N_KINDS * n_h:]
    ideal = np.zeros((n_t, n_e))
    gap_bound, gap_rss = np.zeros((n_t, n_e)), np.zeros((n_t, n_e))
    tip_bound, tip_rss = np.zeros((n_t, mech.n_faces)), np.zeros((n_t, mech.n_faces))
    variance = np.zeros((n_e, len(bounds)))
    element = np.zeros((n_e, n_h + len(mech.couplings)))
    closing = _closure_index(times)
    faces, flat = _vertex_table(mech)
    for i, t in enumerate(times):
        ctx = _context(mech, schedule.rates * t, tree, frames, paths, mesh)
        pa, pb = _cut_posed(mech, ctx.poses)
        diff = np.linalg.norm(pa - pb, axis=-1)
        ideal[i] = diff.max(axis=-1, initial=0.0)
        for sl in _chunks(n_e, 512):
            ends = [_edge_path_jacobian(ctx, mech, pa, pb, sl, k) for k in range(2)]
            reduced = [_reduce_path(*e, spec, sig_h, sig_m) for e in ends]
            worst = np.stack([r[0] for r in reduced], axis=1)
            rss = np.stack([r[1] for r in reduced], axis=1)
            gap_bound[i, sl] = (diff[sl] + worst).max(axis=1)
            gap_rss[i, sl] = rss.max(axis=1)
            if i == closing:
                pick = np.argmax(rss, axis=1)
                for k, (idx, hinge, mesh_jac) in enumerate(ends):
                    on = np.flatnonzero(pick == k)
                    if len(on):
                        var_rows, elem_rows = _edge_shares(idx[on], hinge[on], mesh_jac[on], spec,
                                                           sig_h, sig_m)
                        variance[sl][on] = var_rows
                        element[sl][on] = elem_rows
        points = geometry.transform_points(ctx.poses[faces], flat)
        worst_v, rss_v = np.zeros(len(points)), np.zeros(len(points))
        for sl in _chunks(len(points), 4096):
            jac_path = _path_jacobian(ctx.pose, points[sl], faces[sl])
            worst_v[sl], rss_v[sl] = _reduce_path(*jac_path, spec, sig_h, sig_m)
        np.maximum.at(tip_bound[i], faces, worst_v)
        np.maximum.at(tip_rss[i], faces, rss_v)
    return LinearResult(times, ideal, gap_bound, gap_rss, tip_bound, tip_rss, variance, element)


# ---------------------------------------------------------------- Monte Carlo


def _times(times):
    times = np.unique(np.append(np.asarray(times, dtype=float).ravel(), 1.0))
    if not np.isfinite(times).all():
        raise ModelError("times: drive values must be finite")
    return times


@dataclass(frozen=True)
class MonteCarloResult:
    """Sampled stack-up at several drive values.

    Attributes
    ----------
    times : (T,) float
    samples : int
    seed : int or None
    dist : str
    ideal_gaps : (T, E) float
    gap_median, gap_p95, gap_max, gap_rms : (T, E) float
        Statistics of each cut edge's gap over the samples.
    tip_median, tip_p95, tip_max, tip_rms : (T, F) float
        Statistics of each face's largest vertex displacement from its ideal pose.
    gaps : (N, T, E) float or None
        Every sample's gaps (with ``keep=True``).
    tips : (N, T, F) float or None
    """

    times: np.ndarray
    samples: int
    seed: object
    dist: str
    ideal_gaps: np.ndarray
    gap_median: np.ndarray
    gap_p95: np.ndarray
    gap_max: np.ndarray
    gap_rms: np.ndarray
    tip_median: np.ndarray
    tip_p95: np.ndarray
    tip_max: np.ndarray
    tip_rms: np.ndarray
    gaps: object = None
    tips: object = None


def _chunk_size(mech, n_times=1, budget=8e6):
    """Samples per chunk: about ``budget`` bytes of (samples, faces, 4, 4) poses (small batches stay in cache)."""
    return max(1, int(budget // (128 * max(mech.n_faces, mech.n_hinges) * max(1, n_times))))


def _stats(values):
    """median, 95th percentile, max, RMS over axis 0 of (N, ...) values."""
    median, p95 = np.quantile(values, [0.5, 0.95], axis=0)
    return median, p95, values.max(axis=0), np.sqrt((values**2).mean(axis=0))


def monte_carlo(mech, spec, samples=DEFAULT_SAMPLES, seed=0, dist="uniform", times=DEFAULT_TIMES,
                chunk=None, keep=False, schedule=None):
    """Sample the built mechanism many times and measure gaps and panel deviations.

    Parameters
    ----------
    mech : Mechanism
    spec : PlaySpec
    samples : int
    seed : int or numpy.random.SeedSequence
        Seeds ``numpy.random.default_rng``; the same seed gives the same samples at
        every drive value and for every chunk size.
    dist : {"uniform", "normal"}
    times : sequence of float
        Drive values; t = 1 is added when missing.
    chunk : int, optional
        Samples per batch (default: about 8 MB of poses).
    keep : bool
        Return every sample's gaps and deviations too.
    schedule : Schedule, optional

    Returns
    -------
    MonteCarloResult

    Notes
    -----
    The percentiles need every sample, so ``samples * T * (E + F)`` floats are held
    (10,000 samples of a 1,280-panel model at one t: about 150 MB).
    """
    _check_dist(dist)
    for value, name in ((samples, "samples"), (1 if chunk is None else chunk, "chunk")):
        if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < 1:
            raise ModelError(f"{name}: must be a positive integer, not {value!r}")
    times = _times(times)
    schedule = fold_schedule(mech) if schedule is None else schedule
    tree, frames = gear_tree(mech), hinge_frames(mech)
    chunk = _chunk_size(mech) if chunk is None else int(chunk)
    padded = _padded_faces(mech)
    angles = schedule.rates[None] * times[:, None]
    ideal_poses = face_poses(mech, angles)
    ideal_gaps = cut_edge_gaps(mech, ideal_poses)
    n_e, n_f = len(mech.cut_faces), mech.n_faces
    gaps = np.empty((samples, len(times), n_e))
    tips = np.empty((samples, len(times), n_f))
    rng = np.random.default_rng(seed)
    for sl in _chunks(samples, chunk):
        errors = draw_errors(spec, sl.stop - sl.start, rng, dist)
        for i, poses in enumerate(_pose_batches(mech, angles, errors, tree, frames)):
            gaps[sl, i] = cut_edge_gaps(mech, poses)
            tips[sl, i] = tip_deviations(poses, ideal_poses[i], padded)
    g = [s.reshape(len(times), n_e) for s in _stats(gaps)]
    p = [s.reshape(len(times), n_f) for s in _stats(tips)]
    return MonteCarloResult(times, int(samples), seed, dist, ideal_gaps, *g, *p,
                            gaps if keep else None, tips if keep else None)


# ---------------------------------------------------------------- the report


def source_names(mech):
    """Label of every source, hinge-major then couplings: ``"hinge 3 tilt_across"``."""
    names = [f"hinge {h} {k}" for h in range(mech.n_hinges) for k in KINDS]
    return names + [f"mesh {c} backlash" for c in range(len(mech.couplings))]


def _element_label(mech, index):
    n_h = mech.n_hinges
    if index < n_h:
        a, b = mech.hinge_faces[index].tolist()
        return {"element": "hinge", "index": int(index), "faces": [int(a), int(b)]}
    c = index - n_h
    return {"element": "mesh", "index": int(c), "hinges": [int(h) for h in mech.couplings[c].hinges]}


def _ranking(mech, variance, element_bound, rows=None, top=None):
    """Hinges and meshes ranked by their share of the variance over the given edges."""
    n_h = mech.n_hinges
    rows = slice(None) if rows is None else rows
    var = variance[rows]
    var = var[None] if var.ndim == 1 else var
    bound = element_bound[rows]
    bound = bound[None] if bound.ndim == 1 else bound
    kinds = var[:, :N_KINDS * n_h].reshape(len(var), n_h, N_KINDS).sum(axis=0)   # (H, 6)
    totals = np.concatenate([kinds.sum(axis=1), var[:, N_KINDS * n_h:].sum(axis=0)])
    whole = totals.sum()
    order = [int(i) for i in np.argsort(-totals, kind="stable") if totals[i] > 0]
    out = []
    for i in order[:top]:
        row = _element_label(mech, i)
        row["share"] = float(totals[i] / whole)
        row["worst_case"] = float(bound[:, i].max())
        if i < n_h:
            row["by_kind"] = {k: float(v / totals[i]) for k, v in zip(KINDS, kinds[i]) if v > 0}
        out.append(row)
    return out


@dataclass(frozen=True)
class Stackup:
    """Everything `foldsim stackup` reports about one mechanism.

    Attributes
    ----------
    mech : Mechanism
    spec : PlaySpec
    mc : MonteCarloResult
    linear : LinearResult
    """

    mech: object
    spec: PlaySpec
    mc: MonteCarloResult
    linear: LinearResult

    @property
    def closure(self):
        """Index of t = 1 in the times."""
        return _closure_index(self.mc.times)

    @property
    def p95_gap(self):
        """Largest 95th-percentile closure gap over the cut edges."""
        return float(self.mc.gap_p95[self.closure].max(initial=0.0))

    def contributors(self, top=None):
        """Hinges and meshes ranked by share of the summed closure-gap variance."""
        return _ranking(self.mech, self.linear.variance, self.linear.element_bound, top=top)

    def to_dict(self, top=10):
        """JSON-ready report (docs/stackup.md lists the keys)."""
        mech, mc, lin, c = self.mech, self.mc, self.linear, self.closure
        units = mech.units
        edges = []
        for e, (a, b) in enumerate(mech.cut_faces.tolist()):
            edges.append({
                "faces": [int(a), int(b)], "ideal": float(mc.ideal_gaps[c, e]),
                "median": float(mc.gap_median[c, e]), "p95": float(mc.gap_p95[c, e]),
                "max": float(mc.gap_max[c, e]), "worst_case": float(lin.gap_bound[c, e]),
                "rss": float(lin.gap_rss[c, e]),
                "contributors": _ranking(mech, lin.variance, lin.element_bound, rows=e, top=3),
            })
        faces = [{"face": f, "median": float(mc.tip_median[c, f]), "p95": float(mc.tip_p95[c, f]),
                  "max": float(mc.tip_max[c, f]), "worst_case": float(lin.tip_bound[c, f]),
                  "rss": float(lin.tip_rss[c, f])} for f in range(mech.n_faces)]
        motion = []
        for i, t in enumerate(mc.times):
            motion.append({
                "t": float(t),
                "ideal_max_gap": float(mc.ideal_gaps[i].max(initial=0.0)),
                "p95_gap": float(mc.gap_p95[i].max(initial=0.0)),
                "max_gap": float(mc.gap_max[i].max(initial=0.0)),
                "worst_case_gap": float(lin.gap_bound[i].max(initial=0.0)),
                "p95_tip": float(mc.tip_p95[i].max(initial=0.0)),
                "worst_case_tip": float(lin.tip_bound[i].max(initial=0.0)),
            })
        return {
            "model": mech.name, "units": units, "faces": mech.n_faces, "hinges": mech.n_hinges,
            "cut_edges": len(mech.cut_faces), "process": self.spec.process,
            "samples": mc.samples, "seed": mc.seed if isinstance(mc.seed, int) else None, "dist": mc.dist,
            "longest_hinge_chain": longest_hinge_chain(mech), "longest_gear_chain": longest_gear_chain(mech),
            "bounds": _bounds_summary(self.spec),
            "p95_gap": self.p95_gap,
            "max_gap": float(mc.gap_max[c].max(initial=0.0)),
            "worst_case_gap": float(lin.gap_bound[c].max(initial=0.0)),
            "edges": edges, "panels": faces, "motion": motion,
            "contributors": self.contributors(top),
        }


def _bounds_summary(spec):
    """Smallest and largest ± bound of each kind (angles in degrees)."""
    out = {}
    for k, kind in enumerate(KINDS):
        col = spec.hinge[:, k]
        scale = 180.0 / math.pi if k < 3 else 1.0
        key = f"{kind}_deg" if k < 3 else kind
        out[key] = [float(col.min() * scale), float(col.max() * scale)] if len(col) else [0.0, 0.0]
    mesh = spec.mesh * 180.0 / math.pi
    out["backlash_deg"] = [float(mesh.min()), float(mesh.max())] if len(mesh) else [0.0, 0.0]
    return out


def stackup(mech, spec=None, process=None, samples=DEFAULT_SAMPLES, seed=0, dist="uniform",
            times=DEFAULT_TIMES, chunk=None):
    """Run the Monte Carlo and the linearised stack-up of one mechanism.

    Parameters
    ----------
    mech : Mechanism
    spec : PlaySpec, optional
        Default: `play_spec(mech, process)`.
    process : str, optional
    samples, seed, dist, times, chunk
        As for `monte_carlo`.

    Returns
    -------
    Stackup
    """
    spec = play_spec(mech, process) if spec is None else spec
    schedule = fold_schedule(mech)
    mc = monte_carlo(mech, spec, samples, seed, dist, times, chunk=chunk, schedule=schedule)
    lin = linear_stackup(mech, spec, mc.times, dist, schedule=schedule)
    return Stackup(mech, spec, mc, lin)


def compare(mechs, names=None, process=None, specs=None, samples=DEFAULT_SAMPLES, seed=0, dist="uniform"):
    """Candidate nets or gear layouts of one shape, side by side.

    Every candidate gets the same seed, so the comparison is not muddied by
    sampling noise more than it must be (the sources differ between layouts, so
    the draws cannot be matched one to one).

    Parameters
    ----------
    mechs : sequence of Mechanism
    names : sequence of str, optional
        Row labels (default: each mechanism's name, or its position).
    process : str, optional
        Preset for every candidate (replaces the one each file names).
    specs : sequence of PlaySpec, optional
        Explicit bounds per candidate instead.
    samples, seed, dist
        As for `monte_carlo`; closure (t = 1) only.

    Returns
    -------
    list of dict
        One row per candidate: ``name``, ``faces``, ``hinges``, ``cut_edges``,
        ``longest_hinge_chain`` (hinges), ``longest_gear_chain`` (meshes),
        ``p95_gap``, ``max_gap``, ``worst_case_gap``, ``rss_gap``, ``p95_tip``,
        ``worst_edge`` (face pair with the largest p95 gap), ``tighten_first``.
    """
    rows = []
    for i, mech in enumerate(mechs):
        spec = specs[i] if specs is not None else play_spec(mech, process)
        result = stackup(mech, spec, samples=samples, seed=seed, dist=dist, times=(1.0,))
        c = result.closure
        p95 = result.mc.gap_p95[c]
        worst = int(np.argmax(p95)) if len(p95) else None
        top = result.contributors(top=1)
        rows.append({
            "name": names[i] if names is not None else (mech.name or str(i)),
            "faces": mech.n_faces, "hinges": mech.n_hinges, "cut_edges": len(mech.cut_faces),
            "longest_hinge_chain": longest_hinge_chain(mech),
            "longest_gear_chain": longest_gear_chain(mech),
            "p95_gap": result.p95_gap,
            "max_gap": float(result.mc.gap_max[c].max(initial=0.0)),
            "worst_case_gap": float(result.linear.gap_bound[c].max(initial=0.0)),
            "rss_gap": float(result.linear.gap_rss[c].max(initial=0.0)),
            "p95_tip": float(result.mc.tip_p95[c].max(initial=0.0)),
            "worst_edge": mech.cut_faces[worst].tolist() if worst is not None else None,
            "tighten_first": top[0] if top else None,
        })
    return rows


def _label(row):
    if row is None:
        return "-"
    if row["element"] == "hinge":
        return f"hinge {row['index']} (faces {row['faces'][0]}-{row['faces'][1]})"
    return f"mesh {row['index']} (hinges {row['hinges'][0]}->{row['hinges'][1]})"


def format_comparison(rows, units="mm"):
    """Text table of `compare` rows.

    Examples
    --------
    >>> print(format_comparison([{"name": "a", "faces": 6, "longest_hinge_chain": 3,
    ...     "longest_gear_chain": 2, "p95_gap": 0.5, "worst_case_gap": 0.9, "rss_gap": 0.3,
    ...     "tighten_first": None}]))
    candidate  faces  hinge chain  gear chain  p95 gap mm  worst case mm  rss mm  tighten first
    a              6            3           2         0.5            0.9     0.3  -
    """
    head = (f"{'candidate':<9}  {'faces':>5}  {'hinge chain':>11}  {'gear chain':>10}  "
            f"{'p95 gap ' + units:>10}  {'worst case ' + units:>13}  {'rss ' + units:>6}  tighten first")
    lines = [head]
    for r in rows:
        lines.append(f"{r['name']:<9}  {r['faces']:>5}  {r['longest_hinge_chain']:>11}  "
                     f"{r['longest_gear_chain']:>10}  {r['p95_gap']:>10.4g}  {r['worst_case_gap']:>13.4g}  "
                     f"{r['rss_gap']:>6.4g}  {_label(r['tighten_first'])}")
    return "\n".join(lines)


def format_report(report, edges=10, panels=5):
    """Human-readable text of `Stackup.to_dict`."""
    u = report["units"]
    b = report["bounds"]

    def span(key):
        lo, hi = b[key]
        return f"{lo:.3g}" if abs(hi - lo) <= 1e-12 * max(1.0, abs(hi)) else f"{lo:.3g}..{hi:.3g}"

    lines = [
        (f"{report['model'] or 'mechanism'}: {report['faces']} faces, {report['hinges']} hinges, "
         f"{report['cut_edges']} cut edges; longest hinge chain {report['longest_hinge_chain']}, "
         f"longest gear chain {report['longest_gear_chain']}"),
        (f"process {report['process'] or '(file values)'}; {report['samples']} samples, {report['dist']}, "
         f"seed {report['seed']}"),
        (f"± bounds: play {span('play_deg')}°, tilt {span('tilt_across_deg')}° / {span('tilt_normal_deg')}°, "
         f"axial {span('axial')} {u}, shift {span('shift_across')} / {span('shift_normal')} {u}, "
         f"backlash {span('backlash_deg')}°"),
        "",
        (f"closure (t = 1): p95 gap {report['p95_gap']:.4g} {u}, largest sampled {report['max_gap']:.4g} {u}, "
         f"worst case {report['worst_case_gap']:.4g} {u}"),
    ]
    rows = sorted(report["edges"], key=lambda e: -e["p95"])
    if rows:
        lines.append(f"  cut edge   median     p95       max       worst case  rss       tighten first ({u})")
        for e in rows[:edges]:
            first = e["contributors"][0] if e["contributors"] else None
            share = f" {first['share']:.0%}" if first else ""
            name = f"{e['faces'][0]}-{e['faces'][1]}"
            lines.append(f"  {name:<9}  {e['median']:<9.4g}  {e['p95']:<8.4g}  {e['max']:<8.4g}  "
                         f"{e['worst_case']:<10.4g}  {e['rss']:<8.4g}  {_label(first)}{share}")
        if len(rows) > edges:
            lines.append(f"  ... {len(rows) - edges} more cut edges (--json lists all)")
    lines.append("")
    lines.append(f"along the motion ({u}):")
    lines.append("  t      ideal gap  p95 gap    worst case  p95 tip    worst tip")
    for m in report["motion"]:
        lines.append(f"  {m['t']:<5.3g}  {m['ideal_max_gap']:<9.4g}  {m['p95_gap']:<9.4g}  "
                     f"{m['worst_case_gap']:<10.4g}  {m['p95_tip']:<9.4g}  {m['worst_case_tip']:.4g}")
    lines.append("")
    far = sorted(report["panels"], key=lambda p: -p["p95"])[:panels]
    lines.append(f"far panels at closure (largest vertex displacement, {u}):")
    for p in far:
        lines.append(f"  face {p['face']:<4}  p95 {p['p95']:<9.4g}  max {p['max']:<9.4g}  "
                     f"worst case {p['worst_case']:.4g}")
    lines.append("")
    lines.append("tighten first (share of the summed closure-gap variance):")
    if not report["contributors"]:
        lines.append("  nothing contributes (no cut edges, or no play)")
    for i, r in enumerate(report["contributors"], 1):
        kinds = ""
        if r.get("by_kind"):
            kinds = "  (" + ", ".join(f"{k} {v:.0%}" for k, v in
                                       sorted(r["by_kind"].items(), key=lambda kv: -kv[1]) if v >= 0.005) + ")"
        lines.append(f"  {i:>2}. {_label(r):<32} {r['share']:>6.1%}  worst case {r['worst_case']:.4g} {u}{kinds}")
    return "\n".join(lines)
