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
- L is per stretch: the bound that holds at every t (the reference's), or, where
  smaller, one from the pairs' relative twists at the stretch's two ends and a bound
  on how fast that rate can change (`_stretch_rates`); each half of a split stretch
  takes the smaller of its own and its parent's. Pairs that close in slowly, as
  pairs touching by design do near the ends of the motion, then leave few stretches
  open.
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
from ..geometry import cross, transform_points
from ..kinematics import common_depth, face_poses, face_twists, speed_profile, turn_profile
from ..tolerances import DEFAULT
from . import spatialhash
from .narrowphase import pair_state
from .panels import _corner_boxes, _face_boxes, _in_sorted, _keys, corner_boxes, panels

MAX_STEPS = 4096
"""Most start-grid steps over the swept range."""

ROW_CHUNK = 250_000
"""Candidate rows expanded to fine steps at once."""

MAX_FACE_STEPS = 1_000_000
"""Most fine-grid steps times faces: the grid's boxes and centres stay below ~100 MB."""

HASH_LEVELS = 3
"""The spatial hash runs on blocks of up to 2**HASH_LEVELS fine steps (`_candidates`):
on models whose pairs stay near for long, 8 steps made the candidates about a
quarter cheaper than 4 (1,280 panels with their gear bodies), fewer than 8 no
cheaper."""

POSE_BUDGET = 2_000_000
"""Pose matrix entries (4 x 4 per face per t) held at once."""


class Evaluator:
    """Separation and collision state of face pairs at drive values, in bounded blocks."""

    def __init__(self, mech, schedule, pan, clearance, tol, stats=None, profile=None):
        self.mech, self.schedule, self.pan = mech, schedule, pan
        self.clearance = clearance
        self.eps = tol.contact * mech.size
        self.n = pan.n
        self.owner = pan.owner
        self.profile = speed_profile(mech, schedule.rates) if profile is None else profile
        self.speed = self.profile[:, 0]
        self.turn = turn_profile(mech, schedule.rates)
        # The sum of the fold rates of the hinges between each pivoting pair's faces
        # (for items, their carrying faces').
        self.pivot_rate = self.turns(np.column_stack([pan.pivot_keys // self.n, pan.pivot_keys % self.n]))
        self.chunk = max(1, POSE_BUDGET // (16 * max(self.n, mech.n_faces)))
        self.stats = stats if stats is not None else {}
        self.stats.setdefault("t_values", 0)
        self.stats.setdefault("pair_tests", 0)

    def poses(self, t, faces=False):
        """(T, F, 4, 4) poses of the items at drive values t (T,); with ``faces``, also the faces' poses."""
        self.stats["t_values"] += len(t)
        at = face_poses(self.mech, fold_angles(self.schedule, t))
        items = at if self.owner is None else at[:, self.owner]
        return (items, at) if faces else items

    def rates(self, pairs):
        """(n,) bound on d(separation)/dt for face pairs (n, 2)."""
        keys, first, back = np.unique(_keys(pairs, self.n), return_index=True, return_inverse=True)
        unique_pairs = np.sort(pairs[first], axis=1)
        depth = common_depth(self.mech, unique_pairs if self.owner is None else self.owner[unique_pairs])
        linear = (self.profile[unique_pairs[:, 0], depth] + self.profile[unique_pairs[:, 1], depth])
        is_pivot, pos = _in_sorted(keys, self.pan.pivot_keys)
        out = np.where(is_pivot, self.pivot_rate[pos] if len(self.pivot_rate) else 0.0, linear)
        return out[back], is_pivot[back]

    def turns(self, pairs):
        """(n,) bound on how fast face pairs (n, 2) turn relative to each other, per unit t.

        The sum of the fold rates of the hinges on the tree path between the two
        faces (`kinematics.turn_profile`).
        """
        pairs = np.asarray(pairs, np.int64).reshape(-1, 2)
        if self.owner is not None:
            pairs = self.owner[pairs]
        depth = common_depth(self.mech, pairs)
        return self.turn[pairs[:, 0], depth] + self.turn[pairs[:, 1], depth]

    def twists(self, faces):
        """Twists omega, lin (T, F, 3) of the items, from the faces' poses (T, faces, 4, 4).

        `kinematics.face_twists`; an item moves with the face that carries it.
        """
        omega, lin = face_twists(self.mech, faces, self.schedule.rates)
        if self.owner is not None:
            omega, lin = omega[:, self.owner], lin[:, self.owner]
        return omega, lin

    def spin(self, omega, lin, frame, pairs, centre, pivot):
        """How fast each pair's separation changes at one node, and its centres' distance.

        ``omega``, ``lin`` (T, F, 3) are face twists (`twists`), ``frame`` (n,) the
        node of each pair (n, 2), ``centre`` (n, 2, 3) the two faces' posed sphere
        centres there. Returns ``speed`` (n,): for a pivoting pair (``pivot``) the
        relative angular speed ``|w|``, for any other a bound on d(distance)/dt, the
        largest relative speed ``|w x p + v|`` over the points p of either face's
        bounding sphere, where ``(w, v)`` is face b's twist less face a's (the part
        of a relative velocity that changes the distance); and ``dist`` (n,), the
        distance between the two centres.
        """
        a, b = pairs[:, 0], pairs[:, 1]
        w = omega[frame, b] - omega[frame, a]
        v = lin[frame, b] - lin[frame, a]
        turn = np.sqrt((w * w).sum(axis=1))
        speed = np.full(len(pairs), np.inf)
        for side, f in ((0, a), (1, b)):
            x = cross(w, centre[:, side]) + v
            np.minimum(speed, np.sqrt((x * x).sum(axis=1)) + turn * self.pan.radius[f], out=speed)
        d = centre[:, 0] - centre[:, 1]
        return np.where(pivot, turn, speed), np.sqrt((d * d).sum(axis=1))

    def gap(self, centre, pairs, frame):
        """Sphere gap (less the clearance) of pairs at the centres ``centre[frame]``."""
        d = centre[frame, pairs[:, 0]] - centre[frame, pairs[:, 1]]
        return (np.sqrt((d * d).sum(axis=1)) - self.pan.radius[pairs].sum(axis=1) - self.clearance)

    def state(self, poses, frame, pairs, need):
        """Separation (exact below ``need``) and collision flag of pairs at ``poses[frame]``."""
        self.stats["pair_tests"] += len(pairs)
        return pair_state(self.mech, self.pan, poses, frame, pairs, self.clearance, self.eps, need=need)

    def evaluate(self, t, pairs, need, pivot, motion=False):
        """Separation (n,) and collision flag (n,) of face pairs (n, 2) at t (n,).

        Where the panels' bounding spheres are already ``need`` (n,) apart, that gap
        is the separation (a lower bound is all the advancement needs) and the exact
        test is skipped; pivoting pairs (``pivot``) always take the exact test.
        With ``motion``, also returns the pairs' `spin` (speed and centre distance).
        """
        times, t_index = np.unique(t, return_inverse=True)
        sep = np.empty(len(pairs))
        hit = np.zeros(len(pairs), bool)
        speed, dist = np.empty(len(pairs)), np.empty(len(pairs))
        order = np.argsort(t_index, kind="stable")
        bounds = np.searchsorted(t_index[order], np.arange(0, len(times) + self.chunk, self.chunk))
        for k, (s, e) in enumerate(zip(bounds[:-1], bounds[1:])):
            if s == e:
                continue
            rows = order[s:e]
            poses, faces = self.poses(times[k * self.chunk:(k + 1) * self.chunk], faces=True)
            frame = t_index[rows] - k * self.chunk
            centre = transform_points(poses[frame[:, None], pairs[rows]], self.pan.centre[pairs[rows]])
            if motion:
                omega, lin = self.twists(faces)
                speed[rows], dist[rows] = self.spin(omega, lin, frame, pairs[rows], centre, pivot[rows])
            d = centre[:, 0] - centre[:, 1]
            gap = np.sqrt((d * d).sum(axis=1)) - self.pan.radius[pairs[rows]].sum(axis=1) - self.clearance
            far = (gap >= need[rows]) & ~pivot[rows]
            sep[rows[far]] = gap[far]
            near = rows[~far]
            if len(near):
                sep[near], hit[near] = self.state(poses, frame[~far], pairs[near], need[near])
        if motion:
            return sep, hit, speed, dist
        return sep, hit


def _grid(mech, pan, speed, lo_t, hi_t):
    """The reference's start grid and a finer one that splits each of its steps in 2**k.

    k is the least for which a typical panel (speed at the 75th percentile) moves no
    more than its own size (median bounding diameter) in one fine step, and the fine
    grid has at most `MAX_STEPS` steps and `MAX_FACE_STEPS` steps times faces.

    Returns
    -------
    fine : (n * 2**k + 1,) float
    k : int
    """
    span = hi_t - lo_t
    n_steps = int(np.clip(np.ceil(span * speed.max() / (0.25 * mech.size)), 16, 1024))
    coarse = np.unique(np.concatenate([np.linspace(lo_t, hi_t, n_steps + 1),
                                       [x for x in (-1.0, 0.0, 1.0) if lo_t < x < hi_t]]))
    size = float(np.median(2.0 * pan.radius)) or mech.size
    typical = float(np.quantile(speed, 0.75))
    most = min(MAX_STEPS, max(len(coarse) - 1, MAX_FACE_STEPS // pan.n))
    k = 0
    while (len(coarse) - 1) * 2 ** (k + 1) <= most and span * typical / (n_steps * 2 ** k) > size:
        k += 1
    parts = 2 ** k
    frac = np.arange(parts) / parts
    fine = (coarse[:-1, None] + frac[None, :] * np.diff(coarse)[:, None]).ravel()
    return np.append(fine, coarse[-1]), k


def _merge_runs(cand, k, n_faces):
    """Join candidate fine steps into the coarse steps they fill, bottom up.

    ``cand`` rows (first fine step, level, a, b): runs of ``2**level`` fine steps
    aligned to their length (`_candidates`). Two sibling stretches (fine-step blocks 2j and
    2j + 1 of one level) that are both candidates for a pair become their parent
    stretch, up to the reference's steps (level k). A pair near all along is then
    tested at the coarse grid's values, and the advancement halves only where it has
    to; a pair near only briefly keeps its short stretches.

    Returns
    -------
    start : (n,) int
        First fine step of each stretch.
    level : (n,) int
        The stretch is 2**level fine steps long.
    pairs : (n, 2) int
    """
    key = cand[:, 2] * n_faces + cand[:, 3]
    order = np.lexsort((cand[:, 0], key))
    key, level = key[order], cand[order, 1]
    block = cand[order, 0] >> level
    for lev in range(1, k + 1):
        if len(key) < 2:
            break
        same = (key[:-1] == key[1:]) & (level[:-1] == lev - 1) & (level[1:] == lev - 1)
        join = same & (block[:-1] % 2 == 0) & (block[1:] == block[:-1] + 1)
        first = np.flatnonzero(join)
        level[first] = lev
        block[first] //= 2
        keep = np.ones(len(key), bool)
        keep[first + 1] = False
        key, block, level = key[keep], block[keep], level[keep]
    start = block << level
    return start, level, np.column_stack([key // n_faces, key % n_faces])


def _grid_geometry(ev, grid):
    """Face boxes lo, hi, sphere centres and twists omega, lin (T, F, 3) at every grid value (F: items)."""
    n, f = len(grid), ev.n
    lo, hi, centre = np.empty((n, f, 3)), np.empty((n, f, 3)), np.empty((n, f, 3))
    omega, lin = np.empty((n, f, 3)), np.empty((n, f, 3))
    corners = corner_boxes(ev.pan)
    # Boxes from corners need only the corners (and the centre) posed, not every triangle.
    step = max(1, ev.chunk // (1 if corners else max(1, int(np.ceil(len(ev.pan.tri_face) / f)))))
    for k in range(0, n, step):
        poses, faces = ev.poses(grid[k:k + step], faces=True)
        if corners:
            lo[k:k + step], hi[k:k + step], centre[k:k + step] = _corner_boxes(ev.pan.hull_points, poses,
                                                                               ev.pan.centre)
        else:
            lo[k:k + step], hi[k:k + step] = _face_boxes(ev.pan, poses)
            centre[k:k + step] = (np.einsum("tfij,fj->tfi", poses[..., :3, :3], ev.pan.centre)
                                  + poses[..., :3, 3])
        omega[k:k + step], lin[k:k + step] = ev.twists(faces)
    return lo, hi, centre, omega, lin


def _stretch_rates(bound, turn, reach, pivot, speed0, speed1, dist0, dist1, dt):
    """A bound on d(separation)/dt over each stretch of t, from its two ends' speeds.

    ``bound`` (n,) is the bound valid at every t (`Evaluator.rates`); ``speed0``,
    ``speed1`` bound the rate at the stretch's ends (`Evaluator.spin`), ``dist0``,
    ``dist1`` are the centre distances there, ``dt`` the stretch's length, ``turn``
    the pair's `Evaluator.turns` W and ``reach`` the larger sphere radius r. The rate
    at a node changes at most by K per unit t, so over the stretch it stays below
    ``(speed0 + speed1 + K dt) / 2``:

    - pivoting pairs: the relative angular velocity is a sum of the path's hinge
      rates times their posed unit axes, each axis turning at most at W, so
      K = W**2;
    - others: the relative acceleration of a point p of one face, in the other's
      frame, is at most 3 W sum_h |rate_h| |p - a_h| over the path's hinges (one
      term per hinge for its axis turning, two for p and the axis point moving
      apart); the hinges on p's side of the common ancestor contribute at most
      ``bound`` (their levers, as `kinematics.speed_profile`), those on the other
      side at most W (r + C) more, with C the centre distance, which changes at
      most at ``bound``. So K = 3 W (bound + W (r + (dist0 + dist1 + bound dt) / 2)).

    Returns
    -------
    (n,) float
        At most ``bound``.
    """
    centre = 0.5 * (dist0 + dist1 + bound * dt)
    k = np.where(pivot, turn * turn, 3.0 * turn * (bound + turn * (reach + centre)))
    return np.minimum(bound, 0.5 * (speed0 + speed1 + k * dt))


def _candidates(ev, grid, lo, hi, k):
    """Candidate (first fine step, level, a, b) rows: swept boxes that overlap, grown by half the clearance.

    The spatial hash runs once per block of ``2**min(k, HASH_LEVELS)`` fine steps, on
    the union of the block's swept boxes; each pair it finds is then checked against
    the swept boxes of the block's fine steps directly. The blocks' pairs hold every
    fine step's pairs, so nothing is lost, and the hash is built up to an eighth as
    often. A pair whose boxes meet at every fine step of a block is one row for the
    whole block (level ``min(k, HASH_LEVELS)``); any other gives a row (level 0) per
    fine step where they meet.
    """
    grow = (ev.speed[None, :] * np.diff(grid)[:, None] / 2 + ev.clearance / 2)[..., None]
    swept_lo = np.minimum(lo[:-1], lo[1:]) - grow
    swept_hi = np.maximum(hi[:-1], hi[1:]) + grow
    steps, f = swept_lo.shape[:2]
    block = 2 ** min(k, HASH_LEVELS)
    rows = _box_pairs(ev.pan, swept_lo.reshape(-1, block, f, 3).min(axis=1),
                      swept_hi.reshape(-1, block, f, 3).max(axis=1))
    rows = rows[~_in_sorted(_keys(rows[:, 1:], ev.n), ev.pan.skip_keys)[0]]
    if block > 1 and ev.pan.box_axes is not None and ev.pan.passive is not None and len(rows):
        # Small active solids against large passive ones (a build's gear bodies
        # against its prisms): most block rows are settled here. Among prisms
        # alone (the clash sweep) half are, for no time saved.
        rows = rows[~_apart_over_blocks(ev, grid, rows, block)]
    if block == 1:
        return np.column_stack([rows[:, 0], np.zeros(len(rows), rows.dtype), rows[:, 1:]])
    out = [np.zeros((0, 4), dtype=rows.dtype)]
    for k in range(0, len(rows), ROW_CHUNK):
        part = rows[k:k + ROW_CHUNK]
        step = part[:, :1] * block + np.arange(block)[None, :]
        a, b = part[:, 1:2], part[:, 2:3]
        meet = np.ones(step.shape, bool)
        for axis in range(3):
            meet &= (np.maximum(swept_lo[step, a, axis], swept_lo[step, b, axis])
                     <= np.minimum(swept_hi[step, a, axis], swept_hi[step, b, axis]))
        full = meet.all(axis=1)
        out.append(np.column_stack([step[full, 0], np.full(full.sum(), int(np.log2(block))),
                                    part[full, 1:]]))
        s, j = np.nonzero(meet & ~full[:, None])
        out.append(np.column_stack([step[s, j], np.zeros(len(s), rows.dtype), part[s, 1:]]))
    return np.concatenate(out)


BLOCK_ROWS = 1 << 15
"""Rows `_apart_over_blocks` tests at once (its gathered columns stay in cache)."""


def _apart_over_blocks(ev, grid, rows, block):
    """(n,) bool: (block, a, b) rows whose items stay farther apart than the clearance over the whole block.

    Solids only (``pan.box_axes``): each item's oriented box against the other's
    bounding sphere, axis by axis. The sphere's centre is |u . c - o| - h beyond
    the box's slab along its axis u (half width h), so the items are at least that
    less the sphere's radius apart. In the box's own frame that coordinate changes
    at most as fast as the centre moves relative to it, L: for a pair pivoting
    about a shared point v, W |c - v| (W the pair's turn rate, `Evaluator.turns`);
    for any other, the two speed bounds at the pair's common depth plus W times the
    centres' largest distance over the block (the box's frame turns at most at W
    about a point that moves at its own bound). So over a block of length D whose
    ends give g0 and g1 the coordinate stays above (g0 + g1 - L D) / 2, the usual
    two-sided bound; a row is settled where that, less the sphere's radius, clears
    the clearance and the contact tolerance. Each block's swept boxes overlap long before the boxes
    themselves: a build's gear bodies sit in the boxes of the tilted prisms
    around their corner, which this settles for most of the screen's rows before
    their fine steps and stretches are formed.
    """
    pan = ev.pan
    nodes = np.arange(0, len(grid), block)
    poses = ev.poses(grid[nodes])
    rot, move = poses[..., :3, :3], poses[..., :3, 3]
    n_nodes, f = poses.shape[:2]
    centre = (rot @ pan.centre[None, :, :, None])[..., 0] + move
    box_centre = (rot @ pan.box_centre[None, :, :, None])[..., 0] + move
    axes = pan.box_axes[None] @ rot.transpose(0, 1, 3, 2)  # axes[n, f, i]: posed axis i
    along = (axes * box_centre[:, :, None, :]).sum(axis=3)
    # Columns, one row each: the axes' x, y and z components, the box centre's
    # coordinate along each axis, the sphere centre; gathered column by column.
    table = np.ascontiguousarray(np.concatenate([axes[..., 0], axes[..., 1], axes[..., 2], along, centre],
                                                axis=2).reshape(-1, 15).T)
    span = np.diff(grid[nodes])
    out = np.zeros(len(rows), bool)
    for k in range(0, len(rows), BLOCK_ROWS):
        part = rows[k:k + BLOCK_ROWS]
        pairs = part[:, 1:]
        a, b = pairs[:, 0], pairs[:, 1]
        owners = pairs if ev.owner is None else ev.owner[pairs]
        depth = common_depth(ev.mech, owners)
        linear = ev.profile[a, depth] + ev.profile[b, depth]
        turn = ev.turn[owners[:, 0], depth] + ev.turn[owners[:, 1], depth]
        is_pivot, pos = _in_sorted(_keys(pairs, ev.n), pan.pivot_keys)
        length = span[part[:, 0]]
        at = part[:, 0] * f
        ends_a = [table.take(at + a + s * f, axis=1) for s in (0, 1)]
        ends_b = [table.take(at + b + s * f, axis=1) for s in (0, 1)]
        d = [x[12:] - y[12:] for x, y in zip(ends_a, ends_b)]
        far = np.maximum(*(np.sqrt(e[0] * e[0] + e[1] * e[1] + e[2] * e[2]) for e in d)) + 0.5 * linear * length
        best = np.full(len(part), -np.inf)
        for box_ends, ball_ends, box, ball in ((ends_a, ends_b, a, b), (ends_b, ends_a, b, a)):
            rate = linear + turn * far
            if pan.pivot_points is not None and len(pan.pivot_keys):
                lever = pan.centre[ball] - pan.pivot_points[pos]
                rate = np.where(is_pivot, turn * np.sqrt((lever * lever).sum(axis=1)), rate)
            else:
                rate = np.where(is_pivot, np.inf, rate)
            low = None
            for i in range(3):
                gap = 0.0
                for x, y in zip(box_ends, ball_ends):
                    gap = gap + np.abs(x[i] * y[12] + x[3 + i] * y[13] + x[6 + i] * y[14] - x[9 + i])
                gap = 0.5 * gap - pan.box_half[box, i]
                low = gap if low is None else np.maximum(low, gap)
            np.maximum(best, low - 0.5 * rate * length - pan.radius[ball], out=best)
        out[k:k + BLOCK_ROWS] = best > ev.clearance + ev.eps
    return out


GROUP_ITEMS = 1.5
"""Items per carrying face from which `_box_pairs` hashes the faces' boxes, not the items'."""


def _box_pairs(pan, lo, hi):
    """(frame, i, j) rows, i < j, of item boxes lo, hi (T, n, 3) that overlap, with an active item (in no set order).

    `spatialhash.box_pairs_batched` on the items; or, where the faces carry
    `GROUP_ITEMS` items or more each (a build's prisms and gear bodies), on each
    face's box around its items, a third as many boxes, after which the items of
    every two faces found are tested box against box. Items whose boxes overlap lie
    on faces whose boxes do, so the two ways find the same pairs. Two items of one
    face are never paired (they are one rigid part: `Panels.skip_keys` holds them).
    """
    active = None if pan.passive is None else ~pan.passive
    if pan.owner is None or len(pan.owner) < GROUP_ITEMS * len(np.unique(pan.owner)):
        return spatialhash.box_pairs_batched(lo, hi, active)
    order = np.argsort(pan.owner, kind="stable")
    first = np.flatnonzero(np.r_[True, pan.owner[order][1:] != pan.owner[order][:-1]])
    count = np.diff(np.r_[first, len(order)])
    group_lo = np.minimum.reduceat(lo[:, order], first, axis=1)
    group_hi = np.maximum.reduceat(hi[:, order], first, axis=1)
    group_active = None if active is None else np.logical_or.reduceat(active[order], first)
    groups = spatialhash.box_pairs_batched(group_lo, group_hi, group_active)
    n = lo.shape[1]
    flat_lo, flat_hi = lo.reshape(-1, 3), hi.reshape(-1, 3)
    out = [np.zeros((0, 3), np.int64)]
    # Blocks of face pairs that make about `ROW_CHUNK` item pairs each.
    made = np.cumsum(count[groups[:, 1]] * count[groups[:, 2]])
    cuts = np.searchsorted(made, np.arange(ROW_CHUNK, made[-1] if len(made) else 0, ROW_CHUNK), side="right")
    for part in np.split(groups, cuts):
        ca, cb = count[part[:, 1]], count[part[:, 2]]
        per = ca * cb
        row = np.repeat(np.arange(len(part)), per)
        local = np.arange(per.sum()) - np.repeat(np.cumsum(per) - per, per)
        i = order[first[part[row, 1]] + local // cb[row]]
        j = order[first[part[row, 2]] + local % cb[row]]
        if active is not None:
            keep = active[i] | active[j]
            row, i, j = row[keep], i[keep], j[keep]
        at = part[row, 0] * n
        # One axis at a time, on the pairs still left.
        for axis in range(3):
            a, b = at + i, at + j
            meet = (np.maximum(flat_lo[a, axis], flat_lo[b, axis]) <= np.minimum(flat_hi[a, axis], flat_hi[b, axis]))
            at, i, j = at[meet], i[meet], j[meet]
        out.append(np.column_stack([at // n, np.minimum(i, j), np.maximum(i, j)]))
    return np.concatenate(out)


def _settled(g0, g1, need):
    """Stretches whose sphere gaps g0, g1 at the ends (n,) are positive and add up to more than ``need``."""
    return (g0 > 0) & (g1 > 0) & (g0 + g1 > need)


def _node_states(ev, grid, centre, start, end, pairs, need, pivot):
    """Separations and flags at both ends of every candidate stretch, each node once.

    Returns sep0, hit0, sep1, hit1 (n,) for the stretches from grid value ``start``
    to ``end`` (n,) of face pairs (n, 2).
    """
    n = len(pairs)
    g0 = np.where(pivot, -np.inf, ev.gap(centre, pairs, start))
    g1 = np.where(pivot, -np.inf, ev.gap(centre, pairs, end))
    sep0, sep1 = g0.copy(), g1.copy()
    hit0, hit1 = np.zeros(n, bool), np.zeros(n, bool)
    settled = _settled(g0, g1, need)
    # Nodes that need the exact test: an end of an unsettled stretch whose sphere gap
    # is below the stretch's need.
    ends = [(0, np.flatnonzero(~settled & (g0 < need))), (1, np.flatnonzero(~settled & (g1 < need)))]
    f = ev.n
    node_keys = np.concatenate([np.where(side, end, start)[rows] * f * f + pairs[rows, 0] * f + pairs[rows, 1]
                                for side, rows in ends])
    if not len(node_keys):
        return sep0, hit0, sep1, hit1
    uniq, back = np.unique(node_keys, return_inverse=True)
    u_need = np.full(len(uniq), -np.inf)
    np.maximum.at(u_need, back, np.concatenate([need[rows] for _, rows in ends]))
    node = uniq // (f * f)
    node_pairs = np.column_stack([(uniq // f) % f, uniq % f])
    u_sep, u_hit = np.empty(len(uniq)), np.zeros(len(uniq), bool)
    bounds = np.searchsorted(node, np.arange(0, len(grid) + ev.chunk, ev.chunk))
    for k, (s, e) in enumerate(zip(bounds[:-1], bounds[1:])):
        if s == e:
            continue
        values = np.unique(node[s:e])
        poses = ev.poses(grid[values])
        u_sep[s:e], u_hit[s:e] = ev.state(poses, np.searchsorted(values, node[s:e]), node_pairs[s:e],
                                            u_need[s:e])
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
                        progress=None, first_only=False, stats=None, profile=None):
    """Every colliding face pair over the motion, with its first and last t.

    See `foldsim.analysis.collision.collision_intervals` for the parameters and the
    result. ``first_only``: once a collision is found, stretches that start after
    the earliest one found are dropped, so the sweep ends as soon as the earliest
    collision is known; ``stats``, a dict, receives the counts
    ``t_values`` (drive values posed), ``pair_tests`` (exact face-pair tests),
    ``candidates`` (swept-box candidate stretches) and ``grid_steps``.

    Items other than the faces (``pan.owner`` set, `foldsim.build.bodies`) need
    ``profile`` (items, D + 1), their speed bounds split as `kinematics.speed_profile`
    splits the faces'; the result's ``faces`` are then item indices.
    """
    pan = pan or panels(mech, tol)
    if pan.owner is not None and profile is None:
        raise ValueError("collision_intervals: items carried by faces need their speed profile")
    ev = Evaluator(mech, schedule, pan, clearance, tol, stats, profile)
    lo_t, hi_t = sorted((float(t_from), float(t_to)))
    if hi_t - lo_t == 0:
        return []
    grid, k = _grid(mech, pan, ev.speed, lo_t, hi_t)
    lo, hi, centre, omega, lin = _grid_geometry(ev, grid)
    cand = _candidates(ev, grid, lo, hi, k)
    del lo, hi
    ev.stats["candidates"] = int((1 << cand[:, 1]).sum())
    ev.stats["grid_steps"] = len(grid) - 1
    start, level, pairs = _merge_runs(cand, k, ev.n)
    end = start + (1 << level)
    t0, t1 = grid[start], grid[end]
    bound, pivot = ev.rates(pairs) if len(pairs) else (np.zeros(0), np.zeros(0, bool))
    turn = ev.turns(pairs)
    reach = pan.radius[pairs].max(axis=1) if len(pairs) else np.zeros(0)
    # Stretches the sphere gaps settle under the bound that holds everywhere need no
    # tighter one (they never open); the others take it from their ends' twists.
    loose = np.flatnonzero(pivot | ~_settled(ev.gap(centre, pairs, start), ev.gap(centre, pairs, end),
                                             bound * (t1 - t0)))
    speed0, speed1 = np.full(len(pairs), np.inf), np.full(len(pairs), np.inf)
    dist0, dist1 = np.zeros(len(pairs)), np.zeros(len(pairs))
    for speed, dist, node in ((speed0, dist0, start), (speed1, dist1, end)):
        speed[loose], dist[loose] = ev.spin(omega, lin, node[loose], pairs[loose],
                                            centre[node[loose, None], pairs[loose]], pivot[loose])
    rate = _stretch_rates(bound, turn, reach, pivot, speed0, speed1, dist0, dist1, t1 - t0)
    sep0, hit0, sep1, hit1 = _node_states(ev, grid, centre, start, end, pairs, rate * (t1 - t0), pivot)
    del centre, cand, omega, lin
    found = []
    earliest = None
    resolution = tol.t_resolution / 2
    total = float((t1 - t0).sum()) or 1.0
    while len(pairs):
        both = hit0 & hit1
        found.append(np.column_stack([pairs[both], t0[both], t1[both]]))
        for hit, t in ((hit0 & ~hit1, t0), (hit1 & ~hit0, t1)):
            found.append(np.column_stack([pairs[hit], t[hit], t[hit]]))
        if first_only:
            rows = np.concatenate(found)
            starts = rows[:, 2][~((rows[:, 2] == 0.0) & (rows[:, 3] == 0.0))]
            if len(starts):
                earliest = float(starts.min())
        # The parts of [t0, t1] within reach of an end's separation are clear; what
        # is left, [u0, u1], is where a contact could still be.
        with np.errstate(divide="ignore", invalid="ignore"):
            moving = rate > 0
            u0 = np.where(moving, t0 + sep0 / rate, t0)
            u1 = np.where(moving, t1 - sep1 / rate, t1)
        open_ = ~both & (sep0 + sep1 <= rate * (t1 - t0)) & (u1 - u0 > resolution)
        if earliest is not None:
            # A stretch that starts after the earliest collision found cannot hold an
            # earlier one; every other stretch is refined as in the full sweep.
            open_ &= t0 <= earliest
        pairs, t0, t1, rate, pivot = pairs[open_], t0[open_], t1[open_], rate[open_], pivot[open_]
        u0, u1 = u0[open_], u1[open_]
        sep0, hit0, sep1, hit1 = sep0[open_], hit0[open_], sep1[open_], hit1[open_]
        bound, turn, reach = bound[open_], turn[open_], reach[open_]
        speed0, speed1, dist0, dist1 = speed0[open_], speed1[open_], dist0[open_], dist1[open_]
        if progress is not None:
            progress(1.0 - float((t1 - t0).sum()) / total)
        if not len(pairs):
            break
        mid = _dyadic_split(u0, u1, lo_t, hi_t - lo_t)
        sep_m, hit_m, speed_m, dist_m = ev.evaluate(mid, pairs, rate * np.maximum(mid - t0, t1 - mid), pivot,
                                                    motion=True)
        # Each half takes the tighter of its own bound and its parent's (both hold).
        rate = np.concatenate([
            np.minimum(rate, _stretch_rates(bound, turn, reach, pivot, speed0, speed_m, dist0, dist_m, mid - t0)),
            np.minimum(rate, _stretch_rates(bound, turn, reach, pivot, speed_m, speed1, dist_m, dist1, t1 - mid))])
        bound, turn, reach = (np.concatenate([x, x]) for x in (bound, turn, reach))
        speed0, speed1 = np.concatenate([speed0, speed_m]), np.concatenate([speed_m, speed1])
        dist0, dist1 = np.concatenate([dist0, dist_m]), np.concatenate([dist_m, dist1])
        pairs = np.concatenate([pairs, pairs])
        pivot = np.concatenate([pivot, pivot])
        t0, t1 = np.concatenate([t0, mid]), np.concatenate([mid, t1])
        sep0, sep1 = np.concatenate([sep0, sep_m]), np.concatenate([sep_m, sep1])
        hit0, hit1 = np.concatenate([hit0, hit_m]), np.concatenate([hit_m, hit1])
    if progress is not None:
        progress(1.0)
    return _merge(np.concatenate(found) if found else np.zeros((0, 4)))


def _dyadic_split(u0, u1, origin, span):
    """A point inside each open stretch (u0, u1) near its middle, on a dyadic grid.

    The point is ``origin + span * j / 2**m`` with the coarsest ``2**-m`` no more
    than half the stretch, so it lies within the stretch's middle half, and
    pairs refined in the same round share drive values (their poses are computed
    once per value).
    """
    width = (u1 - u0) / span
    step = np.exp2(np.floor(np.log2(width / 2)))
    centre = (0.5 * (u0 + u1) - origin) / span
    return origin + span * np.round(centre / step) * step


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
