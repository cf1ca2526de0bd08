"""The design review report: one self-contained HTML file.

It holds the verdict of `report.check` and what it rests on: a model
summary, pictures of the posed mechanism at a few drive values (inline SVG from
`render`), the collision intervals, the closure gaps with a gap-versus-t plot
(inline SVG), the hinge table, the part types when the check reports them, and
a short section of cautions. No script, no external file, no web font: it opens
the same anywhere, and prints.

Elements a script may look for: ``#verdict`` (class ``ok`` or ``problems``),
``#problems`` (one ``li`` per problem), ``tr.collision`` rows with
``data-faces="a-b"``, ``tr.cut-edge`` rows with ``data-edge``, ``svg.render``
pictures with ``data-t``, ``svg#gap-plot``, ``#cautions``.
"""

import html
import math

import numpy as np

from .. import __version__
from ..analysis.collision import colliding_pairs
from ..report import check
from ..gearing import fold_schedule
from . import common, render, tables
from .common import fmt

PALETTE = ["#1f77b4", "#d62728", "#2ca02c", "#9467bd", "#ff7f0e", "#17becf", "#8c564b", "#e377c2",
           "#7f7f7f", "#bcbd22"]

CAUTIONS = [
    "Moving assemblies have pinch points: keep fingers, hair and loose clothing clear of hinges and "
    "of closing panels, above all when the mechanism is driven by a motor or a spring.",
    "This report checks an idealised model: rigid panels of zero thickness and exact hinges. Real "
    "panels have thickness, hinges have play, and parts deflect under load; allow for them.",
    "Printed, cut and moulded parts vary in strength and tolerances with the process, the material "
    "and the machine. Test real parts before relying on them.",
    "Defer to the manufacturer's data for materials, fasteners, gears and drives, and to the rules "
    "that apply where the product is made and used (for example on toys, or on machinery guarding).",
]

CSS = """
body{font-family:system-ui,sans-serif;margin:2em auto;max-width:1100px;padding:0 1em;color:#222;line-height:1.4}
h1{font-size:1.6em;margin-bottom:.2em} h2{border-bottom:1px solid #ccc;padding-bottom:.2em;margin-top:1.6em}
table{border-collapse:collapse;margin:.5em 0} th,td{border:1px solid #ccc;padding:.25em .6em;text-align:left}
th{background:#f3f3f3} td.num{text-align:right;font-variant-numeric:tabular-nums}
#verdict{font-size:1.3em;font-weight:bold;padding:.5em .8em;border-radius:4px;display:inline-block}
#verdict.ok{background:#e3f4e1;color:#1b5e20} #verdict.problems{background:#fde2e1;color:#b71c1c}
.renders{display:flex;flex-wrap:wrap;gap:1em} figure{margin:0} figcaption{text-align:center;font-size:.9em}
.bad{color:#b71c1c;font-weight:bold} .good{color:#1b5e20}
#cautions{background:#fff8e1;border:1px solid #f0c36d;padding:.5em 1em;border-radius:4px}
footer{margin-top:2em;font-size:.85em;color:#666}
"""


def _e(value):
    return html.escape(str(value), quote=True)


def _table(head, rows, row_attrs=None):
    """An HTML table; ``rows`` hold already-escaped cell HTML."""
    out = ["<table>", "<thead><tr>" + "".join(f"<th>{_e(h)}</th>" for h in head) + "</tr></thead>", "<tbody>"]
    for i, row in enumerate(rows):
        attrs = row_attrs[i] if row_attrs else ""
        out.append(f"<tr{attrs}>" + "".join(row) + "</tr>")
    out.append("</tbody></table>")
    return "\n".join(out)


def _num(x, digits=4):
    return f'<td class="num">{_e(f"{x:.{digits}g}" if isinstance(x, float) else x)}</td>'


def _td(x):
    return f"<td>{_e(x)}</td>"


