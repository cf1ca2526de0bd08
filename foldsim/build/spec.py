"""The file's optional ``build`` object: what the printed parts are made of.

Reads and validates ``build`` (docs/build.md): panel thickness and its side, where
the hinge axes sit, the gear bodies of each coupling and the hinge stops. Checks
that need only the document run in `parse_build`; checks that need the mechanism's
geometry (a spur pair's centre distance, the gear kind a pair of hinge lines
allows) run in `build_spec`. Every problem is a `ModelError` naming the field and
index, e.g. ``build.gears[1].module: must be a positive length, not -1``.
"""

import math
import weakref
from dataclasses import dataclass

import numpy as np

from ..errors import ModelError
from ..limits import QUOTE_CHARS, quote, unknown_key
from ..tolerances import DEFAULT

KINDS = ("spur", "bevel", "remote")
AXES = ("surface", "mid")
MATERIAL = ("back", "front")
DEFAULT_STOP_MARGIN_DEG = 2.0

_TOP = {"thickness", "faces", "material", "axis", "gears", "stops", "stop_margin_deg", "clearance"}
_GEAR = {"coupling", "kind", "module", "pitch_radius", "corner_distance", "teeth", "face_width",
         "sector_deg", "rod_radius"}


@dataclass(frozen=True)
class GearDoc:
    """One ``build.gears[k]`` entry as read (None where not given)."""

    coupling: int
    kind: str = None
    module: float = None
    pitch_radius: float = None
    corner_distance: float = None
    teeth: tuple = None
    face_width: float = None
    sector_deg: tuple = None
    rod_radius: float = None


@dataclass(frozen=True)
class BuildDoc:
    """The ``build`` object as read, before it meets the geometry."""

    thickness: float
    faces: dict
    material: str
    axis: str
    gears: tuple
    stops: dict
    stop_margin_deg: float
    clearance: float


def _number(value, field, positive=False, minimum=None):
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise ModelError(f"{field}: must be a finite number, not {quote(value)}")
    if positive and not value > 0:
        raise ModelError(f"{field}: must be a positive length, not {quote(value)}")
    if minimum is not None and value < minimum:
        raise ModelError(f"{field}: must be at least {minimum}, not {quote(value)}")
    return float(value)


def _index(value, field, count, what):
    if isinstance(value, bool) or not isinstance(value, int):
        raise ModelError(f"{field}: must be an integer, not {quote(value)}")
    if not 0 <= value < count:
        raise ModelError(f"{field}: {what} {value} out of range (0..{count - 1})")
    return value


def _object(value, field, allowed):
    key = unknown_key(value, field, allowed)
    if key is not None:
        shown = repr(key) if len(key) <= QUOTE_CHARS else quote(key)
        raise ModelError(f"{field}: unknown key {shown}")
    return value


def _choice(value, field, options):
    if value not in options:
        raise ModelError(f"{field}: must be one of {', '.join(options)}, not {quote(value)}")
    return value


def _entries(value, field):
    if not isinstance(value, list):
        raise ModelError(f"{field}: must be a list")
    return value


def _per_index(value, field, key, index_key, value_key, count):
    """Yield ``(index, value, place)`` of every ``{index_key: i, value_key: v}`` entry of ``value[key]``.

    Each index may appear once; ``place`` is the entry's field, e.g. ``build.stops[2]``.
    """
    seen = set()
    for i, entry in enumerate(_entries(value.get(key, []), f"{field}.{key}")):
        where = f"{field}.{key}[{i}]"
        entry = _object(entry, where, {index_key, value_key})
        for name in (index_key, value_key):
            if name not in entry:
                raise ModelError(f"{where}: missing \"{name}\"")
        index = _index(entry[index_key], f"{where}.{index_key}", count, index_key)
        if index in seen:
            raise ModelError(f"{where}.{index_key}: {index_key} {index} is given twice")
        seen.add(index)
        yield index, entry[value_key], where


def _gear(entry, field, n_couplings):
    entry = _object(entry, field, _GEAR)
    if "coupling" not in entry:
        raise ModelError(f"{field}: missing \"coupling\"")
    out = {"coupling": _index(entry["coupling"], f"{field}.coupling", n_couplings, "coupling")}
    if "kind" in entry:
        out["kind"] = _choice(entry["kind"], f"{field}.kind", KINDS)
    sizes = [k for k in ("module", "pitch_radius", "corner_distance") if k in entry]
    if len(sizes) > 1:
        raise ModelError(f"{field}: give at most one of module, pitch_radius, corner_distance "
                         f"(found {sizes[0]} and {sizes[1]})")
    for key in ("module", "pitch_radius", "corner_distance", "face_width", "rod_radius"):
        if key in entry:
            out[key] = _number(entry[key], f"{field}.{key}", positive=True)
    if "teeth" in entry:
        teeth = entry["teeth"]
        if (not isinstance(teeth, list) or len(teeth) != 2
                or any(isinstance(z, bool) or not isinstance(z, int) or z < 1 for z in teeth)):
            raise ModelError(f"{field}.teeth: must be two positive integers, not {quote(teeth)}")
        out["teeth"] = tuple(teeth)
    if "sector_deg" in entry:
        s = entry["sector_deg"]
        values = s if isinstance(s, list) else [s, s]
        if len(values) != 2:
            raise ModelError(f"{field}.sector_deg: must be a number or two numbers, not {quote(s)}")
        values = tuple(_number(v, f"{field}.sector_deg") for v in values)
        if not all(0 < v <= 360 for v in values):
            raise ModelError(f"{field}.sector_deg: must lie in (0, 360], not {quote(s)}")
        out["sector_deg"] = values
    return GearDoc(**out)


