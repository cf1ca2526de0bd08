"""Gear bodies as solids: pitch cylinders and pitch cones, clipped to their sectors.

A coupling's two gears sit on the hinges it couples, which border one face, the
*carrier* (`foldsim.layout`): each gear turns about its hinge's line and is fixed to
the panel across that hinge from the carrier. Relative to the carrier, gear i turns
by ``theta_i``, so the pitch point (where the pitch surfaces touch, fixed on the
carrier) travels over the gear's own rim; the sector must hold teeth wherever that
point goes (`foldsim.build.sectors`).

Kinds (docs/build.md, "Gear bodies"):

- ``spur``: parallel hinge lines a distance ``a`` apart, an external mesh with
  pitch radii ``r_i + r_j = a`` and ``r_i / r_j = z_i / z_j``; pitch diameter
  ``d = m z`` (any gear handbook, e.g. Dudley's Handbook of Practical Gear Design).
  The solid is a sector of the pitch cylinder, ``face_width`` long, its band along
  the hinges starting ``corner_distance`` from where both hinge edges begin to
  overlap (by default the band is centred on their common length, clear of the
  corners where cone pairs sit).
- ``bevel``: the hinge lines meet at a corner of the carrier, the pitch cones'
  apex; cone angles from `foldsim.layout.bevel_cones` (standard straight bevel
  geometry, ISO 23509). The solid is a sector of the pitch cone's frustum between
  the cone distances ``R - face_width`` and ``R``; it must end within its hinge
  edge.
- ``remote``: the lines cross off the panel; the same cones sit at that apex, each
  carried by a rod along its hinge's line to a hollow barrel at the hinge edge's
  nearer end. The solid is the cone frustum and the rod.

Size: a spur pair's size is fixed by its centre distance (a given ``module`` or
``pitch_radius`` must agree with it). A bevel pair takes ``module`` (of the
outer end), ``pitch_radius`` (of gear i) or ``corner_distance`` (the cone
distance ``R``, from the apex); by default ``R`` is 0.3 times the shorter hinge
edge (for ``remote``, 0.5 times the apex's distance from the panel). Face width
defaults to ``R / 3`` for cones (common practice, from memory) and to
``min(10 m, a quarter of the common hinge length)`` for spurs (10 m is common
practice).

The meshes are circumscribed polygons (every facet touches or lies outside the
true surface), so a clearance measured on them is never larger than the true one;
with ``n`` facets over a sector of angle ``S`` a cross-section's area is the true
one times ``tan(h) / h``, ``h = S / 2n``.
"""

import math
import weakref
from dataclasses import dataclass

import numpy as np

from .. import geometry
from ..errors import ModelError
from ..gearing import fold_schedule
from ..layout import bevel_cones, hinge_edge, pair_geometry, teeth_pairs
from ..tolerances import DEFAULT
from .prisms import Solid

PRESSURE_ANGLE = math.radians(20.0)
"""Standard pressure angle (ISO 53 basic rack)."""
ISO54_FIRST = (0.06, 0.08, 0.1, 0.12, 0.15, 0.2, 0.25, 0.3, 0.4, 0.5, 0.6, 0.8,
               1.0, 1.25, 1.5, 2.0, 2.5, 3.0, 4.0, 5.0, 6.0, 8.0, 10.0, 12.0, 16.0, 20.0, 25.0, 32.0,
               40.0, 50.0)
"""ISO 54 preferred modules, first choice, mm (ISO 54:1996, from memory)."""
SEGMENTS_PER_TURN = 48
ROD_SEGMENTS = 12
DEFAULT_TEETH = (12, 120)


def preferred_module(limit, units="mm"):
    """The largest ISO 54 first-choice module not above ``limit``.

    Parameters
    ----------
    limit : float
        Largest module that fits, in the model's units.
    units : str
        The model's length unit (the series is in millimetres).

    Returns
    -------
    float or None
        In the model's units; None when even the smallest module is too large.

    Examples
    --------
    >>> preferred_module(2.7), preferred_module(1.0), preferred_module(0.05)
    (2.5, 1.0, None)
    """
    from ..stackup.inputs import MM_PER_UNIT

    per = MM_PER_UNIT.get(units, 1.0)
    fits = [m for m in ISO54_FIRST if m / per <= limit * (1 + 1e-12)]
    return fits[-1] / per if fits else None