def gap_plot(t, gaps, tolerance, units, width=640, height=300):
    """Closure gap of every cut edge against t, as an ``<svg id="gap-plot">`` element.

    Parameters
    ----------
    t : (T,) float
    gaps : (T, E) float
    tolerance : float
        Drawn as a dashed line.
    units : str
    width, height : int

    Returns
    -------
    str
    """
    left, right, top, bottom = 70, 150, 20, 45
    pw, ph = width - left - right, height - top - bottom
    t0, t1 = float(np.min(t)), float(np.max(t))
    y_max = float(max(np.max(gaps, initial=0.0), tolerance)) * 1.05 or 1.0
    ticks = _ticks(0.0, y_max)
    y_max = max(y_max, ticks[-1])

    def sx(v):
        return left + (v - t0) / ((t1 - t0) or 1.0) * pw

    def sy(v):
        return top + ph - v / y_max * ph

    out = [f'<svg xmlns="http://www.w3.org/2000/svg" id="gap-plot" width="{width}" height="{height}" '
           f'viewBox="0 0 {width} {height}" role="img" font-family="sans-serif" font-size="11">',
           "<title>closure gap of every cut edge against the drive t</title>",
           f'<rect width="{width}" height="{height}" fill="#ffffff"/>',
           f'<rect x="{left}" y="{top}" width="{pw}" height="{ph}" fill="#ffffff" stroke="#444444"/>']
    for v in ticks:
        y = sy(v)
        out.append(f'<line x1="{left - 4}" y1="{fmt(y, 2)}" x2="{left + pw}" y2="{fmt(y, 2)}" stroke="#e0e0e0"/>')
        out.append(f'<text x="{left - 6}" y="{fmt(y, 2)}" text-anchor="end" dominant-baseline="central">'
                   f"{_e(f'{v:.3g}')}</text>")
    for v in _ticks(t0, t1):
        x = sx(v)
        out.append(f'<line x1="{fmt(x, 2)}" y1="{top + ph}" x2="{fmt(x, 2)}" y2="{top + ph + 4}" stroke="#444444"/>')
        out.append(f'<text x="{fmt(x, 2)}" y="{top + ph + 16}" text-anchor="middle">{_e(f"{v:g}")}</text>')
    out.append(f'<text x="{left + pw / 2}" y="{height - 6}" text-anchor="middle">drive t</text>')
    out.append(f'<text x="14" y="{top + ph / 2}" text-anchor="middle" '
               f'transform="rotate(-90 14 {top + ph / 2})">gap ({_e(units)})</text>')
    ty = sy(tolerance)
    out.append(f'<line class="tolerance" x1="{left}" y1="{fmt(ty, 2)}" x2="{left + pw}" y2="{fmt(ty, 2)}" '
               'stroke="#000000" stroke-dasharray="5 3"/>')
    for e in range(gaps.shape[1]):
        colour = PALETTE[e % len(PALETTE)]
        pts = " ".join(f"{fmt(sx(a), 2)},{fmt(sy(b), 2)}" for a, b in zip(t, gaps[:, e]))
        out.append(f'<polyline class="gap" data-edge="{e}" points="{pts}" fill="none" stroke="{colour}" '
                   'stroke-width="1.5"/>')
    lx = left + pw + 12
    entries = [(PALETTE[e % len(PALETTE)], f"cut edge {e}", "") for e in range(gaps.shape[1])][:16]
    entries.append(("#000000", "tolerance", ' stroke-dasharray="5 3"'))
    for i, (colour, words, dash) in enumerate(entries):
        y = top + 8 + 15 * i
        out.append(f'<line x1="{lx}" y1="{y}" x2="{lx + 18}" y2="{y}" stroke="{colour}" stroke-width="1.5"{dash}/>')
        out.append(f'<text x="{lx + 24}" y="{y}" dominant-baseline="central">{_e(words)}</text>')
    out.append("</svg>")
    return "\n".join(out)


def _ticks(lo, hi, count=5):
    """Round tick values covering [lo, hi]."""
    if hi <= lo:
        return [lo]
    raw = (hi - lo) / count
    power = 10 ** math.floor(math.log10(raw))
    step = next(s * power for s in (1, 2, 2.5, 5, 10) if s * power >= raw)
    first = math.ceil(lo / step - 1e-9) * step
    out = []
    v = first
    while v <= hi + 1e-9 * step:
        out.append(round(v, 12))
        v += step
    if out[-1] < hi - 1e-9 * step:
        out.append(round(v, 12))
    return out


