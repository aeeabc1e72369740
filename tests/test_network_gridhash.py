"""Candidate box pairs from the grid hash (geo_reach.network.gridhash) against brute force.

Reference: the obvious O(n m) test of every pair of boxes (two boxes overlap, touching included, when
neither lies wholly left, right, above or below the other).
"""

from __future__ import annotations

import numpy as np
from hypothesis import given, settings, strategies as st

from geo_reach.network import gridhash
from geo_reach.network.gridhash import box_pairs


def brute(a, b=None):
    """Every pair tested (numpy broadcasting over all n x m pairs)."""
    same = b is None
    o = a if same else b
    hit = ((a[:, None, 0] <= o[None, :, 2]) & (o[None, :, 0] <= a[:, None, 2])
           & (a[:, None, 1] <= o[None, :, 3]) & (o[None, :, 1] <= a[:, None, 3]))
    if same:
        hit &= np.triu(np.ones_like(hit), 1).astype(bool)
    return set(zip(*(x.tolist() for x in np.nonzero(hit))))


def boxes(rng, k, sizes):
    lo = rng.uniform(-500, 500, (k, 2)).round(1)
    size = rng.choice(sizes, (k, 2))
    return np.column_stack([lo, lo + size])


def pairs(a, b=None):
    i, j = box_pairs(a, b)
    got = list(zip(i.tolist(), j.tolist()))
    assert len(got) == len(set(got)), "a pair came out twice"
    return set(got)


@settings(max_examples=60, deadline=None)
@given(st.integers(0, 2**31 - 1), st.integers(1, 80), st.integers(0, 60), st.booleans())
def test_mixed_sizes_match_brute_force(seed, n, m, same):
    """Boxes from points to a kilometre (so the long ones take the coarse-grid path), within one
    set and across two: the same pairs as brute force, each once."""
    rng = np.random.default_rng(seed)
    sizes = [0.0, 0.5, 3.0, 40.0, 1000.0]
    a = boxes(rng, n, sizes)
    b = None if same else boxes(rng, m, sizes)
    assert pairs(a, b) == brute(a, b)


def test_touching_and_degenerate_boxes():
    """Boxes that only touch (an edge or a corner) pair; zero-size boxes (points) pair with what they touch."""
    a = np.array([[0, 0, 1, 1], [1, 0, 2, 1], [2, 1, 3, 2], [5, 5, 5, 5], [5, 5, 6, 6], [7, 7, 8, 8.0]])
    assert pairs(a) == {(0, 1), (1, 2), (3, 4)} == brute(a)
    pts = np.array([[1, 1, 1, 1], [10, 10, 10, 10.0]])
    assert pairs(pts, a) == {(0, 0), (0, 1)} == brute(pts, a)


def test_long_boxes_among_short_ones_keep_memory_bounded(monkeypatch):
    """A few 30 km boxes among many 10 m ones: same pairs as brute force, and the grid lists each box
    in a bounded number of cells (without the coarse grid for long boxes, each would fill millions)."""
    rng = np.random.default_rng(3)
    lo = rng.uniform(0, 30_000, (3000, 2))
    small = np.column_stack([lo, lo + rng.uniform(0, 20, (3000, 2))])
    big = np.array([[0, 0, 30_000, 30_000.0], [0, 15_000, 30_000, 15_001.0], [100, 0, 101, 30_000.0]])
    allb = np.vstack([small, big])
    listed = []
    real = gridhash._grid_cells

    def counting(box, cell, origin):
        out = real(box, cell, origin)
        listed.append(len(out[0]))
        return out

    monkeypatch.setattr(gridhash, "_grid_cells", counting)
    got = pairs(allb)
    assert sum(listed) < 100 * len(allb)
    # brute force on the pairs that involve a long box, plus a sample check of the rest
    for k in range(3000, 3003):
        want = {(min(k, q), max(k, q)) for q in range(len(allb)) if q != k and allb[k, 0] <= allb[q, 2]
                and allb[q, 0] <= allb[k, 2] and allb[k, 1] <= allb[q, 3] and allb[q, 1] <= allb[k, 3]}
        assert {p for p in got if k in p} == want
    assert {p for p in got if max(p) < 3000} == brute(small)
