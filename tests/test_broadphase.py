"""Tests of foldsim.analysis.broadphase against an all-pairs reference."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from foldsim.analysis.broadphase import box_pairs_batched, overlapping_boxes


def brute_force(lo, hi):
    """All pairs i < j of closed boxes with a common point, O(m^2), common practice."""
    hit = (np.maximum(lo[:, None], lo[None]) <= np.minimum(hi[:, None], hi[None])).all(axis=2)
    return np.argwhere(np.triu(hit, k=1))


def random_boxes(rng, m, spread=1.0, size=0.1):
    lo = rng.random((m, 3)) * spread
    return lo, lo + rng.random((m, 3)) * size


@pytest.mark.parametrize("m", [0, 1, 2, 5, 50, 400])
@pytest.mark.parametrize("seed", [0, 1, 2])
def test_matches_brute_force(m, seed):
    lo, hi = random_boxes(np.random.default_rng(seed), m)
    pairs = overlapping_boxes(lo, hi)
    assert pairs.shape[1] == 2 and pairs.dtype.kind == "i"
    # common practice: the same pair list as checking every pair
    assert np.array_equal(pairs, brute_force(lo, hi))


def test_flat_layout_and_large_boxes():
    rng = np.random.default_rng(3)
    lo, hi = random_boxes(rng, 300, size=0.3)
    lo[:, 2] = hi[:, 2] = 0.0  # a flat net: all boxes in one plane
    hi[:5] += 2.0  # a few boxes overlapping nearly everything
    # common practice: the same pair list as checking every pair
    assert np.array_equal(overlapping_boxes(lo, hi), brute_force(lo, hi))


def test_closed_intervals_and_empty_boxes():
    lo = np.array([[0, 0, 0], [1, 0, 0], [1, 1, 1], [2.5, 0, 0], [0.2, 0.2, 0.2]], float)
    hi = np.array([[1, 1, 1], [2, 1, 1], [2, 2, 2], [3, 1, 1], [0.1, 0.9, 0.9]], float)
    # hand check: boxes 0-1 share a face, 0-2 a corner, 1-2 an edge, box 3 is
    # apart and box 4 is empty (lo > hi on x)
    assert overlapping_boxes(lo, hi).tolist() == [[0, 1], [0, 2], [1, 2]]


def test_allowed_filter():
    rng = np.random.default_rng(4)
    lo, hi = random_boxes(rng, 200, size=0.2)
    everything = brute_force(lo, hi)
    m = len(lo)
    candidates = np.argwhere(np.triu(np.ones((m, m), bool), k=1))
    allowed = candidates[rng.random(len(candidates)) < 0.3]
    flipped = allowed[::-1, ::-1]  # reversed order, j before i
    keys = set(map(tuple, allowed))
    expected = np.array([p for p in everything.tolist() if tuple(p) in keys]).reshape(-1, 2)
    # common practice: filtering the brute-force list by hand gives the same pairs
    assert np.array_equal(overlapping_boxes(lo, hi, allowed=flipped), expected)
    assert 0 < len(expected) < len(everything)
    assert overlapping_boxes(lo, hi, allowed=np.empty((0, 2), int)).shape == (0, 2)
    with pytest.raises(ValueError):
        overlapping_boxes(lo, hi, allowed=[[0, m]])


def test_shapes_are_checked():
    with pytest.raises(ValueError):
        overlapping_boxes(np.zeros((4, 3)), np.zeros((5, 3)))
    with pytest.raises(ValueError):
        overlapping_boxes(np.zeros((4, 2)), np.zeros((4, 2)))
    with pytest.raises(ValueError):
        box_pairs_batched(np.zeros((4, 3)), np.zeros((4, 3)))


def test_batched_frames():
    rng = np.random.default_rng(5)
    frames, m = 6, 80
    lo = rng.random((frames, m, 3)) * np.linspace(0.2, 2, frames)[:, None, None]
    hi = lo + 0.15
    hi[2] = lo[2] - 1  # a frame of empty boxes has no pairs
    rows = box_pairs_batched(lo, hi)
    assert rows.shape[1] == 3
    # common practice: frame by frame against the brute force
    expected = [
        np.column_stack([np.full(len(p), f), p])
        for f in range(frames)
        for p in [brute_force(lo[f], hi[f])]
    ]
    assert np.array_equal(rows, np.concatenate(expected))
    assert not np.any(rows[:, 0] == 2)
    allowed = np.array([[0, 1], [3, 2], [10, 20]])
    filtered = box_pairs_batched(lo, hi, allowed=allowed)
    keep = np.isin(rows[:, 1] * m + rows[:, 2], [1, 2 * m + 3, 10 * m + 20])
    assert np.array_equal(filtered, rows[keep])
    assert box_pairs_batched(np.zeros((0, m, 3)), np.zeros((0, m, 3))).shape == (0, 3)


@settings(derandomize=True, max_examples=200, deadline=None)
@given(
    arrays(np.int8, st.tuples(st.integers(0, 30), st.just(3)), elements=st.integers(0, 6)),
    st.data(),
)
def test_integer_boxes_match_brute_force(lo, data):
    # integer corners make ties and touching faces common
    size = data.draw(arrays(np.int8, lo.shape, elements=st.integers(-1, 3)))
    lo = lo.astype(float)
    hi = lo + size
    # common practice: the same pair list as checking every pair
    assert np.array_equal(overlapping_boxes(lo, hi), brute_force(lo, hi))


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_items_grouped_by_face_find_every_overlapping_pair(seed):
    """The sweep's broad phase on items carried by faces (`sweep._box_pairs`, faces' boxes first).

    Against all pairs checked one by one (common practice), per frame: every two
    items of different faces whose boxes overlap and of which one is active.
    """
    from types import SimpleNamespace

    from foldsim.analysis.sweep import _box_pairs

    rng = np.random.default_rng(seed)
    n_t, m = 3, 240
    owner = rng.integers(0, 60, m)
    passive = rng.random(m) < 0.4
    lo = rng.random((n_t, m, 3))
    hi = lo + rng.random((n_t, m, 3)) * 0.12
    rows = _box_pairs(SimpleNamespace(owner=owner, passive=passive), lo, hi)
    got = {tuple(r) for r in rows.tolist()}
    assert len(got) == len(rows)
    want = set()
    for t in range(n_t):
        for i, j in brute_force(lo[t], hi[t]).tolist():
            if owner[i] != owner[j] and not (passive[i] and passive[j]):
                want.add((t, i, j))
    assert got == want
