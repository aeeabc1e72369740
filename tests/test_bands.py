"""Reach bands, population statistics, zone tables, point sampling and the Rural Access Index."""

import geopandas as gpd
import numpy as np
import pytest
import shapely
from hypothesis import given, settings, strategies as st
from hypothesis.extra import numpy as hnp

from geo_reach.analysis.bands import (band_polygons, parse_thresholds, population_stats, ring_polygons,
                                      rural_access_index, sample_points, zone_table)
from geo_reach.errors import CRSError, InputError, OptionError
from tests.helpers.surface_nets import CRS_UTM, grid


def _surface():
    g = grid(6, 4, cell_m=1000.0)
    minutes = np.array([[5, 10, 20, 40, 70, np.nan],
                        [5, 15, 25, 45, 80, np.nan],
                        [8, 12, 30, 50, 90, 100],
                        [9, 11, 35, 55, 95, 110]], dtype=float)
    hub = np.where(np.isnan(minutes), 0, np.where(np.arange(6)[None, :] < 3, 1, 2))
    pop = np.arange(24, dtype=float).reshape(4, 6)
    return g, minutes, hub, pop


def test_parse_thresholds():
    assert parse_thresholds("45") == [("45", 45.0)]
    with pytest.raises(OptionError, match="not a number"):
        parse_thresholds(["ten"])
    with pytest.raises(OptionError, match="positive"):
        parse_thresholds([0])
    with pytest.raises(OptionError, match="repeat"):
        parse_thresholds(["30", 30])


def test_band_polygons_nested_per_hub_and_combined():
    g, minutes, hub, pop = _surface()
    b = band_polygons(minutes, hub, g, ["30", "60"], population=pop, hub_ids=[101, 202])
    comb = b[b.hub_id.isna()].set_index("within_minutes")
    # 30-minute band: the 10 cells <= 30 (cols 0-1 all, col 2 rows 0-2); 60 adds col 2 row 3 and col 3.
    assert comb.loc[30.0, "area_km2"] == pytest.approx(11.0)
    assert comb.loc[60.0, "area_km2"] == pytest.approx(16.0)
    assert comb.loc[30.0, "population"] == pop[minutes <= 30].sum()
    # polygon areas equal the cell counts (km2) and bands nest
    for t, row in comb.iterrows():
        assert row.geometry.area / 1e6 == pytest.approx(row.area_km2)
    assert comb.loc[60.0].geometry.contains(comb.loc[30.0].geometry)
    per = b[b.hub_id.notna()]
    assert set(per.hub_id) == {101, 202}
    for t in (30.0, 60.0):
        rows = per[per.within_minutes == t]
        assert rows.area_km2.sum() == pytest.approx(comb.loc[t, "area_km2"])
        assert rows.population.sum() == pytest.approx(comb.loc[t, "population"])
        assert shapely.union_all(rows.geometry.values).equals(comb.loc[t].geometry)
    assert b.crs == CRS_UTM


def test_ring_polygons_are_disjoint_and_are_the_band_differences():
    g, minutes, hub, pop = _surface()
    r = ring_polygons(minutes, g, ["60", "30"], population=pop)
    assert r[["from_minutes", "to_minutes"]].to_numpy().tolist()[:2] == [[0.0, 30.0], [30.0, 60.0]]
    assert r["from_minutes"].iloc[2] == 60.0 and np.isnan(r["to_minutes"].iloc[2])
    # hand counts: 11 cells <= 30, 5 more <= 60, the other 8 (two of them unreachable) beyond
    assert r["area_km2"].tolist() == pytest.approx([11.0, 5.0, 8.0])
    assert r["population"].tolist() == pytest.approx([pop[minutes <= 30].sum(),
                                                      pop[(minutes > 30) & (minutes <= 60)].sum(),
                                                      pop[~(minutes <= 60)].sum()])
    # the rings are the differences of the nested bands, and tile the grid without overlap
    b = band_polygons(minutes, hub, g, ["30", "60"], population=pop)
    comb = b[b.hub_id.isna()].set_index("within_minutes")
    assert r.geometry.iloc[0].equals(comb.loc[30.0].geometry)
    assert r.geometry.iloc[1].symmetric_difference(comb.loc[60.0].geometry.difference(comb.loc[30.0].geometry)).area < 1e-6
    assert shapely.union_all(r.geometry.values).area == pytest.approx(r.geometry.area.sum()) == pytest.approx(24e6)
    for geom, area in zip(r.geometry, r.area_km2):
        assert geom.area / 1e6 == pytest.approx(area)
    # impassable cells (water) belong to no ring
    passable = np.ones(g.shape, bool)
    passable[:, 5] = False
    r2 = ring_polygons(minutes, g, ["30", "60"], population=pop, passable=passable)
    assert r2["area_km2"].tolist() == pytest.approx([11.0, 5.0, 4.0])
    assert r2.crs == CRS_UTM


@settings(max_examples=40, deadline=None)
@given(hnp.arrays(np.float64, (5, 7), elements=st.one_of(st.floats(0, 200), st.just(np.nan))),
       hnp.arrays(np.float64, (5, 7), elements=st.floats(0, 1e4)),
       st.lists(st.integers(1, 180), min_size=1, max_size=4, unique=True))
def test_ring_people_add_up_to_the_band_counts(minutes, pop, thresholds):
    g = grid(7, 5, cell_m=1000.0)
    r = ring_polygons(minutes, g, thresholds, population=pop)
    s = population_stats(minutes, pop, thresholds)
    assert r["population"].sum() == pytest.approx(s.population_total, rel=1e-9, abs=1e-6)
    assert r["area_km2"].sum() == pytest.approx(35.0)
    within = dict(zip(r["to_minutes"], r["population"]))
    prev = 0.0
    for t in sorted(thresholds):
        assert within.get(float(t), 0.0) == pytest.approx(s.population_by_band[str(t)] - prev, rel=1e-9, abs=1e-6)
        prev = s.population_by_band[str(t)]


