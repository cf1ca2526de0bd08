"""Hinge stops: which hinges pass their stop inside the swept range.

Fold angles are linear in the drive t (`foldsim.gearing`), so a hinge passes its
stop on one side of ``t* = stop / rate`` and the overrun is largest at an end of
the swept range.
"""

import numpy as np


def stop_overruns(spec, schedule, t_from=0.0, t_to=1.0):
    """How far every hinge passes its stop over a swept range of t.

    Parameters
    ----------
    spec : BuildSpec
    schedule : Schedule
    t_from, t_to : float

    Returns
    -------
    list of dict
        One per hinge: ``hinge``, ``stop_deg``, ``overrun_deg`` (0 when it stays
        short of its stop) and ``at_t`` (the first t of the sweep, going from
        ``t_from`` to ``t_to``, past the stop; None when it never passes it).

    Examples
    --------
    A flap closing at 90° with its stop at 80°, swept from flat to closed:

    >>> from types import SimpleNamespace
    >>> spec = SimpleNamespace(stops=np.radians([80.0]))
    >>> row = stop_overruns(spec, SimpleNamespace(rates=np.radians([90.0])))[0]
    >>> round(row["overrun_deg"], 9), round(row["at_t"], 6)
    (10.0, 0.888889)
    """
    rows = []
    ends = np.array([t_from, t_to], float)
    for h, (stop, rate) in enumerate(zip(np.asarray(spec.stops, float), np.asarray(schedule.rates, float))):
        side = 1.0 if stop >= 0 else -1.0
        over = side * (rate * ends - stop)
        overrun = float(max(over.max(), 0.0))
        at = None
        if overrun > 0:
            if over[0] > 0:
                at = float(t_from)
            else:
                at = float(stop / rate)
        rows.append({"hinge": h, "stop_deg": float(np.degrees(stop)), "overrun_deg": float(np.degrees(overrun)),
                     "at_t": at})
    return rows
