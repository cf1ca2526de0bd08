"""What the stack-up reports: the full run, contributor rankings, candidate comparison, text."""

import math
from dataclasses import dataclass

import numpy as np

from ..gearing import fold_schedule
from .inputs import DEFAULT_SAMPLES, DEFAULT_TIMES, KINDS, N_KINDS, PlaySpec, _closure_index, play_spec
from .linear import LinearResult, linear_stackup
from .sampling import MonteCarloResult, monte_carlo
from .sources import longest_gear_chain, longest_hinge_chain


def _element_label(mech, index):
    n_h = mech.n_hinges
    if index < n_h:
        a, b = mech.hinge_faces[index].tolist()
        return {"element": "hinge", "index": int(index), "faces": [int(a), int(b)]}
    c = index - n_h
    return {"element": "mesh", "index": int(c), "hinges": [int(h) for h in mech.couplings[c].hinges]}


def _ranking(mech, variance, element_bound, rows=None, top=None):
    """Hinges and meshes ranked by their share of the variance over the given edges."""
    n_h = mech.n_hinges
    rows = slice(None) if rows is None else rows
    var = variance[rows]
    var = var[None] if var.ndim == 1 else var
    bound = element_bound[rows]
    bound = bound[None] if bound.ndim == 1 else bound
    kinds = var[:, :N_KINDS * n_h].reshape(len(var), n_h, N_KINDS).sum(axis=0)   # (H, 6)
    totals = np.concatenate([kinds.sum(axis=1), var[:, N_KINDS * n_h:].sum(axis=0)])
    whole = totals.sum()
    order = [int(i) for i in np.argsort(-totals, kind="stable") if totals[i] > 0]
    out = []
    for i in order[:top]:
        row = _element_label(mech, i)
        row["share"] = float(totals[i] / whole)
        row["worst_case"] = float(bound[:, i].max())
        if i < n_h:
            row["by_kind"] = {k: float(v / totals[i]) for k, v in zip(KINDS, kinds[i]) if v > 0}
        out.append(row)
    return out


def _largest_gaps(mc, lin, i):
    """Largest p95, sampled and worst-case gap over the cut edges at time index ``i``."""
    return {
        "p95_gap": float(mc.gap_p95[i].max(initial=0.0)),
        "max_gap": float(mc.gap_max[i].max(initial=0.0)),
        "worst_case_gap": float(lin.gap_bound[i].max(initial=0.0)),
    }


@dataclass(frozen=True)
class Stackup:
    """Everything `foldsim stackup` reports about one mechanism.

    Attributes
    ----------
    mech : Mechanism
    spec : PlaySpec
    mc : MonteCarloResult
    linear : LinearResult
    """

    mech: object
    spec: PlaySpec
    mc: MonteCarloResult
    linear: LinearResult

    @property
    def closure(self):
        """Index of t = 1 in the times."""
        return _closure_index(self.mc.times)

    @property
    def p95_gap(self):
        """Largest 95th-percentile closure gap over the cut edges."""
        return float(self.mc.gap_p95[self.closure].max(initial=0.0))

    def contributors(self, top=None):
        """Hinges and meshes ranked by share of the summed closure-gap variance."""
        return _ranking(self.mech, self.linear.variance, self.linear.element_bound, top=top)

    def to_dict(self, top=10):
        """JSON-ready report (docs/stackup.md lists the keys)."""
        mech, mc, lin, c = self.mech, self.mc, self.linear, self.closure
        units = mech.units
        edges = []
        for e, (a, b) in enumerate(mech.cut_faces.tolist()):
            edges.append({
                "faces": [int(a), int(b)], "ideal": float(mc.ideal_gaps[c, e]),
                "median": float(mc.gap_median[c, e]), "p95": float(mc.gap_p95[c, e]),
                "max": float(mc.gap_max[c, e]), "worst_case": float(lin.gap_bound[c, e]),
                "rss": float(lin.gap_rss[c, e]),
                "contributors": _ranking(mech, lin.variance, lin.element_bound, rows=e, top=3),
            })
        faces = [{"face": f, "median": float(mc.tip_median[c, f]), "p95": float(mc.tip_p95[c, f]),
                  "max": float(mc.tip_max[c, f]), "worst_case": float(lin.tip_bound[c, f]),
                  "rss": float(lin.tip_rss[c, f])} for f in range(mech.n_faces)]
        motion = []
        for i, t in enumerate(mc.times):
            motion.append({
                "t": float(t),
                "ideal_max_gap": float(mc.ideal_gaps[i].max(initial=0.0)),
                **_largest_gaps(mc, lin, i),
                "p95_tip": float(mc.tip_p95[i].max(initial=0.0)),
                "worst_case_tip": float(lin.tip_bound[i].max(initial=0.0)),
            })
        return {
            "model": mech.name, "units": units, "faces": mech.n_faces, "hinges": mech.n_hinges,
            "cut_edges": len(mech.cut_faces), "process": self.spec.process,
            "samples": mc.samples, "seed": mc.seed if isinstance(mc.seed, int) else None, "dist": mc.dist,
            "longest_hinge_chain": longest_hinge_chain(mech), "longest_gear_chain": longest_gear_chain(mech),
            "bounds": _bounds_summary(self.spec),
            **_largest_gaps(mc, lin, c),
            "edges": edges, "panels": faces, "motion": motion,
            "contributors": self.contributors(top),
        }


