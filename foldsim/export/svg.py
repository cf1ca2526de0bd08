"""SVG flat pattern at true scale, for cutting, scoring and assembling.

The drawing is the flat layout (t = 0) seen from the side that ends up outside,
in the root face's plane (`common.plane_frame`). The ``viewBox`` is in model
units and ``width``/``height`` are in millimetres, so a viewer or cutter that
honours them draws the pattern at its real size; the scale bar lets anyone check
a print.

Every element carries a class and an id so tools can pick lines by kind:

============  ==========================================  =========================
class         what                                        style
============  ==========================================  =========================
``panel``     a face, filled (``id="face-F"``)            no stroke; root tinted blue
``outline``   free edge: cut through, meets nothing       solid black, 0.25 mm
``cut``       cut edge: cut through, meets the edge with  solid red, 0.35 mm
              the same ``cE`` label when closed
              (``id="cut-E-S"``, S = side 0 or 1)
``hinge``     fold line (``id="hinge-H"``)                dashed blue 2 mm / 1 mm, 0.25 mm
``tab``       outline of a glue/registration tab          solid black, 0.25 mm
``tab-fold``  where a tab folds off its panel             dotted blue 0.5 / 0.5 mm
``bevel``     with a ``build`` object: where each thick   dashed grey 1 / 0.5 mm
              panel's bevelled sides meet its far face
              (``id="bevel-F"``)
============  ==========================================  =========================

With a ``build`` object (docs/build.md) the cut outline is the panel's outline
on the side drawn, and the ``bevel`` line shows how far the tapered sides
(Tachi 2011; Lang et al. 2018) run in across the thickness: the cut's bevel.

Face numbers are drawn at each panel's centroid, ``hH`` at each hinge's
midpoint, ``cE`` just inside each copy of cut edge E.

``seam_gap`` trims every copy of every cut edge inward by half the gap, so two
edges that meet exactly in the model leave that gap once folded (for parts whose
edges must not bind). ``tabs`` adds a trapezoidal tab of that width on side 0 of
every cut edge, outside its panel; tabs are not checked against other panels.
"""

import math
from xml.sax.saxutils import escape

import numpy as np

from ..errors import FoldsimError
from . import common
from .common import fmt

STYLE = {
    "panel": "fill:#f6ecd6;stroke:none",
    "panel root": "fill:#dde6f2;stroke:none",
    "outline": "fill:none;stroke:#000000;stroke-width:{w25};stroke-linecap:round",
    "cut": "fill:none;stroke:#c0392b;stroke-width:{w35};stroke-linecap:round",
    "hinge": "fill:none;stroke:#1f5fa8;stroke-width:{w25};stroke-dasharray:{d2} {d1}",
    "tab": "fill:#fbf7ee;stroke:#000000;stroke-width:{w25};stroke-linejoin:round",
    "tab-fold": "fill:none;stroke:#1f5fa8;stroke-width:{w25};stroke-dasharray:{d05} {d05}",
    "bevel": "fill:none;stroke:#7f7f7f;stroke-width:{w25};stroke-dasharray:{d1} {d05}",
}


def edge_kinds(mech):
    """What each edge of each face is in the flat pattern.

    Returns
    -------
    list of list of tuple
        ``kinds[f][k]`` for the edge from vertex k to k + 1 of face f:
        ``("hinge", h)``, ``("cut", e, s)`` (copy on side s of cut edge e) or
        ``("free",)``.
    """
    eps = 1e-6 * mech.size
    kinds = [[("free",)] * len(p) for p in mech.flat_faces]

    def locate(f, a, b):
        poly = mech.flat_faces[f]
        nxt = np.roll(poly, -1, axis=0)
        same = (np.linalg.norm(poly - a, axis=1) <= eps) & (np.linalg.norm(nxt - b, axis=1) <= eps)
        back = (np.linalg.norm(poly - b, axis=1) <= eps) & (np.linalg.norm(nxt - a, axis=1) <= eps)
        hit = np.flatnonzero(same | back)
        return int(hit[0]) if len(hit) else None

    for h in range(mech.n_hinges):
        for f in (mech.parent[h], mech.child[h]):
            k = locate(f, *mech.axes[h])
            if k is not None:
                kinds[f][k] = ("hinge", h)
    for e, faces in enumerate(mech.cut_faces):
        for s, f in enumerate(faces):
            k = locate(f, *mech.cut_points[e, s])
            if k is not None and kinds[f][k][0] == "free":
                kinds[f][k] = ("cut", e, s)
    return kinds


