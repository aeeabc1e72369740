"""The committed demo region (data_samples/) has the properties data_samples/README.md promises.

The region is invented; these tests only check that the files say what the
README and faults.json say they do, measuring again with shapely, pyproj and
rasterio.  Sources for the facts used:

* Butler, Daly, Doyle, Gillies, Hagen, Schaub (2016), RFC 7946 "The GeoJSON
  Format", section 4: coordinates are WGS84 longitude/latitude, no ``crs`` member.
* IOGP, EPSG Geodetic Parameter Dataset: EPSG:32727 = WGS 84 / UTM zone 27S.
  UTM zone n spans longitudes -180 + 6(n-1) .. -180 + 6n, central meridian
  -183 + 6n (common practice).
* OGC 12-128r18 (2021), GeoPackage Encoding Standard: layers and their CRS.
* Snapping tolerance 1 m: the project's default (data_samples/study.toml ``snap_m``).
"""

from __future__ import annotations

import json
import re
from pathlib import Path

import numpy as np
import pyogrio
import pytest
import rasterio
import shapely
from pyproj import CRS, Transformer
from shapely.geometry import LineString, Point

DATA = Path(__file__).resolve().parents[1] / "data_samples"
GPKG = DATA / "region.gpkg"
SNAP_M = 1.0

LAYERS = {
    "roads": ["road_id", "name", "class", "all_season", "oneway", "level"],
    "rail": ["rail_id", "name"],
    "stations": ["station_id", "name"],
    "cable": ["cable_id", "name"],
    "cable_nodes": ["node_name"],
    "settlements": ["settlement_id", "name", "population"],
    "districts": ["district_id", "name"],
    "proposed_road": ["proposal_id", "name", "class"],
    "water": ["kind"],
}
FAULT_KINDS = {"gap_small", "gap_large", "overshoot", "crossing", "duplicate", "multipart",
               "null_geometry", "bridge", "stub"}


@pytest.fixture(scope="module")
def layers():
    return {n: pyogrio.read_dataframe(GPKG, layer=n) for n in LAYERS}


@pytest.fixture(scope="module")
def roads(layers):
    return layers["roads"].set_index("road_id", drop=False)


@pytest.fixture(scope="module")
def faults():
    return json.loads((DATA / "faults.json").read_text())


@pytest.fixture(scope="module")
def network(roads):
    return shapely.union_all(roads.geometry.dropna().to_numpy())


def _ends(geom):
    parts = getattr(geom, "geoms", [geom])
    return [Point(p.coords[i]) for p in parts for i in (0, -1)]


def _region():
    """The region's extent: the population grid covers it exactly (README)."""
    with rasterio.open(DATA / "population.tif") as ds:
        return shapely.box(*ds.bounds)


def _others(roads, ids):
    return [g for rid, g in zip(roads.road_id, roads.geometry) if rid not in ids and g is not None]


# ----------------------------------------------------------------------------- layers, CRS
def test_layers_fields_and_crs(layers):
    assert set(pyogrio.list_layers(GPKG)[:, 0]) == set(LAYERS)
    for name, fields in LAYERS.items():
        df = layers[name]
        assert set(fields) <= set(df.columns), name
        assert df.crs is not None and df.crs.to_epsg() == 32727, name
        assert len(df) > 0, name


def test_region_lies_in_utm_zone_27_south(layers):
    crs = CRS.from_epsg(32727)
    assert crs.utm_zone == "27S"
    xmin, ymin, xmax, ymax = _region().bounds
    for name, df in layers.items():
        if name == "water":   # the sea runs out past the region on purpose (open water under the grid margin)
            continue
        b = df.total_bounds
        assert xmin <= b[0] and ymin <= b[1] and b[2] <= xmax and b[3] <= ymax
    to_ll = Transformer.from_crs(32727, 4326, always_xy=True)
    lon, lat = to_ll.transform([xmin, xmax, xmin, xmax], [ymin, ymin, ymax, ymax])
    # Zone 27 spans 24 W .. 18 W; the region is about 60 km x 45 km around 21 W, 31 S.
    assert all(-24 < x < -18 for x in lon) and all(-31.5 < y < -30.5 for y in lat)
    assert 55_000 < xmax - xmin < 65_000 and 40_000 < ymax - ymin < 50_000


