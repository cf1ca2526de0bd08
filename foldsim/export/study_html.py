"""A net study's section of the review report: the front and the top nets' flat patterns.

`foldsim export MODEL -o report.html --study STUDY` adds it after the part types:
the study's counts and criteria, the Pareto front of the plot's two criteria as an
inline SVG scatter (`foldsim.study.plot`), a table of the top nets, and each top
net's flat pattern (`foldsim.export.svg`, labels off), every net built from its cut
list as `foldsim study --pick` builds it. Elements a script may look for:
``#study``, ``svg#study-front``, ``tr.study-net`` rows with ``data-net``,
``figure.study-pattern`` with ``data-net``.
"""

import html
import re

from ..study import table
from ..study.rank import DEFAULT_RANK, cell_text, parse_criteria, pareto_front, ranked, summary

TOP = 3
"""Top nets drawn by default."""


def _e(value):
    return html.escape(str(value), quote=True)


def section(study, top=TOP, criteria=None):
    """The study section as HTML text.

    Parameters
    ----------
    study : path
        A study directory (`foldsim study`).
    top : int
        Top nets listed and drawn.
    criteria : str, optional
        Ranking criteria (default as `foldsim study`).
    """
    from ..design import build, shape_args
    from ..study.plot import front_svg
    from . import svg

    plan = table.read_plan(study)
    spec = table.plan_spec(plan)
    rows = table.read_table(study)
    default = DEFAULT_RANK.replace("worst_case_gap", "p95_gap") if spec.mc else DEFAULT_RANK
    names = parse_criteria(criteria or default, rows)
    order = [r for r in ranked(rows, names) if r["error"] is None]
    info = summary(rows, names)
    front = pareto_front(rows, names)
    y = "p95_gap" if spec.mc else "worst_case_gap"
    out = ['<section id="study">', f"<h2>Net study: {_e(plan['shape'])}</h2>",
           f"<p>{info['nets']:,} nets ({_e(plan['nets'])}), {info['evaluated']:,} evaluated, "
           f"{info['failed']:,} failed; ranked by {_e(', '.join(names))}; Pareto front of these criteria: "
           f"{len(front)} nets. Study directory: <code>{_e(study)}</code>.</p>"]
    if order:
        picture, _ = front_svg(rows, "diameter", y, title=f"{plan['shape']}: diameter against {y}")
        out.append(picture.replace("<svg", '<svg id="study-front"', 1))
    head = ["net", "ok", *names, "cuts"]
    out.append("<table><tr>" + "".join(f"<th>{_e(h)}</th>" for h in head) + "</tr>")
    for r in order[:top]:
        cells = [cell_text(r[h]) for h in head]
        out.append(f'<tr class="study-net" data-net="{r["net"]}">' + "".join(f"<td>{_e(c)}</td>" for c in cells)
                   + "</tr>")
    out.append("</table>")
    out.append('<div class="renders">')
    for r in order[:top]:
        mech, _ = build(shape_args(spec.shape, spec.size, spec.units, cut=r["cuts"], root=r["root"],
                                   gears=spec.gears))
        pattern = svg.build(mech, labels=False)
        pattern = pattern[pattern.index("<svg"):]
        # true scale in a printed pattern; here a picture 320 px wide (the viewBox keeps the shape)
        pattern = re.sub(r'width="[^"]*mm" height="[^"]*mm"', 'width="320"', pattern, count=1)
        out.append(f'<figure class="study-pattern" data-net="{r["net"]}">{pattern}'
                   f"<figcaption>net {r['net']}: flat pattern</figcaption></figure>")
    out.append("</div></section>")
    return "\n".join(out)