def contact_ratio(r1, r2, module, pressure_angle=PRESSURE_ANGLE):
    """Transverse contact ratio of an external involute pair of standard proportions.

    ``eps = (sqrt(ra1^2 - rb1^2) + sqrt(ra2^2 - rb2^2) - a sin(alpha)) / (pi m cos(alpha))``
    with tip radii ``ra = r + m``, base radii ``rb = r cos(alpha)`` and centre
    distance ``a = r1 + r2`` (Dudley's Handbook of Practical Gear Design; ISO 21771).
    For a bevel pair pass the virtual (Tredgold) radii ``r / cos(delta)``.

    Examples
    --------
    >>> round(contact_ratio(10.0, 10.0, 1.0), 3)  # z = 20 and 20, m = 1
    1.557
    """
    c = math.cos(pressure_angle)
    ra1, ra2 = r1 + module, r2 + module
    path = (math.sqrt(ra1**2 - (r1 * c) ** 2) + math.sqrt(ra2**2 - (r2 * c) ** 2)
            - (r1 + r2) * math.sin(pressure_angle))
    return path / (math.pi * module * c)


@dataclass(frozen=True, eq=False)
class Gear:
    """One gear of a pair, in the flat frame.

    Attributes
    ----------
    hinge, face : int
        Its hinge and the panel carrying it (across the hinge from the carrier).
    teeth : int
    pitch_radius : float
        Outer pitch radius (spur: the cylinder's; cones: at cone distance R).
    origin : (3,) float
        Spur: centre of the band on the hinge line; cones: the apex.
    axial : (3,) float
        Unit; spur: the hinge's rotation direction; cones: from the apex along the edge.
    spin : (3,) float
        Unit rotation direction of the hinge (``mech.axes[h, 1] - mech.axes[h, 0]``).
    e1 : (3,) float
        Unit, perpendicular to the axis: toward the pitch point at t = 0.
    sign : float
        The pitch point sits at angle ``-sign * theta_h`` about ``spin`` in the
        gear's own frame: +1 when the gear's panel is the hinge's child.
    sector : (float, float)
        Angular range of the teeth about ``spin`` from ``e1``, radians.
    x_range, r_range : (float, float)
        Axial positions and radii of the solid's two ends (equal radii for a spur).
    rod : (float, float) or None
        Axial range of the rod (``remote``).
    """

    hinge: int
    face: int
    teeth: int
    pitch_radius: float
    origin: np.ndarray
    axial: np.ndarray
    spin: np.ndarray
    e1: np.ndarray
    sign: float
    sector: tuple
    x_range: tuple
    r_range: tuple
    rod: tuple = None

    @property
    def pitch_angle(self):
        """Angle of one tooth pitch, radians."""
        return 2.0 * math.pi / self.teeth


@dataclass(frozen=True, eq=False)
class GearPair:
    """The resolved gear bodies of one coupling.

    Attributes
    ----------
    coupling : int
    kind : str
        ``spur``, ``bevel`` or ``remote``.
    carrier : int
    gears : (Gear, Gear)
        On the coupling's hinges[0] and hinges[1].
    module, face_width, rod_radius : float
    cone_angles : (float, float) or None
        Pitch cone angles (radians) of the cone kinds.
    cone_distance : float or None
    contact_ratio : float
        Of the full gears (`contact_ratio`).
    kappa : float
        +1 when the two gears' rims move the same way about their spins at the pitch
        point (in angle per tooth), -1 otherwise.
    play : (float, float)
        Angular play at each gear (radians) the sectors must allow for.
    """

    coupling: int
    kind: str
    carrier: int
    gears: tuple
    module: float
    face_width: float
    rod_radius: float
    cone_angles: tuple
    cone_distance: float
    contact_ratio: float
    kappa: float
    play: tuple

    def report(self):
        """JSON-ready summary."""
        return {"coupling": self.coupling, "kind": self.kind, "carrier": self.carrier,
                "hinges": [g.hinge for g in self.gears], "teeth": [g.teeth for g in self.gears],
                "module": self.module, "pitch_diameters": [2 * g.pitch_radius for g in self.gears],
                "face_width": self.face_width,
                "sector_deg": [math.degrees(g.sector[1] - g.sector[0]) for g in self.gears],
                "cone_angles_deg": None if self.cone_angles is None else [math.degrees(a) for a in self.cone_angles],
                "cone_distance": self.cone_distance, "contact_ratio": self.contact_ratio}