def _inset(poly, offsets):
    """Move each edge of a counter-clockwise polygon inward by ``offsets[k]``."""
    n = len(poly)
    d = np.roll(poly, -1, axis=0) - poly
    d = d / np.linalg.norm(d, axis=1, keepdims=True)
    inward = np.column_stack([-d[:, 1], d[:, 0]])
    base = poly + offsets[:, None] * inward  # a point on each moved edge line
    out = np.empty_like(poly)
    for k in range(n):
        i = k - 1  # edges i (into vertex k) and k (out of it)
        det = d[i, 0] * d[k, 1] - d[i, 1] * d[k, 0]
        if abs(det) < 1e-9:
            out[k] = poly[k] + offsets[k] * inward[k]
            continue
        r = base[k] - base[i]
        s = (r[0] * d[k, 1] - r[1] * d[k, 0]) / det
        out[k] = base[i] + s * d[i]
    return out


def _nice_length(target):
    """The 1-2-5 step length nearest below ``target`` (positive).

    Examples
    --------
    >>> _nice_length(37.0), _nice_length(0.9)
    (20.0, 0.5)
    """
    power = 10.0 ** math.floor(math.log10(target))
    for step in (5.0, 2.0, 1.0):
        if step * power <= target:
            return step * power
    return power


def build(mech, seam_gap=0.0, tabs=0.0, labels=True):
    """The flat pattern as SVG text.

    Parameters
    ----------
    mech : Mechanism
    seam_gap : float
        Gap left between the two copies of every cut edge once folded (model
        units); each copy is trimmed inward by half of it.
    tabs : float
        Width of a tab on side 0 of every cut edge (model units); 0 for none.
    labels : bool
        Draw face, hinge and cut-edge numbers.

    Returns
    -------
    str
    """
    for value, name in ((seam_gap, "--seam-gap"), (tabs, "--tabs")):
        if not (np.isfinite(value) and value >= 0):
            raise FoldsimError(f"{name}: must be a non-negative length, not {value}")
    mm = common.unit_scale(mech.units, "mm")  # millimetres per model unit
    kinds = edge_kinds(mech)
    flat = common.flat_2d(mech)
    polys = []
    for f, poly in enumerate(flat):
        offsets = np.array([seam_gap / 2 if kind[0] == "cut" else 0.0 for kind in kinds[f]])
        polys.append(_inset(poly, offsets) if seam_gap > 0 else poly)
        if seam_gap > 0 and _signed_area(polys[-1]) <= 0:
            raise FoldsimError(f"--seam-gap: {seam_gap:g} {mech.units} trims face {f} away")
    tab_polys = []
    if tabs > 0:
        for f, poly in enumerate(polys):
            for k, kind in enumerate(kinds[f]):
                if kind[0] == "cut" and kind[2] == 0:
                    a, b = poly[k], poly[(k + 1) % len(poly)]
                    length = np.linalg.norm(b - a)
                    d = (b - a) / length
                    out = np.array([d[1], -d[0]])
                    c = min(tabs, 0.45 * length)
                    tab_polys.append((kind[1], np.array([a, b, b - c * d + tabs * out, a + c * d + tabs * out])))
    every = np.concatenate(polys + [p for _, p in tab_polys])
    lo, hi = every.min(axis=0), every.max(axis=0)
    extent = hi - lo
    margin = 10.0 / mm
    font = 4.0 / mm  # largest panel label; legend text is 3 mm
    legend_w, legend_h = 75.0 / mm, 36.0 / mm
    width = max(extent[0] + 2 * margin, legend_w + 2 * margin)
    height = extent[1] + 2 * margin + legend_h

    def xy(p):
        p = np.asarray(p, float)
        return np.column_stack([p[..., 0] - lo[0] + margin, hi[1] - p[..., 1] + margin]).reshape(p.shape)

    def path(points, closed):
        q = xy(points)
        d = "M " + " L ".join(f"{fmt(x)} {fmt(y)}" for x, y in q)
        return d + (" Z" if closed else "")

    per_mm = 1.0 / mm
    style_vars = {"w25": fmt(0.25 * per_mm), "w35": fmt(0.35 * per_mm), "d2": fmt(2 * per_mm),
                  "d1": fmt(per_mm), "d05": fmt(0.5 * per_mm)}
    css = "\n".join(f"    .{name.replace(' ', '.')} {{{rule.format(**style_vars)}}}" for name, rule in STYLE.items())
    out = [
        '<?xml version="1.0" encoding="UTF-8"?>',
        f'<svg xmlns="http://www.w3.org/2000/svg" version="1.1" width="{fmt(width * mm, 4)}mm" '
        f'height="{fmt(height * mm, 4)}mm" viewBox="0 0 {fmt(width)} {fmt(height)}">',
        f"  <title>{escape(mech.name or 'mechanism')}: flat pattern</title>",
        f"  <desc>Flat pattern at true scale, seen from the outside; viewBox in {escape(mech.units)}, "
        "page size in mm. Solid black: cut (free edge). Solid red: cut edge that meets the edge with the "
        "same c-label when folded. Dashed blue: fold line (hinge). Dotted blue: tab fold. "
        f"Seam gap {fmt(seam_gap)} {escape(mech.units)}, tab width {fmt(tabs)} {escape(mech.units)}.</desc>",
        f"  <style>\n{css}\n    text {{font-family:sans-serif;fill:#222222}}\n  </style>",
        '  <g id="panels">',
    ]
    for f, poly in enumerate(polys):
        cls = "panel root" if f == mech.root else "panel"
        out.append(f'    <path id="face-{f}" class="{cls}" data-face="{f}" d="{path(poly, True)}"/>')
    out.append("  </g>")
    if tab_polys:
        out.append('  <g id="tabs">')
        for e, poly in tab_polys:
            out.append(f'    <path id="tab-{e}" class="tab" data-edge="{e}" d="{path(poly[[1, 2, 3, 0]], False)}"/>')
            out.append(f'    <path id="tab-fold-{e}" class="tab-fold" data-edge="{e}" d="{path(poly[:2], False)}"/>')
        out.append("  </g>")
    groups = {"outline": [], "cut": [], "hinge": []}
    drawn_hinges = set()
    tabbed = {e for e, _ in tab_polys}
    for f, poly in enumerate(polys):
        for k, kind in enumerate(kinds[f]):
            seg = poly[[k, (k + 1) % len(poly)]]
            if kind[0] == "hinge":
                if kind[1] in drawn_hinges:
                    continue
                drawn_hinges.add(kind[1])
                groups["hinge"].append(f'    <path id="hinge-{kind[1]}" class="hinge" data-hinge="{kind[1]}" '
                                       f'd="{path(seg, False)}"/>')
            elif kind[0] == "cut":
                if kind[1] in tabbed and kind[2] == 0:
                    continue  # the tab's fold line stands here
                groups["cut"].append(f'    <path id="cut-{kind[1]}-{kind[2]}" class="cut" data-edge="{kind[1]}" '
                                     f'data-face="{f}" d="{path(seg, False)}"/>')
            else:
                groups["outline"].append(f'    <path class="outline" data-face="{f}" data-side="{k}" '
                                         f'd="{path(seg, False)}"/>')
    bevels = _bevel_outlines(mech)
    if bevels is not None:
        out.append('  <g id="bevels">')
        for f, ring in enumerate(bevels):
            out.append(f'    <path id="bevel-{f}" class="bevel" data-face="{f}" d="{path(ring, True)}"/>')
        out.append("  </g>")
    for name in ("outline", "cut", "hinge"):
        out.append(f'  <g id="{name}s">')
        out.extend(groups[name])
        out.append("  </g>")
    if labels:
        out.append('  <g id="labels">')
        out.extend(_labels(mech, polys, kinds, font, xy))
        out.append("  </g>")
    out.extend(_scale_and_legend(mech, mm, margin, extent, font, width))
    out.append("</svg>")
    return "\n".join(out) + "\n"