def test_population_stats_hand_counts():
    g, minutes, hub, pop = _surface()
    s = population_stats(minutes, pop, [60, 30])
    assert s.population_total == pop.sum() == 276
    assert s.population_by_band == {"30": pop[minutes <= 30].sum(), "60": pop[minutes <= 60].sum()}
    assert s.population_by_band["60"] + s.population_beyond == s.population_total
    assert s.population_unreachable == 5 + 11
    reach = np.isfinite(minutes)
    assert s.population_weighted_minutes == pytest.approx((pop * np.nan_to_num(minutes)).sum() / pop[reach].sum())


@settings(max_examples=40, deadline=None)
@given(hnp.arrays(np.float64, (5, 7), elements=st.one_of(st.floats(0, 200), st.just(np.nan))),
       hnp.arrays(np.float64, (5, 7), elements=st.floats(0, 1e4)),
       st.lists(st.integers(1, 180), min_size=1, max_size=4, unique=True))
def test_band_totals_add_up(minutes, pop, thresholds):
    s = population_stats(minutes, pop, thresholds)
    largest = str(max(thresholds))
    assert s.population_by_band[largest] + s.population_beyond == pytest.approx(s.population_total, rel=1e-12)
    vals = [s.population_by_band[str(t)] for t in sorted(thresholds)]
    assert all(a <= b for a, b in zip(vals, vals[1:]))


def test_zone_table_totals_and_shares():
    # Cell centres sit at x = 500, 1500, ... and y = 3500, 2500, ...; "overlap" strictly holds the centres
    # of rows 0-1, columns 2-3 and, drawn last, wins them from "west" and "east". Column 5 is in no zone.
    g, minutes, hub, pop = _surface()
    zones = gpd.GeoDataFrame({"name": ["west", "east", "overlap"]},
                             geometry=[shapely.box(0, 0, 3000, 4000), shapely.box(3000, 0, 5000, 4000),
                                       shapely.box(2000, 2000, 4000, 4000)], crs=CRS_UTM)
    z = zone_table(minutes, pop, g, zones, ["30"], zone_field="name")
    t = z.zones.set_index("zone")
    assert t.population.sum() + z.population_outside == pytest.approx(z.population_total)
    assert z.population_total == pop.sum()
    assert z.population_outside == pop[:, 5].sum()
    assert t.loc["overlap", "population"] == pop[0:2, 2:4].sum()
    west = np.zeros(g.shape, bool)
    west[:, :3] = True
    west[0:2, 2] = False
    assert t.loc["west", "population"] == pop[west].sum()
    assert t.loc["west", "share_within_30"] == pytest.approx(pop[west & (minutes <= 30)].sum() / pop[west].sum())
    east = np.zeros(g.shape, bool)
    east[:, 3:5] = True
    east[0:2, 3] = False
    assert t.loc["east", "population_beyond"] == pop[east & ~(minutes <= 30)].sum()
    assert t.loc["east", "mean_minutes"] == pytest.approx((pop * minutes)[east].sum() / pop[east].sum())
    with pytest.raises(InputError, match="field 'code' is missing"):
        zone_table(minutes, pop, g, zones, ["30"], zone_field="code")
    with pytest.raises(CRSError):
        zone_table(minutes, pop, g, zones.set_crs(None, allow_override=True), ["30"])


def test_sample_points():
    g, minutes, hub, pop = _surface()
    pts = gpd.GeoDataFrame({"name": ["a", "b", "far"]},
                           geometry=shapely.points([(500, 3500), (4500, 500), (99999, 0)]), crs=CRS_UTM)
    out = sample_points(minutes, hub, g, pts)
    assert out.minutes.iloc[0] == 5 and out.minutes.iloc[1] == 95 and np.isnan(out.minutes.iloc[2])
    assert out.hub_id.iloc[0] == 1 and out.hub_id.iloc[1] == 2 and out.hub_id.isna().iloc[2]


def test_rural_access_index_hand_example():
    # A straight all-season road along y = 5000 m across a 10 km x 10 km grid of 500 m cells with one
    # person per cell: centres at y = 250, 750, ... within 2 km of the road are those with
    # |y - 5000| <= 2000: y = 3250 .. 6750, 8 of 20 rows, so RAI = 8/20 = 0.4 (Roberts, KC & Rastogi
    # 2006, World Bank TP-10: share of rural people within 2 km of an all-season road).
    g = grid(20, 20, cell_m=500.0)
    pop = np.ones(g.shape)
    road = shapely.LineString([(0, 5000), (10000, 5000)])
    track = shapely.LineString([(0, 500), (10000, 500)])
    r = rural_access_index(pop, g, [road, track], [True, False])
    assert r.share == pytest.approx(0.4) and r.population_total == 400 and r.population_within == 160


def test_rural_access_index_against_brute_force():
    rng = np.random.default_rng(9)
    g = grid(40, 30, cell_m=250.0)
    pop = rng.uniform(0, 10, g.shape)
    roads = [shapely.LineString(rng.uniform(0, 10000, (3, 2))) for _ in range(4)]
    flags = [True, False, True, True]
    r = rural_access_index(pop, g, roads, flags)
    x, y = g.cell_centres()
    X, Y = np.meshgrid(x, y)
    d = shapely.distance(shapely.points(X, Y), shapely.union_all([rd for rd, f in zip(roads, flags) if f]))
    sure_in, sure_out = d <= 2000 - 3, d > 2000 + 1e-6
    assert pop[sure_in].sum() <= r.population_within <= pop[~sure_out].sum()
