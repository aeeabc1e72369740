"""Friction surface: Tobler's hiking function, land-cover table, barriers."""

import numpy as np
import pytest
import shapely

from geo_reach.analysis.friction import (SLOPE_LIMIT, clip_slopes, count_steep_moves, flat_speed_kmh,
                                         landcover_kmh, rasterise_barriers, slope_factor, tobler_kmh,
                                         walking_kmh)
from geo_reach.errors import InputError, OptionError
from tests.helpers.surface_nets import grid


def test_tobler_published_values():
    # Tobler, W. (1993), "Three presentations on geographical analysis and modeling", NCGIA TR 93-1:
    # W = 6 exp(-3.5 |dh/dx + 0.05|) km/h; peak 6 km/h at slope -0.05, about 5.04 km/h on the flat,
    # about 3.55 km/h at +0.10 (values recomputed by hand from the published formula).
    assert tobler_kmh(-0.05) == pytest.approx(6.0, abs=1e-12)
    assert tobler_kmh(0.0) == pytest.approx(5.04, abs=0.005)
    assert tobler_kmh(0.10) == pytest.approx(3.55, abs=0.005)
    # Symmetric about the best slope -0.05 (from the formula).
    assert tobler_kmh(-0.05 + 0.2) == pytest.approx(tobler_kmh(-0.05 - 0.2))


def test_walking_speed_scaled_to_flat():
    # speed = walk * T(s) / T(0): flat ground gives exactly the walking speed.
    assert walking_kmh(0.0, 5.0) == pytest.approx(5.0, rel=1e-15)
    s = np.linspace(-0.8, 0.8, 33)
    np.testing.assert_allclose(walking_kmh(s, 4.0), 4.0 * tobler_kmh(s) / tobler_kmh(0.0), rtol=1e-14)
    np.testing.assert_allclose(slope_factor(s), tobler_kmh(s) / tobler_kmh(0.0), rtol=1e-14)


def test_clip_slopes_counts():
    s = np.array([-1.5, -1.0, 0.0, 0.99, 1.01, np.nan, 3.0])
    c, n = clip_slopes(s, SLOPE_LIMIT)
    assert n == 3
    assert c[0] == -1.0 and c[4] == 1.0 and c[6] == 1.0 and c[3] == 0.99
    assert np.isnan(c[5])


def test_landcover_missing_class_named():
    cls = np.array([[1, 2], [2, 7]])
    with pytest.raises(InputError, match=r"lc\.tif: class 7 has no speed"):
        landcover_kmh(cls, {1: 5.0, 2: 3.0}, source="lc.tif")


def test_landcover_speeds_and_nodata():
    cls = np.array([[1, 2], [-1, 3]])
    kmh, n = landcover_kmh(cls, {1: 5.0, 2: 3.0, 3: 0.0}, nodata_kmh=4.0)
    assert kmh.tolist() == [[5.0, 3.0], [4.0, 0.0]] and n == 1
    with pytest.raises(InputError, match="class 2"):
        landcover_kmh(cls, {1: 5.0, 2: -1.0, 3: 0.0})


def test_barriers_rasterised_touching_cells():
    g = grid(10, 10, cell_m=10.0)
    wall = shapely.box(30.5, 0, 39.5, 100)  # inside column 3 only
    m = rasterise_barriers(g, [wall])
    assert m[:, 3].all() and m.sum() == 10
    # A thin diagonal line blocks: every cell it touches is marked, so the cells form a 4-connected chain.
    line = shapely.LineString([(0, 0), (100, 100)])
    d = rasterise_barriers(g, [line])
    for r in range(10):
        assert d[r, 9 - r]
    fr = flat_speed_kmh(g, 5.0, barriers=[wall])
    assert fr.impassable_cells == 10 and (fr.kmh[:, 3] == 0).all() and (fr.kmh[:, 4] == 5.0).all()


def test_barrier_classes_and_table():
    g = grid(3, 1)
    fr = flat_speed_kmh(g, 5.0, landcover=np.array([[1, 9, -1]]), landcover_speeds={1: 2.0, 9: 4.0},
                        barrier_classes=[9])
    assert fr.kmh.tolist() == [[2.0, 0.0, 5.0]] and fr.landcover_nodata_cells == 1
    with pytest.raises(OptionError, match="walking speed"):
        flat_speed_kmh(g, 0.0)


@pytest.mark.parametrize("neighbours", [8, 16])
def test_count_steep_moves_against_loop(neighbours):
    # Every move of the set, each pair of cells once, counted by a plain loop: slope over the move's own
    # length (1, sqrt 2, sqrt 5 cells); a knight move is only made when the two cells it passes through
    # (for +1 row, +2 columns from (r, c): (r, c+1) and (r+1, c+1)) are passable.
    rng = np.random.default_rng(3)
    z = rng.normal(0, 80, (9, 11))
    z[2, 3] = np.nan
    passable = rng.random(z.shape) > 0.15
    cell = 50.0
    steps = [(0, 1), (1, 0), (1, 1), (1, -1)]
    if neighbours == 16:
        steps += [(1, 2), (2, 1), (1, -2), (2, -1)]
    for mask in (None, passable):
        n = 0
        rows, cols = z.shape
        for r in range(rows):
            for c in range(cols):
                for dr, dc in steps:
                    r2, c2 = r + dr, c + dc
                    if not (0 <= r2 < rows and 0 <= c2 < cols):
                        continue
                    if not (np.isfinite(z[r, c]) and np.isfinite(z[r2, c2])):
                        continue
                    if mask is not None:
                        cells = [(r, c), (r2, c2)]
                        if abs(dc) == 2:
                            cells += [(r, c + dc // 2), (r2, c + dc // 2)]
                        if abs(dr) == 2:
                            cells += [(r + 1, c), (r + 1, c2)]
                        if not all(mask[rc] for rc in cells):
                            continue
                    d = cell * np.hypot(dr, dc)
                    n += abs(z[r2, c2] - z[r, c]) / d > 1.0
        got = count_steep_moves(z, cell, 1.0, passable=mask, neighbours=neighbours)
        assert got == n and n > 0
    assert count_steep_moves(z, cell, 1.0, neighbours=16) > count_steep_moves(z, cell, 1.0, neighbours=8)
    with pytest.raises(OptionError, match="neighbours"):
        count_steep_moves(z, cell, 1.0, neighbours=12)


def test_count_steep_moves_limit_is_exclusive():
    # A move exactly at the limit is costed as it is (not clipped), so it is not counted; just past it is.
    assert count_steep_moves(np.array([[0.0, 100.0]]), 100.0, 1.0) == 0
    assert count_steep_moves(np.array([[0.0, 100.001]]), 100.0, 1.0) == 1
