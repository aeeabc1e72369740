"""Exact seeds: points joined to nearby cell centres (own cell and the eight around) by straight walks.

The reference here measures each walk with shapely (the length of the segment inside every cell box),
interpolates the point's elevation with scipy's RegularGridInterpolator and applies Tobler's function
written out from the paper (Tobler 1993, "Three presentations on geographical analysis and modeling",
NCGIA Technical Report 93-1).
"""

import math

import numpy as np
import pytest
import shapely
from hypothesis import given, settings, strategies as st
from hypothesis.extra import numpy as hnp

from geo_reach.analysis.accumulate import accumulate
from geo_reach.analysis.pointwalk import minutes_at_points, seed_points
from geo_reach.errors import OptionError


def _tobler_ratio(slope):
    """T(0) / T(s): how much longer than on the flat a metre takes at slope s (Tobler 1993)."""
    return math.exp(-3.5 * 0.05) / math.exp(-3.5 * abs(slope + 0.05))


def _z_reference(elev, x, y):
    """Elevation at a point: bilinear between the four centres around it (scipy), else its own cell's."""
    if elev is None:
        return math.nan
    rows, cols = elev.shape
    z = math.nan
    r0, c0 = math.floor(y - 0.5), math.floor(x - 0.5)
    if r0 >= 0 and c0 >= 0 and r0 + 1 < rows and c0 + 1 < cols:
        from scipy.interpolate import RegularGridInterpolator

        f = RegularGridInterpolator((np.arange(rows) + 0.5, np.arange(cols) + 0.5), elev, method="linear")
        z = float(f([[y, x]])[0])
    return z if math.isfinite(z) else float(elev[int(math.floor(y)), int(math.floor(x))])


def _walk_reference(kmh, cell_m, a, b, za, zb, slope_limit=1.0):
    """Minutes of the straight walk from a to b (cell units), None if it crosses an impassable cell: the
    length inside every cell box measured with shapely, at that cell's pace, then Tobler on the rise."""
    rows, cols = kmh.shape
    seg = shapely.LineString([a, b])
    minutes = 0.0
    for rr in range(rows):
        for cc in range(cols):
            inside = shapely.box(cc, rr, cc + 1, rr + 1).intersection(seg).length if seg.length else 0.0
            if inside > 1e-9:
                if not kmh[rr, cc] > 0:
                    return None
                minutes += inside * cell_m * 60.0 / (1000.0 * kmh[rr, cc])
    d = seg.length * cell_m
    if d > 0 and math.isfinite(za) and math.isfinite(zb):
        minutes *= _tobler_ratio(max(-slope_limit, min(slope_limit, (zb - za) / d)))
    return minutes


def _block(kmh, x, y, reach=1):
    """The cells a point joins: its own and those up to ``reach`` rows and columns away (None outside)."""
    rows, cols = kmh.shape
    if not (0 <= x < cols and 0 <= y < rows):
        return None
    own = (int(math.floor(y)), int(math.floor(x)))
    span = range(-reach, reach + 1)
    return own, [(own[0] + a, own[1] + b) for a in span for b in span
                 if 0 <= own[0] + a < rows and 0 <= own[1] + b < cols]


def _walks_reference(kmh, cell_m, x, y, elev, to_point, slope_limit=1.0, reach=1):
    """(cell, minutes) pairs a point joins, computed from scratch (seeds: reach 1; read points: 2)."""
    blk = _block(kmh, x, y, reach)
    if blk is None:
        return []
    own, cells = blk
    if not kmh[own] > 0:
        return [(own, 0.0)]
    zp = _z_reference(elev, x, y)
    out = []
    for r, c in cells:
        zc = math.nan if elev is None else float(elev[r, c])
        if to_point:
            w = _walk_reference(kmh, cell_m, (c + 0.5, r + 0.5), (x, y), zc, zp, slope_limit)
        else:
            w = _walk_reference(kmh, cell_m, (x, y), (c + 0.5, r + 0.5), zp, zc, slope_limit)
        if w is not None:
            out.append(((r, c), w))
    return out


