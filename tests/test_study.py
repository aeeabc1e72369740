"""Study files and the pipeline: validation, runs, scenarios, determinism."""

from __future__ import annotations

import json
import sys
from pathlib import Path

import numpy as np
import pytest
import rasterio

from geo_reach.errors import InputError
from geo_reach.study import load_study

sys.path.insert(0, str(Path(__file__).parent))
from studykit import write_study  # noqa: E402
from helpers.cli import cli, refused as one_line_error  # noqa: E402


# ----------------------------------------------------------------------------- validation
@pytest.mark.parametrize("extra, key", [
    ("\n[routing]\nspeedy = 3\n", "routing.speedy"),
    ("\n[scenarios.north_link]\nspeed_kmh = 40\n", "scenarios.north_link.speed_kmh"),
    ("\n[routing]\nwalk_kmh = \"fast\"\n", "routing.walk_kmh"),
    ("\n[outputs]\nmap = 1\n", "outputs.map"),
])
def test_unknown_key_or_wrong_type_names_the_dotted_key_and_line(tmp_path, extra, key):
    p = write_study(tmp_path, extra=extra, proposal=False)
    with pytest.raises(InputError) as e:
        load_study(p)
    msg = str(e.value)
    assert key in msg
    line_no = next(i for i, ln in enumerate(p.read_text().splitlines(), 1)
                   if ln.strip().startswith(key.split(".")[-1]) or ln.strip() == f"[{key}]")
    assert f"line {line_no}" in msg


def test_missing_file_names_the_key(tmp_path):
    p = write_study(tmp_path, proposal=False)
    p.write_text(p.read_text().replace('population = "pop.tif"', 'population = "nope.tif"'))
    with pytest.raises(InputError, match=r"surface\.population.*nope\.tif"):
        load_study(p)


def test_duplicate_scenario_names_are_refused(tmp_path):
    """TOML itself forbids defining a table twice; the message carries the parser's line."""
    p = write_study(tmp_path)
    p.write_text(p.read_text() + '\n[scenarios.far_link]\ndescription = "again"\n')
    msg = one_line_error(["run", p, "-o", tmp_path / "out"], "study.toml", "line")
    assert not (tmp_path / "out").exists(), msg


def test_closing_a_feature_that_does_not_exist(tmp_path):
    p = write_study(tmp_path, extra='\n[scenarios.shut]\nclose = [{ layer = "roads", fids = [9999] }]\n')
    one_line_error(["run", p, "-o", tmp_path / "out"], "scenarios.shut.close", "9999")
    assert not (tmp_path / "out").exists()


# ----------------------------------------------------------------------------- running
@pytest.fixture(scope="module")
def ran(tmp_path_factory):
    d = tmp_path_factory.mktemp("study")
    p = write_study(d)
    out = d / "out"
    code, stdout, err = cli("run", p, "-o", out, "--quiet")
    assert code == 0, err
    return p, out, stdout


def test_run_writes_the_promised_outputs(ran):
    import pyogrio

    p, out, stdout = ran
    layers = set(pyogrio.list_layers(out / "results.gpkg")[:, 0])
    assert {"edges", "nodes", "hubs", "network_issues", "diameter_path", "reach_bands", "weak_regions",
            "settlements", "zones"} <= layers
    assert {"far_link_settlements", "far_link_zones", "far_link_edge_change"} <= layers
    for f in ("hub_minutes.tif", "nearest_hub.tif", "hub_minutes_clinic.tif", "hub_minutes_change_far_link.tif",
              "summary.json", "map.html", "reach_profile.png"):
        assert (out / f).exists(), f
    s = json.loads((out / "summary.json").read_text())
    assert s["caution"].startswith("Model estimates")
    b = s["baseline"]
    assert b["population_total"] == pytest.approx(3600.0)           # 60 x 60 cells of one person
    largest = b["population_by_band"]["60"]
    assert largest + b["population_beyond"] == pytest.approx(b["population_total"])
    assert "map:" in stdout and "Model estimates" in stdout


def test_nodes_layer_merges_build_access_and_metrics(ran):
    import geopandas as gpd

    _, out, _ = ran
    n = gpd.read_file(out / "results.gpkg", layer="nodes")
    for f in ("node_id", "degree", "component", "joinable", "nearest_hub", "hub_cost", "nearest_hub_clinic",
              "hub_cost_clinic", "nearest_hub_market", "hub_cost_market", "eccentricity", "closeness"):
        assert f in n.columns, f