def _part_types(value):
    """Render the check's ``part_types``: groups of faces that are one part (any other shape as given)."""
    if isinstance(value, list) and all(isinstance(g, list) and all(isinstance(f, int) for f in g) for g in value):
        return (f"<p>{len(value)} distinct part(s) make the {sum(map(len, value))} panels.</p>"
                + _table(["part type", "panels", "count"],
                         [[_td(i + 1), _td(", ".join(map(str, g))), _num(len(g))] for i, g in enumerate(value)],
                         [f' class="part-type" data-faces="{",".join(map(str, g))}"' for g in value]))
    if isinstance(value, dict):
        return _table(["part", "type"], [[_td(k), _td(v)] for k, v in value.items()])
    if isinstance(value, list) and value and all(isinstance(r, dict) for r in value):
        keys = list(dict.fromkeys(k for r in value for k in r))
        return _table(keys, [[_td(r.get(k, "")) for k in keys] for r in value])
    if isinstance(value, list):
        return "<ul>" + "".join(f"<li>{_e(v)}</li>" for v in value) + "</ul>"
    return f"<p>{_e(value)}</p>"


def build(mech, t_from=0.0, t_to=1.0, frames=41, views=None, clearance=0.0, gap_tol=None, sheet=False,
          report=None, study=None):
    """The review report as HTML text.

    Parameters
    ----------
    mech : Mechanism
    t_from, t_to : float
        Drive range swept by the check and plotted.
    frames : int
        Drive values sampled for the gap plot.
    views : sequence of float, optional
        Drive values pictured; default ``t_from``, the middle, ``t_to``.
    clearance, gap_tol, sheet
        Passed to `report.check`.
    report : dict, optional
        A check report already computed with these options.
    study : path, optional
        A net study (`foldsim study`) whose front and top nets' flat patterns are
        added (`study_html.section`).

    Returns
    -------
    str
    """
    report = report or check(mech, t_from=t_from, t_to=t_to, gap_tol=gap_tol, clearance=clearance, sheet=sheet)
    schedule = fold_schedule(mech)
    views = [t_from, 0.5 * (t_from + t_to), t_to] if views is None else list(views)
    units = mech.units
    name = mech.name or "mechanism"
    body = [f"<h1>Design review: {_e(name)}</h1>",
            f"<p>foldsim {_e(__version__)} &middot; drive t from {t_from:g} to {t_to:g} "
            "(0 flat, 1 closed, &minus;1 closed the other way)</p>"]

    # Verdict.
    body.append("<h2>Verdict</h2>")
    if report["ok"]:
        body.append('<p id="verdict" class="ok">OK: every check holds</p>')
    else:
        body.append(f'<p id="verdict" class="problems">PROBLEMS: {len(report["problems"])} found</p>')
    body.append('<ul id="problems">' + "".join(f"<li>{_e(p)}</li>" for p in report["problems"]) + "</ul>")

    # Summary.
    rows = [("model", name), ("units", units), ("source state", report["state"]),
            ("panels (faces)", report["faces"]), ("hinges", report["hinges"]),
            ("root face (fixed)", report["root"]), ("drive hinge", report["drive"]),
            ("schedule", report["schedule"]), ("degrees of freedom", report["dof"]),
            ("free hinges", ", ".join(map(str, report["free_hinges"])) or "none"),
            ("locked coupling cycles", "; ".join(str(c) for c in report["locked_cycles"]) or "none"),
            ("couplings (gear pairs)", len(mech.couplings)), ("cut edges", len(mech.cut_faces)),
            ("size (closed bounding-box diagonal)", f"{mech.size:.4g} {units}"),
            ("clearance", f"{report['clearance']:g} {units}"),
            ("flat layout overlaps itself", "yes: " + ", ".join(f"{a}-{b}" for a, b in report["flat_overlap_pairs"])
             if report["flat_overlap"] else "no")]
    body.append("<h2>Model</h2>")
    body.append(_table(["item", "value"], [[_td(k), _td(v)] for k, v in rows]))

    # Renders.
    body.append("<h2>Pictures</h2>")
    body.append("<p>Orthographic view from front-right-above with the root panel as the floor, panels drawn "
                "far to near. "
                "Warm: a panel's outside face; cool: its inside. Red outline: the panel collides at that t.</p>")
    cam = render.camera(up=render.panels_up(mech, t_to if abs(t_to) >= abs(t_from) else t_from))
    sample_t = np.unique(np.concatenate([np.linspace(t_from, t_to, 9), views]))
    box = render.screen_box(mech, cam, common.poses(mech, sample_t, schedule))
    body.append('<div class="renders">')
    for t in views:
        pose = common.poses(mech, [t], schedule)[0]
        hits = colliding_pairs(mech, pose, clearance=report["clearance"])
        picture = render.render(mech, pose, cam, box, highlight=np.unique(hits), caption=f"{name} at t = {t:g}")
        picture = picture.replace('class="render"', f'class="render" data-t="{t:g}"', 1)
        note = f"; colliding: {', '.join(f'{a}-{b}' for a, b in hits)}" if len(hits) else ""
        body.append(f"<figure>{picture}<figcaption>t = {t:g}{_e(note)}</figcaption></figure>")
    body.append("</div>")

    # Collisions.
    body.append("<h2>Collisions</h2>")
    collisions = report["collisions"]
    if collisions:
        body.append(f'<p class="bad">{len(collisions)} colliding stretch(es) over t in '
                    f'[{report["t_range"][0]:g}, {report["t_range"][1]:g}] (ends accurate to 1e-3 in t).</p>')
        body.append(_table(
            ["faces", "first t", "last t"],
            [[_td(f"{c['faces'][0]} and {c['faces'][1]}"), _num(c["first_t"]), _num(c["last_t"])] for c in collisions],
            [f' class="collision" data-faces="{c["faces"][0]}-{c["faces"][1]}"' for c in collisions]))
    else:
        body.append(f'<p class="good">No panels collide over t in [{report["t_range"][0]:g}, '
                    f'{report["t_range"][1]:g}].</p>')

    # Closure.
    closure = report["closure"]
    body.append("<h2>Closure</h2>")
    body.append(f"<p>At t = 1 the largest cut-edge gap is {closure['max_gap']:.4g} {_e(units)} "
                f"(tolerance {closure['tolerance']:.4g} {_e(units)}): "
                + ('<span class="good">every cut edge meets</span>' if closure["meets"]
                   else '<span class="bad">some cut edges stay open</span>') + ".</p>")
    if closure["edges"]:
        body.append(_table(
            ["cut edge", "faces", f"gap at t = 1 ({units})", "meets"],
            [[_td(e), _td(f"{d['faces'][0]}-{d['faces'][1]}"), _num(d["gap"]), _td("yes" if d["meets"] else "NO")]
             for e, d in enumerate(closure["edges"])],
            [f' class="cut-edge" data-edge="{e}"' for e in range(len(closure["edges"]))]))
        t_plot = common.drive_samples(t_from, t_to, frames) if t_from != t_to else np.array([t_from])
        _, gaps = tables.motion_table(mech, t_plot, schedule)
        body.append(gap_plot(t_plot, gaps, closure["tolerance"], units))
    else:
        body.append("<p>The model has no cut edges.</p>")

    # Hinges.
    body.append("<h2>Hinges</h2>")
    body.append(_table(
        ["hinge", "faces", "parent", "child", "closes at (deg)", "reaches at t = 1 (deg)", "couplings"],
        [[_td(r["hinge"]), _td(f"{r['faces'][0]}-{r['faces'][1]}"), _td(r["parent"]), _td(r["child"]),
          _num(r["closed_angle_deg"], 6), _num(r["end_angle_deg"], 6),
          _td(", ".join(map(str, r["couplings"])) or "-")] for r in report["hinge_table"]]))

    if report.get("part_types") is not None:
        body.append("<h2>Part types</h2>")
        body.append(_part_types(report["part_types"]))

    if study is not None:
        from .study_html import section

        body.append(section(study))

    body.append('<h2>Cautions</h2>\n<div id="cautions"><ul>'
                + "".join(f"<li>{_e(c)}</li>" for c in CAUTIONS) + "</ul></div>")
    body.append(f"<footer>Written by foldsim {_e(__version__)}. Check options: t from {t_from:g} to {t_to:g}, "
                f"clearance {report['clearance']:g} {_e(units)}, gap tolerance {closure['tolerance']:.4g} "
                f"{_e(units)}, sheet {'yes' if sheet else 'no'}.</footer>")
    return ("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
            f"<title>Design review: {_e(name)}</title>\n<style>{CSS}</style>\n</head>\n<body>\n"
            + "\n".join(body) + "\n</body>\n</html>\n")


def write(mech, path, **options):
    """Write the report atomically; options as for `build`.

    Returns
    -------
    str
        One line saying what was written, with the verdict.
    """
    report = check(mech, t_from=options.get("t_from", 0.0), t_to=options.get("t_to", 1.0),
                   gap_tol=options.get("gap_tol"), clearance=options.get("clearance", 0.0),
                   sheet=options.get("sheet", False))
    text = build(mech, report=report, **options)
    common.write_atomic_text(path, text)
    verdict = "OK" if report["ok"] else "PROBLEMS: " + "; ".join(report["problems"])
    return f"review report; verdict {verdict}"


__all__ = ["CAUTIONS", "build", "gap_plot", "write"]
