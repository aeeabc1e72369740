"""A scenario that cuts people off says so first, everywhere (issue: "scenarios say what they take away").

Hand-built case (invented): a west town with a clinic and a market, an east town with neither, one
bridge between them over a river that nobody can walk across (a barrier polygon).  Closing the
bridge must cut off exactly the people east of the river from every hub and from each kind; the
largest part of the network shrinks, so no diameter change may be reported; the ranking puts the
closure after a scenario that cuts nobody off; the console headline leads with the loss.

Expected counts come from the population raster itself (one person per 100 m cell, none in the
river): the cells whose centres lie east of the river.  Monotonicity (closing a link cannot make a trip cheaper,
Cormen et al. 2009, ch. 24, from memory) gives the sign checks.
"""

from __future__ import annotations

import json
import subprocess
import sys
import textwrap

import geopandas as gpd
import numpy as np
import pyogrio
import rasterio
import shapely
from rasterio.transform import from_origin

CRS = "EPSG:32727"
X0, Y0 = 500_000.0, 6_570_000.0
RIVER = (X0 + 2000, X0 + 2400)   # west and east banks


def write(folder):
    roads = []
    for k in range(5):   # west town: a 2 km street grid; east town: the same, 2.4 km further east
        v = k * 500.0
        roads += [shapely.LineString([(X0 + v, Y0), (X0 + v, Y0 + 2000)]),
                  shapely.LineString([(X0, Y0 + v), (X0 + 2000, Y0 + v)]),
                  shapely.LineString([(X0 + 2400 + v, Y0), (X0 + 2400 + v, Y0 + 2000)]),
                  shapely.LineString([(X0 + 2400, Y0 + v), (X0 + 4400, Y0 + v)])]
    roads.append(shapely.LineString([(X0 + 2000, Y0 + 1000), (X0 + 2400, Y0 + 1000)]))   # the bridge
    gdf = gpd.GeoDataFrame({"speed": [30.0] * len(roads), "level": [0] * (len(roads) - 1) + [1]},
                           geometry=roads, crs=CRS)
    gdf.to_file(folder / "towns.gpkg", layer="roads")
    bridge_fid = len(roads)   # GeoPackage feature ids start at 1
    river = gpd.GeoDataFrame({"name": ["river"]}, geometry=[shapely.box(RIVER[0], Y0 - 20_000, RIVER[1], Y0 + 20_000)],
                             crs=CRS)
    river.to_file(folder / "towns.gpkg", layer="water")
    extra = gpd.GeoDataFrame({"speed": [30.0]}, geometry=[shapely.LineString([(X0, Y0), (X0 - 1000, Y0 - 1000)])],
                             crs=CRS)
    extra.to_file(folder / "towns.gpkg", layer="spur")
    hubs = gpd.GeoDataFrame({"hub_id": ["C", "M"], "kind": ["clinic", "market"]},
                            geometry=[shapely.Point(X0 + 510, Y0 + 500), shapely.Point(X0 + 1000, Y0 + 1510)], crs=CRS)
    hubs.to_file(folder / "towns.gpkg", layer="hubs")
    pop = np.ones((20, 44), dtype="float32")
    xs = X0 + (np.arange(44) + 0.5) * 100
    pop[:, (xs > RIVER[0]) & (xs < RIVER[1])] = 0.0   # nobody lives in the river
    with rasterio.open(folder / "pop.tif", "w", driver="GTiff", width=44, height=20, count=1, dtype="float32",
                       crs=CRS, transform=from_origin(X0, Y0 + 2000, 100, 100), nodata=-1) as ds:
        ds.write(pop, 1)
    text = textwrap.dedent(f"""
        title = "Two towns and a bridge"

        [[lines]]
        path = "towns.gpkg"
        layer = "roads"
        speed_field = "speed"
        level_field = "level"

        [hubs]
        path = "towns.gpkg"
        layer = "hubs"
        id_field = "hub_id"
        kind_field = "kind"

        [surface]
        cell_m = 100
        margin_m = 500
        population = "pop.tif"
        barriers = "towns.gpkg"
        barriers_layer = "water"
        bands = [15, 30, 60]

        [outputs]
        map = false
        profile_png = false

        [scenarios.bridge_out]
        description = "the bridge washes out"
        close = [{{ layer = "roads", fids = [{bridge_fid}] }}]

        [scenarios.spur]
        description = "a short spur road"
        add_lines = [{{ path = "towns.gpkg", layer = "spur", speed_field = "speed" }}]
    """)
    (folder / "study.toml").write_text(text)
    return folder / "study.toml"


