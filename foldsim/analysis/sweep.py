"""The collision sweep over the motion: conservative advancement on a fine grid.

The method is the one `reference.collision_intervals` implements (see
`foldsim.analysis.collision` and docs/cli.md): for every candidate pair and stretch
[t0, t1] of t, a separation s >= 0 at both ends and a bound L on its rate; a
stretch with s(t0) + s(t1) > L (t1 - t0) cannot hold a contact, any other is
halved until it is shorter than half the reporting resolution. What differs is how
little work it takes to get there:

- The start grid is the reference's, halved until a typical panel moves about its
  own size in one step (at most `MAX_STEPS` steps). Swept boxes then stay close to
  the panels, so the candidates are about the pairs of neighbours, not every pair
  that some long stretch of motion brings near.
- Candidates come from a 3-axis spatial hash of the swept boxes
  (`spatialhash.box_pairs_batched`), all stretches at once, in blocks of bounded
  memory.
- The boxes and the bounding-sphere centres at the grid values are computed once
  and reused by every stretch that ends there; each (grid value, pair) is evaluated
  once, though two stretches share it.
- Distances are lazy: a stretch whose sphere gaps at both ends are positive and add
  up to more than L (t1 - t0) is settled without any triangle test; the exact test
  runs only at the ends of the others, and only where the sphere gap is below the
  stretch's need, as in the reference.
- Poses and triangle temporaries are made in blocks (`POSE_BUDGET`,
  `narrowphase.CHUNK`), so peak memory grows with the model, not with the number
  of drive values.
"""

import numpy as np

from ..gearing import fold_angles
from ..geometry import transform_points
from ..kinematics import common_depth, face_poses, speed_profile
from ..tolerances import DEFAULT
from . import spatialhash
from .narrowphase import pair_state
from .panels import _face_boxes, _in_sorted, _keys, panels

MAX_STEPS = 4096
"""Most start-grid steps over the swept range."""

POSE_BUDGET = 2_000_000
"""Pose matrix entries (4 x 4 per face per t) held at once."""