def test_hubs_are_wgs84_geojson(layers):
    raw = json.loads((DATA / "hubs.geojson").read_text())
    assert "crs" not in raw  # RFC 7946 section 4
    hubs = pyogrio.read_dataframe(DATA / "hubs.geojson")
    assert hubs.crs.to_epsg() == 4326
    lon, lat = hubs.geometry.x.to_numpy(), hubs.geometry.y.to_numpy()
    assert ((-21.5 < lon) & (lon < -20.5) & (-31.3 < lat) & (lat < -30.7)).all()
    assert all(re.fullmatch(r"H\d\d", h) for h in hubs.hub_id) and hubs.hub_id.is_unique
    kinds = hubs.kind.value_counts().to_dict()
    assert 4 <= kinds.get("clinic", 0) <= 6 and kinds.get("market") == 1 and kinds.get("port") == 1
    assert set(kinds) == {"clinic", "market", "port"}
    water = layers["water"]
    sea = water[water.kind == "sea"].geometry.iloc[0]
    utm = hubs.to_crs(32727)
    assert not utm.intersects(shapely.union_all(water.geometry.to_numpy())).any()
    port = utm[hubs.kind == "port"].geometry.iloc[0]
    assert port.distance(sea) < 100.0


# ----------------------------------------------------------------------------- roads
def test_road_attributes(roads):
    assert 200 <= len(roads) <= 400 and roads.road_id.is_unique
    assert set(roads["class"]) == {"trunk", "main", "feeder", "track"}
    assert set(roads.all_season) <= {0, 1}
    for cls in ("trunk", "main"):
        assert roads.loc[roads["class"] == cls, "all_season"].mean() >= 0.9
    assert (roads.loc[roads["class"] == "track", "all_season"] == 0).all()
    assert set(roads.oneway.dropna()) <= {"no", "yes", "-1"}
    counts = roads.oneway.value_counts()
    assert 3 <= counts["yes"] <= 8 and 1 <= counts["-1"] <= 3
    assert roads.oneway.isna().sum() + counts["no"] > 0.9 * len(roads)
    assert (roads.level == 1).sum() == 1 and set(roads.level) == {0, 1}
    nv = shapely.get_num_coordinates(roads.geometry.to_numpy())
    assert (nv > 50).sum() >= 10  # real polylines, not just straight segments
    named = roads.name.notna()
    assert 0 < (~named).sum() < len(roads)


def test_one_way_streets_form_a_loop(roads):
    # 'yes' runs with the digitised direction, '-1' against it; followed that way the
    # one-way streets make one closed circuit.
    ow = roads[roads.oneway.isin(["yes", "-1"])]
    arcs = {}
    for g, flag in zip(ow.geometry, ow.oneway):
        a, b = g.coords[0], g.coords[-1]
        tail, head = (a, b) if flag == "yes" else (b, a)
        assert tail not in arcs, "two one-way streets leave the same node"
        arcs[tail] = head
    node, seen = next(iter(arcs)), 0
    while True:
        node = arcs[node]
        seen += 1
        if node == next(iter(arcs)):
            break
        assert seen <= len(arcs)
    assert seen == len(arcs)


# ----------------------------------------------------------------------------- faults
def test_fault_list_shape(faults, roads):
    assert {f["kind"] for f in faults} == FAULT_KINDS
    assert [f["fault_id"] for f in faults] == list(range(1, len(faults) + 1))
    for f in faults:
        assert set(f["road_ids"]) <= set(roads.road_id), f
    by = {k: [f for f in faults if f["kind"] == k] for k in FAULT_KINDS}
    assert len(by["gap_small"]) >= 3 and len(by["gap_large"]) >= 2
    assert sum(1.5 <= f["size_m"] <= 3.0 for f in by["gap_large"]) >= 2
    assert len(by["duplicate"]) == 2 and len(by["bridge"]) == 1 and len(by["null_geometry"]) == 1
    sizes = sorted(f["size_m"] for f in by["overshoot"])
    assert sizes[-1] == pytest.approx(4.0, abs=0.01) and all(0.2 <= s <= 0.8 for s in sizes[:-1])


