"""Nobody is left out silently: the grid grows to cover every settlement (issue: "nothing is left out").

Invented case: a 2 km road with a clinic, and a village 5.7 km from any road - beyond the default
2 km grid margin.  The people total must equal the settlements' sum, and the far village must get
minutes (walking) rather than vanish; with an explicit extent that cuts it off, it is named.
Walking time is checked against the straight-line walk at 5 km/h (common practice) as a lower bound.
"""

from __future__ import annotations

import json
import subprocess
import sys
import textwrap

import geopandas as gpd
import pyogrio
import shapely

CRS = "EPSG:32727"
X0, Y0 = 500_000.0, 6_570_000.0


def write(folder, extent=""):
    gpd.GeoDataFrame({"speed": [40.0]}, geometry=[shapely.LineString([(X0, Y0), (X0 + 2000, Y0)])],
                     crs=CRS).to_file(folder / "w.gpkg", layer="roads")
    gpd.GeoDataFrame({"hub_id": [1], "kind": ["clinic"]}, geometry=[shapely.Point(X0 + 10, Y0 + 10)],
                     crs=CRS).to_file(folder / "w.gpkg", layer="hubs")
    gpd.GeoDataFrame({"sid": [1, 2], "population": [150, 50]},
                     geometry=[shapely.Point(X0 + 1000, Y0 + 5700), shapely.Point(X0 + 1500, Y0 + 100)],
                     crs=CRS).to_file(folder / "w.gpkg", layer="villages")
    (folder / "s.toml").write_text(textwrap.dedent(f"""
        [[lines]]
        path = "w.gpkg"
        layer = "roads"
        speed_field = "speed"
        [hubs]
        path = "w.gpkg"
        layer = "hubs"
        id_field = "hub_id"
        kind_field = "kind"
        [surface]
        cell_m = 100
        bands = [30, 60, 120]
        {extent}
        [settlements]
        path = "w.gpkg"
        layer = "villages"
        id_field = "sid"
        population_field = "population"
        [outputs]
        map = false
        profile_png = false
    """))
    return folder / "s.toml"


def run(study, out):
    p = subprocess.run([sys.executable, "-m", "geo_reach", "run", str(study), "-o", str(out), "--quiet"],
                       capture_output=True, text=True)
    assert p.returncode == 0, p.stderr
    return json.loads((out / "summary.json").read_text()), p


def test_far_village_is_inside_the_grid_and_counted(tmp_path):
    s, _ = run(write(tmp_path), tmp_path / "out")
    assert s["baseline"]["population_total"] == 200
    lay = pyogrio.read_dataframe(tmp_path / "out" / "results.gpkg", layer="settlements")
    far = lay[lay.settlement_id == 1].iloc[0]
    assert far.hub_minutes >= 5700 / (5000 / 60) - 1e-6   # at least the straight walk at 5 km/h


def test_an_extent_that_cuts_a_village_off_names_it(tmp_path):
    ext = f"extent = [{X0 - 500}, {Y0 - 500}, {X0 + 2500}, {Y0 + 1000}]"
    s, p = run(write(tmp_path, ext), tmp_path / "out")
    notes = " ".join(s["baseline"]["notes"])
    assert "1 settlements (150 people) lie outside the grid" in notes and ": 1;" in notes
