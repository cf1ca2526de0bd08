"""Sector coverage: do a pair's teeth stay in mesh over the whole swept range?

Relative to the carrier each gear turns with its hinge, so in the gear's own frame
the pitch point sits at ``psi(t) = -sign * rate * t`` (`foldsim.build.gears.Gear`).
The teeth in mesh at one moment lie along the arc of action, ``eps * p`` long on the
pitch circle, where ``eps`` is the transverse contact ratio of the full gears

    eps = (sqrt(ra1^2 - rb1^2) + sqrt(ra2^2 - rb2^2) - a sin(alpha)) / (pi m cos(alpha))

(Dudley's Handbook of Practical Gear Design; ISO 21771; virtual Tredgold gears for
bevels) and ``p = pi m`` the circular pitch: an angle ``eps * 2 pi / z`` on the gear,
taken here centred on the pitch point (exact for equal gears; for unequal gears the
approach and recess arcs differ slightly). A sector gear only meshes where its
teeth are, so the effective contact ratio is

    eps_eff(t) = eps * |arc of action that both sectors cover| / |arc of action|

With play (hinge play at each gear's hinge and the mesh's backlash, from the file's
``tolerances``, docs/stackup.md) a gear may sit anywhere within ± its play of
nominal, so each sector is taken shorter by its play at both ends. A sector *runs
out* where ``eps_eff`` falls below ``eps``: from there on the last teeth leave the
mesh. The pitch point moves linearly in t, so the t where this starts is exact,
and ``eps_eff`` is concave in t (a difference of a minimum and a maximum of linear
functions, clipped at 0), so its least value over a range lies at one of its ends.
"""

import numpy as np

from ..gearing import fold_schedule
from ..tolerances import DEFAULT
from .gears import gear_pairs


def _arcs(pair, rates):
    """Per gear: pitch-point speed c (psi = c t), half window w, shrunk sector (lo, hi)."""
    out = []
    for g, play in zip(pair.gears, pair.play):
        c = -g.sign * float(rates[g.hinge])
        w = pair.contact_ratio * np.pi / g.teeth
        out.append((c, w, g.sector[0] + play, g.sector[1] - play))
    return out


def effective_contact_ratio(pair, rates, t):
    """The contact ratio the two sectors leave at drive values t.

    Parameters
    ----------
    pair : GearPair
    rates : (H,) float
        The schedule's fold rates.
    t : (T,) float

    Returns
    -------
    (T,) float
        ``pair.contact_ratio`` where both sectors cover the whole arc of action,
        less where they do not, 0 where no tooth pair meshes.
    """
    t = np.atleast_1d(np.asarray(t, float))
    lows, highs = [np.full(len(t), -0.5)], [np.full(len(t), 0.5)]
    for (c, w, lo, hi), sense in zip(_arcs(pair, rates), (1.0, pair.kappa)):
        psi = c * t
        a, b = (lo - psi) / (2 * w), (hi - psi) / (2 * w)
        if sense < 0:
            a, b = -b, -a
        lows.append(a)
        highs.append(b)
    covered = np.clip(np.min(highs, axis=0) - np.max(lows, axis=0), 0.0, None)
    return pair.contact_ratio * covered


def full_mesh_range(pair, rates):
    """The range of t over which both sectors cover the whole arc of action.

    Returns
    -------
    (float, float)
        ``(t_lo, t_hi)``, possibly infinite; ``t_lo > t_hi`` when there is none.
    """
    t_lo, t_hi = -np.inf, np.inf
    for c, w, lo, hi in _arcs(pair, rates):
        # lo + w <= c t <= hi - w
        if c == 0:
            if not lo + w <= 0 <= hi - w:
                return np.inf, -np.inf
            continue
        a, b = sorted(((lo + w) / c, (hi - w) / c))
        t_lo, t_hi = max(t_lo, a), min(t_hi, b)
    return t_lo, t_hi


def sector_coverage(mech, spec, schedule=None, t_from=0.0, t_to=1.0, pairs=None, samples=21, tol=DEFAULT):
    """Sector coverage of every gear pair over a swept range (the ``sector_coverage`` report key).

    Parameters
    ----------
    mech : Mechanism
    spec : BuildSpec
    schedule : Schedule, optional
    t_from, t_to : float
        The swept range; the sweep runs from ``t_from`` to ``t_to``.
    pairs : list of GearPair, optional
    samples : int
        How many evenly spaced t the contact ratio is listed at.

    Returns
    -------
    list of dict
        Per pair: ``coupling``, ``contact_ratio_full`` (of whole gears),
        ``min_contact_ratio`` (over the range), ``runs_out_at_t`` (the first t
        of the sweep where a sector no longer covers the arc of action; None
        when it never does), ``full_mesh_t`` ([t_lo, t_hi], null for an
        unbounded end), ``t`` and ``contact_ratio`` (the samples).
    """
    schedule = schedule or fold_schedule(mech, tol)
    pairs = gear_pairs(mech, spec, tol) if pairs is None else pairs
    rates = schedule.rates
    t = np.linspace(t_from, t_to, max(2, samples))
    slack = tol.t_resolution * 1e-3
    rows = []
    for p in pairs:
        ratio = effective_contact_ratio(p, rates, t)
        ends = effective_contact_ratio(p, rates, [t_from, t_to])
        t_lo, t_hi = full_mesh_range(p, rates)
        out = None
        if t_lo > t_hi:
            out = t_from
        elif t_to >= t_from:
            out = t_from if t_lo > t_from + slack else (t_hi if t_hi < t_to - slack else None)
        else:
            out = t_from if t_hi < t_from - slack else (t_lo if t_lo > t_to + slack else None)
        rows.append({"coupling": p.coupling, "contact_ratio_full": p.contact_ratio,
                     "min_contact_ratio": float(min(ratio.min(), ends.min())),
                     "runs_out_at_t": None if out is None else float(out),
                     "full_mesh_t": [None if not np.isfinite(x) else float(x) + 0.0 for x in (t_lo, t_hi)]
                     if t_lo <= t_hi else None,
                     "t": [float(x) for x in t], "contact_ratio": [float(x) for x in ratio]})
    return rows