def _bounds_summary(spec):
    """Smallest and largest ± bound of each kind (angles in degrees)."""
    out = {}
    for k, kind in enumerate(KINDS):
        col = spec.hinge[:, k]
        scale = 180.0 / math.pi if k < 3 else 1.0
        key = f"{kind}_deg" if k < 3 else kind
        out[key] = [float(col.min() * scale), float(col.max() * scale)] if len(col) else [0.0, 0.0]
    mesh = spec.mesh * 180.0 / math.pi
    out["backlash_deg"] = [float(mesh.min()), float(mesh.max())] if len(mesh) else [0.0, 0.0]
    return out


def stackup(mech, spec=None, process=None, samples=DEFAULT_SAMPLES, seed=0, dist="uniform",
            times=DEFAULT_TIMES, chunk=None, keep=False, progress=None):
    """Run the Monte Carlo and the linearised stack-up of one mechanism.

    Parameters
    ----------
    mech : Mechanism
    spec : PlaySpec, optional
        Default: `play_spec(mech, process)`.
    process : str, optional
    samples, seed, dist, times, chunk, keep, progress
        As for `monte_carlo`.

    Returns
    -------
    Stackup
    """
    spec = play_spec(mech, process) if spec is None else spec
    schedule = fold_schedule(mech)
    mc = monte_carlo(mech, spec, samples, seed, dist, times, chunk=chunk, keep=keep, schedule=schedule,
                     progress=progress)
    lin = linear_stackup(mech, spec, mc.times, dist, schedule=schedule)
    return Stackup(mech, spec, mc, lin)


def compare(mechs, names=None, process=None, specs=None, samples=DEFAULT_SAMPLES, seed=0, dist="uniform"):
    """Candidate nets or gear layouts of one shape, side by side.

    Every candidate gets the same seed, so the comparison is not muddied by
    sampling noise more than it must be (the sources differ between layouts, so
    the draws cannot be matched one to one).

    Parameters
    ----------
    mechs : sequence of Mechanism
    names : sequence of str, optional
        Row labels (default: each mechanism's name, or its position).
    process : str, optional
        Preset for every candidate (replaces the one each file names).
    specs : sequence of PlaySpec, optional
        Explicit bounds per candidate instead.
    samples, seed, dist
        As for `monte_carlo`; closure (t = 1) only.

    Returns
    -------
    list of dict
        One row per candidate: ``name``, ``faces``, ``hinges``, ``cut_edges``,
        ``longest_hinge_chain`` (hinges), ``longest_gear_chain`` (meshes),
        ``p95_gap``, ``max_gap``, ``worst_case_gap``, ``rss_gap``, ``p95_tip``,
        ``worst_edge`` (face pair with the largest p95 gap), ``tighten_first``.
    """
    rows = []
    for i, mech in enumerate(mechs):
        spec = specs[i] if specs is not None else play_spec(mech, process)
        result = stackup(mech, spec, samples=samples, seed=seed, dist=dist, times=(1.0,))
        c = result.closure
        p95 = result.mc.gap_p95[c]
        worst = int(np.argmax(p95)) if len(p95) else None
        top = result.contributors(top=1)
        rows.append({
            "name": names[i] if names is not None else (mech.name or str(i)),
            "faces": mech.n_faces, "hinges": mech.n_hinges, "cut_edges": len(mech.cut_faces),
            "longest_hinge_chain": longest_hinge_chain(mech),
            "longest_gear_chain": longest_gear_chain(mech),
            **_largest_gaps(result.mc, result.linear, c),
            "rss_gap": float(result.linear.gap_rss[c].max(initial=0.0)),
            "p95_tip": float(result.mc.tip_p95[c].max(initial=0.0)),
            "worst_edge": mech.cut_faces[worst].tolist() if worst is not None else None,
            "tighten_first": top[0] if top else None,
        })
    return rows


def _label(row):
    if row is None:
        return "-"
    if row["element"] == "hinge":
        return f"hinge {row['index']} (faces {row['faces'][0]}-{row['faces'][1]})"
    return f"mesh {row['index']} (hinges {row['hinges'][0]}->{row['hinges'][1]})"


