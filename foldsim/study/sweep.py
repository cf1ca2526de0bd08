"""The collision sweep with an early exit: whether panels collide, and where first.

A study needs, per net, whether a collision exists over the motion and the drive
value and face pair where the first one starts, not every interval. The collision
sweep's own early exit gives it
(`foldsim.analysis.collision.collision_intervals` with ``first_only=True``): once a
collision is found, stretches of t after the earliest one are dropped, so its
earliest interval is exactly the one the full sweep reports first (the smallest
``first_t``, ties to the smallest face pair); `tests/test_study.py` compares the
two. A net that does not collide costs the same as the full sweep.
"""

from ..analysis.collision import collision_intervals
from ..tolerances import DEFAULT


def first_collision(mech, schedule, t_from=0.0, t_to=1.0, clearance=0.0, tol=DEFAULT, pan=None):
    """The earliest collision over the motion, or None.

    Parameters
    ----------
    mech : Mechanism
    schedule : Schedule
    t_from, t_to : float
        Range of the drive parameter swept.
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
    found = collision_intervals(mech, schedule, t_from, t_to, clearance, tol, pan=pan, first_only=True)
    if not found:
        return None
    first = min(found, key=lambda c: (c["first_t"], c["faces"]))
    return {"faces": list(first["faces"]), "first_t": float(first["first_t"])}