def _unit(v):
    return v / np.linalg.norm(v)


def _rotate_in_plane(u, normal, angle):
    """u turned by angle about normal (u perpendicular to normal)."""
    return math.cos(angle) * u + math.sin(angle) * np.cross(normal, u)


def _play(mech):
    """(H,) hinge play and (C,) mesh backlash bounds, radians (zero without a tolerances key)."""
    if "tolerances" not in mech.extras:
        return np.zeros(mech.n_hinges), np.zeros(len(mech.couplings))
    from ..stackup.inputs import play_spec

    try:
        spec = play_spec(mech)
    except ModelError:
        return np.zeros(mech.n_hinges), np.zeros(len(mech.couplings))
    return spec.hinge[:, 0], spec.mesh


def _teeth(doc, coupling, field, tol):
    ratio = abs(coupling.ratio)
    if doc.teeth is not None:
        zi, zj = doc.teeth
        if abs(zi / zj - ratio) > tol.ratio * ratio:
            raise ModelError(f"{field}.teeth: {zi}:{zj} make ratio {zi / zj:.6g}, the coupling's is {ratio:.6g}")
        return zi, zj
    if coupling.teeth is not None:
        return tuple(int(z) for z in coupling.teeth)
    zi, zj, _ = teeth_pairs(ratio, *DEFAULT_TEETH)
    return zi, zj


def _common_span(ends, d):
    """Where two parallel hinge edges ``ends`` ((p, q) each) both run, along direction ``d``.

    Returns the span's start, measured from ``ends[0][0]`` along ``d``, and its length.
    """
    lo = max(min((p - ends[0][0]) @ d for p in e) for e in ends)
    hi = min(max((p - ends[0][0]) @ d for p in e) for e in ends)
    return lo, hi - lo


def _hinge_ends(mech, hinges, face):
    """The end points (p, q) of each hinge's edge as ``face`` runs round it (flat frame)."""
    poly = mech.flat_faces[face]
    out = []
    for h in hinges:
        e = hinge_edge(mech, h, face)
        out.append((poly[e], poly[(e + 1) % len(poly)]))
    return out


def spur_common_length(mech, i, j, face):
    """Length along which hinges i and j (parallel, both edges of ``face``) both run: a spur band's room."""
    return _common_span(_hinge_ends(mech, (i, j), face), _unit(mech.axes[i, 1] - mech.axes[i, 0]))[1]


def gear_pairs(mech, spec, tol=DEFAULT):
    """Resolve every ``build.gears`` entry against the mechanism.

    Parameters
    ----------
    mech : Mechanism
    spec : BuildSpec
    tol : Tolerances

    Returns
    -------
    list of GearPair
        In the order of ``build.gears``.

    Raises
    ------
    ModelError
        Naming ``build.gears[k]`` and the field that does not fit the geometry.
    """
    # Kept per mechanism and spec while both live: a check resolves its pairs on load
    # and again for its sweeps, and the pairs key their bodies (`gear_solids`).
    known = _PAIRS.setdefault(mech, weakref.WeakKeyDictionary()).setdefault(spec, {})
    if tol not in known:
        known[tol] = tuple(_resolve_pairs(mech, spec, tol))
    return list(known[tol])


_PAIRS = weakref.WeakKeyDictionary()
"""The resolved pairs of each mechanism, by spec and tolerances (`gear_pairs`)."""


