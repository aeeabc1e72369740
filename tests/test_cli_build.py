"""``geo-reach build`` / ``check`` on bad input: refused with exit 2 and one line, or accepted and reported."""

from __future__ import annotations

import json
import sys
from pathlib import Path

import geopandas as gpd
import pyogrio
import pytest
import shapely

UTM = "EPSG:32727"
X0, Y0 = 500_000.0, 6_570_000.0

sys.path.insert(0, str(Path(__file__).parent))
from helpers.cli import cli as run, refused  # noqa: E402


@pytest.fixture
def roads(tmp_path):
    g = gpd.GeoDataFrame(
        {"speed": [50, None, "x"], "cls": ["main", "track", "main"]},
        geometry=[shapely.LineString([(X0, Y0), (X0 + 100, Y0)]),
                  shapely.LineString([(X0 + 100, Y0), (X0 + 100, Y0 + 100)]),
                  shapely.LineString([(X0 + 50, Y0 - 50), (X0 + 50, Y0 + 50)])], crs=UTM)
    path = tmp_path / "roads.gpkg"
    g.to_file(path, layer="roads")
    return path


def test_build_writes_layers_and_report(tmp_path, roads):
    out = tmp_path / "net.gpkg"
    code, stdout, err = run("build", f"{roads}:roads", "-o", out, "--json", "--speed-field", "speed",
                            "--report", tmp_path / "rep.json")
    assert code == 0, err
    rep = json.loads(stdout)
    for key in ("nodes", "edges", "components", "largest_component_nodes", "input_length_m", "network_length_m",
                "dropped_features", "default_speeds_used", "crs"):
        assert key in rep
    assert rep == json.loads((tmp_path / "rep.json").read_text())
    layers = set(pyogrio.list_layers(out)[:, 0])
    assert {"edges", "nodes", "network_issues"} <= layers
    e = gpd.read_file(out, layer="edges")
    for f in ("edge_id", "from_node", "to_node", "mode", "length_m", "minutes", "latency_ms", "oneway",
              "src_layer", "src_fid"):
        assert f in e.columns
    n = gpd.read_file(out, layer="nodes")
    for f in ("node_id", "degree", "component", "joinable"):
        assert f in n.columns
    assert rep["issues"]["crossing_split"] == 1
    assert rep["issues"]["speed_defaulted"] == 2      # null and "x": accepted, defaulted, reported


def test_missing_file(tmp_path):
    refused(["build", tmp_path / "nope.gpkg", "-o", tmp_path / "o.gpkg"], "nope.gpkg", "not found")


def test_unknown_layer(tmp_path, roads):
    refused(["build", f"{roads}:streets", "-o", tmp_path / "o.gpkg"], "streets", "roads")


def test_points_where_lines_expected(tmp_path):
    p = tmp_path / "pts.gpkg"
    gpd.GeoDataFrame(geometry=[shapely.Point(X0, Y0)], crs=UTM).to_file(p)
    refused(["build", p, "-o", tmp_path / "o.gpkg"], "pts.gpkg", "Point", "lines")


def test_polygons_where_lines_expected(tmp_path):
    p = tmp_path / "poly.gpkg"
    gpd.GeoDataFrame(geometry=[shapely.box(X0, Y0, X0 + 1, Y0 + 1)], crs=UTM).to_file(p)
    refused(["build", p, "-o", tmp_path / "o.gpkg"], "poly.gpkg", "Polygon")


def test_empty_layer(tmp_path):
    p = tmp_path / "empty.gpkg"
    gpd.GeoDataFrame({"a": []}, geometry=gpd.GeoSeries([], crs=UTM)).to_file(p, layer="roads")
    refused(["build", p, "-o", tmp_path / "o.gpkg"], "empty.gpkg", "no features")


def test_no_crs_refused_then_assumed(tmp_path, roads):
    shp = tmp_path / "noprj.shp"
    gpd.read_file(roads).to_file(shp)
    shp.with_suffix(".prj").unlink()
    refused(["build", shp, "-o", tmp_path / "o.gpkg"], "noprj.shp", "no CRS", "--assume-crs")
    code, _, err = run("build", shp, "-o", tmp_path / "o.gpkg", "--assume-crs", UTM)
    assert code == 0, err


def test_output_exists_is_kept(tmp_path, roads):
    out = tmp_path / "o.gpkg"
    out.write_bytes(b"precious")
    refused(["build", roads, "-o", out], "o.gpkg", "--overwrite")
    assert out.read_bytes() == b"precious"
    code, _, err = run("build", roads, "-o", out, "--overwrite")
    assert code == 0, err
    assert "edges" in pyogrio.list_layers(out)[:, 0]


def test_output_folder_missing(tmp_path, roads):
    refused(["build", roads, "-o", tmp_path / "no" / "o.gpkg"], "does not exist")