@st.composite
def _case(draw):
    rows = draw(st.integers(1, 6))
    cols = draw(st.integers(1, 6))
    kmh = draw(hnp.arrays(np.float64, (rows, cols), elements=st.sampled_from([0.0, 1.0, 3.0, 5.0, 6.0])))
    n = draw(st.integers(1, 6))
    coord = st.one_of(st.floats(-0.5, 7.0), st.sampled_from([0.0, 0.5, 1.0, 1.5, 2.0, 2.5]))
    xs = draw(hnp.arrays(np.float64, n, elements=coord))
    ys = draw(hnp.arrays(np.float64, n, elements=coord))
    minutes = draw(hnp.arrays(np.float64, n, elements=st.one_of(st.floats(0, 20), st.just(np.inf))))
    elev = draw(st.one_of(st.none(), hnp.arrays(np.float64, (rows, cols),
                                                 elements=st.one_of(st.floats(-50, 80), st.just(np.nan)))))
    direction = draw(st.sampled_from(["to-hub", "from-hub"]))
    return kmh, xs, ys, minutes, elev, direction


@settings(max_examples=70, deadline=None)
@given(_case())
def test_seed_points_against_reference(case):
    kmh, xs, ys, minutes, elev, direction = case
    cell = 40.0
    got = seed_points(kmh, cell, xs, ys, minutes, elevation=elev, direction=direction)
    want = np.full(kmh.shape, np.inf)
    for i in range(len(xs)):
        if not np.isfinite(minutes[i]):
            continue
        for rc, w in _walks_reference(kmh, cell, xs[i], ys[i], elev, to_point=direction == "to-hub"):
            want[rc] = min(want[rc], minutes[i] + w)
    np.testing.assert_allclose(got.minutes, want, rtol=1e-12, atol=1e-12)
    # the point named is one that gives the cell's minutes
    for (r, c), p in np.ndenumerate(got.point):
        if p < 0:
            assert not np.isfinite(got.minutes[r, c])
            continue
        ways = dict(_walks_reference(kmh, cell, xs[p], ys[p], elev, to_point=direction == "to-hub"))
        assert minutes[p] + ways[(r, c)] == pytest.approx(got.minutes[r, c], rel=1e-12, abs=1e-12)


@settings(max_examples=50, deadline=None)
@given(_case(), st.booleans())
def test_minutes_at_points_against_reference(case, with_seeds):
    kmh, xs, ys, seed_m, elev, direction = case
    cell = 40.0
    surf = np.arange(kmh.size, dtype=np.float64).reshape(kmh.shape) * 0.7
    surf[0, 0] = np.nan
    # query points: the seed points themselves, shifted a little, and a few fixed places
    qx = np.concatenate([xs + 0.13, [0.5, 1.2, 2.9]])
    qy = np.concatenate([ys - 0.21, [0.5, 0.7, 1.1]])
    kw = dict(seed_col=xs, seed_row=ys, seed_minutes=seed_m) if with_seeds else {}
    got, cell_of, seed_of = minutes_at_points(surf, kmh, cell, qx, qy, elevation=elev, direction=direction, **kw)
    for i in range(len(qx)):
        # to-hub: the trip walks from the point to the centre (or seed); from-hub: from there to the point
        ways = _walks_reference(kmh, cell, qx[i], qy[i], elev, to_point=direction == "from-hub", reach=2)
        vals = [surf[rc] + w for rc, w in ways if np.isfinite(surf[rc])]
        blk = _block(kmh, qx[i], qy[i], reach=2)
        if with_seeds and blk is not None and kmh[blk[0]] > 0:
            zq = _z_reference(elev, qx[i], qy[i])
            for j in range(len(xs)):
                sb = _block(kmh, xs[j], ys[j])
                if sb is None or sb[0] not in blk[1] or not np.isfinite(seed_m[j]):
                    continue
                zs = _z_reference(elev, xs[j], ys[j])
                if direction == "to-hub":
                    w = _walk_reference(kmh, cell, (qx[i], qy[i]), (xs[j], ys[j]), zq, zs)
                else:
                    w = _walk_reference(kmh, cell, (xs[j], ys[j]), (qx[i], qy[i]), zs, zq)
                if w is not None:
                    vals.append(seed_m[j] + w)
        if not vals:
            assert np.isnan(got[i]) and cell_of[i] == -1 and seed_of[i] == -1
        else:
            assert got[i] == pytest.approx(min(vals), rel=1e-12, abs=1e-12)
            assert (cell_of[i] >= 0) != (seed_of[i] >= 0)