def _bevel_outlines(mech):
    """Each thick panel's far-face outline in pattern coordinates, or None without a ``build`` object."""
    from ..build.prisms import edge_closing_angles, panel_rings
    from ..build.spec import build_spec

    spec = build_spec(mech)
    if spec is None:
        return None
    origin, u, v = common.plane_frame(mech)
    closing = edge_closing_angles(mech)
    out = []
    for f, poly in enumerate(mech.flat_faces):
        rings = panel_rings(mech, spec, f, closing)
        # The level farthest from the file's polygon (the far face of the panel).
        far = max(rings, key=lambda r: float(np.abs(np.linalg.norm(r - poly, axis=1)).max()))
        out.append(np.column_stack([(far - origin) @ u, (far - origin) @ v]))
    return out


def _signed_area(poly):
    x, y = poly[:, 0], poly[:, 1]
    return 0.5 * float(np.sum(x * np.roll(y, -1) - np.roll(x, -1) * y))


def _centroid(poly):
    x, y = poly[:, 0], poly[:, 1]
    cross = x * np.roll(y, -1) - np.roll(x, -1) * y
    area = cross.sum() / 2
    return np.array([((x + np.roll(x, -1)) * cross).sum(), ((y + np.roll(y, -1)) * cross).sum()]) / (6 * area)