def test_hand_checked_figures(ran):
    """The grid is 3 km x 3 km (grid metres) of 30 km/h streets: corner to corner is 6 km of
    street.  On the ground that is 6000 / 0.9996 m, since the grid sits on the UTM central
    meridian where the scale factor is k0 = 0.9996 (the UTM definition, common practice):
    6002.4 m at 30 km/h = 12.0048 minutes."""
    _, out, _ = ran
    s = json.loads((out / "summary.json").read_text())
    assert s["baseline"]["metrics"]["diameter"]["value"] == pytest.approx(6000 / 0.9996 / 30_000 * 60, rel=2e-5)


def test_scenario_figures(ran):
    _, out, _ = ran
    s = json.loads((out / "summary.json").read_text())
    sc = s["scenarios"]
    assert sc["far_link"]["new_or_upgraded_km"] == pytest.approx(2.828, rel=0.01)   # the proposed diagonal
    assert sc["new_clinic"]["new_or_upgraded_km"] == 0
    for name in ("far_link", "new_clinic"):
        assert sc[name]["person_minutes_saved"] >= 0
        assert all(v >= 0 for v in sc[name]["people_newly_within"].values())
    ranks = {r["scenario"]: r for r in s["scenario_ranking"]}
    assert "alone" in ranks["new_clinic"]["ranked_by"]
    with rasterio.open(out / "hub_minutes_change_far_link.tif") as ds:
        d = ds.read(1, masked=True)
    assert float(d.max()) <= 1e-9      # adding a line never makes a cell slower


def test_refuses_a_folder_holding_results_and_keeps_it(ran):
    p, out, _ = ran
    before = (out / "summary.json").read_bytes()
    one_line_error(["run", p, "-o", out], "already holds results", "--overwrite")
    assert (out / "summary.json").read_bytes() == before


def test_failed_run_leaves_old_results(ran, tmp_path):
    p, out, _ = ran
    import shutil

    d = tmp_path / "copy"
    shutil.copytree(p.parent, d, ignore=shutil.ignore_patterns("out"))
    old = tmp_path / "old"
    shutil.copytree(out, old)
    (d / "study.toml").write_text((d / "study.toml").read_text() + '\n[scenarios.shut]\nclose = [{ layer = "roads", fids = [9999] }]\n')
    one_line_error(["run", d / "study.toml", "-o", old, "--overwrite"], "9999")
    assert (old / "summary.json").read_bytes() == (out / "summary.json").read_bytes()


def test_same_study_twice_gives_identical_summary_and_rasters(ran, tmp_path):
    p, out, _ = ran
    out2 = tmp_path / "again"
    code, _, err = cli("run", p, "-o", out2, "--quiet")
    assert code == 0, err
    a = json.loads((out / "summary.json").read_text())
    b = json.loads((out2 / "summary.json").read_text())
    a.pop("timing"); b.pop("timing")
    assert a == b
    for f in ("hub_minutes.tif", "nearest_hub.tif", "hub_minutes_change_far_link.tif"):
        with rasterio.open(out / f) as x, rasterio.open(out2 / f) as y:
            assert np.array_equal(x.read(1), y.read(1), equal_nan=True)
    assert (out / "map.html").read_bytes() == (out2 / "map.html").read_bytes()


def test_scenario_that_changes_nothing_is_reported_and_still_mapped(tmp_path):
    p = write_study(tmp_path, extra='\n[scenarios.idle]\ndescription = "nothing"\n', proposal=False)
    code, out, err = cli("run", p, "-o", tmp_path / "o", "--quiet")
    assert code == 0, err
    s = json.loads((tmp_path / "o" / "summary.json").read_text())
    assert s["scenarios"]["idle"]["changed_anything"] is False
    assert "changes nothing" in out + err
    assert (tmp_path / "o" / "map.html").exists()


def test_upgrade_and_closure_inside_a_polygon(tmp_path):
    """A wet-season slowdown inside a polygon is never faster; a closure by polygon never faster either;
    an upgrade by id never slower (costs are monotone in edge costs: Dijkstra 1959, relaxation)."""
    import geopandas as gpd
    import shapely

    from studykit import CRS, X0, Y0

    extra = '''
[scenarios.wet]
upgrade = [{ layer = "roads", within = "net.gpkg", within_layer = "mud", speed_factor = 0.5 }]

[scenarios.shut]
close = [{ layer = "roads", within = "net.gpkg", within_layer = "mud" }]

[scenarios.fast]
upgrade = [{ layer = "roads", fids = [1, 2], speed_kmh = 60 }]

[scenarios.island]
add_lines = [{ path = "net.gpkg", layer = "island", speed_field = "speed" }]
'''
    p = write_study(tmp_path, extra=extra, proposal=False)
    gpd.GeoDataFrame(geometry=[shapely.box(X0 + 900, Y0 - 100, X0 + 2100, Y0 + 1100)], crs=CRS).to_file(
        tmp_path / "net.gpkg", layer="mud")
    gpd.GeoDataFrame({"speed": [30.0]}, geometry=[shapely.LineString([(X0 + 4000, Y0), (X0 + 4000, Y0 + 900)])],
                     crs=CRS).to_file(tmp_path / "net.gpkg", layer="island")
    code, out, err = cli("run", p, "-o", tmp_path / "o", "--quiet")
    assert code == 0, err
    s = json.loads((tmp_path / "o" / "summary.json").read_text())["scenarios"]
    assert any("inside mud" in c for c in s["wet"]["changes"])
    assert s["fast"]["new_or_upgraded_km"] > 0
    assert "island" in s["island"]["touches_nothing"]
    for name, sign in (("wet", 1), ("shut", 1), ("fast", -1)):
        with rasterio.open(tmp_path / "o" / f"hub_minutes_change_{name}.tif") as ds:
            d = ds.read(1, masked=True).compressed()
        assert (sign * d >= -1e-9).all(), name
        assert np.abs(d).max() > 0, name