def _resolve_pairs(mech, spec, tol):
    """`gear_pairs` without the cache."""
    rates = fold_schedule(mech, tol).rates
    hinge_play, mesh_play = _play(mech)
    normal = _unit(geometry.newell_normals([mech.flat_faces[mech.root]])[0])
    out = []
    for k, doc in enumerate(spec.gears):
        field = f"build.gears[{k}]"
        coupling = mech.couplings[doc.coupling]
        i, j = (int(h) for h in coupling.hinges)
        pair = pair_geometry(mech, i, j, ratio=coupling.ratio, tol=tol)
        kind = {"spur": "spur", "bevel": "bevel", "remote-bevel": "remote"}.get(pair.kind)
        if kind is None:
            raise ModelError(f"{field}.coupling: hinges {i} and {j} cannot carry a gear pair ({pair.kind})")
        if doc.kind is not None and doc.kind != kind:
            raise ModelError(f"{field}.kind: hinges {i} and {j} make a {kind} pair, not {doc.kind}")
        if kind == "spur" and pair.mesh != "external":
            raise ModelError(f"{field}.kind: hinges {i} and {j} need an internal spur mesh, which is not built")
        zi, zj = _teeth(doc, coupling, field, tol)
        f = pair.face
        other = [int(mech.hinge_faces[h][0]) if int(mech.hinge_faces[h][1]) == f else int(mech.hinge_faces[h][1])
                 for h in (i, j)]
        signs = [1.0 if int(mech.child[h]) == o else -1.0 for h, o in zip((i, j), other)]
        spins = [_unit(mech.axes[h, 1] - mech.axes[h, 0]) for h in (i, j)]
        ends = _hinge_ends(mech, (i, j), f)
        cone_angles = cone_distance = None
        rod_radius = doc.rod_radius
        if kind == "spur":
            a = pair.centre_distance
            m = 2.0 * a / (zi + zj)
            r = (m * zi / 2.0, m * zj / 2.0)
            if doc.module is not None and abs(doc.module - m) > 1e-6 * m:
                raise ModelError(f"{field}.module: hinges {i} and {j} lie {a:.6g} apart, so teeth {zi}:{zj} "
                                 f"need module {m:.6g}, not {doc.module:.6g}")
            if doc.pitch_radius is not None and abs(doc.pitch_radius - r[0]) > 1e-6 * r[0]:
                raise ModelError(f"{field}.pitch_radius: hinges {i} and {j} lie {a:.6g} apart, so teeth "
                                 f"{zi}:{zj} need pitch radius {r[0]:.6g}, not {doc.pitch_radius:.6g}")
            d = spins[0]
            lo, common = _common_span(ends, d)
            width = doc.face_width if doc.face_width is not None else min(10.0 * m, 0.25 * common)
            start = doc.corner_distance if doc.corner_distance is not None else (common - width) / 2.0
            if start + width > common * (1 + 1e-9):
                raise ModelError(f"{field}.face_width: the band ({start:.6g} + {width:.6g}) runs past the "
                                 f"hinges' common length {common:.6g}")
            centre = ends[0][0] + (lo + start + width / 2.0) * d
            toward = [None, None]
            foot = centre + ((ends[1][0] - centre) - ((ends[1][0] - centre) @ d) * d)
            toward[0] = _unit(foot - centre)
            toward[1] = -toward[0]
            origins = [centre, foot]
            axials = spins
            x_ranges = [(-width / 2.0, width / 2.0)] * 2
            r_ranges = [(r[0], r[0]), (r[1], r[1])]
            eps = contact_ratio(r[0], r[1], m)
            rods = [None, None]
        else:
            apex = pair.apex
            axials = []
            for (p, q) in ends:
                far = p if np.linalg.norm(p - apex) > np.linalg.norm(q - apex) else q
                axials.append(_unit(far - apex))
            other_axis = axials[1] if coupling.ratio > 0 else -axials[1]
            shaft = math.acos(float(np.clip(axials[0] @ other_axis, -1.0, 1.0)))
            cones = bevel_cones(shaft, zi, zj)
            cone_angles = (cones.delta1, cones.delta2)
            turn = 1.0 if np.cross(axials[0], other_axis) @ normal >= 0 else -1.0
            line = _rotate_in_plane(axials[0], turn * normal, cones.delta1)
            if doc.module is not None:
                R = doc.module * zj / (2.0 * math.sin(cones.delta2))
            elif doc.pitch_radius is not None:
                R = doc.pitch_radius / math.sin(cones.delta1)
            elif doc.corner_distance is not None:
                R = doc.corner_distance
            elif kind == "bevel":
                R = 0.3 * min(np.linalg.norm(p - q) for p, q in ends)
            else:
                R = 0.5 * pair.apex_reach
            m = 2.0 * R * math.sin(cones.delta2) / zj
            cone_distance = R
            width = doc.face_width if doc.face_width is not None else R / 3.0
            if not width < R:
                raise ModelError(f"{field}.face_width: {width:.6g} must be shorter than the cone distance {R:.6g}")
            r = (R * math.sin(cones.delta1), R * math.sin(cones.delta2))
            if kind == "bevel":
                for h, (p, q), delta in zip((i, j), ends, cone_angles):
                    if R * math.cos(delta) > np.linalg.norm(p - q) * (1 + 1e-9):
                        raise ModelError(f"{field}: the gear on hinge {h} reaches {R * math.cos(delta):.6g} along "
                                         f"its hinge, past the edge's length {np.linalg.norm(p - q):.6g}")
            origins = [apex, apex]
            toward = []
            x_ranges, r_ranges, rods = [], [], []
            for g, (ax, delta) in enumerate(zip((axials[0], axials[1]), cone_angles)):
                toward.append(_unit(line - (line @ ax) * ax))
                x_ranges.append(((R - width) * math.cos(delta), R * math.cos(delta)))
                r_ranges.append(((R - width) * math.sin(delta), R * math.sin(delta)))
                if kind == "remote":
                    near = min(((p - apex) @ ax for p in ends[g]))
                    rods.append((x_ranges[-1][0], near) if near > x_ranges[-1][0] else None)
                else:
                    rods.append(None)
            if kind == "remote":
                rod_radius = rod_radius if rod_radius is not None else 0.5 * min(rr[0] for rr in r_ranges)
            cv = [ri / math.cos(dl) for ri, dl in zip(r, cone_angles)]
            eps = contact_ratio(cv[0], cv[1], m)
        if kind != "remote":
            rod_radius = None
        tangents = [np.cross(s, t) for s, t in zip(spins, toward)]
        kappa = 1.0 if tangents[0] @ tangents[1] >= 0 else -1.0
        play = (hinge_play[i] + mesh_play[doc.coupling] * zj / zi, hinge_play[j] + mesh_play[doc.coupling])
        gears = []
        for g, (h, z) in enumerate(((i, zi), (j, zj))):
            travel = -signs[g] * rates[h]
            window = eps * 2.0 * math.pi / z
            lead = window / 2.0 + play[g]
            if doc.sector_deg is not None:
                span = math.radians(doc.sector_deg[g])
            else:  # the needed span and one spare tooth, at most a whole turn
                span = min(2.0 * math.pi, abs(travel) + 2.0 * lead + 2.0 * math.pi / z)
            sector = (-lead, span - lead) if travel >= 0 else (lead - span, lead)
            gears.append(Gear(h, other[g], int(z), float(r[g]), np.asarray(origins[g], float), axials[g], spins[g],
                              toward[g], signs[g], sector, x_ranges[g], r_ranges[g], rods[g]))
        out.append(GearPair(int(doc.coupling), kind, int(f), tuple(gears), float(m), float(width),
                            None if rod_radius is None else float(rod_radius), cone_angles, cone_distance,
                            float(eps), kappa, tuple(float(p) for p in play)))
    return out