def _text(point, body, size, cls, extra=""):
    x, y = point
    return (f'    <text class="{cls}" x="{fmt(x)}" y="{fmt(y)}" font-size="{fmt(size)}" '
            f'text-anchor="middle" dominant-baseline="central"{extra}>{escape(body)}</text>')


def _labels(mech, polys, kinds, font, xy):
    lines = []
    done = set()
    for f, poly in enumerate(polys):
        area = abs(_signed_area(poly))
        lines.append(_text(xy(_centroid(poly)), str(f), min(font, 0.35 * np.sqrt(area)), "face-label",
                           f' data-face="{f}" font-weight="bold"'))
        for k, kind in enumerate(kinds[f]):
            a, b = poly[k], poly[(k + 1) % len(poly)]
            length = float(np.linalg.norm(b - a))
            d = (b - a) / length
            inward = np.array([-d[1], d[0]])
            size = min(0.6 * font, 0.25 * length)
            if kind[0] == "hinge" and kind[1] not in done:
                done.add(kind[1])
                lines.append(_text(xy((a + b) / 2 + 0.9 * size * inward), f"h{kind[1]}", size, "hinge-label",
                                   f' data-hinge="{kind[1]}" style="fill:#1f5fa8"'))
            elif kind[0] == "cut":
                lines.append(_text(xy((a + b) / 2 + 0.9 * size * inward), f"c{kind[1]}", size, "cut-label",
                                   f' data-edge="{kind[1]}"'))
    return lines


def _scale_and_legend(mech, mm, margin, extent, font, width):
    """Scale bar and line legend below the pattern (page coordinates)."""
    text = 3.0 / mm
    bar_mm = _nice_length(min(max(0.5 * extent[0] * mm, 10.0), 0.8 * (width - 2 * margin) * mm))
    bar = bar_mm / mm
    y0 = extent[1] + 2 * margin
    x0 = margin
    tick = 1.5 / mm
    label = f"{fmt(bar_mm, 4)} mm"
    if mech.units.strip().lower() not in ("mm", "millimetre", "millimeter"):
        label += f" = {fmt(bar, 6)} {mech.units}"
    out = [
        '  <g id="scale">',
        f'    <path id="scale-bar" class="scale-bar" data-length-mm="{fmt(bar_mm, 6)}" '
        f'd="M {fmt(x0)} {fmt(y0)} H {fmt(x0 + bar)}" style="fill:none;stroke:#000000;'
        f'stroke-width:{fmt(0.5 / mm)}"/>',
        f'    <path class="scale-ticks" d="M {fmt(x0)} {fmt(y0 - tick)} V {fmt(y0 + tick)} '
        f'M {fmt(x0 + bar)} {fmt(y0 - tick)} V {fmt(y0 + tick)}" style="fill:none;stroke:#000000;'
        f'stroke-width:{fmt(0.25 / mm)}"/>',
        _text((x0 + bar / 2, y0 + 4.0 / mm), label, text, "scale-label"),
        "  </g>",
        '  <g id="legend">',
    ]
    seg = 10.0 / mm
    for row, (cls, words) in enumerate((("outline", "cut (free edge)"),
                                        ("cut", "cut edge: meets the same c-label"),
                                        ("hinge", "fold line (hinge)"), ("tab-fold", "tab fold"))):
        y = y0 + (10.0 + 6.0 * row) / mm
        out.append(f'    <path class="{cls} legend" d="M {fmt(x0)} {fmt(y)} H {fmt(x0 + seg)}"/>')
        out.append(f'    <text x="{fmt(x0 + seg + 2.0 / mm)}" y="{fmt(y)}" font-size="{fmt(text)}" '
                   f'dominant-baseline="central">{escape(words)}</text>')
    out.append("  </g>")
    return out


def write(mech, path, **options):
    """Write the flat pattern atomically; options as for `build`.

    Returns
    -------
    str
        One line saying what was written.
    """
    text = build(mech, **options)
    common.write_atomic_text(path, text)
    return f"flat pattern of {mech.n_faces} panels at true scale"
