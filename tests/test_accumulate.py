"""Least-cost accumulation: exact against closed forms, scikit-image and a pure-Python reference."""

import math

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st
from hypothesis.extra import numpy as hnp

from geo_reach.analysis.accumulate import accumulate, accumulate_reference
from geo_reach.analysis.friction import slope_factor
from geo_reach.errors import OptionError

SQRT2 = math.sqrt(2.0)


def _one_seed(shape, r, c, minutes=0.0):
    s = np.full(shape, np.inf)
    s[r, c] = minutes
    return s


def test_uniform_friction_octile_exact():
    # On uniform friction every 8-neighbour shortest path has the octile length
    # (max(dr,dc) - min(dr,dc)) + sqrt(2) min(dr,dc) cells (common practice: the chamfer/octile metric).
    shape, cell, kmh = (41, 37), 30.0, 4.0
    r0, c0 = 12, 20
    res = accumulate(np.full(shape, kmh), _one_seed(shape, r0, c0), cell)
    R, C = np.indices(shape)
    dr, dc = np.abs(R - r0), np.abs(C - c0)
    octile_m = cell * ((np.maximum(dr, dc) - np.minimum(dr, dc)) + SQRT2 * np.minimum(dr, dc))
    np.testing.assert_allclose(res.minutes, octile_m / (kmh * 1000 / 60), rtol=1e-12, atol=1e-12)
    assert (res.label == 1).all()


def test_uniform_friction_euclidean_error_bound():
    # Worst case of the 8-neighbour metric against the Euclidean distance: sqrt(4 - 2 sqrt 2) - 1
    # = 8.24 % at 22.5 degrees (common practice; value from memory, recomputed here from the formula).
    bound = math.sqrt(4 - 2 * SQRT2) - 1
    assert bound == pytest.approx(0.0824, abs=5e-5)
    shape, cell, kmh = (81, 81), 10.0, 5.0
    res = accumulate(np.full(shape, kmh), _one_seed(shape, 40, 40), cell)
    R, C = np.indices(shape)
    euclid_min = cell * np.hypot(R - 40, C - 40) / (kmh * 1000 / 60)
    rel = (res.minutes - euclid_min)[euclid_min > 0] / euclid_min[euclid_min > 0]
    assert rel.min() >= -1e-12           # never shorter than the straight line
    assert rel.max() <= bound + 1e-12
    assert rel.max() > bound - 0.002     # and the bound is (nearly) attained near 22.5 degrees


def test_matches_skimage_mcp_geometric():
    # scikit-image's MCP_Geometric charges (cost_a + cost_b)/2 times the step length (1 or sqrt 2);
    # with cost = pace (minutes per metre) and 1 m cells it is our move cost exactly.
    from skimage.graph import MCP_Geometric

    rng = np.random.default_rng(42)
    for trial in range(3):
        shape = (60, 45)
        kmh = rng.uniform(0.5, 20.0, shape)
        starts = [tuple(rng.integers(0, s) for s in shape) for _ in range(1 + trial * 3)]
        seeds = np.full(shape, np.inf)
        for r, c in starts:
            seeds[r, c] = 0.0
        ours = accumulate(kmh, seeds, 1.0)
        cum, _ = MCP_Geometric(0.06 / kmh, fully_connected=True).find_costs(starts)
        np.testing.assert_allclose(ours.minutes, cum, rtol=1e-12, atol=1e-12)


def test_uphill_dearer_than_downhill():
    # A ramp rising 10 m per 100 m cell eastward; the network seed is at the low west end.
    # to-hub: the trip from each cell to the seed goes downhill (slope -0.1);
    # from-hub: from the seed up to the cell (slope +0.1). Tobler (1993): T(-0.1) = 6 e^-0.175 = 5.04 km/h,
    # T(+0.1) = 6 e^-0.525 = 3.55 km/h; scaled so flat = 5 km/h.
    cols, cell, walk = 8, 100.0, 5.0
    z = np.tile(np.arange(cols) * 10.0, (1, 1))
    seeds = _one_seed((1, cols), 0, 0)
    down = accumulate(np.full((1, cols), walk), seeds, cell, elevation=z, direction="to-hub")
    up = accumulate(np.full((1, cols), walk), seeds, cell, elevation=z, direction="from-hub")
    k = np.arange(cols)
    flat_min = k * cell * 0.06 / walk
    np.testing.assert_allclose(down.minutes[0], flat_min / slope_factor(-0.1), rtol=1e-12)
    np.testing.assert_allclose(up.minutes[0], flat_min / slope_factor(0.1), rtol=1e-12)
    # By hand for the far cell (700 m): T(-0.1) = T(0) (both 0.05 from the optimum slope -0.05), so
    # downhill is walked at exactly 5 km/h: 700 m * 60 / 5000 m/h = 8.4 min. Uphill at
    # 5 * e^-0.525 / e^-0.175 = 5 e^-0.35 = 3.5234 km/h: 700 * 60 / 3523.4 = 11.920 min.
    assert down.minutes[0, -1] == pytest.approx(8.4, rel=1e-12)
    assert up.minutes[0, -1] == pytest.approx(11.920, abs=5e-4)
    assert (up.minutes[0, 1:] > down.minutes[0, 1:]).all()


