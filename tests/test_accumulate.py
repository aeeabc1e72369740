"""Least-cost accumulation: exact against closed forms, scikit-image and a pure-Python reference.

The move sets are written down here from their definition (not read from the module), and the
bounds on how much a grid overstates straight walking are derived from their geometry.
"""

import itertools
import math

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st
from hypothesis.extra import numpy as hnp

from geo_reach.analysis.accumulate import accumulate, moves
from geo_reach.analysis.accumulate_reference import accumulate_reference
from geo_reach.analysis.friction import slope_factor
from geo_reach.errors import OptionError

SQRT2 = math.sqrt(2.0)

#: The move sets by definition: the 8 cells around a cell; plus the 8 knight moves (2 along one axis,
#: 1 along the other) for 16 (common practice for cost-distance grids).
AXES_DIAGONALS = [(dr, dc) for dr in (-1, 0, 1) for dc in (-1, 0, 1) if (dr, dc) != (0, 0)]
KNIGHTS = [(a * s, b * t) for a, b in ((1, 2), (2, 1)) for s in (-1, 1) for t in (-1, 1)]
MOVE_SETS = {8: AXES_DIAGONALS, 16: AXES_DIAGONALS + KNIGHTS}


def _one_seed(shape, r, c, minutes=0.0):
    s = np.full(shape, np.inf)
    s[r, c] = minutes
    return s


def _bound_from_geometry(move_set):
    """Largest ratio of the grid path to the straight line on uniform ground, from the move directions.

    Between two neighbouring move directions ``g`` apart, a target at angle ``a`` from the first is
    reached by ``p`` of one unit move and ``q`` of the other with, by the law of sines,
    ``p = |x| sin(g - a) / sin g`` and ``q = |x| sin a / sin g``; the path over the straight line is
    ``(sin(g - a) + sin a) / sin g = cos(a - g/2) / cos(g/2)``, largest at the bisector: ``1 / cos(g/2)``.
    So the bound is ``1 / cos(G/2)`` for the widest gap ``G`` between neighbouring move directions.
    """
    ang = sorted(math.atan2(dr, dc) % (2 * math.pi) for dr, dc in move_set)
    gaps = [b - a for a, b in zip(ang, ang[1:])] + [ang[0] + 2 * math.pi - ang[-1]]
    return 1.0 / math.cos(max(gaps) / 2.0)


def _lp_gauge(dx, dy, move_vectors, move_cost):
    """Cheapest non-negative combination of moves reaching (dx, dy): the continuous optimum of the
    move graph (in the plane two moves suffice, so every pair is tried)."""
    best = np.full(np.shape(dx), np.inf)
    best[(dx == 0) & (dy == 0)] = 0.0
    target = np.vstack([np.ravel(dx), np.ravel(dy)])
    for i, j in itertools.combinations(range(len(move_vectors)), 2):
        a = np.column_stack([move_vectors[i], move_vectors[j]])
        if abs(np.linalg.det(a)) < 1e-12:
            continue
        coef = np.linalg.solve(a, target)
        ok = (coef >= -1e-12).all(axis=0)
        cost = coef[0] * move_cost[i] + coef[1] * move_cost[j]
        flat = best.ravel()
        flat[ok] = np.minimum(flat[ok], cost[ok])
        best = flat.reshape(best.shape)
    return best


def test_move_sets_as_defined():
    assert set(moves(8)) == set(MOVE_SETS[8]) and len(moves(8)) == 8
    assert set(moves(16)) == set(MOVE_SETS[16]) and len(moves(16)) == 16


