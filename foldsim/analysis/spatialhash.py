"""Broad phase on a uniform 3-axis grid: which axis-aligned boxes overlap.

Spatial hashing (M. Teschner et al., "Optimized Spatial Hashing for Collision
Detection of Deformable Objects", VMV 2003; C. Ericson, "Real-Time Collision
Detection", 2005, section 7.1). Every box is entered into each grid cell it
overlaps; two boxes can overlap only if they share a cell. A pair is reported only
from the one cell that holds the lower corner of the two boxes' intersection, so it
is found once, without deduplication. Boxes that would cover more than `MAX_CELLS`
cells find their partners on a grid of `COARSE` times larger cells, and the few too
large even for that are tested against every box of their frame directly.

The answers are those of `broadphase.overlapping_boxes` (closed boxes: touching
boxes overlap; a box with ``lo > hi`` on some axis is empty), which stays the
reference. Everything is vectorised over boxes and over frames.
"""

import numpy as np

MAX_CELLS = 27
"""Cells a box may cover before it goes to the coarser grid."""

ROW_BUDGET = 100_000
"""About how many (box, cell) entries one block of frames may make (bounds memory)."""


def _cell_size(lo, hi):
    """One cell edge for all boxes: the median of their largest extents."""
    extent = (hi - lo).max(axis=-1)
    extent = extent[np.isfinite(extent) & (extent > 0)]
    if not len(extent):
        return 1.0
    return float(np.quantile(extent, 0.5))


def later_in_run(run_end):
    """Index pairs (i, j), i < j, of every entry with each later entry of its run.

    ``run_end`` (n,): for each entry of a sorted array, where its run of equal
    values ends (``searchsorted(..., side="right")``).

    Examples
    --------
    >>> [x.tolist() for x in later_in_run(np.array([2, 2, 3, 5, 5]))]
    [[0, 3], [1, 4]]
    """
    per = run_end - np.arange(1, len(run_end) + 1)
    i = np.repeat(np.arange(len(run_end)), per)
    return i, i + 1 + (np.arange(per.sum()) - np.repeat(np.cumsum(per) - per, per))


