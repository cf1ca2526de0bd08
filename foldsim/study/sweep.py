"""The collision sweep with an early exit: whether panels collide, and where first.

A study needs, per net, whether a collision exists over the motion and the drive
value and face pair where the first one starts, not every interval
(`foldsim.analysis.collision.collision_intervals` gives all of them). This runs the
same conservative-advancement refinement (same grid, candidates, separations and
halving, through that module's own helpers) but drops every open stretch of t that
starts at or after the earliest collision found so far: such a stretch cannot hold
an earlier one. What is left is refined exactly as the full sweep refines it, so the
first collision found is the one the full sweep reports first (the smallest
``first_t``, ties to the smallest face pair); `tests/test_study.py` compares the two.
A net that does not collide costs the same as the full sweep.

It reads that module's private `_Evaluator` and `_swept_candidates` and repeats
its starting grid (`_grid`); a change to the sweep there must be mirrored here,
and the comparison test says when it is not.
"""

import numpy as np

from ..analysis.collision import _Evaluator, _swept_candidates, panels
from ..tolerances import DEFAULT


def _grid(mech, ev, lo_t, hi_t):
    n_steps = int(np.clip(np.ceil((hi_t - lo_t) * ev.speed.max() / (0.25 * mech.size)), 16, 1024))
    return np.unique(np.concatenate([np.linspace(lo_t, hi_t, n_steps + 1),
                                     [x for x in (-1.0, 0.0, 1.0) if lo_t < x < hi_t]]))


def first_collision(mech, schedule, t_from=0.0, t_to=1.0, clearance=0.0, tol=DEFAULT, pan=None):
    """The earliest collision over the motion, or None.

    Parameters
    ----------
    mech : Mechanism
    schedule : Schedule
    t_from, t_to : float
        Range of the drive parameter swept (``t_from < t_to``).
    clearance : float
    tol : Tolerances
    pan : Panels, optional

    Returns
    -------
    dict or None
        ``{"faces": [a, b], "first_t": float}``, as the first entry of
        `collision_intervals` ordered by ``first_t`` would give it. A pair that
        touches only at exactly t = 0 is a flat-layout overlap and is not counted.
    """
    pan = pan or panels(mech, tol)
    lo_t, hi_t = sorted((float(t_from), float(t_to)))
    if hi_t == lo_t:
        return None
    ev = _Evaluator(mech, schedule, pan, clearance, tol)
    grid = _grid(mech, ev, lo_t, hi_t)
    cand = _swept_candidates(mech, pan, ev, grid, ev.poses(grid))
    pairs = cand[:, 1:]
    t0, t1 = grid[cand[:, 0]], grid[cand[:, 0] + 1]
    rate = ev.rates(pairs)
    sep0, hit0 = ev.evaluate(t0, pairs, rate * (t1 - t0))
    sep1, hit1 = ev.evaluate(t1, pairs, rate * (t1 - t0))
    best = None   # (first_t, a, b)
    resolution = tol.t_resolution / 2
    while len(pairs):
        both = hit0 & hit1
        for rows, start in ((both, t0), (hit0 & ~hit1, t0), (hit1 & ~hit0, t1)):
            for i in np.flatnonzero(rows):
                # A stretch that only touches at exactly t = 0 is a flat overlap
                # (`collision_intervals` drops it too), unless it goes on past 0.
                if start[i] == 0.0 and not (both[i] and t1[i] > 0.0):
                    continue
                key = (float(start[i]), int(pairs[i, 0]), int(pairs[i, 1]))
                best = key if best is None or key < best else best
        open_ = ~both & (sep0 + sep1 <= rate * (t1 - t0)) & (t1 - t0 > resolution)
        if best is not None:
            open_ &= t0 <= best[0]
        pairs, t0, t1, rate = pairs[open_], t0[open_], t1[open_], rate[open_]
        sep0, hit0, sep1, hit1 = sep0[open_], hit0[open_], sep1[open_], hit1[open_]
        mid = 0.5 * (t0 + t1)
        sep_m, hit_m = ev.evaluate(mid, pairs, rate * (mid - t0))
        pairs, rate = np.concatenate([pairs, pairs]), np.concatenate([rate, rate])
        t0, t1 = np.concatenate([t0, mid]), np.concatenate([mid, t1])
        sep0, sep1 = np.concatenate([sep0, sep_m]), np.concatenate([sep_m, sep1])
        hit0, hit1 = np.concatenate([hit0, hit_m]), np.concatenate([hit_m, hit1])
    if best is None:
        return None
    return {"faces": [best[1], best[2]], "first_t": best[0]}