def test_bounds_derived_from_move_geometry():
    # 8 neighbours: widest gap 45 degrees, 1/cos(22.5 deg) = sqrt(4 - 2 sqrt 2) = 1.0824 (common practice:
    # the octile metric's worst case; value from memory, here derived).  16 neighbours: the widest gap is
    # between an axis and a knight move, atan(1/2) = 26.57 degrees, 1/cos(13.28 deg) = 1.0275 (the figure).
    b8, b16 = _bound_from_geometry(MOVE_SETS[8]), _bound_from_geometry(MOVE_SETS[16])
    assert b8 == pytest.approx(math.sqrt(4 - 2 * SQRT2), rel=1e-14)
    assert b8 == pytest.approx(1.0824, abs=5e-5)
    assert b16 == pytest.approx(1.0 / math.cos(math.atan(0.5) / 2), rel=1e-14)
    assert b16 == pytest.approx(1.0275, abs=5e-5)


@pytest.mark.parametrize("neighbours", [8, 16])
def test_flat_ground_against_euclid(neighbours):
    # Uniform friction, one seed: every cell's minutes is (a) the closed-form cheapest combination of two
    # moves (the pairs bracketing a direction have determinant 1, so every cell is reached by whole
    # moves), (b) never below the straight line (Euclid) and (c) at most the derived bound above it,
    # (d) which the worst-placed cells nearly reach.
    shape, cell, kmh = (81, 81), 10.0, 5.0
    r0 = c0 = 40
    res = accumulate(np.full(shape, kmh), _one_seed(shape, r0, c0), cell, neighbours=neighbours)
    pace = 60.0 / (kmh * 1000.0)
    R, C = np.indices(shape)
    dx, dy = (C - c0) * cell, (R - r0) * cell
    mv = np.array([(dc * cell, dr * cell) for dr, dc in MOVE_SETS[neighbours]], dtype=np.float64)
    closed = _lp_gauge(dx, dy, mv, np.hypot(mv[:, 0], mv[:, 1]) * pace)
    np.testing.assert_allclose(res.minutes, closed, rtol=1e-12, atol=1e-12)
    euclid = np.hypot(dx, dy) * pace
    far = euclid > 0
    ratio = res.minutes[far] / euclid[far]
    bound = _bound_from_geometry(MOVE_SETS[neighbours])
    assert ratio.min() >= 1.0 - 1e-12
    assert ratio.max() <= bound + 1e-12
    assert ratio.max() > bound - 0.001
    # exact along every move direction
    for dr, dc in MOVE_SETS[neighbours]:
        k = 10 if neighbours == 8 else 5
        assert res.minutes[r0 + k * dr, c0 + k * dc] == pytest.approx(euclid[r0 + k * dr, c0 + k * dc], rel=1e-13)
    assert (res.label == 1).all()


def _tobler_line_integral(length_m, grade_at, walk_kmh, n=24):
    """Minutes along a straight path of ``length_m`` with grade ``grade_at(l)`` (rise/run) at distance
    ``l``, by Gauss-Legendre quadrature of dt = dl / v(grade); v = walk * T(s) / T(0),
    T(s) = 6 exp(-3.5 |s + 0.05|) km/h (Tobler 1993, "Three presentations on geographical analysis and
    modeling", NCGIA Technical Report 93-1), written out here."""
    x, w = np.polynomial.legendre.leggauss(n)
    l = 0.5 * (x[:, None] + 1.0) * length_m[None, :]
    s = grade_at(l)
    v_kmh = walk_kmh * np.exp(-3.5 * np.abs(s + 0.05)) / math.exp(-3.5 * 0.05)
    return 0.5 * length_m * (w[:, None] * 60.0 / (1000.0 * v_kmh)).sum(axis=0)