def test_compare_writes_only_the_comparison(ran, tmp_path):
    p, _, _ = ran
    out = tmp_path / "cmp"
    code, stdout, err = cli("compare", p, "--scenario", "far_link", "-o", out, "--quiet")
    assert code == 0, err
    files = {f.name for f in out.iterdir()}
    assert {"comparison.gpkg", "hub_minutes_change_far_link.tif", "summary.json", "map.html"} <= files
    assert "hub_minutes.tif" not in files and "results.gpkg" not in files and "hub_minutes_change_new_clinic.tif" not in files
    s = json.loads((out / "summary.json").read_text())
    assert list(s["scenarios"]) == ["far_link"]
    one_line_error(["compare", p, "--scenario", "nope", "-o", tmp_path / "x"], "nope")


def test_closure_change_layer_has_nothing_faster(tmp_path):
    """Regression: edges merged by a closure were matched by midpoint with another stretch of road
    and shown up to a minute faster; closing roads can never make a trip faster."""
    import geopandas as gpd

    p = write_study(tmp_path, extra='\n[scenarios.shut]\nclose = [{ layer = "roads", fids = [1, 2] }]\n'
                                     'upgrade = [{ layer = "roads", fids = [1], speed_kmh = 50 }]\n'
                                     '\n[scenarios.detour]\nclose = [{ layer = "roads", fids = [5, 9] }]\n', proposal=False)
    code, _, err = cli("run", p, "-o", tmp_path / "o", "--quiet")
    assert code == 0, err
    ch = gpd.read_file(tmp_path / "o" / "results.gpkg", layer="shut_edge_change")
    d = ch["hub_cost_change"].dropna().to_numpy()
    assert len(d) > 0 and (d >= -1e-9).all()
    import pyogrio

    if "detour_edge_change" in pyogrio.list_layers(tmp_path / "o" / "results.gpkg")[:, 0]:
        d2 = gpd.read_file(tmp_path / "o" / "results.gpkg", layer="detour_edge_change")["hub_cost_change"].dropna()
        assert (d2.to_numpy() >= -1e-9).all()


@pytest.mark.parametrize("extra, key", [
    ("\n[routing]\nwalk_kmh = 0\n", "routing.walk_kmh"),
    ("\n[network]\nsnap_m = -1\n", "network.snap_m"),
])
def test_out_of_range_numbers_name_the_key(tmp_path, extra, key):
    p = write_study(tmp_path, proposal=False)
    text = p.read_text().replace("[network]\nsnap_m = 1.0\n", "") if key.startswith("network") else p.read_text()
    p.write_text(text + extra)
    with pytest.raises(InputError, match=key.replace(".", r"\.")):
        load_study(p)


def test_a_zero_speed_in_a_line_table_is_refused(tmp_path):
    p = write_study(tmp_path, proposal=False)
    p.write_text(p.read_text().replace('speed_field = "speed"', 'speed_kmh = 0', 1))
    with pytest.raises(InputError, match=r"lines\[0\]\.speed_kmh.*positive"):
        load_study(p)


def test_a_folder_with_other_files_is_never_replaced(tmp_path):
    p = write_study(tmp_path, proposal=False)
    before = sorted(f.name for f in tmp_path.iterdir())
    # the folder holding the study and its inputs: refused as holding inputs
    one_line_error(["run", p, "-o", tmp_path, "--overwrite"], "would hold the input")
    assert sorted(f.name for f in tmp_path.iterdir()) == before
    # a folder of someone else's files: refused, naming them
    other = tmp_path / "other"
    other.mkdir()
    (other / "notes.txt").write_text("mine")
    one_line_error(["run", p, "-o", other, "--overwrite"], "geo-reach did not write (notes.txt)")
    assert [f.name for f in other.iterdir()] == ["notes.txt"]