def _arcs(lo, hi, radius, segments, closed):
    """(n, m, 2) polygons of circumscribed arcs (cos, sin scaled), ends on the circle.

    ``lo``, ``hi``, ``radius`` (n,); one facet count and one kind for all: a closed
    ring (``m = segments``) or an open arc (``m = segments + 2``, its two ends on the
    circle, the facets' midpoints between them).
    """
    lo, hi, radius = (np.asarray(x, float)[:, None] for x in (lo, hi, radius))
    if closed:
        step = 2.0 * math.pi / segments
        phi = lo + (np.arange(segments) + 0.5) * step
        scale = radius / math.cos(step / 2.0) * np.ones_like(phi)
    else:
        step = (hi - lo) / segments
        phi = np.concatenate([lo, lo + (np.arange(segments) + 0.5) * step, hi], axis=1)
        scale = np.repeat(radius / np.cos(step / 2.0), segments + 2, axis=1)
        scale[:, [0, -1]] = radius
    return np.stack([np.cos(phi), np.sin(phi)], axis=2) * scale[..., None]


def sector_frustum(origin, axial, e1, e2, x_range, r_range, sector, segments):
    """Closed mesh of a sector of a frustum (a cylinder when the radii agree).

    Parameters
    ----------
    origin, axial, e1, e2 : (3,) float
        Frame: the axis runs along ``axial`` through ``origin``; angles are measured
        from ``e1`` toward ``e2``.
    x_range, r_range : (float, float)
        Axial positions and radii of the two ends.
    sector : (float, float)
        Angular range, radians (a span of 2 pi or more gives a whole frustum).
    segments : int
        Facets along the arc.

    Returns
    -------
    (n, 3, 3) float
        Outward-facing triangles.
    """
    return sector_frusta(*(np.asarray(x, float)[None] for x in (origin, axial, e1, e2, x_range, r_range, sector)),
                         segments)[0]