@pytest.mark.parametrize("neighbours,psi_deg", [(16, 0.0), (16, 30.0), (8, 0.0)])
@pytest.mark.parametrize("direction", ["from-hub", "to-hub"])
def test_slope_against_tobler_line_integral(neighbours, psi_deg, direction):
    # A plane rising 10 % towards psi (degrees from east).  Reference: the walking time along the straight
    # path, a numerical line integral of Tobler's function with the grade taken numerically from the
    # elevation function.  Tolerance, derived: the grid reaches a cell by whole moves, each of one constant
    # grade on a plane, so its best is at most the cheapest two-move combination; the worst ratio of that
    # combination to the straight path over all directions (sampled finely, plus Tobler's kink directions)
    # bounds the grid.  From below: Tobler's speed figure on a plane is convex (checked here), so no path
    # beats the straight one.
    g, cell, walk = 0.10, 10.0, 5.0
    psi = math.radians(psi_deg)
    n = 61
    r0 = c0 = 30
    R, C = np.indices((n, n))

    def z_at(x, y):                       # metres; x east, y north from the seed
        return g * (x * math.cos(psi) + y * math.sin(psi))

    z = z_at((C - c0) * cell, -(R - r0) * cell)
    res = accumulate(np.full((n, n), walk), _one_seed((n, n), r0, c0), cell, elevation=z,
                     direction=direction, neighbours=neighbours)
    dx, dy = ((C - c0) * cell).ravel().astype(float), (-(R - r0) * cell).ravel().astype(float)
    length = np.hypot(dx, dy)
    far = length > 0
    # from-hub: walked from the seed to the cell; to-hub: from the cell to the seed
    sgn = 1.0 if direction == "from-hub" else -1.0
    ux, uy = sgn * dx[far] / length[far], sgn * dy[far] / length[far]

    def grade_at(l):
        h = 1e-3                           # central difference of the elevation along the path, rise/run
        x0 = np.where(sgn > 0, 0.0, dx[far])
        y0 = np.where(sgn > 0, 0.0, dy[far])
        return (z_at(x0 + (l + h) * ux, y0 + (l + h) * uy) - z_at(x0 + (l - h) * ux, y0 + (l - h) * uy)) / (2 * h)

    straight = _tobler_line_integral(length[far], grade_at, walk)
    ratio = res.minutes.ravel()[far] / straight

    def cost_per_m(theta):                 # walking minutes per metre along direction theta (travelled)
        return 60.0 / (1000.0 * walk * slope_factor(g * np.cos(theta - psi)))

    theta = np.concatenate([np.linspace(0, 2 * np.pi, 40_001),
                            psi + np.array([1, -1]) * np.arccos(-0.05 / g)])   # Tobler's kink: grade -0.05
    # convexity of the speed figure: every point of it lies on its convex hull
    from scipy.spatial import ConvexHull

    fig = np.column_stack([np.cos(theta[::50]), np.sin(theta[::50])]) / cost_per_m(theta[::50])[:, None]
    hull = ConvexHull(fig)
    assert (fig @ hull.equations[:, :2].T + hull.equations[:, 2]).max(axis=1).min() > -1e-12
    mv = np.array([(dc, -dr) for dr, dc in MOVE_SETS[neighbours]], dtype=np.float64)
    mcost = np.hypot(mv[:, 0], mv[:, 1]) * cost_per_m(np.arctan2(mv[:, 1], mv[:, 0]))
    worst = (_lp_gauge(np.cos(theta), np.sin(theta), mv, mcost) / cost_per_m(theta)).max()
    assert ratio.min() >= 1.0 - 1e-9
    assert ratio.max() <= worst + 1e-8
    assert ratio.max() > worst - 0.005      # reached nearly, in the worst direction
    if neighbours == 8 and psi_deg == 0.0:
        assert worst == pytest.approx(1.196, abs=0.001)    # the 19.6 % off-axis
    if neighbours == 16 and psi_deg == 0.0:
        assert worst < 1.04


def test_matches_skimage_mcp_geometric():
    # scikit-image's MCP_Geometric charges (cost_a + cost_b)/2 times the step length (1 or sqrt 2);
    # with cost = pace (minutes per metre) and 1 m cells it is our 8-neighbour move cost exactly.
    from skimage.graph import MCP_Geometric

    rng = np.random.default_rng(42)
    for trial in range(3):
        shape = (60, 45)
        kmh = rng.uniform(0.5, 20.0, shape)
        starts = [tuple(rng.integers(0, s) for s in shape) for _ in range(1 + trial * 3)]
        seeds = np.full(shape, np.inf)
        for r, c in starts:
            seeds[r, c] = 0.0
        ours = accumulate(kmh, seeds, 1.0, neighbours=8)
        cum, _ = MCP_Geometric(0.06 / kmh, fully_connected=True).find_costs(starts)
        np.testing.assert_allclose(ours.minutes, cum, rtol=1e-12, atol=1e-12)


