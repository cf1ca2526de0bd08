"""Broad phase: which axis-aligned bounding boxes overlap.

Sweep and prune after J. D. Cohen, M. C. Lin, D. Manocha and M. K. Ponamgi,
"I-COLLIDE: An Interactive and Exact Collision Detection System for
Large-Scale Environments", Proc. ACM Symposium on Interactive 3D Graphics,
1995.  The boxes are sorted by their lower bound along one axis; a box can
only overlap the boxes whose lower bound falls inside its own interval on that
axis, found for all boxes at once with a binary search.  The candidate pairs
are then checked on all three axes.

Boxes are closed: boxes that only touch do overlap, so the narrow phase
decides about contact.  Everything is vectorised over boxes.
"""

import numpy as np


def _check_boxes(lo, hi, ndim):
    """Return `lo`, `hi` as float arrays after checking their shapes match (..., m, 3)."""
    lo = np.asarray(lo, dtype=float)
    hi = np.asarray(hi, dtype=float)
    if lo.shape != hi.shape or lo.ndim != ndim or lo.shape[-1] != 3:
        raise ValueError(
            f"lo and hi must both have {ndim} axes, the last of length 3; "
            f"got {lo.shape} and {hi.shape}"
        )
    return lo, hi


def _pair_keys(pairs, m):
    """Keys i * m + j of (p, 2) int pairs, each first put in order i < j."""
    i = np.minimum(pairs[:, 0], pairs[:, 1])
    j = np.maximum(pairs[:, 0], pairs[:, 1])
    return i * m + j


def _candidate_pairs(lo, hi, axis):
    """Pairs (p, 2), not ordered, of boxes whose intervals on `axis` may overlap.

    Every pair overlapping on `axis` appears exactly once: with boxes sorted
    by lower bound, box k is paired with the later boxes whose lower bound is
    at most its upper bound.
    """
    m = len(lo)
    order = np.argsort(lo[:, axis], kind="stable")
    sorted_lo = lo[order, axis]
    end = np.searchsorted(sorted_lo, hi[order, axis], side="right")
    start = np.arange(1, m + 1)
    counts = np.maximum(end - start, 0)
    first = np.repeat(np.arange(m), counts)
    # Position within each run of candidates: 0, 1, ... counts[k] - 1.
    run_start = np.repeat(np.cumsum(counts) - counts, counts)
    second = first + 1 + (np.arange(counts.sum()) - run_start)
    return np.stack([order[first], order[second]], axis=1)


def overlapping_boxes(lo, hi, allowed=None):
    """Index pairs of boxes that overlap on all three axes.

    Parameters
    ----------
    lo, hi : (m, 3) float
        Lower and upper corners of axis-aligned boxes.  Intervals are closed;
        a box with ``lo > hi`` on some axis is empty and overlaps nothing.
    allowed : (q, 2) int, optional
        Pairs that may be reported (in either order); other pairs are dropped.
        By default every pair may be reported.

    Returns
    -------
    (p, 2) int
        Pairs ``(i, j)`` with ``i < j``, sorted lexicographically.

    Raises
    ------
    ValueError
        If the shapes are wrong or `allowed` holds an index outside ``[0, m)``.

    Notes
    -----
    The sweep runs along the axis on which the box centres spread most, which
    keeps the candidate list short for flat layouts.
    """
    lo, hi = _check_boxes(lo, hi, ndim=2)
    m = len(lo)
    if m < 2:
        return np.empty((0, 2), dtype=int)
    centres = 0.5 * (lo + hi)
    axis = int(np.argmax(centres.var(axis=0)))
    pairs = _candidate_pairs(lo, hi, axis)
    i, j = pairs[:, 0], pairs[:, 1]
    # The boxes' intersection is not empty (so an empty box meets nothing).
    overlap = (np.maximum(lo[i], lo[j]) <= np.minimum(hi[i], hi[j])).all(axis=1)
    i, j = i[overlap], j[overlap]
    pairs = np.stack([np.minimum(i, j), np.maximum(i, j)], axis=1)
    if allowed is not None:
        allowed = np.asarray(allowed, dtype=int).reshape(-1, 2)
        if allowed.size and (allowed.min() < 0 or allowed.max() >= m):
            raise ValueError(f"allowed pairs must index boxes 0 to {m - 1}")
        pairs = pairs[np.isin(_pair_keys(pairs, m), _pair_keys(allowed, m))]
    return pairs[np.lexsort((pairs[:, 1], pairs[:, 0]))]


def box_pairs_batched(lo, hi, allowed=None):
    """Overlapping box pairs in each of several frames.

    Parameters
    ----------
    lo, hi : (T, m, 3) float
        Lower and upper box corners; frame ``f`` is ``lo[f], hi[f]``.
    allowed : (q, 2) int, optional
        Pairs that may be reported, the same in every frame; see
        `overlapping_boxes`.

    Returns
    -------
    (p, 3) int
        Rows ``(frame, i, j)`` with ``i < j``, sorted by frame, then i, then j.
    """
    lo, hi = _check_boxes(lo, hi, ndim=3)
    rows = [np.empty((0, 3), dtype=int)]
    for frame in range(len(lo)):
        pairs = overlapping_boxes(lo[frame], hi[frame], allowed)
        rows.append(np.column_stack([np.full(len(pairs), frame, dtype=int), pairs]))
    return np.concatenate(rows, axis=0)
