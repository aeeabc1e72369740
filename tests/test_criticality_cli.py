"""``geo-reach criticality`` end to end: the layer, CSV and JSON, hazard runs, and one-line refusals.

The figures written are checked against the library run on the network read back from the file
(itself checked against networkx brute force in test_criticality.py) and, for a grid, by hand:
a 1 km grid of 1-minute links with a clinic at one corner; cut edges are the links of a spur.
"""

from __future__ import annotations

import dataclasses
import json
import sys
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio
import pytest
import rasterio
import shapely
from pyproj import CRS
from rasterio.transform import Affine

sys.path.insert(0, str(Path(__file__).parent))
from helpers.routing_nets import make_network  # noqa: E402

from geo_reach import cli  # noqa: E402
from geo_reach.analysis.criticality import HubTrips, link_criticality  # noqa: E402
from geo_reach.network.io import read_network  # noqa: E402

X0, Y0 = 500000.0, 6000000.0
UTM = CRS.from_epsg(32633)


def run(argv, capsys, monkeypatch):
    monkeypatch.setattr(cli, "COMMANDS", ["criticality"])
    code = cli.main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def assert_refused(code, err, *words):
    assert code == 2, err
    lines = [ln for ln in err.strip().splitlines() if ln.strip()]
    assert len(lines) == 1 and lines[0].startswith("geo-reach: error:"), err
    for w in words:
        assert w in lines[0], (w, lines[0])


@pytest.fixture
def files(tmp_path):
    """A 4 x 4 grid (1 km, 1 minute), a spur 15-16-17 east of node 15 with a bridge (level 1) as 16-17,
    a clinic at node 0 and a market at node 12, five villages, two districts (west, east)."""
    xy = [(X0 + c * 1000.0, Y0 + r * 1000.0) for r in range(4) for c in range(4)]
    edges = [(r * 4 + c, r * 4 + c + 1) for r in range(4) for c in range(3)]
    edges += [(r * 4 + c, (r + 1) * 4 + c) for r in range(3) for c in range(4)]
    xy += [(X0 + 4000.0, Y0 + 3000.0), (X0 + 5000.0, Y0 + 3000.0)]
    edges += [(15, 16), (16, 17)]
    net = make_network(edges, np.array(xy), minutes=1.0)
    level = np.zeros(len(edges))
    level[-1] = 1.0
    net = dataclasses.replace(net, crs=UTM, extra={"level": level})
    path = tmp_path / "net.gpkg"
    net.edges_frame().to_file(path, layer="edges", driver="GPKG")
    net.nodes_frame().to_file(path, layer="nodes", driver="GPKG")
    hubs = tmp_path / "hubs.gpkg"
    gpd.GeoDataFrame({"hub_id": ["C1", "M1"], "kind": ["clinic", "market"]},
                     geometry=shapely.points([xy[0], xy[12]]), crs=UTM).to_file(hubs, driver="GPKG")
    vil = tmp_path / "villages.gpkg"
    vxy = np.array([xy[5], xy[10], xy[16], xy[17], xy[3]]) + [0.0, 40.0]
    gpd.GeoDataFrame({"name": list("ABCDE"), "pop": [100, 200, 300, 400, None]},
                     geometry=shapely.points(vxy), crs=UTM).to_file(vil, driver="GPKG")
    zones = tmp_path / "zones.gpkg"
    gpd.GeoDataFrame({"code": ["W", "E"]}, geometry=[shapely.box(X0 - 500, Y0 - 500, X0 + 2500, Y0 + 3500),
                                                     shapely.box(X0 + 2500, Y0 - 500, X0 + 5500, Y0 + 3500)],
                     crs=UTM).to_file(zones, driver="GPKG")
    flood = tmp_path / "flood.gpkg"       # over the spur: touches 15-16 and the bridge 16-17, and village C
    gpd.GeoDataFrame({"n": [1]}, geometry=[shapely.box(X0 + 3500, Y0 + 2900, X0 + 4500, Y0 + 3100)],
                     crs=UTM).to_file(flood, driver="GPKG")
    return dict(net=path, hubs=hubs, villages=vil, zones=zones, flood=flood, tmp=tmp_path, xy=np.array(xy))


def base_args(f, out):
    """Walk legs within 500 m only, so the spur's villages cannot walk 1 km to the grid."""
    return ["criticality", f["net"], "--hubs", f["hubs"], "--hub-id-field", "hub_id", "--hub-kind-field", "kind",
            "--max-access-m", "500", "-o", out]