def test_knight_move_costed_over_four_cells():
    # From (0, 0) to (1, 2): a knight move of sqrt 5 cells, a quarter of its length in each of (0, 0),
    # (0, 1), (1, 1), (1, 2) (the straight line crosses the column edge at 1/4, the row edge at 1/2 and
    # the next column edge at 3/4).  6 km/h (0.010 min/m) except the two pass-through cells at 5 km/h
    # (0.012 min/m).  100 m cells.
    kmh = np.full((2, 3), 6.0)
    kmh[0, 1] = kmh[1, 1] = 5.0
    cell = 100.0
    res = accumulate(kmh, _one_seed((2, 3), 0, 0), cell)
    knight = math.sqrt(5) * cell * (0.010 + 0.012 + 0.012 + 0.010) / 4            # 2.4597 min
    # the other routes: an axis and a diagonal move through (0, 1) or (1, 1): 1.1 + 1.5556 = 2.6556 min
    round_about = cell * (0.010 + 0.012) / 2 + SQRT2 * cell * (0.012 + 0.010) / 2
    assert knight < round_about
    assert res.minutes[1, 2] == pytest.approx(knight, rel=1e-13)
    assert res.minutes[1, 2] == pytest.approx(2.4597, abs=1e-4)


@pytest.mark.parametrize("blocked", [(0, 1), (1, 1)])
def test_knight_move_never_jumps_an_impassable_cell(blocked):
    # Either of the two cells the knight move (0,0) -> (1,2) passes through being impassable forbids it;
    # the trip then goes one of the ways round.  6 km/h: 1 minute per 100 m.
    kmh = np.full((2, 3), 6.0)
    kmh[blocked] = 0.0
    res = accumulate(kmh, _one_seed((2, 3), 0, 0), 100.0)
    # round: (0,0) -> the free one of (0,1)/(1,1) -> (1,2); (1,0) -> (0,2) is a knight through (1,1), (0,1)
    assert res.minutes[1, 2] == pytest.approx(1 + SQRT2, rel=1e-13)
    free = accumulate(np.full((2, 3), 6.0), _one_seed((2, 3), 0, 0), 100.0)
    assert free.minutes[1, 2] == pytest.approx(math.sqrt(5), rel=1e-13)


@pytest.mark.parametrize("neighbours", [8, 16])
def test_one_cell_wall_holds(neighbours):
    # A wall one cell wide: no move crosses it (a knight move spanning it passes through two of its cells).
    kmh = np.full((7, 7), 5.0)
    kmh[:, 3] = 0.0
    res = accumulate(kmh, _one_seed((7, 7), 3, 0), 50.0, neighbours=neighbours)
    assert np.isfinite(res.minutes[:, :3]).all()
    assert np.isnan(res.minutes[:, 3:]).all()
    # a row wall, the other way round
    res = accumulate(kmh.T.copy(), _one_seed((7, 7), 0, 3), 50.0, neighbours=neighbours)
    assert np.isnan(res.minutes[3:, :]).all() and np.isfinite(res.minutes[:3, :]).all()