def sector_frusta(origin, axial, e1, e2, x_range, r_range, sector, segments):
    """`sector_frustum` for many bodies of one facet count at once.

    ``origin``, ``axial``, ``e1``, ``e2`` (n, 3); ``x_range``, ``r_range``,
    ``sector`` (n, 2). Returns (n, k, 3, 3): bodies that are whole frusta and
    sectors have different triangle counts, so one call takes only one kind.
    """
    whole = _whole(sector.T)
    closed = bool(whole.all())
    if not closed and whole.any():
        raise ValueError("sector_frusta: whole frusta and sectors in one call")
    rings, centres = [], []
    for end in (0, 1):
        ring = _arcs(sector[:, 0], sector[:, 1], r_range[:, end], segments, closed)
        centre = origin + x_range[:, end, None] * axial
        rings.append(centre[:, None] + ring[..., :1] * e1[:, None] + ring[..., 1:] * e2[:, None])
        centres.append(centre)
    a, b = rings
    n, m = a.shape[:2]
    k = np.arange(m if closed else m - 1)
    k1 = (k + 1) % m
    c0, c1 = (np.broadcast_to(c[:, None], (n, len(k), 3)) for c in centres)
    tris = [np.stack([c0, a[:, k1], a[:, k]], axis=2), np.stack([c1, b[:, k], b[:, k1]], axis=2),
            np.stack([a[:, k], a[:, k1], b[:, k1]], axis=2), np.stack([a[:, k], b[:, k1], b[:, k]], axis=2)]
    if not closed:
        e0, e1_ = centres
        first, last = a[:, 0], b[:, 0]
        tris.append(np.stack([np.stack([e0, first, last], axis=1), np.stack([e0, last, e1_], axis=1),
                              np.stack([e0, e1_, b[:, -1]], axis=1), np.stack([e0, b[:, -1], a[:, -1]], axis=1)],
                             axis=1))
    out = np.concatenate(tris, axis=1)
    # Orientation: right-handed (e1, e2, axial) gives outward faces; flip otherwise.
    flip = np.einsum("ij,ij->i", np.cross(e1, e2), axial) * (x_range[:, 1] - x_range[:, 0]) < 0
    out[flip] = out[flip][:, :, ::-1]
    return out


def _whole(sector):
    """Whether a sector (lo, hi), or each of many (two arrays), spans a whole turn."""
    return np.asarray(sector[1]) - np.asarray(sector[0]) >= 2.0 * math.pi - 1e-12


def _segments(span, per_turn=SEGMENTS_PER_TURN):
    return max(2, int(math.ceil(per_turn * min(span, 2 * math.pi) / (2 * math.pi))))


COARSE_PER_TURN = 12
"""Facets per turn of the coarse gear bodies a sweep may screen with (`gear_solids`'s ``coarse``)."""


def gear_solids(mech, spec, pairs=None, tip=False, tol=DEFAULT, coarse=False):
    """The solids of every gear body (and rod), carried by their panels.

    Parameters
    ----------
    mech : Mechanism
    spec : BuildSpec
    pairs : list of GearPair, optional
        From `gear_pairs`.
    tip : bool
        Grow every gear's radius by one module (to the tip circle of standard
        teeth, addendum = m), for clearance checks.
    coarse : bool
        Fewer facets (`COARSE_PER_TURN`), each body circumscribed about the fine
        one (radii grown by 1 / cos of the fine facets' half angle), so it holds
        the fine body: a screen that is nearer to everything than the fine bodies,
        never farther.

    Returns
    -------
    list of Solid
        Two (or, for ``remote``, four) per pair, in pair order.
    """
    pairs = gear_pairs(mech, spec, tol) if pairs is None else pairs
    missing = [p for p in pairs if (tip, coarse) not in _SOLIDS.setdefault(p, {})]
    for p, made in zip(missing, _pair_solids(missing, tip, coarse)):
        _SOLIDS[p][(tip, coarse)] = made
    return [s for p in pairs for s in _SOLIDS[p][(tip, coarse)]]


_SOLIDS = weakref.WeakKeyDictionary()
"""The solids of each resolved pair, by (tip, coarse): a pair's bodies depend on it alone."""