class Evaluator:
    """Separation and collision state of face pairs at drive values, in bounded blocks."""

    def __init__(self, mech, schedule, pan, clearance, tol, stats=None):
        self.mech, self.schedule, self.pan = mech, schedule, pan
        self.clearance = clearance
        self.eps = tol.contact * mech.size
        self.profile = speed_profile(mech, schedule.rates)
        self.speed = self.profile[:, 0]
        self.pivot_rate = pan.pivot_path.astype(float) @ np.abs(schedule.rates)
        self.chunk = max(1, POSE_BUDGET // (16 * mech.n_faces))
        self.stats = stats if stats is not None else {}
        self.stats.setdefault("t_values", 0)
        self.stats.setdefault("pair_tests", 0)

    def poses(self, t):
        """(T, F, 4, 4) poses at drive values t (T,)."""
        self.stats["t_values"] += len(t)
        return face_poses(self.mech, fold_angles(self.schedule, t))

    def rates(self, pairs):
        """(n,) bound on d(separation)/dt for face pairs (n, 2)."""
        keys, first, back = np.unique(_keys(pairs, self.mech.n_faces), return_index=True,
                                      return_inverse=True)
        unique_pairs = np.sort(pairs[first], axis=1)
        depth = common_depth(self.mech, unique_pairs)
        linear = (self.profile[unique_pairs[:, 0], depth] + self.profile[unique_pairs[:, 1], depth])
        is_pivot, pos = _in_sorted(keys, self.pan.pivot_keys)
        out = np.where(is_pivot, self.pivot_rate[pos] if len(self.pivot_rate) else 0.0, linear)
        return out[back], is_pivot[back]

    def gap(self, centre, pairs, frame):
        """Sphere gap (less the clearance) of pairs at the centres ``centre[frame]``."""
        d = centre[frame, pairs[:, 0]] - centre[frame, pairs[:, 1]]
        return (np.sqrt((d * d).sum(axis=1)) - self.pan.radius[pairs].sum(axis=1) - self.clearance)

    def state(self, poses, frame, pairs):
        """Exact separation and collision flag of pairs at ``poses[frame]``."""
        self.stats["pair_tests"] += len(pairs)
        return pair_state(self.mech, self.pan, poses, frame, pairs, self.clearance, self.eps)

    def evaluate(self, t, pairs, need, pivot):
        """Separation (n,) and collision flag (n,) of face pairs (n, 2) at t (n,).

        Where the panels' bounding spheres are already ``need`` (n,) apart, that gap
        is the separation (a lower bound is all the advancement needs) and the exact
        test is skipped; pivoting pairs (``pivot``) always take the exact test.
        """
        times, t_index = np.unique(t, return_inverse=True)
        sep = np.empty(len(pairs))
        hit = np.zeros(len(pairs), bool)
        order = np.argsort(t_index, kind="stable")
        bounds = np.searchsorted(t_index[order], np.arange(0, len(times) + self.chunk, self.chunk))
        for k, (s, e) in enumerate(zip(bounds[:-1], bounds[1:])):
            if s == e:
                continue
            rows = order[s:e]
            poses = self.poses(times[k * self.chunk:(k + 1) * self.chunk])
            frame = t_index[rows] - k * self.chunk
            centre = transform_points(poses[frame[:, None], pairs[rows]], self.pan.centre[pairs[rows]])
            d = centre[:, 0] - centre[:, 1]
            gap = np.sqrt((d * d).sum(axis=1)) - self.pan.radius[pairs[rows]].sum(axis=1) - self.clearance
            far = (gap >= need[rows]) & ~pivot[rows]
            sep[rows[far]] = gap[far]
            near = rows[~far]
            if len(near):
                sep[near], hit[near] = self.state(poses, frame[~far], pairs[near])
        return sep, hit


def _grid(mech, pan, speed, lo_t, hi_t):
    """Start grid: the reference's steps, halved until a typical panel moves its own size."""
    span = hi_t - lo_t
    n_steps = int(np.clip(np.ceil(span * speed.max() / (0.25 * mech.size)), 16, 1024))
    size = float(np.median(2.0 * pan.radius)) or mech.size
    typical = float(np.quantile(speed, 0.75))
    while n_steps * 2 <= MAX_STEPS and span * typical / n_steps > size:
        n_steps *= 2
    return np.unique(np.concatenate([np.linspace(lo_t, hi_t, n_steps + 1),
                                     [x for x in (-1.0, 0.0, 1.0) if lo_t < x < hi_t]]))


def _grid_geometry(ev, grid):
    """Face boxes lo, hi (T, F, 3) and sphere centres (T, F, 3) at every grid value."""
    n, f = len(grid), ev.mech.n_faces
    lo, hi, centre = np.empty((n, f, 3)), np.empty((n, f, 3)), np.empty((n, f, 3))
    step = max(1, ev.chunk // max(1, int(np.ceil(len(ev.pan.tri_face) / f))))
    for k in range(0, n, step):
        poses = ev.poses(grid[k:k + step])
        lo[k:k + step], hi[k:k + step] = _face_boxes(ev.pan, poses)
        centre[k:k + step] = np.einsum("tfij,fj->tfi", poses[..., :3, :3], ev.pan.centre) + poses[..., :3, 3]
    return lo, hi, centre


def _candidates(ev, grid, lo, hi):
    """Candidate (stretch, a, b) rows: swept boxes that overlap, grown by half the clearance."""
    grow = (ev.speed[None, :] * np.diff(grid)[:, None] / 2 + ev.clearance / 2)[..., None]
    swept_lo = np.minimum(lo[:-1], lo[1:]) - grow
    swept_hi = np.maximum(hi[:-1], hi[1:]) + grow
    rows = spatialhash.box_pairs_batched(swept_lo, swept_hi)
    skip, _ = _in_sorted(_keys(rows[:, 1:], ev.mech.n_faces), ev.pan.skip_keys)
    return rows[~skip]


def _node_states(ev, grid, centre, cand, need, pivot):
    """Separations and flags at both ends of every candidate stretch, each node once.

    Returns sep0, hit0, sep1, hit1 (n,) for the rows of ``cand``.
    """
    n = len(cand)
    pairs = cand[:, 1:]
    g0 = np.where(pivot, -np.inf, ev.gap(centre, pairs, cand[:, 0]))
    g1 = np.where(pivot, -np.inf, ev.gap(centre, pairs, cand[:, 0] + 1))
    sep0, sep1 = g0.copy(), g1.copy()
    hit0, hit1 = np.zeros(n, bool), np.zeros(n, bool)
    settled = (g0 > 0) & (g1 > 0) & (g0 + g1 > need)
    # Nodes that need the exact test: an end of an unsettled stretch whose sphere gap
    # is below the stretch's need.
    open_ = ~settled
    ends = []
    for side, g in ((0, g0), (1, g1)):
        rows = np.flatnonzero(open_ & (g < need))
        ends.append((side, rows))
    f = ev.mech.n_faces
    node_keys = np.concatenate([(cand[rows, 0] + side) * f * f + cand[rows, 1] * f + cand[rows, 2]
                                for side, rows in ends])
    if not len(node_keys):
        return sep0, hit0, sep1, hit1
    uniq, back = np.unique(node_keys, return_inverse=True)
    node = uniq // (f * f)
    node_pairs = np.column_stack([(uniq // f) % f, uniq % f])
    u_sep, u_hit = np.empty(len(uniq)), np.zeros(len(uniq), bool)
    bounds = np.searchsorted(node, np.arange(0, len(grid) + ev.chunk, ev.chunk))
    for k, (s, e) in enumerate(zip(bounds[:-1], bounds[1:])):
        if s == e:
            continue
        poses = ev.poses(grid[k * ev.chunk:(k + 1) * ev.chunk])
        u_sep[s:e], u_hit[s:e] = ev.state(poses, node[s:e] - k * ev.chunk, node_pairs[s:e])
    offset = 0
    for side, rows in ends:
        part = back[offset:offset + len(rows)]
        offset += len(rows)
        if side == 0:
            sep0[rows], hit0[rows] = u_sep[part], u_hit[part]
        else:
            sep1[rows], hit1[rows] = u_sep[part], u_hit[part]
    return sep0, hit0, sep1, hit1


def collision_intervals(mech, schedule, t_from=0.0, t_to=1.0, clearance=0.0, tol=DEFAULT, pan=None,
                        progress=None, first_only=False, stats=None):
    """Every colliding face pair over the motion, with its first and last t.

    See `foldsim.analysis.collision.collision_intervals` for the parameters and the
    result. ``first_only`` returns after the refinement round that finds the first
    collision, with the intervals found so far (at least one; [] when there is no
    collision, after the whole sweep). ``stats``, a dict, receives the counts
    ``t_values`` (drive values posed), ``pair_tests`` (exact face-pair tests),
    ``candidates`` (swept-box candidate stretches) and ``grid_steps``.
    """
    pan = pan or panels(mech, tol)
    ev = Evaluator(mech, schedule, pan, clearance, tol, stats)
    lo_t, hi_t = sorted((float(t_from), float(t_to)))
    if hi_t - lo_t == 0:
        return []
    grid = _grid(mech, pan, ev.speed, lo_t, hi_t)
    lo, hi, centre = _grid_geometry(ev, grid)
    cand = _candidates(ev, grid, lo, hi)
    del lo, hi
    ev.stats["candidates"] = len(cand)
    ev.stats["grid_steps"] = len(grid) - 1
    pairs = cand[:, 1:]
    t0, t1 = grid[cand[:, 0]], grid[cand[:, 0] + 1]
    rate, pivot = ev.rates(pairs) if len(pairs) else (np.zeros(0), np.zeros(0, bool))
    sep0, hit0, sep1, hit1 = _node_states(ev, grid, centre, cand, rate * (t1 - t0), pivot)
    del centre, cand
    found = []
    resolution = tol.t_resolution / 2
    total = float((t1 - t0).sum()) or 1.0
    while len(pairs):
        both = hit0 & hit1
        found.append(np.column_stack([pairs[both], t0[both], t1[both]]))
        for hit, t in ((hit0 & ~hit1, t0), (hit1 & ~hit0, t1)):
            found.append(np.column_stack([pairs[hit], t[hit], t[hit]]))
        if first_only:
            merged = _merge(np.concatenate(found))
            if merged:
                if progress is not None:
                    progress(1.0)
                return merged
        open_ = ~both & (sep0 + sep1 <= rate * (t1 - t0)) & (t1 - t0 > resolution)
        pairs, t0, t1, rate, pivot = pairs[open_], t0[open_], t1[open_], rate[open_], pivot[open_]
        sep0, hit0, sep1, hit1 = sep0[open_], hit0[open_], sep1[open_], hit1[open_]
        if progress is not None:
            progress(1.0 - float((t1 - t0).sum()) / total)
        if not len(pairs):
            break
        mid = 0.5 * (t0 + t1)
        sep_m, hit_m = ev.evaluate(mid, pairs, rate * (mid - t0), pivot)
        pairs, rate = np.concatenate([pairs, pairs]), np.concatenate([rate, rate])
        pivot = np.concatenate([pivot, pivot])
        t0, t1 = np.concatenate([t0, mid]), np.concatenate([mid, t1])
        sep0, sep1 = np.concatenate([sep0, sep_m]), np.concatenate([sep_m, sep1])
        hit0, hit1 = np.concatenate([hit0, hit_m]), np.concatenate([hit_m, hit1])
    if progress is not None:
        progress(1.0)
    return _merge(np.concatenate(found) if found else np.zeros((0, 4)))


def _merge(rows):
    """Merge (a, b, first, last) rows of one pair that touch into intervals."""
    out = []
    rows = rows[np.lexsort((rows[:, 2], rows[:, 1], rows[:, 0]))]
    for row in rows:
        a, b, first, last = int(row[0]), int(row[1]), float(row[2]), float(row[3])
        if out and out[-1]["faces"] == [a, b] and first <= out[-1]["last_t"] + 1e-12:
            out[-1]["last_t"] = max(out[-1]["last_t"], last)
        else:
            out.append({"faces": [a, b], "first_t": first, "last_t": last})
    return [c for c in out if not (c["first_t"] == 0.0 and c["last_t"] == 0.0)]