def test_knight_slope_over_its_own_length():
    # Cell (1, 2) is 10 m higher than the rest (100 m cells).  The knight move up to it rises 10 m over
    # sqrt 5 * 100 m = 223.6 m: slope 0.0447, Tobler factor exp(-3.5 (0.0947 - 0.05)) = 0.855.  The other
    # routes climb over 100 m or 141 m: steeper, and longer (checked below), so the knight move is taken.
    z = np.zeros((2, 3))
    z[1, 2] = 10.0
    cell = 100.0
    res = accumulate(np.full((2, 3), 6.0), _one_seed((2, 3), 0, 0), cell, elevation=z, direction="from-hub")
    d = math.sqrt(5) * cell
    knight = d * 0.01 / slope_factor(10.0 / d)
    via_01 = 1.0 + SQRT2 * cell * 0.01 / slope_factor(10.0 / (SQRT2 * cell))
    via_11 = SQRT2 + 1.0 / slope_factor(0.1)
    assert knight < min(via_01, via_11)
    assert res.minutes[1, 2] == pytest.approx(knight, rel=1e-13)
    assert slope_factor(10.0 / d) == pytest.approx(math.exp(-3.5 * (10.0 / d + 0.05 - 0.05)), rel=1e-13)


def test_uphill_dearer_than_downhill():
    # A ramp rising 10 m per 100 m cell eastward; the network seed is at the low west end.
    # to-hub: the trip from each cell to the seed goes downhill (slope -0.1);
    # from-hub: from the seed up to the cell (slope +0.1). Tobler (1993): T(-0.1) = 6 e^-0.175 = 5.04 km/h,
    # T(+0.1) = 6 e^-0.525 = 3.55 km/h; scaled so flat = 5 km/h.  One row: only axis moves exist.
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
    # just under the limit it is not clipped
    z = np.array([[0.0, 99.0]])
    r = accumulate(np.full((1, 2), 5.0), _one_seed((1, 2), 0, 0), 100.0, elevation=z, direction="from-hub",
                   slope_limit=1.0)
    assert r.minutes[0, 1] == pytest.approx(100 * 0.06 / 5.0 / slope_factor(0.99))


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
    for bad in (4, 12, 24, True, "16"):
        with pytest.raises(OptionError, match="neighbours"):
            accumulate(np.ones((2, 2)), np.zeros((2, 2)), 1.0, neighbours=bad)


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
    neighbours = draw(st.sampled_from([8, 16]))
    return kmh, seeds, labels, elev, cell, direction, neighbours


@settings(max_examples=80, deadline=None)
@given(_problem())
def test_kernel_matches_reference(p):
    kmh, seeds, labels, elev, cell, direction, neighbours = p
    fast = accumulate(kmh, seeds, cell, labels, elevation=elev, direction=direction, neighbours=neighbours)
    slow = accumulate_reference(kmh, seeds, cell, labels, elevation=elev, direction=direction,
                                neighbours=neighbours)
    np.testing.assert_array_equal(np.isnan(fast.minutes), np.isnan(slow.minutes))
    np.testing.assert_allclose(fast.minutes, slow.minutes, rtol=1e-12, atol=1e-12)
    assert ((fast.label == 0) == np.isnan(fast.minutes)).all()


def test_kernel_matches_reference_on_a_larger_barrier_grid():
    # Random friction with scattered impassable cells and terrain, both move sets: knight moves next to
    # barriers are where the two implementations could part.
    rng = np.random.default_rng(3)
    shape = (18, 21)
    kmh = rng.choice([0.0, 1.5, 4.0, 6.0], shape, p=[0.2, 0.2, 0.3, 0.3])
    z = rng.normal(0, 15, shape).cumsum(axis=0)
    seeds = np.full(shape, np.inf)
    seeds[rng.integers(0, 18, 4), rng.integers(0, 21, 4)] = rng.uniform(0, 5, 4)
    for neighbours in (8, 16):
        for direction in ("to-hub", "from-hub"):
            fast = accumulate(kmh, seeds, 40.0, elevation=z, direction=direction, neighbours=neighbours)
            slow = accumulate_reference(kmh, seeds, 40.0, elevation=z, direction=direction, neighbours=neighbours)
            np.testing.assert_allclose(fast.minutes, slow.minutes, rtol=1e-12, atol=1e-12)