def test_gaps_measured_again(faults, roads):
    for f in faults:
        if f["kind"] not in ("gap_small", "gap_large"):
            continue
        first, rest = f["road_ids"][0], f["road_ids"][1:]
        p = Point(f["x"], f["y"])
        assert min(e.distance(p) for e in _ends(roads.geometry[first])) < 1e-6, f
        d = min(roads.geometry[r].distance(p) for r in rest)
        assert d == pytest.approx(f["size_m"], abs=1e-3), f
        # Nothing else is nearer: the gap is what a snapping tool sees there.
        assert min(g.distance(p) for g in _others(roads, {first})) == pytest.approx(d, abs=1e-9)
        node = min(e.distance(p) for r in rest for e in _ends(roads.geometry[r]))
        assert node == pytest.approx(f["node_distance_m"], abs=1e-3)
        assert 0.3 <= d <= node <= 3.0
        if f["kind"] == "gap_small":
            assert node < SNAP_M
        else:
            assert d > SNAP_M


def test_overshoots_measured_again(faults, roads):
    for f in [f for f in faults if f["kind"] == "overshoot"]:
        first, rest = f["road_ids"][0], f["road_ids"][1:]
        g = roads.geometry[first]
        p = Point(f["x"], f["y"])
        assert min(e.distance(p) for e in _ends(g)) < 1e-6
        cross = shapely.get_coordinates(g.intersection(shapely.union_all([roads.geometry[r] for r in rest])))
        assert len(cross) >= 1
        past = np.min(np.hypot(*(cross - [p.x, p.y]).T))
        assert past == pytest.approx(f["size_m"], abs=1e-3)


def test_crossings_and_bridge(faults, roads):
    for f in [f for f in faults if f["kind"] in ("crossing", "bridge")]:
        a, b = (roads.geometry[r] for r in f["road_ids"])
        pts = shapely.get_coordinates(a.intersection(b))
        assert len(pts) == 1 and np.hypot(*(pts[0] - [f["x"], f["y"]])) < 1e-3
        verts = np.vstack([shapely.get_coordinates(a), shapely.get_coordinates(b)])
        nearest = np.min(np.hypot(*(verts - pts[0]).T))
        assert nearest == pytest.approx(f["size_m"], abs=1e-3) and nearest > 1.0  # no vertex there
        levels = [roads.level[r] for r in f["road_ids"]]
        assert levels == ([0, 0] if f["kind"] == "crossing" else [1, 0])


def test_duplicates_multipart_null_stub(faults, roads):
    dup = [f for f in faults if f["kind"] == "duplicate"]
    how = set()
    for f in dup:
        a, b = (roads.geometry[r] for r in f["road_ids"])
        if shapely.equals_exact(a, b, tolerance=0):
            how.add("exact")
        elif shapely.equals_exact(a, b.reverse(), tolerance=0):
            how.add("reversed")
        cols = ["name", "class", "all_season", "oneway", "level"]
        ra, rb = (roads.loc[r, cols] for r in f["road_ids"])
        assert ra.fillna("").tolist() == rb.fillna("").tolist()
        assert a.length == pytest.approx(f["size_m"], abs=1e-3)
    assert how == {"exact", "reversed"}
    (mp,) = [f for f in faults if f["kind"] == "multipart"]
    g = roads.geometry[mp["road_ids"][0]]
    assert g.geom_type == "MultiLineString" and len(g.geoms) == 2
    assert (roads.geometry.dropna().geom_type == "MultiLineString").sum() == 1
    (nul,) = [f for f in faults if f["kind"] == "null_geometry"]
    assert roads.geometry[nul["road_ids"][0]] is None and roads.geometry.isna().sum() == 1
    (stub,) = [f for f in faults if f["kind"] == "stub"]
    s = roads.geometry[stub["road_ids"][0]]
    assert 3.0 <= s.length <= 8.0 and s.length == pytest.approx(stub["size_m"], abs=1e-3)
    start, end = Point(s.coords[0]), Point(s.coords[-1])
    assert end.distance(Point(stub["x"], stub["y"])) < 1e-6
    assert len(stub["road_ids"]) >= 3  # it leaves a junction of at least two other roads
    for r in stub["road_ids"][1:]:
        assert min(e.distance(start) for e in _ends(roads.geometry[r])) < 1e-9
    assert min(g.distance(end) for g in _others(roads, {stub["road_ids"][0]})) > 1.0