def test_layer_csv_and_json(files, capsys, monkeypatch):
    out = files["tmp"] / "crit.gpkg"
    csv = files["tmp"] / "crit.csv"
    code, stdout, err = run(base_args(files, out) + ["--settlements", files["villages"], "--population-field", "pop",
                                                     "--csv", csv, "--json"], capsys, monkeypatch)
    assert code == 0, err
    assert "settlements have no number in 'pop'" in err and "Model estimates" in err
    layer = gpd.read_file(out, layer="link_criticality")
    assert list(layer.columns) == ["edge_id", "people_cut_off", "people_cut_off_clinic", "people_cut_off_market",
                                   "nodes_cut_off", "person_minutes_added", "cut_edge", "rank", "geometry"]
    assert len(layer) == 26 and set(layer.geom_type) == {"LineString"}
    assert layer["rank"].tolist() == list(range(1, 27))
    # the spur: 15-16 cuts villages C (300) and D (400) off both hubs; 16-17 cuts D off both
    by = layer.set_index("edge_id")
    assert by.loc[24, "people_cut_off"] == 1400 and by.loc[24, "cut_edge"] == 1 and by.loc[24, "nodes_cut_off"] == 2
    assert by.loc[25, "people_cut_off"] == 800 and by.loc[25, "people_cut_off_clinic"] == 400
    assert layer["edge_id"].iloc[0] == 24 and layer["edge_id"].iloc[1] == 25
    # the same as the library on the network read back
    net = read_network(out.parent / "net.gpkg")
    v = gpd.read_file(files["villages"])
    t = HubTrips.prepare(net, files["xy"][[0, 12]], np.array(["C1", "M1"], object),
                         np.array(["clinic", "market"], object), place_xy=shapely.get_coordinates(v.geometry.values),
                         people=v["pop"].fillna(0).to_numpy(float), max_access_m=500.0)
    ref = link_criticality(t).table
    pd.testing.assert_frame_equal(pd.DataFrame(layer.drop(columns="geometry")), ref, check_dtype=False)
    table = pd.read_csv(csv, skiprows=1, encoding="utf-8-sig")   # line 1 is the caution
    pd.testing.assert_frame_equal(table, ref, check_dtype=False)
    js = json.loads(stdout)
    assert len(js["top"]) == 20 and js["top"][0]["edge_id"] == 24 and js["caution"].startswith("Model estimates")
    assert js["work"]["links"] == 26 and js["work"]["naive_full_searches"] == 52 and js["work"]["full_searches"] > 0
    assert pyogrio.read_info(out, layer="link_criticality")["crs"].endswith("32633")


def test_links_subset_from_a_list_or_a_file(files, capsys, monkeypatch):
    out = files["tmp"] / "a.gpkg"
    code, _, err = run(base_args(files, out) + ["--links", "3,24,3"], capsys, monkeypatch)
    assert code == 0, err
    assert sorted(gpd.read_file(out)["edge_id"]) == [3, 24]
    ids = files["tmp"] / "ids.txt"
    ids.write_text("5\n7\n\n9\n")
    code, _, err = run(base_args(files, out) + ["--links", ids, "--overwrite"], capsys, monkeypatch)
    assert code == 0, err
    assert sorted(gpd.read_file(out)["edge_id"]) == [5, 7, 9]
    table = files["tmp"] / "ids.csv"
    pd.DataFrame({"name": ["a", "b"], "edge_id": [1, 2]}).to_csv(table, index=False)
    code, _, err = run(base_args(files, out) + ["--links", table, "--overwrite"], capsys, monkeypatch)
    assert code == 0, err
    assert sorted(gpd.read_file(out)["edge_id"]) == [1, 2]


@pytest.mark.parametrize("extra,words", [
    (["--links", "3,99"], ["link id 99 is not in the network", "0..25"]),
    (["--links", "3,x7"], ["'x7' is not a whole number"]),
    (["--links", "nothere.txt"], ["nothere.txt", "not found"]),
    (["--population-field", "pop"], ["--population-field", "--settlements"]),
    (["--settlements", "VIL"], ["--settlements needs --population-field"]),
    (["--hazard", "FLOOD", "--links", "1"], ["--links", "hazard"]),
    (["--zones", "ZONES"], ["--zones", "hazard"]),
    (["--hazard-raster", "x.tif"], ["--hazard-above"]),
    (["--workers", "0"], ["--workers 0"]),
    (["--settlements", "VIL", "--population-field", "people"], ["no field 'people'", "--population-field"]),
])
def test_refusals_are_one_line_and_write_nothing(files, capsys, monkeypatch, extra, words):
    out = files["tmp"] / "never.gpkg"
    extra = [{"VIL": files["villages"], "FLOOD": files["flood"], "ZONES": files["zones"]}.get(a, a) for a in extra]
    code, _, err = run(base_args(files, out) + extra, capsys, monkeypatch)
    assert_refused(code, err, *words)
    assert not out.exists()


def test_links_file_with_an_unknown_id_names_the_file(files, capsys, monkeypatch):
    ids = files["tmp"] / "bad.txt"
    ids.write_text("1\n2\n400\n")
    code, _, err = run(base_args(files, files["tmp"] / "o.gpkg") + ["--links", ids], capsys, monkeypatch)
    assert_refused(code, err, "bad.txt", "link id 400")