def parse_build(value, n_faces, n_hinges, n_couplings, field="build"):
    """Validate a ``build`` object against the document's counts.

    Parameters
    ----------
    value : object
        The parsed JSON value.
    n_faces, n_hinges, n_couplings : int

    Returns
    -------
    BuildDoc
    """
    value = _object(value, field, _TOP)
    if "thickness" not in value:
        raise ModelError(f"{field}: missing \"thickness\"")
    thickness = _number(value["thickness"], f"{field}.thickness", positive=True)
    faces = {f: _number(v, f"{where}.thickness", positive=True)
             for f, v, where in _per_index(value, field, "faces", "face", "thickness", n_faces)}
    material = _choice(value.get("material", "back"), f"{field}.material", MATERIAL)
    axis = _choice(value.get("axis", "surface"), f"{field}.axis", AXES)
    gears, seen = [], {}
    for i, entry in enumerate(_entries(value.get("gears", []), f"{field}.gears")):
        gear = _gear(entry, f"{field}.gears[{i}]", n_couplings)
        if gear.coupling in seen:
            raise ModelError(f"{field}.gears[{i}].coupling: coupling {gear.coupling} already has "
                             f"gears in {field}.gears[{seen[gear.coupling]}]")
        seen[gear.coupling] = i
        gears.append(gear)
    stops = {}
    for h, v, where in _per_index(value, field, "stops", "hinge", "stop_deg", n_hinges):
        stops[h] = _number(v, f"{where}.stop_deg")
        if not -180.0 <= stops[h] <= 180.0:
            raise ModelError(f"{where}.stop_deg: must lie in [-180, 180], not {stops[h]}")
    margin = _number(value.get("stop_margin_deg", DEFAULT_STOP_MARGIN_DEG), f"{field}.stop_margin_deg",
                     minimum=0.0)
    clearance = _number(value.get("clearance", 0.0), f"{field}.clearance", minimum=0.0)
    return BuildDoc(thickness, faces, material, axis, tuple(gears), stops, margin, clearance)


@dataclass(frozen=True, eq=False)
class BuildSpec:
    """The resolved build of a mechanism.

    Attributes
    ----------
    thickness : (F,) float
        Of every panel.
    material : str
        ``back`` (toward the inside of the shell) or ``front``.
    axis : str
        ``surface``: hinge lines on the file's polygons, which are one surface of
        the panel; ``mid``: the polygons are the panels' mid-planes.
    gears : tuple of GearDoc
        The gear entries as read and checked against the document (their bodies
        are not built yet).
    stops : (H,) float
        Stop angle of every hinge, radians, on the side its closing angle lies.
    stops_given : (H,) bool
    clearance : float
        Least distance a gear body must keep from every body it is not meant to touch.
    doc : BuildDoc
    """

    thickness: np.ndarray
    material: str
    axis: str
    gears: tuple
    stops: np.ndarray
    stops_given: np.ndarray
    clearance: float
    doc: BuildDoc

    def report(self):
        """What was read or defaulted, JSON-ready (the ``build`` key of a check report)."""
        return {"thickness": [float(t) for t in self.thickness], "material": self.material, "axis": self.axis,
                "method": "tapered panels (Tachi 2011; Lang et al. 2018)",
                "stops_deg": [float(np.degrees(s)) for s in self.stops],
                "stops_given": [bool(s) for s in self.stops_given],
                "clearance": self.clearance,
                "gears": [{k: v for k, v in vars(g).items() if v is not None} for g in self.gears]}


_CACHE = weakref.WeakKeyDictionary()


def build_spec(mech, tol=DEFAULT, validate=True):
    """The mechanism's resolved build, or None when its file has no ``build`` object.

    Parameters
    ----------
    mech : Mechanism
    tol : Tolerances
    validate : bool
        Build the prisms and the gear pairs once, so that a thickness the bevels
        cannot take or gears the hinges cannot carry fail here. False: the caller
        builds them itself (and sees the same errors); the spec is not cached.

    Returns
    -------
    BuildSpec or None

    Raises
    ------
    ModelError
        Naming the ``build`` field and index.
    """
    if "build" not in mech.extras:
        return None
    if mech in _CACHE:
        return _CACHE[mech]
    doc = parse_build(mech.extras["build"], mech.n_faces, mech.n_hinges, len(mech.couplings))
    thickness = np.full(mech.n_faces, doc.thickness)
    for f, value in doc.faces.items():
        thickness[f] = value
    closing = np.asarray(mech.closed_angles, float)
    margin = math.radians(doc.stop_margin_deg)
    stops = closing + np.where(closing >= 0, margin, -margin)
    given = np.zeros(mech.n_hinges, bool)
    for h, deg in doc.stops.items():
        stops[h], given[h] = math.radians(deg), True
    spec = BuildSpec(thickness, doc.material, doc.axis, doc.gears, stops, given, doc.clearance, doc)
    if not validate:
        return spec
    from .gears import gear_pairs
    from .prisms import panel_solids

    panel_solids(mech, spec, tol=tol)  # thickness the bevels cannot take fails here, on load
    gear_pairs(mech, spec, tol=tol)  # so do gears the hinges cannot carry
    _CACHE[mech] = spec
    return spec
