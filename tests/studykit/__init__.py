"""A tiny study written into a folder for pipeline tests (invented, hand-checkable).

A 3 x 3 km street grid (roads every 500 m, 30 km/h), two hubs of two kinds,
a population raster of 100 m cells, four settlements, two zones and a
proposed road reaching a far corner.
"""

from __future__ import annotations

import textwrap
from pathlib import Path

import geopandas as gpd
import numpy as np
import rasterio
import shapely
from rasterio.transform import from_origin

CRS = "EPSG:32727"
X0, Y0 = 500_000.0, 6_570_000.0


def write_study(folder: Path, extra: str = "", proposal: bool = True) -> Path:
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    lines = []
    for k in range(0, 7):
        v = k * 500.0
        lines.append(shapely.LineString([(X0 + v, Y0), (X0 + v, Y0 + 3000)]))
        lines.append(shapely.LineString([(X0, Y0 + v), (X0 + 3000, Y0 + v)]))
    roads = gpd.GeoDataFrame({"speed": [30.0] * len(lines), "allseason": [1] * len(lines)}, geometry=lines, crs=CRS)
    roads.to_file(folder / "net.gpkg", layer="roads")
    far = gpd.GeoDataFrame({"speed": [30.0]}, geometry=[shapely.LineString([(X0 + 3000, Y0 + 3000), (X0 + 5000, Y0 + 5000)])],
                           crs=CRS)
    far.to_file(folder / "net.gpkg", layer="proposed")
    hubs = gpd.GeoDataFrame({"hub_id": ["C1", "M1"], "kind": ["clinic", "market"], "name": ["North clinic", "<b>Market</b>"]},
                            geometry=[shapely.Point(X0 + 10, Y0 + 10), shapely.Point(X0 + 1500, Y0 + 1510)], crs=CRS)
    hubs.to_crs(4326).to_file(folder / "hubs.geojson")
    st = gpd.GeoDataFrame({"sid": [1, 2, 3, 4], "population": [100, 200, 300, 400]},
                          geometry=[shapely.Point(X0 + 250, Y0 + 250), shapely.Point(X0 + 2750, Y0 + 2750),
                                    shapely.Point(X0 + 4500, Y0 + 4500), shapely.Point(X0 + 1000, Y0 + 2000)], crs=CRS)
    st.to_file(folder / "net.gpkg", layer="settlements")
    zones = gpd.GeoDataFrame({"zid": ["west", "east"]},
                             geometry=[shapely.box(X0 - 3000, Y0 - 3000, X0 + 1500, Y0 + 8000),
                                       shapely.box(X0 + 1500, Y0 - 3000, X0 + 8000, Y0 + 8000)], crs=CRS)
    zones.to_file(folder / "net.gpkg", layer="zones")
    pop = np.ones((60, 60), dtype="float32")
    with rasterio.open(folder / "pop.tif", "w", driver="GTiff", width=60, height=60, count=1, dtype="float32",
                       crs=CRS, transform=from_origin(X0 - 500, Y0 + 5500, 100, 100), nodata=-1) as ds:
        ds.write(pop, 1)
    scen = textwrap.dedent("""
        [scenarios.far_link]
        description = "a road to the far corner"
        add_lines = [{ path = "net.gpkg", layer = "proposed", speed_field = "speed" }]

        [scenarios.new_clinic]
        add_hubs = { path = "hubs_new.geojson", id_field = "hub_id", kind_field = "kind" }
    """) if proposal else ""
    if proposal:
        gpd.GeoDataFrame({"hub_id": ["C2"], "kind": ["clinic"]}, geometry=[shapely.Point(X0 + 3000, Y0 + 3000)],
                         crs=CRS).to_file(folder / "hubs_new.geojson")
    text = textwrap.dedent("""
        title = "Grid town"

        [network]
        snap_m = 1.0

        [[lines]]
        path = "net.gpkg"
        layer = "roads"
        mode = "road"
        speed_field = "speed"
        all_season_field = "allseason"

        [hubs]
        path = "hubs.geojson"
        id_field = "hub_id"
        kind_field = "kind"

        [surface]
        cell_m = 100
        margin_m = 1000
        population = "pop.tif"
        bands = [15, 30, 60]

        [settlements]
        path = "net.gpkg"
        layer = "settlements"
        population_field = "population"

        [zones]
        path = "net.gpkg"
        layer = "zones"
        id_field = "zid"

        [metrics]
        profile_sources = 5
    """) + scen + extra
    p = folder / "study.toml"
    p.write_text(text)
    return p