def test_output_under_a_file(tmp_path, roads):
    f = tmp_path / "afile"
    f.write_text("x")
    refused(["build", roads, "-o", f / "o.gpkg"], "afile")
    assert f.read_text() == "x"


def test_failed_build_leaves_nothing(tmp_path, roads):
    out = tmp_path / "o.gpkg"
    refused(["build", roads, "-o", out, "--speed-field", "nosuch"], "nosuch")
    assert list(tmp_path.iterdir()) == [roads]


def test_accepts_mixed_crs_z_and_invalid(tmp_path):
    """Layers in different CRSs are reprojected; Z dropped; a one-point line dropped and reported."""
    a = gpd.GeoDataFrame(geometry=[shapely.LineString([(X0, Y0, 5), (X0 + 100, Y0, 7)])], crs=UTM)
    b = a.to_crs(4326)
    b["geometry"] = [shapely.LineString([(x, y) for x, y, *_ in shapely.get_coordinates(b.geometry.iloc[0], include_z=True)]
                                        + [(-20.9, -31.0)])]
    bad = gpd.GeoDataFrame(geometry=[shapely.LineString([(X0, Y0 + 5), (X0, Y0 + 5)])], crs=UTM)
    pa, pb, pc = tmp_path / "a.gpkg", tmp_path / "b.geojson", tmp_path / "c.gpkg"
    a.to_file(pa); b.to_file(pb); bad.to_file(pc)
    code, out, err = run("build", pa, pb, pc, "-o", tmp_path / "o.gpkg", "--json")
    assert code == 0, err
    rep = json.loads(out)
    assert rep["z_m_dropped_features"] == 1
    assert rep["issues"]["zero_length"] == 1
    assert rep["crs"] == "EPSG:32727"


def test_check_writes_issues_only(tmp_path, roads):
    out = tmp_path / "issues.gpkg"
    code, stdout, err = run("check", roads, "-o", out, "--json")
    assert code == 0, err
    assert list(pyogrio.list_layers(out)[:, 0]) == ["network_issues"]
    assert json.loads(stdout)["issues"]["crossing_split"] == 1


def test_absurd_coordinates_refused_in_one_line(tmp_path):
    """Issue 9, point 3: coordinates of 1e15 once ended in a ValueError traceback (exit 1)."""
    p = tmp_path / "far.gpkg"
    gpd.GeoDataFrame(geometry=[shapely.LineString([(X0, Y0), (X0 + 100, Y0)]),
                               shapely.LineString([(X0, Y0), (1e15, 1e15)])], crs=UTM).to_file(p, layer="roads")
    refused(["build", f"{p}:roads", "-o", tmp_path / "o.gpkg"], "far.gpkg", "layer 'roads'", "feature 2",
            "not a place on Earth")
    assert sorted(x.name for x in tmp_path.iterdir()) == ["far.gpkg"]


def test_uninterpretable_level_refused_in_one_line(tmp_path):
    """Issue 9, point 5: a level field holding "0x"/"1x" once made every level 0, silently."""
    p = tmp_path / "lv.gpkg"
    gpd.GeoDataFrame({"lvl": ["0x", "1x"]},
                     geometry=[shapely.LineString([(X0, Y0), (X0 + 100, Y0)]),
                               shapely.LineString([(X0 + 50, Y0 - 50), (X0 + 50, Y0 + 50)])], crs=UTM
                     ).to_file(p, layer="roads")
    refused(["build", f"{p}:roads", "-o", tmp_path / "o.gpkg", "--level-field", "lvl"], "lv.gpkg", "feature 1",
            "field 'lvl'", "'0x'", "1 more feature", "whole numbers")
    assert sorted(x.name for x in tmp_path.iterdir()) == ["lv.gpkg"]


def test_network_from_an_earlier_version_with_entry_is_read_and_said(tmp_path, roads):
    """Regression: the nodes' flag was written as ``entry`` before it took the glossary's name ``joinable``.
    Last month's network files still route, with their flags kept, and the reading says what it did."""
    from geo_reach.network.io import read_network

    out = tmp_path / "net.gpkg"
    code, _, err = run("build", f"{roads}:roads", "-o", out, "--speed-field", "speed")
    assert code == 0, err
    nodes = gpd.read_file(out, layer="nodes")
    old = nodes.rename(columns={"joinable": "entry"})
    old.loc[0, "entry"] = 0                          # one node a trip may not join at: the flag must survive
    old.to_file(out, layer="nodes", driver="GPKG")
    assert "joinable" not in gpd.read_file(out, layer="nodes").columns
    notes: list = []
    net = read_network(out, "minutes", notes)
    assert net.node_entry.tolist() == [False] + [True] * (len(nodes) - 1)
    assert len(notes) == 1 and "field 'entry'" in notes[0] and "'joinable'" in notes[0] and str(out) in notes[0]
    code, _, err = run("metrics", out)
    assert code == 0, err
    assert "field 'entry': read as 'joinable'" in err
