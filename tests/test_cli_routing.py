"""The routing commands end to end: access, route, od, metrics, profile.

Networks are written straight from arrays (``Network.edges_frame`` /
``nodes_frame``), not by the builder.  Expected costs are hand-computed on a
grid of 1 km, 1 minute links (written beside each check); walking at
5 km/h covers 50 m in 0.6 minutes.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import geopandas as gpd
import numpy as np
import pyogrio
import pytest
import shapely
from pyproj import CRS

sys.path.insert(0, str(Path(__file__).parent))
from helpers.routing_nets import make_network  # noqa: E402

from geo_reach import cli  # noqa: E402
from geo_reach.network.weights import as_weight  # noqa: E402

X0, Y0 = 500000.0, 6000000.0
UTM = CRS.from_epsg(32633)


def run(argv, capsys, monkeypatch):
    """Run one command through geo_reach.cli.main (only that command registered)."""
    monkeypatch.setattr(cli, "COMMANDS", [argv[0]])
    code = cli.main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def assert_refused(code, err, match):
    assert code == 2
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("geo-reach: error:"), err
    assert match in lines[0], lines[0]


def grid_network(rows=4, cols=5, island=True, oneway=None, minutes=None, latency=True):
    """rows x cols grid, 1 km spacing, 1 minute per link; plus a 2-node island 50 km east."""
    xy = [(X0 + c * 1000.0, Y0 + r * 1000.0) for r in range(rows) for c in range(cols)]
    edges = [(r * cols + c, r * cols + c + 1) for r in range(rows) for c in range(cols - 1)]
    edges += [(r * cols + c, (r + 1) * cols + c) for r in range(rows - 1) for c in range(cols)]
    if island:
        n = len(xy)
        xy += [(X0 + 50000.0, Y0), (X0 + 51000.0, Y0)]
        edges.append((n, n + 1))
    m = len(edges)
    net = make_network(edges, np.array(xy), minutes=minutes if minutes is not None else 1.0,
                       latency_ms=np.where(np.arange(m) % 2 == 0, 2.0, np.nan) if latency else None,
                       oneway=oneway)
    object.__setattr__(net, "crs", UTM)
    return net


def write_net(path, net, drop=(), edges_frame=None):
    e = net.edges_frame() if edges_frame is None else edges_frame
    e = e.drop(columns=list(drop))
    e.to_file(path, layer="edges", driver="GPKG")
    net.nodes_frame().to_file(path, layer="nodes", driver="GPKG")
    return path


def write_points(path, xy, crs=UTM, **fields):
    gpd.GeoDataFrame(fields or {"n": np.arange(len(xy))}, geometry=shapely.points(np.asarray(xy)),
                     crs=crs).to_file(path, driver="GPKG")
    return path


@pytest.fixture
def net_path(tmp_path):
    return write_net(tmp_path / "net.gpkg", grid_network())


# ====================================================================== access
def test_access_nearest_hub_fields_and_values(tmp_path, net_path, capsys, monkeypatch):
    # hub 1 at (100 m, 50 m) from node 0: on link 0-1 at 10 %, 50 m walk -> node 0 costs 0.6 + 0.1 min.
    # hub 2 near the far corner node 19 (4 km, 3 km): (3900, 2950) -> 0.6 + 0.1 min from node 19.
    hubs = write_points(tmp_path / "hubs.gpkg", [(X0 + 100, Y0 + 50), (X0 + 3900, Y0 + 2950)])
    out = tmp_path / "acc.gpkg"
    code, _, err = run(["access", net_path, "--hubs", hubs, "-o", out], capsys, monkeypatch)
    assert code == 0, err
    nodes = pyogrio.read_dataframe(out, layer="nodes")
    assert {"node_id", "nearest_hub", "hub_cost"} <= set(nodes.columns)
    assert nodes.loc[0, "nearest_hub"] == 1 and nodes.loc[0, "hub_cost"] == pytest.approx(0.7)
    assert nodes.loc[19, "nearest_hub"] == 2 and nodes.loc[19, "hub_cost"] == pytest.approx(0.7)
    # node 2 (2 km east of node 0): 0.6 + 0.9 + 1 = 2.5 min to hub 1
    assert nodes.loc[2, "hub_cost"] == pytest.approx(2.5)
    # the island reaches no hub: null, not 0 and not a sentinel
    assert nodes.loc[20:, "nearest_hub"].isna().all() and nodes.loc[20:, "hub_cost"].isna().all()
    hub_layer = pyogrio.read_dataframe(out, layer="hubs")
    assert hub_layer["hub_id"].tolist() == [1, 2]  # row numbers from 1
    assert hub_layer["served_nodes"].sum() == 20
    assert hub_layer["served_length_m"].sum() == pytest.approx(31 * 1000.0)  # the 31 grid links
    assert "2 of 22 nodes reach no hub" in err


@pytest.mark.parametrize("weight,field", [("length_m", "hub_cost"), ("hops", "hub_cost"),
                                          ("latency_ms", "hub_cost")])
def test_access_cost_field_follows_weight(tmp_path, net_path, capsys, monkeypatch, weight, field):
    hubs = write_points(tmp_path / "hubs.gpkg", [(X0 + 100, Y0 + 50)])
    out = tmp_path / "acc.gpkg"
    code, _, err = run(["access", net_path, "--hubs", hubs, "--weight", weight, "-o", out], capsys, monkeypatch)
    assert code == 0, err
    nodes = pyogrio.read_dataframe(out, layer="nodes")
    assert field in nodes.columns
    # one fixed field whatever the weight: the weight and its unit are in the layer's description
    import sqlite3

    with sqlite3.connect(out) as db:
        desc = db.execute("select description from gpkg_contents where table_name='nodes'").fetchone()[0]
    assert as_weight(weight).unit in desc and as_weight(weight).describes in desc
    if weight == "length_m":
        assert nodes.loc[0, field] == pytest.approx(150.0)  # 50 m walk + 100 m along the link
    if weight == "hops":
        assert nodes.loc[0, field] == pytest.approx(0.1)  # a tenth of a link, the access leg counts 0
    if weight == "latency_ms":
        assert "edges have no latency_ms value" in err  # accepted and reported


def test_access_per_kind_with_ids(tmp_path, net_path, capsys, monkeypatch):
    hubs = write_points(tmp_path / "hubs.gpkg", [(X0 + 100, Y0 + 50), (X0 + 3900, Y0 + 2950), (X0 + 2000, Y0 - 10)],
                        name=["north", "south", "quay"], kind=["clinic", "clinic", "port"])
    out = tmp_path / "acc.gpkg"
    code, _, err = run(["access", net_path, "--hubs", hubs, "--hub-id-field", "name", "--hub-kind-field", "kind",
                        "-o", out], capsys, monkeypatch)
    assert code == 0, err
    nodes = pyogrio.read_dataframe(out, layer="nodes")
    assert {"nearest_hub_clinic", "hub_cost_clinic", "nearest_hub_port", "hub_cost_port"} <= set(nodes.columns)
    assert nodes.loc[0, "nearest_hub_clinic"] == "north" and nodes.loc[0, "nearest_hub_port"] == "quay"
    # node 0 to the port 10 m south of node 2 (nearest entry: node 2 itself): 2 min + 0.12 min walk
    assert nodes.loc[0, "hub_cost_port"] == pytest.approx(2.0 + 10 / (5000 / 60))
    hubs_out = pyogrio.read_dataframe(out, layer="hubs")
    assert hubs_out["hub_id"].tolist() == ["north", "south", "quay"]
    assert hubs_out["kind"].tolist() == ["clinic", "clinic", "port"]


def test_access_direction_on_one_way_network(tmp_path, capsys, monkeypatch):
    # chain of one-way links 0 -> 1 -> ... -> 4 (1 km, 1 min); hub at node 4's position.
    # --max-access-m 100: the hub may only join at node 4 (with the default 5 km it could also walk
    # to an earlier link, a legitimate but slower outreach trip).
    net = make_network([(i, i + 1) for i in range(4)], np.array([(X0 + 1000.0 * i, Y0) for i in range(5)]),
                       oneway=True)
    object.__setattr__(net, "crs", UTM)
    path = write_net(tmp_path / "chain.gpkg", net, drop=["latency_ms"])
    hubs = write_points(tmp_path / "h.gpkg", [(X0 + 4000, Y0)])
    for direction, expect in (("to-hub", [4.0, 3.0, 2.0, 1.0, 0.0]), ("from-hub", [None, None, None, None, 0.0])):
        out = tmp_path / f"{direction}.gpkg"
        code, _, err = run(["access", path, "--hubs", hubs, "--direction", direction, "--max-access-m", "100",
                            "-o", out], capsys, monkeypatch)
        assert code == 0, err
        got = pyogrio.read_dataframe(out, layer="nodes")["hub_cost"].tolist()
        assert [None if np.isnan(v) else v for v in got] == expect


def test_access_reports_far_and_lone_hubs(tmp_path, net_path, capsys, monkeypatch):
    # hub 1 normal, hub 2 near the island (alone in its component), hub 3 30 km from anything.
    hubs = write_points(tmp_path / "hubs.gpkg", [(X0 + 100, Y0 + 50), (X0 + 50500, Y0 + 20), (X0 + 20000, Y0 + 30000)])
    out = tmp_path / "acc.gpkg"
    code, _, err = run(["access", net_path, "--hubs", hubs, "-o", out], capsys, monkeypatch)
    assert code == 0, err
    # hub 3 is reported with its real distance to the grid corner (4 km, 3 km): hypot(16, 27) km
    assert "1 hubs farther than the largest access distance (5000 m)" in err and f"id 3 ({np.hypot(16000, 27000):,.0f} m)" in err
    assert "alone in a component of their own" in err and "id 2" in err
    h = pyogrio.read_dataframe(out, layer="hubs")
    assert h["joined"].tolist() == [1, 1, 0] and h["isolated"].tolist() == [0, 1, 0]


# ---------------------------------------------------------------- access: bad input
def test_access_refuses_empty_hubs(tmp_path, net_path, capsys, monkeypatch):
    empty = tmp_path / "empty.gpkg"
    gpd.GeoDataFrame({"n": []}, geometry=gpd.GeoSeries([], crs=UTM)).to_file(empty, driver="GPKG")
    code, _, err = run(["access", net_path, "--hubs", empty, "-o", tmp_path / "o.gpkg"], capsys, monkeypatch)
    assert_refused(code, err, "no features with geometry")
    assert not (tmp_path / "o.gpkg").exists()


def test_access_refuses_wrong_geometry(tmp_path, net_path, capsys, monkeypatch):
    lines = tmp_path / "lines.gpkg"
    gpd.GeoDataFrame({"n": [1]}, geometry=[shapely.LineString([(X0, Y0), (X0 + 5, Y0)])], crs=UTM).to_file(
        lines, driver="GPKG")
    code, _, err = run(["access", net_path, "--hubs", lines, "-o", tmp_path / "o.gpkg"], capsys, monkeypatch)
    assert_refused(code, err, "points are expected")


def test_access_refuses_duplicate_ids(tmp_path, net_path, capsys, monkeypatch):
    hubs = write_points(tmp_path / "hubs.gpkg", [(X0, Y0), (X0 + 10, Y0)], code=["h1", "h1"])
    code, _, err = run(["access", net_path, "--hubs", hubs, "--hub-id-field", "code", "-o", tmp_path / "o.gpkg"],
                       capsys, monkeypatch)
    assert_refused(code, err, "id 'h1' is used by features")


def test_access_keeps_existing_output_on_refusal(tmp_path, net_path, capsys, monkeypatch):
    out = tmp_path / "o.gpkg"
    out.write_bytes(b"old")
    hubs = write_points(tmp_path / "hubs.gpkg", [(X0, Y0), (X0 + 10, Y0)], code=["a", "a"])
    code, _, err = run(["access", net_path, "--hubs", hubs, "--hub-id-field", "code", "-o", out, "--overwrite"],
                       capsys, monkeypatch)
    assert code == 2 and out.read_bytes() == b"old"


def test_network_without_edges_or_nodes_layer_refused(tmp_path, capsys, monkeypatch):
    net = grid_network()
    only_nodes = tmp_path / "n.gpkg"
    net.nodes_frame().to_file(only_nodes, layer="nodes", driver="GPKG")
    only_edges = tmp_path / "e.gpkg"
    net.edges_frame().to_file(only_edges, layer="edges", driver="GPKG")
    hubs = write_points(tmp_path / "hubs.gpkg", [(X0, Y0)])
    code, _, err = run(["access", only_nodes, "--hubs", hubs, "-o", tmp_path / "o.gpkg"], capsys, monkeypatch)
    assert_refused(code, err, "has no layer 'edges'")
    code, _, err = run(["metrics", only_edges, "--json"], capsys, monkeypatch)
    assert_refused(code, err, "has no layer 'nodes'")


def test_weight_column_missing_refused(tmp_path, capsys, monkeypatch):
    path = write_net(tmp_path / "net.gpkg", grid_network(), drop=["latency_ms"])
    code, _, err = run(["metrics", path, "--json", "--weight", "latency_ms"], capsys, monkeypatch)
    assert_refused(code, err, "has no field 'latency_ms'")


def test_negative_costs_refused(tmp_path, capsys, monkeypatch):
    net = grid_network()
    e = net.edges_frame()
    e.loc[3, "minutes"] = -2.0
    path = write_net(tmp_path / "neg.gpkg", net, edges_frame=e)
    code, _, err = run(["metrics", path, "--json"], capsys, monkeypatch)
    assert_refused(code, err, "negative minutes")


# ====================================================================== route
def test_route_geojson_hand_computed(tmp_path, net_path, capsys, monkeypatch):
    # (100, 50) -> (3900, 2950) in the working CRS: the start sits 50 m off link 0-1 at 10 %, the end
    # 50 m off link 18-19 at 90 %: 0.6 walk + 0.9 to node 1 + 5 links to node 18 + 0.9 + 0.6 walk
    # = 8.0 minutes; length 50 + 900 + 5000 + 900 + 50 = 6900 m.
    code, out, err = run(["route", net_path, "--from", f"{X0 + 100},{Y0 + 50}", "--to", f"{X0 + 3900},{Y0 + 2950}",
                          "--crs", "EPSG:32633"], capsys, monkeypatch)
    assert code == 0, err
    f = json.loads(out)
    assert f["type"] == "Feature" and f["geometry"]["type"] == "LineString"
    assert f["properties"]["cost"] == pytest.approx(8.0)
    assert f["properties"]["length_m"] == pytest.approx(6900.0)
    lon, lat = f["geometry"]["coordinates"][0]
    assert 14.9 < lon < 15.1 and 54.0 < lat < 54.2  # EPSG:32633 easting 500 km is 15 deg E
    # the same trip given in longitude/latitude, written to a file
    from pyproj import Transformer

    t = Transformer.from_crs(UTM, 4326, always_xy=True)
    a = t.transform(X0 + 100, Y0 + 50)
    b = t.transform(X0 + 3900, Y0 + 2950)
    o = tmp_path / "r.geojson"
    code, _, err = run(["route", net_path, "--from", f"{a[0]},{a[1]}", "--to", f"{b[0]},{b[1]}", "-o", o],
                       capsys, monkeypatch)
    assert code == 0, err
    assert json.loads(o.read_text())["properties"]["cost"] == pytest.approx(8.0, rel=1e-6)


def test_route_unreachable_and_too_far(tmp_path, net_path, capsys, monkeypatch):
    code, out, err = run(["route", net_path, "--from", f"{X0 + 100},{Y0 + 50}", "--to", f"{X0 + 50500},{Y0 + 20}",
                          "--crs", "EPSG:32633"], capsys, monkeypatch)
    assert code == 0 and json.loads(out)["geometry"] is None and json.loads(out)["properties"]["cost"] is None
    assert "no trip joins" in err
    code, _, err = run(["route", net_path, "--from", f"{X0 + 100},{Y0 + 50}", "--to", f"{X0 + 20000},{Y0 + 30000}",
                        "--crs", "EPSG:32633"], capsys, monkeypatch)
    assert_refused(code, err, "beyond --max-access-m 5000")


# ====================================================================== od
def test_od_pairs_layer_and_csv(tmp_path, net_path, capsys, monkeypatch):
    o = write_points(tmp_path / "o.gpkg", [(X0 + 100, Y0 + 50), (X0 + 3900, Y0 + 2950)], oid=[10, 20])
    d = write_points(tmp_path / "d.gpkg", [(X0 + 3900, Y0 + 2950), (X0 + 50500, Y0 + 20), (X0 + 20000, Y0 + 30000)])
    out, csv = tmp_path / "od.gpkg", tmp_path / "od.csv"
    code, _, err = run(["od", net_path, "--origins", o, "--destinations", d, "--origin-id-field", "oid",
                        "-o", out, "--csv", csv], capsys, monkeypatch)
    assert code == 0, err
    assert "1 destinations farther than --max-access-m" in err
    pairs = pyogrio.read_dataframe(out, layer="od_pairs")
    assert {"origin_id", "destination_id", "trip_cost", "length_m", "reason"} <= set(pairs.columns)
    assert len(pairs) == 6  # 2 origins x 3 destinations: none is dropped, each empty cost has a reason
    row = pairs[(pairs.origin_id == 10) & (pairs.destination_id == 1)].iloc[0]
    assert row.trip_cost == pytest.approx(8.0) and row.length_m == pytest.approx(6900.0)  # as in the route test
    assert row.geometry.length == pytest.approx(np.hypot(3800, 2900))  # straight connecting line
    assert row.reason in ("", None)
    island = pairs[pairs.destination_id == 2]
    assert island.trip_cost.isna().all() and island.reason.str.startswith("no path").all()
    far = pairs[pairs.destination_id == 3]
    assert far.trip_cost.isna().all() and far.reason.str.startswith("destination farther").all()
    import pandas as pd

    table = pd.read_csv(csv, skiprows=1, encoding="utf-8-sig")   # line 1 is the caution
    assert open(csv, encoding="utf-8-sig").readline().strip().strip('"').startswith("Model estimates")
    assert list(table.columns[:4]) == ["origin_id", "destination_id", "trip_cost", "length_m"] and len(table) == 6
    code, _, err = run(["od", net_path, "--origins", o, "--destinations", d, "--nearest", "1", "-o", out,
                        "--overwrite"], capsys, monkeypatch)
    assert code == 0, err
    near = pyogrio.read_dataframe(out, layer="od_pairs")
    assert len(near) == 2 and near["rank"].tolist() == [1, 1]
    assert near.set_index("origin_id").loc[2, "destination_id"] == 1  # origin 2 stands on destination 1
    # an origin that reaches no destination is kept, with a null cost and the reason
    code, _, err = run(["od", net_path, "--origins", o, "--destinations", write_points(tmp_path / "d2.gpkg",
                        [(X0 + 50500, Y0 + 20)]), "--nearest", "1", "-o", out, "--overwrite"], capsys, monkeypatch)
    assert code == 0, err
    near = pyogrio.read_dataframe(out, layer="od_pairs")
    assert len(near) == 2 and near["trip_cost"].isna().all() and near["destination_id"].isna().all()
    assert near["reason"].str.startswith("no destination reachable").all()
    assert "2 without a path" in err


# ====================================================================== metrics
def test_metrics_json_keys_and_values(tmp_path, net_path, capsys, monkeypatch):
    code, out, err = run(["metrics", net_path, "--json", "-o", tmp_path / "m.gpkg"], capsys, monkeypatch)
    assert code == 0, err
    r = json.loads(out)
    for key in ("nodes", "edges", "components", "largest_component_nodes", "largest_two_way_component_nodes",
                "diameter", "mean_path", "global_efficiency"):
        assert key in r
    assert set(r["diameter"]) == {"value", "from_node", "to_node", "searches"}
    assert set(r["mean_path"]) == {"value", "range_95_low", "range_95_high", "exact", "sources"}
    assert (r["nodes"], r["edges"], r["components"]) == (22, 32, 2)
    assert (r["largest_component_nodes"], r["largest_two_way_component_nodes"]) == (20, 20)
    assert r["diameter"]["value"] == 7.0  # 4 x 5 grid: (4 - 1) + (5 - 1) links of 1 minute
    assert r["mean_path"]["value"] == pytest.approx(3.0) and r["mean_path"]["exact"]  # (4 + 5) / 3
    nodes = pyogrio.read_dataframe(tmp_path / "m.gpkg", layer="nodes")
    assert {"eccentricity", "closeness"} <= set(nodes.columns)
    assert nodes.loc[0, "eccentricity"] == 7.0 and nodes.loc[20, "eccentricity"] == 1.0
    path = pyogrio.read_dataframe(tmp_path / "m.gpkg", layer="diameter_path")
    assert len(path) == 1 and path.geometry.iloc[0].length == pytest.approx(7000.0)
    assert r["global_efficiency"] == pytest.approx(float(nodes["closeness"].mean()))


def test_metrics_sampled_options(tmp_path, capsys, monkeypatch):
    path = write_net(tmp_path / "big.gpkg", grid_network(rows=72, cols=72, island=False, latency=False))
    code, out, err = run(["metrics", path, "--json", "--samples", "50", "--seed", "3"], capsys, monkeypatch)
    assert code == 0, err
    r = json.loads(out)
    assert r["nodes"] == 5184 and not r["mean_path"]["exact"] and r["mean_path"]["sources"] == 50
    assert r["mean_path"]["range_95_low"] <= 48.0 <= r["mean_path"]["range_95_high"]  # exact (72 + 72) / 3 = 48
    assert r["diameter"]["value"] == 142.0


# ====================================================================== profile
def test_profile_json_and_png(tmp_path, net_path, capsys, monkeypatch):
    png = tmp_path / "p.png"
    code, out, err = run(["profile", net_path, "--from", 0, "--weight", "hops", "--json", "--png", png],
                         capsys, monkeypatch)
    assert code == 0, err
    r = json.loads(out)
    assert [s["nodes"] for s in r["steps"]] == [2, 5, 9, 13, 16, 18, 19]  # corner of a 4 x 5 grid
    assert set(r["steps"][0]) >= {"cost", "nodes", "length_m"}
    assert r["steps"][0]["length_m"] == pytest.approx(2000.0)
    assert r["growth"]["kind"] in {"linear", "polynomial", "exponential", "undetermined"}
    assert png.read_bytes()[:4] == b"\x89PNG"
    code, out, err = run(["profile", net_path, "--sample", 5, "--steps", 4, "--json"], capsys, monkeypatch)
    assert code == 0, err
    assert len(json.loads(out)["steps"]) == 4 and json.loads(out)["sources"] == 5


def test_profile_refuses_unknown_node(tmp_path, net_path, capsys, monkeypatch):
    code, _, err = run(["profile", net_path, "--from", 999], capsys, monkeypatch)
    assert_refused(code, err, "node id 999 is not in the network")


# ====================================================================== one walk model in the commands
def test_route_from_a_place_to_itself_costs_nothing(tmp_path, net_path, capsys, monkeypatch):
    """Issue: `route --from P --to P` cost 13.2 minutes (walking to the network and back); a trip to the
    place one stands on costs 0 on every weight."""
    for weight in ("minutes", "length_m", "hops"):
        code, out, err = run(["route", net_path, "--from", f"{X0 + 300},{Y0 + 550}", "--to", f"{X0 + 300},{Y0 + 550}",
                              "--crs", "EPSG:32633", "--weight", weight], capsys, monkeypatch)
        assert code == 0, err
        assert json.loads(out)["properties"]["cost"] == 0.0 and json.loads(out)["properties"]["edge_ids"] == []


def _river(tmp_path):
    """A barrier 40 m wide along x = X0+1560..X0+1600 over the whole grid network (between columns 1 and 2)."""
    path = tmp_path / "water.gpkg"
    gpd.GeoDataFrame({"n": [1]}, geometry=[shapely.box(X0 + 1560, Y0 - 6000, X0 + 1600, Y0 + 9000)],
                     crs=UTM).to_file(path, layer="water")
    return f"{path}:water"


# Hand-worked, walking at 4 km/h (66.67 m per minute) on 50 m cells, whose centres lie at X0 + 25 + 50 k:
# W = (X0+1525, Y0+525) is 475 m west of column 2 (x = X0+2000), E = (X0+1625, Y0+525) 375 m west of it,
# with the barrier between them.  Without it, W walks east 475 m (7.125 min) and rides 0.525 link down
# to node 2 (X0+2000, Y0): 7.65 min.  With it, W walks 525 m south to the row y = Y0 (7.875 min; a column
# of cell centres, then 25 m to the road) and rides 0.475 link east: 8.35 min.  E: 375 m + 0.525 = 6.15.
W, E, NODE2 = (X0 + 1525, Y0 + 525), (X0 + 1625, Y0 + 525), (X0 + 2000, Y0)


def test_route_and_od_walk_round_barriers_at_the_given_speed(tmp_path, net_path, capsys, monkeypatch):
    water = _river(tmp_path)

    def route(frm, *extra):
        code, out, err = run(["route", net_path, "--from", f"{frm[0]},{frm[1]}", "--to", f"{NODE2[0]},{NODE2[1]}",
                              "--crs", "EPSG:32633", "--walk-kmh", "4", *extra], capsys, monkeypatch)
        assert code == 0, err
        return json.loads(out)["properties"]["cost"]

    assert route(W) == pytest.approx(7.65, rel=1e-9)                        # straight lines, no friction
    # the hand-worked walks round the water are on the 8-neighbour grid (axes and diagonals) ...
    assert route(W, "--barriers", water, "--cell-m", "50", "--neighbours", "8") == pytest.approx(8.35, rel=1e-9)
    # ... and knight moves can only shorten a grid walk, never below the straight line (7.65)
    assert 7.65 < route(W, "--barriers", water, "--cell-m", "50") <= 8.35 + 1e-9
    assert route(E, "--barriers", water, "--cell-m", "50") == pytest.approx(6.15, rel=1e-9)
    assert route(W, "--terrain", _dem(tmp_path, 0.0), "--cell-m", "50") == pytest.approx(7.65, rel=1e-9)
    # ground rising 1 in 10 to the east: walking east uphill (Tobler: speed x exp(-3.5 x 0.15) / exp(-3.5 x
    # 0.05) = 0.705) costs 475 m / 2.82 km/h = 10.1 min; the flat walk south (columns keep their height)
    # to the row y = Y0 is cheaper: 8.35 min as with the barrier
    assert route(W, "--terrain", _dem(tmp_path, 0.1), "--cell-m", "50", "--neighbours", "8") == \
        pytest.approx(8.35, rel=1e-9)
    # od prices the same trips
    o = write_points(tmp_path / "o.gpkg", [W, E])
    d = write_points(tmp_path / "d.gpkg", [NODE2])
    code, _, err = run(["od", net_path, "--origins", o, "--destinations", d, "--walk-kmh", "4", "--barriers", water,
                        "--cell-m", "50", "--neighbours", "8", "-o", tmp_path / "od.gpkg"], capsys, monkeypatch)
    assert code == 0, err
    pairs = pyogrio.read_dataframe(tmp_path / "od.gpkg", layer="od_pairs").sort_values("origin_id")
    assert pairs.trip_cost.tolist() == pytest.approx([8.35, 6.15], rel=1e-9)


def _dem(tmp_path, rise):
    """A terrain raster rising ``rise`` metres per metre eastwards (50 m cells, centres on the grid's)."""
    import rasterio
    from rasterio.transform import from_origin

    path = tmp_path / f"dem_{rise:g}.tif"
    x = X0 - 4000 + 25 + 50 * np.arange(240)
    z = np.repeat((100.0 + rise * (x - X0))[None, :], 240, axis=0)
    with rasterio.open(path, "w", driver="GTiff", width=240, height=240, count=1, dtype="float64", crs=UTM,
                       transform=from_origin(X0 - 4000, Y0 + 6000, 50, 50)) as ds:
        ds.write(z, 1)
    return path


def test_access_prices_hub_walks_with_the_friction_options(tmp_path, net_path, capsys, monkeypatch):
    """The hub at W (hand-worked above): node 2 is 8.35 min from it with the barrier, 7.65 without;
    node 1 (X0+1000, Y0) is 0.525 link + 525 m = 8.4 min either way (W lies west of the barrier)."""
    hubs = write_points(tmp_path / "hubs.gpkg", [W])
    out = tmp_path / "acc.gpkg"
    code, _, err = run(["access", net_path, "--hubs", hubs, "--walk-kmh", "4", "--barriers", _river(tmp_path),
                        "--cell-m", "50", "-o", out], capsys, monkeypatch)
    assert code == 0, err
    nodes = pyogrio.read_dataframe(out, layer="nodes")
    assert nodes.loc[2, "hub_cost"] == pytest.approx(8.35, rel=1e-9)
    assert nodes.loc[1, "hub_cost"] == pytest.approx(8.4, rel=1e-9)
    code, _, err = run(["access", net_path, "--hubs", hubs, "--walk-kmh", "4", "-o", out, "--overwrite"],
                       capsys, monkeypatch)
    assert code == 0, err
    assert pyogrio.read_dataframe(out, layer="nodes").loc[2, "hub_cost"] == pytest.approx(7.65, rel=1e-9)


def test_friction_options_refused_in_one_line(tmp_path, net_path, capsys, monkeypatch):
    frm = ["--from", f"{X0 + 300},{Y0 + 550}", "--to", f"{X0 + 900},{Y0 + 550}", "--crs", "EPSG:32633"]
    code, _, err = run(["route", net_path, *frm, "--landcover", tmp_path / "lc.tif"], capsys, monkeypatch)
    assert_refused(code, err, "--landcover needs --landcover-speeds")
    code, _, err = run(["route", net_path, *frm, "--landcover-speeds", "1=5"], capsys, monkeypatch)
    assert_refused(code, err, "--landcover-speeds needs --landcover")
    code, _, err = run(["route", net_path, *frm, "--barriers", tmp_path / "nothing.gpkg"], capsys, monkeypatch)
    assert_refused(code, err, "nothing.gpkg")
    # a place walled in by barriers is named, not routed
    ring = tmp_path / "ring.gpkg"
    gpd.GeoDataFrame({"n": [1]}, geometry=[shapely.box(X0 + 200, Y0 + 450, X0 + 400, Y0 + 650).difference(
        shapely.box(X0 + 260, Y0 + 510, X0 + 340, Y0 + 590))], crs=UTM).to_file(ring, layer="ring")
    code, _, err = run(["route", net_path, *frm, "--barriers", f"{ring}:ring", "--cell-m", "20"], capsys, monkeypatch)
    assert_refused(code, err, "no walk from the point reaches a place to join the network")
    # od keeps the walled-in origin, with a null cost and the reason, and says so
    o = write_points(tmp_path / "o.gpkg", [(X0 + 300, Y0 + 550), (X0 + 900, Y0 + 550)])
    code, _, err = run(["od", net_path, "--origins", o, "--destinations", o, "--barriers", f"{ring}:ring",
                        "--cell-m", "20", "-o", tmp_path / "od.gpkg"], capsys, monkeypatch)
    assert code == 0, err
    assert "1 origins cannot walk to any place to join the network" in err
    pairs = pyogrio.read_dataframe(tmp_path / "od.gpkg", layer="od_pairs")
    walled = pairs[pairs.origin_id == 1]
    assert walled.trip_cost.isna().all() and walled.reason.str.startswith("origin walks to no place").all()
    assert pairs[(pairs.origin_id == 2) & (pairs.destination_id == 2)].trip_cost.tolist() == [0.0]