def _block_pairs(lo, hi, frame, cell, origin, active=None):
    """(frame, i, j) rows for boxes lo, hi (n, 3) with frame ids and per-frame indices.

    ``active`` (n,) bool, optional: only pairs with an active box are wanted.
    """
    first = np.floor((lo - origin) / cell).astype(np.int64)
    last = np.floor((hi - origin) / cell).astype(np.int64)
    span = last - first + 1
    n_cells = span.prod(axis=1)
    big = n_cells > MAX_CELLS
    small = np.flatnonzero(~big)
    dims = last.max(axis=0) + 1
    n_frames = int(frame.max()) + 1 if len(frame) else 0
    if n_frames * int(np.prod(dims.astype(np.float64))) >= 2.0 ** 62:
        raise ValueError("grid too fine for the boxes' spread")
    counts = n_cells[small]
    owner = np.repeat(small, counts)
    local = np.arange(counts.sum()) - np.repeat(np.cumsum(counts) - counts, counts)
    sy, sz = span[owner, 1], span[owner, 2]
    cx = first[owner, 0] + local // (sy * sz)
    cy = first[owner, 1] + (local // sz) % sy
    cz = first[owner, 2] + local % sz
    key = ((frame[owner] * dims[0] + cx) * dims[1] + cy) * dims[2] + cz
    order = np.argsort(key, kind="stable")
    key, owner = key[order], owner[order]
    at = np.stack([cx, cy, cz])[:, order]
    run_end = np.searchsorted(key, key, side="right")
    if active is None:
        # Pair every entry with the later entries of its cell.
        i, j = later_in_run(run_end)
    else:
        # Pair every active entry with every other entry of its cell, a pair of two
        # active entries from its first only: pairs of passive boxes are never made.
        run_start = np.searchsorted(key, key, side="left")
        seeds = np.flatnonzero(active[owner])
        per = run_end[seeds] - run_start[seeds]
        i = np.repeat(seeds, per)
        j = np.repeat(run_start[seeds], per) + (np.arange(per.sum()) - np.repeat(np.cumsum(per) - per, per))
        keep = (j != i) & (~active[owner[j]] | (j > i))
        i, j = i[keep], j[keep]
    ia, ib = owner[i], owner[j]
    # Keep a pair only in the cell of its boxes' intersection's lower corner (the
    # larger of the two first cells on each axis), then test the boxes, one axis at
    # a time on the pairs still left.
    for axis in range(3):
        home = np.maximum(first[ia, axis], first[ib, axis]) == at[axis, i]
        i, ia, ib = i[home], ia[home], ib[home]
    for axis in range(3):
        meet = np.maximum(lo[ia, axis], lo[ib, axis]) <= np.minimum(hi[ia, axis], hi[ib, axis])
        ia, ib = ia[meet], ib[meet]
    rows = [np.column_stack([ia, ib])]
    if big.any():
        found = _big_pairs(lo, hi, frame, big, cell * COARSE, origin)
        if active is not None:
            found = found[active[found[:, 0]] | active[found[:, 1]]]
        rows.append(found)
    return np.concatenate(rows)


COARSE = 8
"""How much larger the cells are on which big boxes find their partners."""


def _big_pairs(lo, hi, frame, big, cell, origin):
    """Pairs (p, 2) with at least one big box, found on a grid of larger cells.

    Every box that fits is entered into the coarse grid; each big box is paired with
    the entries of its cells, a pair being kept in the one cell that holds the lower
    corner of the boxes' intersection. Boxes too large even there are tested against
    every box of their frame (frames are contiguous runs).
    """
    first = np.floor((lo - origin) / cell).astype(np.int64)
    last = np.floor((hi - origin) / cell).astype(np.int64)
    span = last - first + 1
    n_cells = span.prod(axis=1)
    huge = n_cells > MAX_CELLS
    dims = last.max(axis=0) + 1
    fits = np.flatnonzero(~huge)
    counts = n_cells[fits]
    owner = np.repeat(fits, counts)
    local = np.arange(counts.sum()) - np.repeat(np.cumsum(counts) - counts, counts)
    sy, sz = span[owner, 1], span[owner, 2]
    cx = first[owner, 0] + local // (sy * sz)
    cy = first[owner, 1] + (local // sz) % sy
    cz = first[owner, 2] + local % sz
    key = ((frame[owner] * dims[0] + cx) * dims[1] + cy) * dims[2] + cz
    order = np.argsort(key, kind="stable")
    key, owner = key[order], owner[order]
    run_start = np.searchsorted(key, key, side="left")
    run_end = np.searchsorted(key, key, side="right")
    rows = []
    seeds = np.flatnonzero(big[owner])
    per = run_end[seeds] - run_start[seeds]
    step = max(1, ROW_BUDGET // max(1, int(per.max()) if len(per) else 1))
    for k in range(0, len(seeds), step):
        s, cnt = seeds[k:k + step], per[k:k + step]
        i = np.repeat(s, cnt)
        j = np.repeat(run_start[s], cnt) + (np.arange(cnt.sum()) - np.repeat(np.cumsum(cnt) - cnt, cnt))
        a, b = owner[i], owner[j]
        # A pair of two big boxes comes from both; keep it from the smaller index.
        keep = (a != b) & (~big[b] | (b > a))
        i, a, b = i[keep], a[keep], b[keep]
        low = np.maximum(lo[a], lo[b])
        meet = (low <= np.minimum(hi[a], hi[b])).all(axis=1)
        home_cell = np.floor((low - origin) / cell).astype(np.int64)
        home = ((frame[a] * dims[0] + home_cell[:, 0]) * dims[1] + home_cell[:, 1]) * dims[2] + home_cell[:, 2]
        meet &= home == key[i]
        rows.append(np.column_stack([a[meet], b[meet]]))
    huges = np.flatnonzero(huge)
    if len(huges):
        frame_start = np.searchsorted(frame, frame[huges], side="left")
        per = np.searchsorted(frame, frame[huges], side="right") - frame_start
        step = max(1, ROW_BUDGET // max(1, int(per.max())))
        for k in range(0, len(huges), step):
            g, fs, cnt = huges[k:k + step], frame_start[k:k + step], per[k:k + step]
            a = np.repeat(g, cnt)
            b = np.repeat(fs, cnt) + (np.arange(cnt.sum()) - np.repeat(np.cumsum(cnt) - cnt, cnt))
            # A pair of two huge boxes is reported by the smaller index only.
            keep = (b != a) & (~huge[b] | (b > a))
            a, b = a[keep], b[keep]
            meet = (np.maximum(lo[b], lo[a]) <= np.minimum(hi[b], hi[a])).all(axis=1)
            rows.append(np.column_stack([a[meet], b[meet]]))
    return np.concatenate(rows) if rows else np.zeros((0, 2), dtype=np.int64)


def box_pairs_batched(lo, hi, active=None):
    """Overlapping box pairs in each of several frames.

    Parameters
    ----------
    lo, hi : (T, m, 3) float
        Lower and upper box corners; frame ``f`` is ``lo[f], hi[f]``.
    active : (m,) bool, optional
        Report only pairs with at least one active box (the others are never
        formed, which saves the work where most boxes are passive neighbours).

    Returns
    -------
    (p, 3) int
        Rows ``(frame, i, j)`` with ``i < j``, sorted by frame, then i, then j.
    """
    lo = np.asarray(lo, dtype=float)
    hi = np.asarray(hi, dtype=float)
    if lo.shape != hi.shape or lo.ndim != 3 or lo.shape[-1] != 3:
        raise ValueError(f"lo and hi must both have shape (T, m, 3); got {lo.shape} and {hi.shape}")
    n_frames, m = lo.shape[:2]
    if m < 2 or n_frames == 0:
        return np.empty((0, 3), dtype=int)
    valid = (lo <= hi).all(axis=2)
    if not valid.any():
        return np.empty((0, 3), dtype=int)
    cell = _cell_size(lo[valid], hi[valid])
    origin = lo[valid].min(axis=0)
    top = hi[valid].max(axis=0)
    cell = max(cell, float((top - origin).max()) / 2 ** 16, np.finfo(float).tiny)
    span = (np.floor((hi - origin) / cell) - np.floor((lo - origin) / cell) + 1).prod(axis=2)
    entries = np.where(valid, np.minimum(span, MAX_CELLS), 0).sum(axis=1)
    block = np.cumsum(entries) // ROW_BUDGET
    bounds = np.concatenate([[0], np.flatnonzero(np.diff(block)) + 1, [n_frames]])
    out = [np.empty((0, 3), dtype=int)]
    for k, end in zip(bounds[:-1], bounds[1:]):
        sub = valid[k:end]
        f_idx, b_idx = np.nonzero(sub)
        pairs = _block_pairs(lo[k:end][sub], hi[k:end][sub], f_idx, cell, origin,
                             None if active is None else np.asarray(active, bool)[b_idx])
        if not len(pairs):
            continue
        frame = f_idx[pairs[:, 0]] + k
        i, j = b_idx[pairs[:, 0]], b_idx[pairs[:, 1]]
        out.append(np.column_stack([frame, np.minimum(i, j), np.maximum(i, j)]))
    rows = np.concatenate(out)
    return rows[np.lexsort((rows[:, 2], rows[:, 1], rows[:, 0]))]


def overlapping_boxes(lo, hi):
    """Index pairs (p, 2) of boxes lo, hi (m, 3) that overlap, i < j, sorted."""
    lo = np.asarray(lo, dtype=float)
    hi = np.asarray(hi, dtype=float)
    return box_pairs_batched(lo[None], hi[None])[:, 1:]