def test_reading_at_a_seed_point_gives_its_own_cost():
    kmh = np.full((5, 5), 5.0)
    pts = (np.array([1.3, 3.7]), np.array([2.2, 0.4]), np.array([1.0, 0.0]))   # 3 cells (3.6 min) apart
    s = seed_points(kmh, 100.0, *pts)
    acc = accumulate(kmh, s.minutes, 100.0, seed_label=s.point + 1)
    m, _, seed = minutes_at_points(acc.minutes, kmh, 100.0, *pts[:2], seed_col=pts[0], seed_row=pts[1],
                                   seed_minutes=pts[2])
    np.testing.assert_allclose(m, pts[2], atol=1e-12)
    assert seed.tolist() == [0, 1]
    # without the seeds the point reads through a cell centre: twice its walk to its own centre, or more
    m2, cell_of, _ = minutes_at_points(acc.minutes, kmh, 100.0, *pts[:2])
    assert (m2 > m + 0.1).all() and (cell_of >= 0).all()


def test_point_joins_its_cell_and_the_eight_around():
    # 6 km/h = 0.01 min/m; 100 m cells.  A point at x = 1.3, y = 0.8 (cell units) lies in cell (0, 1):
    # it joins the centres of rows 0..1 (no row -1), columns 0..2, each by the straight walk.
    kmh = np.full((3, 4), 6.0)
    s = seed_points(kmh, 100.0, [1.3], [0.8], [2.0])
    for r in (0, 1):
        for c in (0, 1, 2):
            assert s.minutes[r, c] == pytest.approx(2.0 + math.hypot(c + 0.5 - 1.3, r + 0.5 - 0.8), rel=1e-13)
    assert np.isinf(s.minutes[2, :]).all() and np.isinf(s.minutes[:, 3]).all()
    assert (s.point[:2, :3] == 0).all() and (s.point[2, :] == -1).all()


def test_own_cell_at_most_half_a_diagonal():
    # Wherever a point lies in its cell, its own cell costs it at most the walk of half a cell diagonal.
    rng = np.random.default_rng(4)
    kmh = np.full((4, 4), 5.0)
    cell = 100.0
    half_diag_min = math.sqrt(2) / 2 * cell * 60 / 5000
    for _ in range(300):
        x, y = rng.uniform(0, 4, 2)
        s = seed_points(kmh, cell, [x], [y], [0.0])
        own = s.minutes[int(y), int(x)]
        assert own <= half_diag_min + 1e-12
        assert own == pytest.approx(math.hypot(x % 1 - 0.5, y % 1 - 0.5) * cell * 60 / 5000, rel=1e-12)
    corner = seed_points(kmh, cell, [1.0], [1.0], [0.0])       # at a corner: the four cells meeting there
    np.testing.assert_allclose(corner.minutes[0:2, 0:2], half_diag_min, rtol=1e-13)
    # on a cell edge, the cells on both sides get the same walk (no side is favoured)
    edge = seed_points(kmh, cell, [1.5], [2.0], [0.0])
    assert edge.minutes[1, 1] == edge.minutes[2, 1] == pytest.approx(0.5 * cell * 60 / 5000, rel=1e-13)
    assert edge.minutes[1, 0] == pytest.approx(edge.minutes[2, 2], rel=1e-13)


