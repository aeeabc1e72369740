"""Reading and cleaning the input layers (geo_reach.network.prepare, costs, ingest.layers.check_coordinates).

Values a planner's layer may hold are read as documented or refused with one line naming the file,
layer, feature, field, value and the accepted values (issue 9, points 3 and 5).  Expected travel times
are worked by hand from length / speed (common practice).
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import shapely

from geo_reach.errors import InputError
from geo_reach.ingest.layers import MAX_PROJECTED_M, check_coordinates
from geo_reach.network.build import BuildOptions, LayerSpec, build_network
from geo_reach.network.costs import DEFAULT_CLASS_SPEEDS_KMH, feature_speeds, read_oneway
from geo_reach.network.prepare import read_all_season, read_levels

UTM = "EPSG:32727"
X0, Y0 = 500_000.0, 6_570_000.0


def lines_layer(lines, crs=UTM, **fields):
    geoms = [shapely.LineString([(x + X0, y + Y0) for x, y in c]) for c in lines]
    return gpd.GeoDataFrame(fields or {"n": range(len(geoms))}, geometry=geoms, crs=crs)


def cross(**fields):
    """A road along x and a second line crossing it at (50, 0) with no shared vertex."""
    return lines_layer([[(0, 0), (100, 0)], [(50, -50), (50, 50)]], **fields)


# ----------------------------------------------------------------------------- levels
@pytest.mark.parametrize("levels, joined", [
    ([0, 1], False), (["0", "1"], False), (["0", "1.0"], False), ([-1, 0], False), ([" 1 ", "-1"], False),
    ([None, 1], False),          # null = ground level 0, under a bridge at 1
    ([None, ""], True), ([1, "1.0"], True), ([0, None], True),
])
def test_levels_read_as_whole_numbers(levels, joined):
    """Whole numbers in any form are levels; null and empty mean ground level; equal levels join."""
    g = cross(level=pd.Series(levels, dtype=object))
    r = build_network([LayerSpec(g, level_field="level")])
    assert (r.report["components"] == 1) is joined
    assert (r.report["issues"]["crossing_kept"] == 0) is joined


@pytest.mark.parametrize("bad", ["0x", "1x", "1;2", "bridge", 0.5, True])
def test_uninterpretable_level_is_refused_not_zero(tmp_path, bad):
    """Issue 9: "0x"/"1x" once became level 0 and joined a bridge to the road under it, silently.
    Now: one line naming file, layer, feature id, field, value and the accepted values."""
    g = cross(level=pd.Series(["0", bad], dtype=object))
    path = tmp_path / "roads.gpkg"
    g.to_file(path, layer="roads")
    with pytest.raises(InputError) as e:
        build_network([LayerSpec(f"{path}:roads", level_field="level")])
    msg = str(e.value)
    assert "\n" not in msg
    for word in ("roads.gpkg", "layer 'roads'", "feature 2", "field 'level'", repr(bad) if not isinstance(bad, str)
                 else f"'{bad}'", "whole numbers"):
        assert word in msg, (word, msg)


def test_level_refusal_counts_the_other_features():
    g = lines_layer([[(0, 0), (100, 0)], [(0, 10), (100, 10)], [(0, 20), (100, 20)]],
                    level=pd.Series(["0x", "1x", "1"], dtype=object))
    with pytest.raises(InputError, match=r"feature 0, field 'level': level '0x'.*and 1 more feature"):
        build_network([LayerSpec(g, level_field="level")])


def test_read_levels_table():
    lv, bad = read_levels(pd.Series([2, "2.0", "-3", None, np.nan, "", " ", "2.5", "x", float("inf")], dtype=object))
    assert lv.tolist() == [2, 2, -3, 0, 0, 0, 0, 0, 0, 0]
    assert bad.tolist() == [False] * 7 + [True] * 3


# ----------------------------------------------------------------------------- one-way
@pytest.mark.parametrize("value, code", [("yes", 1), ("TRUE", 1), (1, 1), ("forward", 1), ("-1", -1), (-1, -1),
                                         ("reverse", -1), ("no", 0), ("both", 0), ("", 0), (None, 0), (0, 0)])
def test_oneway_values(value, code):
    g = lines_layer([[(0, 0), (100, 0)]], ow=pd.Series([value], dtype=object))
    net = build_network([LayerSpec(g, oneway_field="ow")]).network
    assert bool(net.edge_oneway[0]) is (code != 0)
    x = shapely.get_coordinates(net.edge_geometry[0])[:, 0]
    assert bool(x[0] > x[-1]) == (code == -1)     # against the digitised direction: turned round


@pytest.mark.parametrize("bad", ["reversible", "alternating", "2", 2, "yes;no"])
def test_unknown_oneway_is_refused_not_two_way(bad):
    g = lines_layer([[(0, 0), (100, 0)], [(100, 0), (200, 0)]], ow=pd.Series(["yes", bad], dtype=object))
    with pytest.raises(InputError) as e:
        build_network([LayerSpec(g, oneway_field="ow")])
    msg = str(e.value)
    for word in ("feature 1", "field 'ow'", repr(bad), "yes/", "-1/", "both ways"):
        assert word in msg, (word, msg)


def test_read_oneway_flags_only_unknown_values():
    code, unknown = read_oneway([np.float32("nan"), pd.NA, " No ", "T", "x"])
    assert code.tolist() == [0, 0, 0, 1, 0] and unknown.tolist() == [False, False, False, False, True]


# ----------------------------------------------------------------------------- all-season
def test_all_season_values_and_refusal():
    flag, bad = read_all_season(pd.Series([2, 0, "yes", "F", None, "", "seasonal"], dtype=object))
    assert np.array_equal(flag, [1, 0, 1, 0, np.nan, np.nan, np.nan], equal_nan=True)
    assert bad.tolist() == [False] * 6 + [True]
    g = lines_layer([[(0, 0), (100, 0)], [(100, 0), (200, 0)]], aseason=pd.Series(["1", "seasonal"], dtype=object))
    with pytest.raises(InputError, match=r"feature 1, field 'aseason': all-season value 'seasonal'"):
        build_network([LayerSpec(g, all_season_field="aseason")])


# ----------------------------------------------------------------------------- speeds
def test_bad_speed_field_falling_back_to_the_class_is_reported():
    """A feature whose speed field is unusable gets its class speed - and that is reported, not silent."""
    g = lines_layer([[(0, 0), (100, 0)], [(100, 0), (200, 0)], [(200, 0), (300, 0)]],
                    speed=pd.Series([50, "fast", None], dtype=object), cls=["main", "main", "nosuch"])
    r = build_network([LayerSpec(g, speed_field="speed", class_field="cls", speed_kmh=20)])
    d = r.issues[r.issues.kind == "speed_defaulted"].set_index("src_fid").detail
    assert sorted(d.index) == [1, 2]
    assert "speed='fast' is not a positive number" in d[1] and "class 'main'" in d[1]
    assert "speed is missing" in d[2] and "20 km/h used" in d[2]
    net = r.network
    per = {int(f): (m, ln) for f, m, ln in zip(net.edge_src_fid, net.edge_minutes, net.edge_length_m)}
    main = DEFAULT_CLASS_SPEEDS_KMH["main"]
    assert per[0][0] == pytest.approx(per[0][1] / 1000 / 50 * 60)
    assert per[1][0] == pytest.approx(per[1][1] / 1000 / main * 60)
    assert per[2][0] == pytest.approx(per[2][1] / 1000 / 20 * 60)
    assert r.report["speed_defaulted_features"] == 2


def test_feature_speeds_defaulted_flags_every_failed_rule():
    frame = pd.DataFrame({"s": [30, "x", np.inf, -2], "c": ["track", "track", "nosuch", None]})
    speed, defaulted, reason, layer_default = feature_speeds(frame, "road", "s", "c", None, None)
    assert speed.tolist() == [30, DEFAULT_CLASS_SPEEDS_KMH["track"], 40, 40]
    assert defaulted.tolist() == [False, True, True, True] and layer_default is None
    assert reason[0] is None and all("used" in r for r in reason[1:])


# ----------------------------------------------------------------------------- coordinates
@pytest.mark.parametrize("crs, coords", [
    (UTM, (1e15, 1e15)), (UTM, (X0, float("nan"))), ("EPSG:4326", (10.0, 200.0)), ("EPSG:4326", (1e15, 10.0)),
    ("EPSG:2223", (MAX_PROJECTED_M / 0.3048006 * 1.01, 0.0)),     # US survey feet: the limit is in metres
])
def test_coordinates_that_are_no_place_are_refused(tmp_path, crs, coords):
    """Issue 9, point 3: 1e15 once gave a ValueError traceback from the spatial index; latitude 200 was
    blamed on "polar" with no file named.  Now one line naming the file, layer and feature."""
    ok = gpd.GeoDataFrame(geometry=[shapely.LineString([(X0, Y0), (X0 + 100, Y0)])], crs=UTM).to_crs(crs)
    start = shapely.get_coordinates(ok.geometry.iloc[0])[0]
    bad = shapely.LineString([start, coords])
    g = gpd.GeoDataFrame({"n": [0, 1]}, geometry=[ok.geometry.iloc[0], bad], crs=crs)
    path = tmp_path / "roads.gpkg"
    g.to_file(path, layer="streets")
    with pytest.raises(InputError) as e:
        build_network([LayerSpec(f"{path}:streets")])
    msg = str(e.value)
    assert "\n" not in msg and "roads.gpkg" in msg and "layer 'streets'" in msg and "feature 2" in msg
    assert "not a place on Earth" in msg


def test_coordinates_at_the_limits_are_accepted():
    """Longitude 0..360 data and a zone-prefixed easting (about 3.85e7 m) are places, not faults."""
    g = gpd.GeoDataFrame(geometry=[shapely.LineString([(350.0, 10.0), (350.01, 10.0)])], crs=4326)
    check_coordinates(g, "a.gpkg")
    g = gpd.GeoDataFrame(geometry=[shapely.LineString([(38_500_000.0, 4_000_000.0), (38_500_100.0, 4_000_000.0)])],
                         crs="EPSG:4526")
    check_coordinates(g, "b.gpkg")


def test_station_coordinates_are_checked_too():
    road = lines_layer([[(0, 0), (200, 0)]])
    rail = lines_layer([[(100, -100), (100, 100)]])
    st = gpd.GeoDataFrame(geometry=[shapely.Point(X0 + 100, Y0), shapely.Point(1e15, 0)], crs=UTM)
    with pytest.raises(InputError, match="feature 1: coordinate"):
        build_network([LayerSpec(road), LayerSpec(rail, mode="rail", access_points=st)])


# ----------------------------------------------------------------------------- option messages
@pytest.mark.parametrize("kw, words", [
    ({"snap_m": -1}, "snapping tolerance (snap_m)"), ({"snap_m": float("nan")}, "(snap_m)"),
    ({"dangle_m": -2}, "dangle length (dangle_m)"), ({"transfer_walk_kmh": 0}, "(transfer_walk_kmh)"),
    ({"transfer_max_m": -1}, "(transfer_max_m)"), ({"access_snap_m": float("inf")}, "(access_snap_m)"),
])
def test_option_messages_name_the_option_not_a_flag(kw, words):
    with pytest.raises(InputError) as e:
        BuildOptions(**kw)
    assert words in str(e.value) and "--" not in str(e.value)


def test_layer_option_messages_name_the_option_not_a_flag():
    g = lines_layer([[(0, 0), (100, 0)]])
    for spec, words in ((LayerSpec(g, speed_kmh=-5), "(speed_kmh)"), (LayerSpec(g, boarding_minutes=-1),
                                                                       "(boarding_minutes)"),
                        (LayerSpec(g, speed_field="nosuch"), "(given as the speed field, speed_field)")):
        with pytest.raises(InputError) as e:
            build_network([spec])
        assert words in str(e.value) and "--" not in str(e.value)


def test_build_defaults_are_exported():
    from geo_reach.network.build import BUILD_DEFAULTS, DANGLE_FACTOR

    assert BUILD_DEFAULTS == {"crs": None, "snap_m": 1.0, "dangle_m": None, "access_snap_m": 100.0,
                              "transfer_max_m": 1000.0, "transfer_walk_kmh": 5.0}
    assert BuildOptions().dangle_m == DANGLE_FACTOR * BUILD_DEFAULTS["snap_m"]


def test_exact_copies_one_way_in_opposite_directions_are_both_kept():
    """Exact copies of one line, one-way each way (a dual carriageway drawn on one course): both kept;
    the same line one-way twice in the same direction is a duplicate feature."""
    line = [(0, 0), (100, 0)]
    r = build_network([LayerSpec(lines_layer([line, line[::-1]], ow=["yes", "yes"]), oneway_field="ow")])
    assert r.network.n_edges == 2 and r.report["duplicate_removed"] == 0
    r = build_network([LayerSpec(lines_layer([line, line], ow=["yes", "yes"]), oneway_field="ow")])
    assert r.network.n_edges == 1 and r.report["duplicate_removed"] == 1


def test_short_lines_are_kept_only_zero_length_dropped():
    """A 0.5 m line is a line; one whose vertices lie within 1 mm of each other is dropped and reported."""
    r = build_network([LayerSpec(lines_layer([[(0, 0), (0.5, 0)], [(10, 0), (10.0005, 0)]]))])
    assert r.network.n_edges == 1 and r.report["zero_length"] == 1
    assert r.report["dropped_features"] == [{"src_layer": "layer1", "src_fid": 1, "reason": "zero length"}]


def test_projected_limit_is_in_metres_whatever_the_unit():
    """2e8 US survey feet is 6.1e7 m: within the limit in metres, so accepted; 1e8 m in a metre CRS is too."""
    ft = gpd.GeoDataFrame(geometry=[shapely.LineString([(2e8, 0.0), (2e8 + 10, 0.0)])], crs="EPSG:2223")
    check_coordinates(ft, "ft.gpkg")
    m = gpd.GeoDataFrame(geometry=[shapely.LineString([(1.01e8, 0.0), (1.01e8 + 10, 0.0)])], crs=UTM)
    with pytest.raises(InputError):
        check_coordinates(m, "m.gpkg")


def test_dangle_length_defaults_to_ten_tolerances():
    assert BuildOptions(snap_m=2.0).dangle_m == 20.0
    assert BuildOptions(snap_m=0.5, dangle_m=3.0).dangle_m == 3.0


def test_multi_part_lines_are_split_and_reported():
    g = gpd.GeoDataFrame({"n": [0, 1]}, geometry=[
        shapely.MultiLineString([[(X0, Y0), (X0 + 100, Y0)], [(X0, Y0 + 50), (X0 + 100, Y0 + 50)]]),
        shapely.LineString([(X0, Y0 + 100), (X0 + 100, Y0 + 100)])], crs=UTM)
    r = build_network([LayerSpec(g)])
    assert r.report["multipart_features"] == 1 and r.network.n_edges == 3
    rep = r.issues[r.issues.kind == "geometry_repaired"]
    assert rep.src_fid.tolist() == [0] and "split into 2 lines" in rep.detail.iloc[0]