def format_comparison(rows, units="mm"):
    """Text table of `compare` rows.

    Examples
    --------
    >>> print(format_comparison([{"name": "a", "faces": 6, "longest_hinge_chain": 3,
    ...     "longest_gear_chain": 2, "p95_gap": 0.5, "worst_case_gap": 0.9, "rss_gap": 0.3,
    ...     "tighten_first": None}]))
    candidate  faces  hinge chain  gear chain  p95 gap mm  worst case mm  rss mm  tighten first
    a              6            3           2         0.5            0.9     0.3  -
    """
    head = (f"{'candidate':<9}  {'faces':>5}  {'hinge chain':>11}  {'gear chain':>10}  "
            f"{'p95 gap ' + units:>10}  {'worst case ' + units:>13}  {'rss ' + units:>6}  tighten first")
    lines = [head]
    for r in rows:
        lines.append(f"{r['name']:<9}  {r['faces']:>5}  {r['longest_hinge_chain']:>11}  "
                     f"{r['longest_gear_chain']:>10}  {r['p95_gap']:>10.4g}  {r['worst_case_gap']:>13.4g}  "
                     f"{r['rss_gap']:>6.4g}  {_label(r['tighten_first'])}")
    return "\n".join(lines)


def format_report(report, edges=10, panels=5):
    """Human-readable text of `Stackup.to_dict`."""
    u = report["units"]
    b = report["bounds"]

    def span(key):
        lo, hi = b[key]
        return f"{lo:.3g}" if abs(hi - lo) <= 1e-12 * max(1.0, abs(hi)) else f"{lo:.3g}..{hi:.3g}"

    lines = [
        (f"{report['model'] or 'mechanism'}: {report['faces']} faces, {report['hinges']} hinges, "
         f"{report['cut_edges']} cut edges; longest hinge chain {report['longest_hinge_chain']}, "
         f"longest gear chain {report['longest_gear_chain']}"),
        (f"process {report['process'] or '(file values)'}; {report['samples']} samples, {report['dist']}, "
         f"seed {report['seed']}"),
        (f"± bounds: play {span('play_deg')}°, tilt {span('tilt_across_deg')}° / {span('tilt_normal_deg')}°, "
         f"axial {span('axial')} {u}, shift {span('shift_across')} / {span('shift_normal')} {u}, "
         f"backlash {span('backlash_deg')}°"),
        "",
        (f"closure (t = 1): p95 gap {report['p95_gap']:.4g} {u}, largest sampled {report['max_gap']:.4g} {u}, "
         f"worst case {report['worst_case_gap']:.4g} {u}"),
    ]
    rows = sorted(report["edges"], key=lambda e: -e["p95"])
    if rows:
        lines.append(f"  cut edge   median     p95       max       worst case  rss       tighten first ({u})")
        for e in rows[:edges]:
            first = e["contributors"][0] if e["contributors"] else None
            share = f" {first['share']:.0%}" if first else ""
            name = f"{e['faces'][0]}-{e['faces'][1]}"
            lines.append(f"  {name:<9}  {e['median']:<9.4g}  {e['p95']:<8.4g}  {e['max']:<8.4g}  "
                         f"{e['worst_case']:<10.4g}  {e['rss']:<8.4g}  {_label(first)}{share}")
        if len(rows) > edges:
            lines.append(f"  ... {len(rows) - edges} more cut edges (--json lists all)")
    lines.append("")
    lines.append(f"along the motion ({u}):")
    lines.append("  t      ideal gap  p95 gap    worst case  p95 tip    worst tip")
    for m in report["motion"]:
        lines.append(f"  {m['t']:<5.3g}  {m['ideal_max_gap']:<9.4g}  {m['p95_gap']:<9.4g}  "
                     f"{m['worst_case_gap']:<10.4g}  {m['p95_tip']:<9.4g}  {m['worst_case_tip']:.4g}")
    lines.append("")
    far = sorted(report["panels"], key=lambda p: -p["p95"])[:panels]
    lines.append(f"far panels at closure (largest vertex displacement, {u}):")
    for p in far:
        lines.append(f"  face {p['face']:<4}  p95 {p['p95']:<9.4g}  max {p['max']:<9.4g}  "
                     f"worst case {p['worst_case']:.4g}")
    lines.append("")
    lines.append("tighten first (share of the summed closure-gap variance):")
    if not report["contributors"]:
        lines.append("  nothing contributes (no cut edges, or no play)")
    for i, r in enumerate(report["contributors"], 1):
        kinds = ""
        if r.get("by_kind"):
            kinds = "  (" + ", ".join(f"{k} {v:.0%}" for k, v in
                                       sorted(r["by_kind"].items(), key=lambda kv: -kv[1]) if v >= 0.005) + ")"
        lines.append(f"  {i:>2}. {_label(r):<32} {r['share']:>6.1%}  worst case {r['worst_case']:.4g} {u}{kinds}")
    return "\n".join(lines)