def test_walk_blocked_by_impassable_cells_and_inside_one():
    kmh = np.full((2, 2), 6.0)
    kmh[0, 1] = 0.0
    # from (0.9, 0.9) in cell (0, 0): the walk to the centre of (0, 1) ends in the impassable cell (none);
    # to the centre of (1, 1) the segment (0.9, 0.9) -> (1.5, 1.5) passes (0, 1) only at its corner (1, 1)
    s = seed_points(kmh, 100.0, [0.9], [0.9], [1.0])
    assert np.isinf(s.minutes[0, 1])
    assert s.minutes[1, 1] == pytest.approx(1.0 + math.hypot(0.6, 0.6), rel=1e-13)
    # from x = 0.9, y = 0.6: to the centre of (1, 1) at (1.5, 1.5) the segment meets column 1 at
    # y = 0.6 + 0.1 * 0.9 / 0.6 = 0.75 < 1, so it crosses the impassable (0, 1): no walk
    s = seed_points(kmh, 100.0, [0.9], [0.6], [1.0])
    assert np.isinf(s.minutes[1, 1]) and np.isfinite(s.minutes[1, 0])
    # a point inside the impassable cell (a road on a bridge) seeds that cell alone, at its own cost
    s = seed_points(kmh, 100.0, [1.5], [0.2], [3.0])
    assert s.minutes[0, 1] == 3.0 and np.isinf(s.minutes[[0, 1, 1], [0, 0, 1]]).all()


def test_slope_of_the_walk_from_interpolated_elevation():
    # A plane rising 0.1 per metre eastward (10 m per 100 m cell): bilinear interpolation is exact on a
    # plane, so the walk from a point to a centre has the plane's grade along it.  from-hub: travelled
    # from the point; to the centre east of it: uphill.
    cell = 100.0
    cols = np.arange(4)
    z = np.tile((cols + 0.5) * 10.0, (4, 1))
    x, y = 1.7, 1.5                       # cell (1, 1); corners (1..2, 1..2); centre (1, 2) is 0.8 cells east
    s = seed_points(np.full((4, 4), 6.0), cell, [x], [y], [0.0], elevation=z, direction="from-hub")
    d = 0.8 * cell
    assert s.minutes[1, 2] == pytest.approx(d * 0.01 * _tobler_ratio(0.1), rel=1e-12)
    d = 0.2 * cell                        # centre (1, 1) is 0.2 cells west: downhill at -0.1
    assert s.minutes[1, 1] == pytest.approx(d * 0.01 * _tobler_ratio(-0.1), rel=1e-12)
    t = seed_points(np.full((4, 4), 6.0), cell, [x], [y], [0.0], elevation=z, direction="to-hub")
    assert t.minutes[1, 2] == pytest.approx(0.8 * cell * 0.01 * _tobler_ratio(-0.1), rel=1e-12)


def test_walk_through_a_corner_between_two_impassable_cells():
    # Walks from points on a diagonal through a cell corner to the centre beyond touch the two side cells
    # only at that corner; both are impassable, and the walk is still made (as a diagonal move is).  Far
    # from the origin, rounding cuts pieces of about 1e-16 cells inside a side cell: they are ignored.
    rng = np.random.default_rng(8)
    kmh0 = np.full((50, 50), 6.0)
    for _ in range(60):
        r, c = rng.integers(2, 48, 2)
        sr, sc = rng.choice([-1, 1], 2)                 # the corner (c + 0.5 + sc/2, r + 0.5 + sr/2)
        kmh = kmh0.copy()
        kmh[r + sr, c] = kmh[r, c + sc] = 0.0            # the side cells at that corner
        a = rng.uniform(0.01, 0.99)
        kx, ky = c + 0.5 + sc / 2, r + 0.5 + sr / 2
        x, y = kx + sc * a / 2, ky + sr * a / 2         # inside cell (r + sr, c + sc), on the diagonal
        s = seed_points(kmh, 100.0, [x], [y], [0.0])
        assert s.minutes[r, c] == pytest.approx(math.hypot(c + 0.5 - x, r + 0.5 - y), rel=1e-12)


