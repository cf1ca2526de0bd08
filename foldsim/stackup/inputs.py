"""What the stack-up is given: the error kinds, process presets, the file's tolerances, the bounds.

The mechanism file's ``tolerances`` key gives total free ranges (a clearance, a
backlash measured flank to flank); `play_spec` resolves them, over a process
preset, into the ± bound of every error source (`PlaySpec`). The drive values and
batch slices every analysis walks over are set here too.
"""

import math
from dataclasses import dataclass, field

import numpy as np

from ..errors import ModelError
from ..limits import DEFAULT_SAMPLES, DEFAULT_TIMES  # noqa: F401  (part of this module's interface)
from ..limits import QUOTE_CHARS, as_float, quote, unknown_key


def _show(value, width=QUOTE_CHARS):
    """A value for a message: ``repr`` of a short string, else `foldsim.limits.quote`."""
    return repr(value) if isinstance(value, str) and len(value) <= width else quote(value, width)


KINDS = ("play", "tilt_across", "tilt_normal", "axial", "shift_across", "shift_normal")
N_KINDS = len(KINDS)
DISTRIBUTIONS = ("uniform", "normal")

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
_PROCESS_KEYS = ("clearance", "lever", "backlash", "pitch_radius")   # the Process fields a file may override


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


def _check_process(name, field):
    if not isinstance(name, str) or name not in PROCESSES:
        raise ModelError(f"{field}: unknown process {_show(name)} (known: {', '.join(PROCESSES)})")


def _mm_per_unit(units, why):
    try:
        return MM_PER_UNIT[units]
    except KeyError:
        known = ", ".join(sorted(MM_PER_UNIT))
        raise ModelError(f"units: cannot convert {why} (in mm) to {_show(units)} (known: {known}); "
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
    _check_process(name, "process")
    base = PROCESSES[name]
    scale = 1.0 / _mm_per_unit(units, f"the {name} preset")
    values = {k: getattr(base, k) * scale for k in _PROCESS_KEYS}
    values.update({k: float(v) for k, v in overrides.items() if v is not None})
    return Process(name, **values)


# ---------------------------------------------------------------- the tolerances key

_HINGE_KEYS = {"play_deg", "tilt_deg", "axial", "shift"}
_MESH_KEYS = {"backlash_deg", "backlash", "pitch_radius"}
_TOP_KEYS = {"process", "hinge", "hinges", "coupling", "couplings", *_PROCESS_KEYS}


def _length(value, field, positive=False):
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(as_float(value)):
        raise ModelError(f"{field}: must be a finite number, not {_show(value)}")
    if value < 0 or (positive and value == 0):
        raise ModelError(f"{field}: must be {'positive' if positive else 'non-negative'}, not {_show(value)}")
    return float(value)


def _pair(value, field):
    """A number applied to both axes, or [across, normal]."""
    if isinstance(value, list):
        if len(value) != 2:
            raise ModelError(f"{field}: must be a number or [across, normal], not {_show(value)}")
        return tuple(_length(v, f"{field}[{i}]") for i, v in enumerate(value))
    v = _length(value, field)
    return v, v


def _object(value, field, allowed):
    key = unknown_key(value, field, allowed)
    if key is not None:
        raise ModelError(f"{field}.{quote(key, 30)[1:-1]}: unknown key (known: {', '.join(sorted(allowed))})")
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
            raise ModelError(f"{here}.{key}: must be an index in 0..{count - 1}, not {_show(index)}")
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
    if process is not None:
        _check_process(process, f"{field}.process")
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
    stops : (H,) float or None
        Stop angle of every hinge (rad, on the side its closing angle lies; the
        file's ``build.stops``): sampled play never takes a hinge past its stop,
        so a hinge held against it takes play in one direction only.
    """

    hinge: np.ndarray
    mesh: np.ndarray
    process: object = None
    stops: object = None

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
        raise ModelError(f"dist: must be one of {', '.join(DISTRIBUTIONS)}, not {_show(dist)}")


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


# ---------------------------------------------------------------- drive values and batches


def _times(times):
    times = np.unique(np.append(np.asarray(times, dtype=float).ravel(), 1.0))
    if not np.isfinite(times).all():
        raise ModelError("times: drive values must be finite")
    return times


def _closure_index(times):
    return int(np.argmin(np.abs(np.asarray(times) - 1.0)))


def _chunks(n, size):
    return [slice(i, min(i + size, n)) for i in range(0, n, size)]