def test_no_unrecorded_faults(faults, roads):
    # Every other meeting of two roads is at line ends they share, and every other dead end
    # is well clear of the network, so faults.json is the complete list.
    paired = {(a, b) for f in faults if f["kind"] in ("overshoot", "crossing", "bridge", "duplicate")
              for a in f["road_ids"] for b in f["road_ids"]}
    live = roads[roads.geometry.notna()]
    geoms, ids = live.geometry.to_numpy(), live.road_id.to_numpy()
    ends = [{tuple(e.coords[0]) for e in _ends(g)} for g in geoms]
    tree = shapely.STRtree(geoms)
    left, right = tree.query(geoms, predicate="intersects")
    for i, j in zip(left, right):
        if i >= j or (ids[i], ids[j]) in paired:
            continue
        shared = ends[i] & ends[j]
        for c in map(tuple, shapely.get_coordinates(geoms[i].intersection(geoms[j]))):
            assert c in shared, (ids[i], ids[j], c)
    fault_pts = np.array([(f["x"], f["y"]) for f in faults if f["x"] is not None])
    count = {}
    for e in ends:
        for c in e:
            count[c] = count.get(c, 0) + 1
    for i, g in enumerate(geoms):
        for c in ends[i]:
            if count[c] > 1 or np.min(np.hypot(*(fault_pts - c).T)) < 1e-3:
                continue
            near = [geoms[j].distance(Point(c)) for j in tree.query(Point(c).buffer(10.0)) if j != i]
            assert not near or min(near) > 10.0, (ids[i], c)


# ----------------------------------------------------------------------------- other layers
def test_settlements_and_reach(layers, network):
    s = layers["settlements"]
    assert 40 <= len(s) <= 80 and s.settlement_id.is_unique and s.name.is_unique
    towns, villages = s[s.population >= 1000], s[s.population < 1000]
    assert 4 <= len(towns) <= 8 and (towns.population < 20000).all()
    assert villages.population.between(50, 800).all()
    d = villages.distance(network)
    assert (d < 2000).mean() >= 0.8          # most villages lie near a road
    assert (d > 3000).sum() >= 3             # several are far from any road
    water = shapely.union_all(layers["water"].geometry.to_numpy())
    assert not s.intersects(water).any()


def test_rail_stations_and_cable(layers):
    rail = layers["rail"].geometry.iloc[0]
    st = layers["stations"]
    assert 4 <= len(st) <= 5 and (st.distance(rail) <= 20.0).all()
    cable = shapely.union_all(layers["cable"].geometry.to_numpy())
    nodes = layers["cable_nodes"]
    assert len(nodes) >= 3 and (nodes.distance(cable) < 1e-6).all()


def test_proposed_road_touches_network_at_its_ends(layers, network):
    line = layers["proposed_road"].geometry.iloc[0]
    d = [network.distance(Point(line.coords[i])) for i in (0, -1)]
    assert max(d) <= 0.5
    inner = LineString(line.coords[1:-1])
    assert inner.distance(network) > 10.0