def _pair_solids(pairs, tip, coarse):
    """The solids of each pair (`gear_solids`): one list per pair, its gears each followed by its rod.

    Bodies of one facet count and kind (whole or sector) are meshed together
    (`sector_frusta`).
    """
    rows = []  # (pair, gear index, is rod, frame and ranges, segments)
    every = [g for p in pairs for g in p.gears]
    # The third axis of every gear's frame at once.
    across = iter(geometry.cross(np.array([g.spin for g in every], float).reshape(-1, 3),
                                 np.array([g.e1 for g in every], float).reshape(-1, 3)))
    for n, p in enumerate(pairs):
        grow = p.module if tip else 0.0
        for k, g in enumerate(p.gears):
            e2 = next(across)
            span = g.sector[1] - g.sector[0]
            radii = (g.r_range[0] + grow, g.r_range[1] + grow)
            segments = _segments(span)
            if coarse:
                scale = 1.0 / math.cos(min(span, 2 * math.pi) / segments / 2.0)
                radii = (radii[0] * scale, radii[1] * scale)
                segments = _segments(span, COARSE_PER_TURN)
            rows.append((n, k, False, (g.origin, g.axial, g.e1, e2, g.x_range, radii, g.sector), segments))
            if g.rod is not None:
                rows.append((n, k, True, (g.origin, g.axial, g.e1, e2, g.rod, (p.rod_radius, p.rod_radius),
                                          (0.0, 2 * math.pi)), ROD_SEGMENTS))
    meshes = [None] * len(rows)
    groups = {}
    for r, (_, _, _, frame, segments) in enumerate(rows):
        groups.setdefault((segments, _whole(frame[6])), []).append(r)
    for (segments, _), members in groups.items():
        columns = [np.array([rows[r][3][c] for r in members], float) for c in range(7)]
        for r, tris in zip(members, sector_frusta(*columns, segments)):
            meshes[r] = tris
    out = [[] for _ in pairs]
    for (n, k, rod, _, _), tris in zip(rows, meshes):
        p, g = pairs[n], pairs[n].gears[k]
        kind = "rod" if rod else "gear"
        out[n].append(Solid(g.face, f"coupling {p.coupling} {kind} on hinge {g.hinge}", kind, tris, p.coupling,
                            g.hinge))
    return out


def build_solids(mech, spec, tip=False, tol=DEFAULT, coarse=False):
    """Every prism and gear body of a built mechanism (list of `Solid`, panels first; ``coarse`` as for `gear_solids`)."""
    from .prisms import panel_solids

    return panel_solids(mech, spec, tol=tol) + gear_solids(mech, spec, tip=tip, tol=tol, coarse=coarse)


def posed_solid_meshes(mech, spec, schedule, t, solids=None, tol=DEFAULT):
    """Posed triangles of every prism and gear body at many drive values at once.

    Parameters
    ----------
    mech : Mechanism
    spec : BuildSpec
    schedule : Schedule
    t : (T,) float
    solids : list of Solid, optional
        Default `build_solids`.

    Returns
    -------
    triangles : (T, N, 3, 3) float
        Every solid's triangles, concatenated in ``solids`` order.
    owner : (N,) int
        Index into ``solids`` of every triangle.
    solids : list of Solid
    """
    from ..kinematics import poses_at

    solids = build_solids(mech, spec, tol=tol) if solids is None else solids
    tris = np.concatenate([s.triangles for s in solids])
    owner = np.repeat(np.arange(len(solids)), [len(s.triangles) for s in solids])
    faces = np.array([s.face for s in solids])[owner]
    poses = poses_at(mech, schedule, np.atleast_1d(np.asarray(t, float)))  # (T, F, 4, 4)
    posed = np.empty((len(poses),) + tris.shape)
    # One matrix product per carrying face, for all t at once.
    order = np.argsort(faces, kind="stable")
    cuts = np.flatnonzero(np.diff(faces[order])) + 1
    for run in np.split(order, cuts):
        f = faces[run[0]]
        pts = tris[run].reshape(-1, 3)
        moved = pts @ np.swapaxes(poses[:, f, :3, :3], -1, -2) + poses[:, f, None, :3, 3]
        posed[:, run] = moved.reshape(len(poses), len(run), 3, 3)
    return posed, owner, solids