def test_steep_slope_clipped():
    z = np.array([[0.0, 500.0]])
    r = accumulate(np.full((1, 2), 5.0), _one_seed((1, 2), 0, 0), 100.0, elevation=z, direction="from-hub",
                   slope_limit=1.0)
    assert r.minutes[0, 1] == pytest.approx(100 * 0.06 / 5.0 / slope_factor(1.0))


def test_impassable_and_seeded_impassable():
    kmh = np.full((3, 5), 6.0)
    kmh[:, 2] = 0.0                      # a wall
    seeds = _one_seed((3, 5), 1, 0)
    r = accumulate(kmh, seeds, 100.0)
    assert np.isnan(r.minutes[:, 2:]).all() and (r.label[:, 2:] == 0).all()
    seeds[1, 2] = 3.0                    # a bridge seed on the wall cell: keeps its cost, spreads nowhere
    r = accumulate(kmh, seeds, 100.0)
    assert r.minutes[1, 2] == 3.0 and np.isnan(r.minutes[:, 3:]).all()


def test_seed_cost_kept_and_improved():
    seeds = np.array([[0.0, 50.0, np.inf]])
    r = accumulate(np.full((1, 3), 6.0), seeds, 100.0, seed_label=np.array([[1, 2, 0]]))
    assert r.minutes.tolist() == [[0.0, 1.0, 2.0]] and r.label.tolist() == [[1, 1, 1]]


def test_bad_arguments():
    with pytest.raises(OptionError, match="direction"):
        accumulate(np.ones((2, 2)), np.zeros((2, 2)), 1.0, direction="uphill")
    with pytest.raises(OptionError, match="shape"):
        accumulate(np.ones((2, 2)), np.zeros((2, 3)), 1.0)
    with pytest.raises(OptionError, match="zero or more"):
        accumulate(np.ones((2, 2)), -np.ones((2, 2)), 1.0)


def test_labels_point_at_a_cheapest_seed():
    # Each cell's label must name a seed group whose own surface reaches the cell at the overall minimum.
    rng = np.random.default_rng(7)
    shape = (25, 30)
    kmh = rng.uniform(1, 6, shape)
    z = rng.normal(0, 20, shape).cumsum(axis=1)
    seeds = np.full(shape, np.inf)
    lab = np.zeros(shape, np.int64)
    for h in range(1, 5):
        for _ in range(3):
            r, c = rng.integers(0, shape[0]), rng.integers(0, shape[1])
            seeds[r, c], lab[r, c] = rng.uniform(0, 10), h
    full = accumulate(kmh, seeds, 25.0, lab, elevation=z)
    per = {h: accumulate(kmh, np.where(lab == h, seeds, np.inf), 25.0, elevation=z).minutes for h in range(1, 5)}
    chosen = np.choose(full.label - 1, [per[h] for h in range(1, 5)])
    np.testing.assert_allclose(chosen, full.minutes, rtol=1e-12)


@st.composite
def _problem(draw):
    rows = draw(st.integers(1, 9))
    cols = draw(st.integers(1, 9))
    kmh = draw(hnp.arrays(np.float64, (rows, cols), elements=st.sampled_from([0.0, 0.7, 2.0, 5.0, 11.0])))
    seeds = draw(hnp.arrays(np.float64, (rows, cols),
                            elements=st.one_of(st.just(np.inf), st.floats(0, 30), st.just(np.nan))))
    labels = draw(hnp.arrays(np.int64, (rows, cols), elements=st.integers(1, 4)))
    elev = draw(st.one_of(st.none(), hnp.arrays(np.float64, (rows, cols),
                                                 elements=st.one_of(st.floats(-200, 400), st.just(np.nan)))))
    cell = draw(st.sampled_from([1.0, 30.0, 100.0]))
    direction = draw(st.sampled_from(["to-hub", "from-hub"]))
    return kmh, seeds, labels, elev, cell, direction


@settings(max_examples=60, deadline=None)
@given(_problem())
def test_kernel_matches_reference(p):
    kmh, seeds, labels, elev, cell, direction = p
    fast = accumulate(kmh, seeds, cell, labels, elevation=elev, direction=direction)
    slow = accumulate_reference(kmh, seeds, cell, labels, elevation=elev, direction=direction)
    np.testing.assert_array_equal(np.isnan(fast.minutes), np.isnan(slow.minutes))
    np.testing.assert_allclose(fast.minutes, slow.minutes, rtol=1e-12, atol=1e-12)
    assert ((fast.label == 0) == np.isnan(fast.minutes)).all()