def test_districts_tile_the_land(layers):
    dist, water = layers["districts"], layers["water"]
    assert 4 <= len(dist) <= 6 and all(re.fullmatch(r"D\d", x) for x in dist.district_id)
    assert set(water.kind) == {"sea", "lake"}
    sea = water[water.kind == "sea"].geometry.iloc[0]
    region = _region()
    land = region.difference(sea)   # inside the region
    union = shapely.union_all(dist.geometry.to_numpy())
    assert union.symmetric_difference(land).area < 1.0
    g = dist.geometry.to_numpy()
    overlap = sum(g[i].intersection(g[j]).area for i in range(len(g)) for j in range(i + 1, len(g)))
    assert overlap < 1.0
    # The sea is on the east edge, and runs 10 km out past the region (open water under a grid margin).
    assert sea.bounds[2] == pytest.approx(region.bounds[2] + 10_000) and sea.bounds[0] > region.centroid.x


# ----------------------------------------------------------------------------- rasters
def test_rasters(layers):
    with rasterio.open(DATA / "population.tif") as pop, rasterio.open(DATA / "terrain.tif") as ter:
        for ds, cell in ((pop, 200.0), (ter, 100.0)):
            assert ds.crs.to_epsg() == 32727 and ds.nodata is not None
            assert ds.res == (cell, cell) and ds.dtypes[0] == "float32"
            assert ds.profile["compress"] == "deflate" and ds.profile["tiled"]
        # Different grid origins: the terrain grid is not aligned with the population grid.
        assert (ter.transform.c - pop.transform.c) % 100.0 != 0
        assert (ter.transform.f - pop.transform.f) % 100.0 != 0
        p = pop.read(1, masked=True)
        total = float(p.sum(dtype=np.float64))
        expected = layers["settlements"].population.sum() + float(pop.tags()["rural_background_total"])
        assert total == pytest.approx(expected, rel=1e-4)
        assert p.min() >= 0
        water = layers["water"]
        sea = water[water.kind == "sea"].geometry.iloc[0]
        lake = water[water.kind == "lake"].geometry.iloc[0]
        sea_pt = sea.representative_point()
        z_sea, z_lake = (v[0] for v in ter.sample([(sea_pt.x, sea_pt.y), (lake.centroid.x, lake.centroid.y)]))
        assert z_sea == 0.0 and z_lake > 0
        (p_sea,) = (v[0] for v in pop.sample([(sea_pt.x, sea_pt.y)]))
        assert p_sea == pop.nodata
        s = layers["settlements"]
        z = np.array([v[0] for v in ter.sample(list(zip(s.geometry.x, s.geometry.y)))])
        assert (z > 0).all()


@pytest.mark.slow
def test_generator_reproduces_the_committed_files(tmp_path):
    import subprocess
    import sys

    subprocess.run([sys.executable, str(DATA / "make_region.py"), "--out", str(tmp_path)], check=True,
                   capture_output=True)
    assert json.loads((tmp_path / "faults.json").read_text()) == json.loads((DATA / "faults.json").read_text())
    for name in LAYERS:
        a = pyogrio.read_dataframe(GPKG, layer=name)
        b = pyogrio.read_dataframe(tmp_path / "region.gpkg", layer=name)
        assert a.drop(columns="geometry").equals(b.drop(columns="geometry")), name
        same = [(x is None and y is None) or (x is not None and y is not None and shapely.equals_exact(x, y, 0))
                for x, y in zip(a.geometry, b.geometry)]
        assert all(same), name
    for tif in ("population.tif", "terrain.tif"):
        with rasterio.open(DATA / tif) as x, rasterio.open(tmp_path / tif) as y:
            assert x.transform == y.transform and np.array_equal(x.read(1), y.read(1))
    hubs_a = pyogrio.read_dataframe(DATA / "hubs.geojson")
    hubs_b = pyogrio.read_dataframe(tmp_path / "hubs.geojson")
    assert hubs_a.equals(hubs_b)
