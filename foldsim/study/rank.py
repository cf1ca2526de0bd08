"""Choosing among a study's nets: criteria, the ranking, the Pareto front, the summary.

A criterion is a column of the study table with a direction: ``collision_free``,
``closes`` and ``ok`` are better true; ``flat_overlap`` is better false; every
number is better small. The ranking is lexicographic in the order the criteria are
given (ties go to the lower net number); the Pareto front is the set of nets that
no other net matches or beats on every chosen criterion while beating on one. Nets
that could not be evaluated are ranked after all others and are never on the front.
"""

import numpy as np

from ..errors import ModelError

CRITERIA = {
    "ok": "max", "collision_free": "max", "closes": "max", "flat_overlap": "min",
    "diameter": "min", "dof": "min", "gear_count": "min", "remote_bevels": "min", "gear_chain": "min",
    "closure_gap": "min", "part_types": "min", "worst_case_gap": "min", "rss_gap": "min", "p95_gap": "min",
}
"""Each criterion (a column name) and whether large (max) or small (min) is better."""

DEFAULT_RANK = "collision_free, worst_case_gap, part_types, diameter"
"""The criteria when none are given (``p95_gap`` replaces ``worst_case_gap`` with --mc)."""


def cell_text(value, missing="-"):
    """A table cell's value as text: yes/no, four significant digits for floats.

    Examples
    --------
    >>> cell_text(True), cell_text(0.123456), cell_text(None), cell_text(None, missing="")
    ('yes', '0.1235', '-', '')
    """
    if value is None:
        return missing
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        return f"{value:.4g}"
    return str(value)


def parse_criteria(text, rows=()):
    """A ``--rank`` string, ``"collision_free, p95_gap, part_types"``, as a list of names.

    Raises
    ------
    ModelError
        For an unknown name, a repeated one, or a column the study did not compute.

    Examples
    --------
    >>> parse_criteria("collision_free,  diameter")
    ['collision_free', 'diameter']
    """
    names = [n.strip() for n in str(text).split(",") if n.strip()]
    if not names:
        raise ModelError("--rank: give at least one criterion, e.g. 'collision_free, part_types, diameter'")
    for name in names:
        if name not in CRITERIA:
            raise ModelError(f"--rank: unknown criterion {name!r}; choose from {', '.join(CRITERIA)}")
        if names.count(name) > 1:
            raise ModelError(f"--rank: {name} is given twice")
        good = [r for r in rows if r["error"] is None]
        if good and all(r[name] is None for r in good):
            hint = " (run the study with --mc N)" if name == "p95_gap" else ""
            raise ModelError(f"--rank: {name} was not computed in this study{hint}")
    return names


def _costs(rows, names):
    """(n, k) float: each row's criteria as costs (smaller is better); NaN where missing."""
    out = np.full((len(rows), len(names)), np.nan)
    for i, row in enumerate(rows):
        for j, name in enumerate(names):
            value = row[name]
            if value is None:
                continue
            value = float(value)
            out[i, j] = -value if CRITERIA[name] == "max" else value
    return out


def ranked(rows, names):
    """Rows best first by the criteria in order; failed rows last, ties by net number."""
    costs = _costs(rows, names)
    failed = np.array([r["error"] is not None for r in rows], bool)
    keys = [np.array([r["net"] for r in rows])]
    for j in reversed(range(len(names))):
        col = costs[:, j]
        keys.append(np.where(np.isnan(col), np.inf, col))
    keys.append(failed)
    order = np.lexsort(keys) if rows else np.zeros(0, int)
    return [rows[i] for i in order]


def pareto_front(rows, names):
    """The nets on the Pareto front of the criteria, in ranking order.

    Examples
    --------
    >>> rows = [{"net": i, "error": None, "diameter": d, "part_types": p}
    ...         for i, (d, p) in enumerate([(3, 4), (4, 2), (4, 4), (5, 1)])]
    >>> [r["net"] for r in pareto_front(rows, ["diameter", "part_types"])]
    [0, 1, 3]
    """
    order = [r for r in ranked(rows, names) if r["error"] is None]
    costs = _costs(order, names)
    costs = np.where(np.isnan(costs), np.inf, costs)
    front = []
    for i in range(len(order)):
        if front:
            kept = costs[front]
            # Rows come in lexicographic order, so only an earlier row can dominate.
            if ((kept <= costs[i]).all(axis=1) & (kept < costs[i]).any(axis=1)).any():
                continue
        front.append(i)
    return [order[i] for i in front]


def summary(rows, names):
    """The `--json` summary: counts, the front's size, the best net per criterion."""
    good = [r for r in rows if r["error"] is None]
    best = {}
    for name in names:
        top = ranked(good, [name, *[n for n in names if n != name]])
        if top and top[0][name] is not None:
            best[name] = {"net": top[0]["net"], "value": top[0][name], "cuts": top[0]["cuts"]}
    return {
        "nets": len(rows), "evaluated": len(good), "failed": len(rows) - len(good),
        "criteria": list(names), "pareto_front": len(pareto_front(rows, names)),
        "best": best,
    }