def test_existing_output_is_kept(files, capsys, monkeypatch):
    out = files["tmp"] / "keep.gpkg"
    out.write_bytes(b"keep")
    code, _, err = run(base_args(files, out), capsys, monkeypatch)
    assert_refused(code, err, "already exists", "--overwrite")
    assert out.read_bytes() == b"keep"


def test_a_scheduler_that_does_not_answer_is_refused(files, capsys, monkeypatch):
    import socket

    s = socket.socket()
    s.bind(("127.0.0.1", 0))
    port = s.getsockname()[1]
    s.close()
    out = files["tmp"] / "o.gpkg"
    code, _, err = run(base_args(files, out) + ["--scheduler", f"tcp://127.0.0.1:{port}", "--timeout-s", "2"],
                       capsys, monkeypatch)
    assert_refused(code, err, f"scheduler tcp://127.0.0.1:{port}", "no answer within 2 s")
    assert not out.exists()


def test_hazard_polygons_zones_and_bridges(files, capsys, monkeypatch):
    """The flood touches spur links 15-16 and the bridge 16-17 and covers village C (300) by node 16.

    Bridge kept open: 15-16 closes, so C (in place) and D (400, outside) lose both hubs: in place 300,
    isolated 400, in place and cut off 300; both in district E.  With --hazard-closes-bridges the
    bridge closes too: the same people (they were already cut off by 15-16).
    """
    out = files["tmp"] / "hz.gpkg"
    args = base_args(files, out) + ["--settlements", files["villages"], "--population-field", "pop",
                                    "--hazard", files["flood"], "--zones", files["zones"], "--zone-id-field", "code",
                                    "--json"]
    code, stdout, err = run(args, capsys, monkeypatch)
    assert code == 0, err
    js = json.loads(stdout)
    assert js["links_closed"] == 1 and js["links_kept_open"] == 1
    assert js["people_in_place"] == 300 and js["people_isolated"] == 400 and js["people_in_place_cut_off"] == 300
    assert js["by_kind"]["clinic"]["people_isolated"] == 400
    assert {"hazard_links", "hazard_places", "hazard_districts"} <= set(pyogrio.list_layers(out)[:, 0])
    links = gpd.read_file(out, layer="hazard_links").set_index("edge_id")
    assert links.loc[24, "closed"] == 1 and links.loc[25, "closed"] == 0 and links.loc[25, "grade_separated"] == 1
    d = gpd.read_file(out, layer="hazard_districts").set_index("zone")
    assert d.loc["E", "people_isolated"] == 400 and d.loc["W", "people_isolated"] == 0
    places = gpd.read_file(out, layer="hazard_places")
    assert places["in_hazard"].tolist() == [0, 0, 1, 0, 0]
    code, stdout, err = run(args + ["--hazard-closes-bridges", "--overwrite"], capsys, monkeypatch)
    assert code == 0, err
    js = json.loads(stdout)
    assert js["links_closed"] == 2 and js["links_kept_open"] == 0 and js["people_isolated"] == 400


def test_hazard_raster(files, capsys, monkeypatch):
    """Flood depth on 500 m cells; the cell over the grid's middle column of links between x = 1.5
    and 2 km, y = 0 to 3.5 km is 1.2 m deep, elsewhere 0.1 m: above 0.5 m it touches the four
    horizontal links 1-2, 5-6, 9-10, 13-14 (each from x = 1 to 2 km)."""
    tif = files["tmp"] / "depth.tif"
    depth = np.full((8, 12), 0.1)
    depth[:, 3] = 1.2            # x from X0 - 500 + 3 * 500 = X0 + 1000 to X0 + 1500
    tr = Affine(500.0, 0.0, X0 - 500.0, 0.0, -500.0, Y0 + 3500.0)
    with rasterio.open(tif, "w", driver="GTiff", width=12, height=8, count=1, dtype="float64", crs=UTM,
                       transform=tr) as ds:
        ds.write(depth, 1)
    out = files["tmp"] / "r.gpkg"
    code, stdout, err = run(base_args(files, out) + ["--hazard-raster", tif, "--hazard-above", "0.5", "--json"],
                            capsys, monkeypatch)
    assert code == 0, err
    links = gpd.read_file(out, layer="hazard_links")
    net = read_network(files["net"])
    box = shapely.box(X0 + 1000, Y0 - 500, X0 + 1500, Y0 + 3500)
    assert sorted(links["edge_id"]) == [e for e in range(net.n_edges) if net.edge_geometry[e].intersects(box)]
    assert json.loads(stdout)["links_closed"] == len(links)


def test_two_local_workers_write_the_same_layer(files, capsys, monkeypatch):
    a, b = files["tmp"] / "a.gpkg", files["tmp"] / "b.gpkg"
    code, _, err = run(base_args(files, a), capsys, monkeypatch)
    assert code == 0, err
    code, _, err = run(base_args(files, b) + ["--workers", "2"], capsys, monkeypatch)
    assert code == 0, err
    pd.testing.assert_frame_equal(gpd.read_file(a), gpd.read_file(b))
