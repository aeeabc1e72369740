"""Stations, entries and transfer links (geo_reach.network.stations).

The transfer walk is priced here with its own closed form: minutes = geodesic length (pyproj.Geod,
Karney 2013) / 1000 / walking speed * 60, at two walking speeds, plus the boarding penalty one way.
Distance limits are checked at their boundaries (inclusive, as documented).
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pytest
import shapely
from pyproj import Geod, Transformer

from geo_reach.errors import InputError
from geo_reach.network.build import BuildOptions, LayerSpec, build_network

UTM = "EPSG:32727"
X0, Y0 = 500_000.0, 6_570_000.0
GEOD = Geod(ellps="WGS84")
TO_LONLAT = Transformer.from_crs(UTM, 4326, always_xy=True)


def layer(lines):
    return gpd.GeoDataFrame({"n": range(len(lines))},
                            geometry=[shapely.LineString([(x + X0, y + Y0) for x, y in c]) for c in lines], crs=UTM)


def points(pts):
    return gpd.GeoDataFrame({"name": [f"s{i}" for i in range(len(pts))]},
                            geometry=[shapely.Point(x + X0, y + Y0) for x, y in pts], crs=UTM)


def walk_minutes(a, b, kmh):
    lon, lat = TO_LONLAT.transform([a[0] + X0, b[0] + X0], [a[1] + Y0, b[1] + Y0])
    return GEOD.line_length(lon, lat) / 1000 / kmh * 60


ROAD = [[(0, 0), (400, 0)]]
RAIL = [[(200, 60), (200, 500)]]


@pytest.mark.parametrize("kmh", [5.0, 3.0])
def test_transfer_walk_priced_at_the_walking_speed(kmh):
    """A station at (200, 60) on the rail line, 60 m from the road: the transfer is the 60 m walk at
    ``kmh`` (plus 4 boarding minutes road -> rail), priced by the closed form above."""
    r = build_network([LayerSpec(layer(ROAD)), LayerSpec(layer(RAIL), mode="rail", access_points=points([(200, 60)]),
                                                         boarding_minutes=4.0)],
                      BuildOptions(transfer_walk_kmh=kmh))
    net = r.network
    tf = np.nonzero(net.edge_mode == "transfer")[0]
    assert len(tf) == 2
    walk = walk_minutes((200, 0), (200, 60), kmh)
    to_rail = [e for e in tf if (net.node_y[net.edge_to[e]] - Y0) > 30][0]
    to_road = [e for e in tf if e != to_rail][0]
    assert net.edge_minutes[to_rail] == pytest.approx(walk + 4.0, rel=1e-9)
    assert net.edge_minutes[to_road] == pytest.approx(walk, rel=1e-9)
    assert r.report["transfer_length_m"] == pytest.approx(2 * net.edge_length_m[to_rail], abs=1e-3)


@pytest.mark.parametrize("d, attached", [(100.0, True), (100.0 + 2 ** -20, False), (30.0, True)])
def test_station_snapping_distance_inclusive(d, attached):
    r = build_network([LayerSpec(layer(ROAD)), LayerSpec(layer(RAIL), mode="rail",
                                                         access_points=points([(200 + d, 300)]))])
    net = r.network
    rail_nodes = np.unique(np.concatenate([net.edge_from[net.edge_mode == "rail"], net.edge_to[net.edge_mode == "rail"]]))
    assert int(net.node_entry[rail_nodes].sum()) == (1 if attached else 0)
    assert (r.report["access_unmatched"] == 0) == attached


@pytest.mark.parametrize("d, linked", [(1000.0, True), (1000.0 + 2 ** -18, False)])
def test_transfer_distance_inclusive(d, linked):
    """A station ``d`` m from the nearest road: linked up to transfer_max_m (1000 m), else reported."""
    rail = [[(200, d), (200, d + 500)]]
    r = build_network([LayerSpec(layer(ROAD)), LayerSpec(layer(rail), mode="rail", access_points=points([(200, d)]))])
    assert bool((r.network.edge_mode == "transfer").sum() == 2) == linked
    assert (r.report["components"] == 1) == linked
    if not linked:
        assert "reachable only by rail" in r.issues[r.issues.kind == "access_unmatched"].detail.iloc[0]


def test_entries_are_road_nodes_and_stations_only():
    r = build_network([LayerSpec(layer(ROAD)), LayerSpec(layer(RAIL), mode="rail", access_points=points([(200, 300)])),
                       LayerSpec(layer([[(0, -100), (400, -100)]]), mode="cable", access_points=points([(100, -99)]))])
    net = r.network
    road = np.unique(np.concatenate([net.edge_from[net.edge_mode == "road"], net.edge_to[net.edge_mode == "road"]]))
    rail = np.unique(np.concatenate([net.edge_from[net.edge_mode == "rail"], net.edge_to[net.edge_mode == "rail"]]))
    cable = np.unique(np.concatenate([net.edge_from[net.edge_mode == "cable"], net.edge_to[net.edge_mode == "cable"]]))
    assert net.node_entry[road].all()
    assert net.node_entry[rail].sum() == 1 and net.node_entry[cable].sum() == 1
    station = rail[net.node_entry[rail]][0]
    assert (net.node_x[station] - X0, net.node_y[station] - Y0) == pytest.approx((200, 300))
    acc = cable[net.node_entry[cable]][0]
    assert (net.node_x[acc] - X0, net.node_y[acc] - Y0) == pytest.approx((100, -100))


def test_no_road_to_link_to_is_reported():
    r = build_network([LayerSpec(layer(RAIL), mode="rail", access_points=points([(200, 300)]))])
    assert r.report["access_unmatched"] == 1
    assert "no road layer" in r.issues.detail.iloc[0]


def test_stations_on_a_road_layer_are_refused():
    with pytest.raises(InputError, match="rail or cable layers only"):
        build_network([LayerSpec(layer(ROAD), access_points=points([(10, 0)]))])


def test_station_at_a_level_crossing_enters_the_rail_line():
    """A station exactly where the rail line crosses the road: the rail node there is the entry (the
    road node at the same place is another mode), and the transfer link between them has no length."""
    road = [[(0, 300), (400, 300)]]
    r = build_network([LayerSpec(layer(road)), LayerSpec(layer(RAIL), mode="rail", access_points=points([(200, 300)]),
                                                         boarding_minutes=2.0)])
    net = r.network
    rail = np.unique(np.concatenate([net.edge_from[net.edge_mode == "rail"], net.edge_to[net.edge_mode == "rail"]]))
    st = rail[net.node_entry[rail]]
    assert len(st) == 1 and (net.node_x[st[0]] - X0, net.node_y[st[0]] - Y0) == pytest.approx((200, 300))
    tf = net.edge_mode == "transfer"
    assert tf.sum() == 2 and np.all(net.edge_length_m[tf] == 0)
    road_nodes = set(np.concatenate([net.edge_from[net.edge_mode == "road"], net.edge_to[net.edge_mode == "road"]]))
    ends = {(int(a) in road_nodes, int(b) in road_nodes) for a, b in zip(net.edge_from[tf], net.edge_to[tf])}
    assert ends == {(True, False), (False, True)}          # road -> rail and rail -> road
    assert r.report["components"] == 1
    assert sorted(net.edge_minutes[tf]) == [0.0, 2.0]