def test_first_point_among_equals_and_the_cheapest_wins():
    kmh = np.full((2, 2), 6.0)
    s = seed_points(kmh, 100.0, [0.5, 0.5, 0.5], [0.5, 0.5, 0.5], [2.0, 2.0, 1.0])
    assert s.point[0, 0] == 2 and s.minutes[0, 0] == 1.0
    s = seed_points(kmh, 100.0, [0.5, 0.5], [0.5, 0.5], [2.0, 2.0])
    assert (s.point == 0).all()


def test_reading_a_surface_walks_the_right_way_uphill():
    # A plane rising 10 m per 100 m cell eastward; the surface is 0 at the centre of cell (1, 2) and NaN
    # elsewhere.  A point 0.8 cells west of that centre: to-hub walks from the point east to the centre,
    # uphill (+0.1); from-hub walks from the centre west to the point, downhill (-0.1).
    cell = 100.0
    z = np.tile((np.arange(4) + 0.5) * 10.0, (4, 1))
    surf = np.full((4, 4), np.nan)
    surf[1, 2] = 0.0
    kmh = np.full((4, 4), 6.0)
    up, c_up, _ = minutes_at_points(surf, kmh, cell, [1.7], [1.5], elevation=z, direction="to-hub")
    down, _, _ = minutes_at_points(surf, kmh, cell, [1.7], [1.5], elevation=z, direction="from-hub")
    assert up[0] == pytest.approx(0.8 * cell * 0.01 * _tobler_ratio(0.1), rel=1e-12)
    assert down[0] == pytest.approx(0.8 * cell * 0.01 * _tobler_ratio(-0.1), rel=1e-12)
    assert c_up[0] == 1 * 4 + 2


def test_reading_walks_straight_to_a_seed_the_right_way_uphill():
    # Same ramp; no cell reached (all NaN), one seed point 0.8 cells east of the point read: to-hub walks
    # from the point east to the seed, uphill; from-hub from the seed west to the point, downhill.
    cell = 100.0
    z = np.tile((np.arange(4) + 0.5) * 10.0, (4, 1))
    surf = np.full((4, 4), np.nan)
    kmh = np.full((4, 4), 6.0)
    kw = dict(elevation=z, seed_col=[2.5], seed_row=[1.5], seed_minutes=[1.0])
    up, cell_up, seed_up = minutes_at_points(surf, kmh, cell, [1.7], [1.5], direction="to-hub", **kw)
    down, _, _ = minutes_at_points(surf, kmh, cell, [1.7], [1.5], direction="from-hub", **kw)
    assert up[0] == pytest.approx(1.0 + 0.8 * cell * 0.01 * _tobler_ratio(0.1), rel=1e-12)
    assert down[0] == pytest.approx(1.0 + 0.8 * cell * 0.01 * _tobler_ratio(-0.1), rel=1e-12)
    assert cell_up[0] == -1 and seed_up[0] == 0


def test_bad_point_arguments():
    with pytest.raises(OptionError, match="differ in length"):
        seed_points(np.ones((2, 2)), 1.0, [0.5, 1.0], [0.5], [0.0, 0.0])
    with pytest.raises(OptionError, match="zero or more"):
        seed_points(np.ones((2, 2)), 1.0, [0.5], [0.5], [-1.0])
    with pytest.raises(OptionError, match="shape"):
        minutes_at_points(np.ones((2, 3)), np.ones((2, 2)), 1.0, [0.5], [0.5])
