"""A picture of a study: two criteria against each other, with their Pareto front marked.

Drawn with matplotlib's Figure on its Agg renderer, without pyplot (no window, no display needed); the file
type follows the suffix (PNG, SVG, PDF). Nets that collide are drawn hollow, so a
front that runs through them shows at a glance.
"""

from pathlib import Path

import numpy as np

from ..errors import ModelError
from .rank import CRITERIA, pareto_front
from .table import _atomic


def parse_axes(text):
    """``"diameter,worst_case_gap"`` -> ("diameter", "worst_case_gap")."""
    names = tuple(n.strip() for n in str(text).split(","))
    if len(names) != 2 or not all(names):
        raise ModelError(f"--axes: expected two criteria like diameter,worst_case_gap, not {text!r}")
    for name in names:
        if name not in CRITERIA:
            raise ModelError(f"--axes: unknown criterion {name!r}; choose from {', '.join(CRITERIA)}")
    return names


def front_figure(rows, x, y, title=None, size=(6.4, 4.8)):
    """A matplotlib Figure: criteria ``x`` and ``y`` of every evaluated net, front marked.

    Returns
    -------
    fig : matplotlib.figure.Figure
    front : list of dict
        The rows on the front of (x, y), best first.
    """
    # A bare Figure draws through Agg (or the SVG/PDF writers) without pyplot, so
    # no window and no global backend switch, even inside the desktop app.
    from matplotlib.figure import Figure

    good = [r for r in rows if r["error"] is None and r[x] is not None and r[y] is not None]
    if not good:
        raise ModelError(f"--plot: no evaluated net has both {x} and {y}")
    front = pareto_front(good, [x, y])
    xs = np.array([float(r[x]) for r in good])
    ys = np.array([float(r[y]) for r in good])
    clear = np.array([bool(r["collision_free"]) for r in good])
    fig = Figure(figsize=size, dpi=100)
    ax = fig.add_subplot()
    ax.scatter(xs[clear], ys[clear], s=14, color="#4a7ab5", alpha=0.6, label="folds without collision")
    if (~clear).any():
        ax.scatter(xs[~clear], ys[~clear], s=14, facecolors="none", edgecolors="#b55a4a", alpha=0.7,
                   label="panels collide")
    fx = [float(r[x]) for r in front]
    fy = [float(r[y]) for r in front]
    ax.plot(fx, fy, "-o", color="#222222", markersize=6, linewidth=1.2, label=f"Pareto front ({len(front)} nets)")
    for r in front[:8]:
        ax.annotate(f"net {r['net']}", (float(r[x]), float(r[y])), textcoords="offset points", xytext=(5, 4),
                    fontsize=8)
    ax.set_xlabel(f"{x} ({CRITERIA[x]} is better)")
    ax.set_ylabel(f"{y} ({CRITERIA[y]} is better)")
    ax.set_title(title or f"{len(good)} nets")
    ax.grid(True, alpha=0.3)
    ax.legend(fontsize=8)
    fig.tight_layout()
    return fig, front


def front_svg(rows, x, y, title=None):
    """The same picture as SVG text (for the HTML report), and the front."""
    import io

    fig, front = front_figure(rows, x, y, title)
    out = io.StringIO()
    fig.savefig(out, format="svg")
    text = out.getvalue()
    return text[text.index("<svg"):], front


def plot_front(rows, x, y, path, title=None):
    """Write the picture of `front_figure` to ``path`` (format from the suffix), atomically.

    Returns
    -------
    list of dict
        The rows on the front of (x, y), best first.
    """
    fig, front = front_figure(rows, x, y, title)
    path = Path(path)
    kind = path.suffix.lower().lstrip(".") or "png"
    try:
        _atomic(path, lambda tmp: fig.savefig(tmp, format=kind))
    except (OSError, ValueError) as exc:
        raise ModelError(f"--plot: cannot write {path}: {exc}") from None
    return front