def east_people():
    xs = X0 + (np.arange(44) + 0.5) * 100
    return float((xs > RIVER[1]).sum() * 20)


def test_closing_the_only_bridge_reports_the_people_cut_off(tmp_path):
    study = write(tmp_path)
    out = tmp_path / "out"
    p = subprocess.run([sys.executable, "-m", "geo_reach", "run", str(study), "-o", str(out), "--quiet"],
                       capture_output=True, text=True)
    assert p.returncode == 0, p.stderr
    s = json.loads((out / "summary.json").read_text())
    cut = s["scenarios"]["bridge_out"]["people_cut_off"]
    want = east_people()
    assert cut["total"] == want
    assert cut["by_kind"] == {"clinic": want, "market": want}
    # the largest part lost places: no diameter or mean path change, the split is reported
    b = s["scenarios"]["bridge_out"]
    assert b["diameter_change"] is None and b["mean_path_change"] is None
    assert b["largest_component"]["same_places"] is False
    assert b["largest_component"]["nodes_after"] < b["largest_component"]["nodes_before"]
    # the spur cuts nobody off and keeps every place: its changes are compared
    sp = s["scenarios"]["spur"]
    assert sp["people_cut_off"] == {"total": 0.0, "by_kind": {"clinic": 0.0, "market": 0.0}}
    assert sp["largest_component"]["same_places"] is True and sp["diameter_change"] is not None
    # ranking: the closure after the scenario that cuts nobody off, and says why
    ranking = {r["scenario"]: r for r in s["scenario_ranking"]}
    assert ranking["spur"]["rank"] == 1 and ranking["bridge_out"]["rank"] == 2
    assert "lose their hub" in ranking["bridge_out"]["ranked_by"]
    # the console headline leads with the loss
    line = next(ln for ln in p.stdout.splitlines() if "bridge_out" in ln and ln.startswith("scenario"))
    assert line.split(": ", 1)[1].startswith(f"CUTS OFF {want:,.0f} people")
    # per settlement-like cell: the change layer of the closure never shows anyone faster
    with rasterio.open(out / "hub_minutes_change_bridge_out.tif") as ds:
        d = ds.read(1)
    assert np.nanmin(d) >= -1e-4


def test_scenario_layers_give_before_after_and_change_per_kind(tmp_path):
    study = write(tmp_path)
    st = gpd.GeoDataFrame({"sid": [1, 2], "population": [10, 20]},
                          geometry=[shapely.Point(X0 + 1200, Y0 + 800), shapely.Point(X0 + 3600, Y0 + 800)], crs=CRS)
    st.to_file(tmp_path / "towns.gpkg", layer="villages")
    text = study.read_text().replace("[outputs]", textwrap.dedent("""
        [settlements]
        path = "towns.gpkg"
        layer = "villages"
        id_field = "sid"
        population_field = "population"

        [outputs]"""))
    study.write_text(text)
    out = tmp_path / "out"
    p = subprocess.run([sys.executable, "-m", "geo_reach", "run", str(study), "-o", str(out), "--quiet"],
                       capture_output=True, text=True)
    assert p.returncode == 0, p.stderr
    lay = pyogrio.read_dataframe(out / "results.gpkg", layer="bridge_out_settlements")
    for c in ("hub_minutes", "hub_minutes_clinic", "hub_minutes_market"):
        assert {f"{c}_before", f"{c}_after", f"{c}_change"} <= set(lay.columns)
    west, east = lay.iloc[0], lay.iloc[1]
    assert west["hub_minutes_change"] == 0.0
    assert np.isfinite(east["hub_minutes_before"]) and np.isnan(east["hub_minutes_after"])
    assert np.isfinite(east["hub_minutes_clinic_before"]) and np.isnan(east["hub_minutes_clinic_after"])
