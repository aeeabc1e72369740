"""Every vector format the messages and README name, in and out: GeoPackage, Shapefile, GeoJSON, FlatGeobuf, GeoParquet.

In: a real street layer (libpysal's GeoDaNet ``streets.shp``, shipped with the
libpysal package) is written in each format by an independent writer
(geopandas: GDAL through pyogrio, pyarrow for GeoParquet) and read through
geo-reach's reader; geometries, attributes and CRS must come back unchanged.

Out: a network built by geo-reach is written in each format and read back by
the independent readers (pyogrio/GDAL, geopandas/pyarrow) and by geo-reach
itself; every layer must equal the GeoPackage output.  GeoParquet follows the
GeoParquet 1.0.0 specification (OGC 2023): a ``geo`` key in the file's
metadata naming the geometry column, WKB encoding and a PROJJSON CRS.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyarrow.parquet as pq
import pyogrio
import pytest
import shapely

from geo_reach.errors import InputError, OptionError
from geo_reach.export import gpkg as G
from geo_reach.ingest import layers as L

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "data_samples" / "region.gpkg"

#: suffix -> how an independent writer writes one layer in that format
FORMATS = {
    ".gpkg": lambda f, p: f.to_file(p, driver="GPKG", layer="streets"),
    ".shp": lambda f, p: f.to_file(p, driver="ESRI Shapefile"),
    ".geojson": lambda f, p: f.to_file(p, driver="GeoJSON"),
    ".fgb": lambda f, p: f.to_file(p, driver="FlatGeobuf"),
    ".parquet": lambda f, p: f.to_parquet(p),
}


def test_the_formats_named_in_messages_are_the_ones_tested():
    named = {"GeoPackage": ".gpkg", "Shapefile": ".shp", "GeoJSON": ".geojson", "FlatGeobuf": ".fgb",
             "GeoParquet": ".parquet"}
    assert L.FORMATS == "a GeoPackage, Shapefile, GeoJSON, FlatGeobuf or GeoParquet file"
    assert set(named.values()) == set(FORMATS)
    for word, suffix in named.items():
        assert word in L.FORMATS and word in G.NETWORK_FORMATS and suffix in G.NETWORK_FORMATS
    readme = (ROOT / "README.md").read_text()
    for word in named:
        assert word in readme, word


@pytest.fixture(scope="module")
def streets():
    import libpysal

    path = os.path.join(os.path.dirname(libpysal.examples.__file__), "geodanet", "streets.shp")
    f = gpd.read_file(path)
    f = f[[c for c in f.columns if c != "geometry"][:3] + ["geometry"]]
    return f


@pytest.mark.parametrize("suffix", list(FORMATS))
def test_read_each_format(tmp_path, streets, suffix):
    path = tmp_path / f"streets{suffix}"
    FORMATS[suffix](streets, path)
    got = L.read_layer(path, "lines")
    assert len(got) == len(streets)
    if suffix == ".fgb":     # FlatGeobuf's spatial index stores features in its own (Hilbert) order
        got = got.set_index("ID", drop=False).loc[streets["ID"]].reset_index(drop=True)
    assert got.crs.equals(streets.crs) or got.crs.to_epsg() == streets.crs.to_epsg()
    assert shapely.equals_exact(got.geometry.values, streets.geometry.values, tolerance=1e-6).all()
    for c in streets.columns.drop("geometry"):
        a, b = got[c].to_numpy(), streets[c].to_numpy()
        if np.issubdtype(np.asarray(b).dtype, np.number):
            assert np.allclose(a.astype(float), b.astype(float), equal_nan=True), c
        else:
            assert list(map(str, a)) == list(map(str, b)), c


def test_geoparquet_of_the_demo_roads_builds_like_the_geopackage(tmp_path):
    """The case reported: the demo roads as GeoParquet were refused with a GDAL driver error."""
    roads = gpd.read_file(DEMO, layer="roads")
    roads.to_parquet(tmp_path / "roads.parquet")
    outs = {}
    for name, src in (("pq", tmp_path / "roads.parquet"), ("gpkg", f"{DEMO}:roads")):
        out = tmp_path / f"{name}.gpkg"
        p = subprocess.run([sys.executable, "-m", "geo_reach", "build", str(src), "-o", str(out), "--class-field",
                            "class"], capture_output=True, text=True)
        assert p.returncode == 0, p.stderr
        outs[name] = pyogrio.read_dataframe(out, layer="edges")
    a, b = outs["pq"], outs["gpkg"]
    assert len(a) == len(b)
    assert np.allclose(a["length_m"], b["length_m"]) and np.allclose(a["minutes"], b["minutes"], equal_nan=True)


def test_plain_parquet_and_junk_are_refused_in_one_line(tmp_path):
    pd.DataFrame({"a": [1]}).to_parquet(tmp_path / "plain.parquet")
    with pytest.raises(InputError, match=r"plain\.parquet.*without GeoParquet metadata") as e:
        L.read_layer(tmp_path / "plain.parquet")
    assert "\n" not in str(e.value)
    (tmp_path / "junk.parquet").write_text("not parquet")
    with pytest.raises(InputError, match=r"junk\.parquet.*not a Parquet file"):
        L.read_layer(tmp_path / "junk.parquet")
    (tmp_path / "junk.xyz").write_text("not vector data")
    with pytest.raises(InputError) as e:
        L.read_layer(tmp_path / "junk.xyz")
    assert str(e.value).endswith("give " + L.FORMATS) and "libduckdb" not in str(e.value)
    p = subprocess.run([sys.executable, "-m", "geo_reach", "build", str(tmp_path / "plain.parquet"), "-o",
                        str(tmp_path / "n.gpkg")], capture_output=True, text=True)
    assert p.returncode == 2 and len(p.stderr.strip().splitlines()) == 1 and "plain.parquet" in p.stderr


# ------------------------------------------------------------------ out
@pytest.fixture(scope="module")
def built(tmp_path_factory):
    """The demo roads built once per output format by the CLI."""
    d = tmp_path_factory.mktemp("formats_out")
    for suffix in FORMATS:
        p = subprocess.run([sys.executable, "-m", "geo_reach", "build", f"{DEMO}:roads", "-o", str(d / f"net{suffix}"),
                            "--class-field", "class", "--oneway-field", "oneway", "--level-field", "level"],
                           capture_output=True, text=True)
        assert p.returncode == 0, (suffix, p.stderr)
    return d


def _independent(path: Path, layer: str) -> gpd.GeoDataFrame:
    if path.suffix == ".gpkg":
        return pyogrio.read_dataframe(path, layer=layer)
    f = G.layer_file(path, layer)
    return gpd.read_parquet(f) if f.suffix == ".parquet" else pyogrio.read_dataframe(f)


@pytest.mark.parametrize("suffix", [s for s in FORMATS if s != ".gpkg"])
def test_write_each_format_equals_the_geopackage(built, suffix):
    ref = built / "net.gpkg"
    out = built / f"net{suffix}"
    assert sorted(p.name for p in built.glob(f"net.*{suffix}")) == \
        [f"net.{layer}{suffix}" for layer in ("edges", "network_issues", "nodes")]
    for layer in ("edges", "nodes", "network_issues"):
        a, b = _independent(out, layer), _independent(ref, layer)
        assert len(a) == len(b), layer
        assert a.crs.to_epsg() == b.crs.to_epsg() == 32727
        # same features in the same order (edge and node ids are row numbers)
        assert shapely.equals_exact(a.geometry.values, b.geometry.values, tolerance=1e-6).all(), layer
        assert list(a.columns) == list(b.columns), layer
        for c in b.columns.drop("geometry"):
            x, y = a[c], b[c]
            if pd.api.types.is_numeric_dtype(y):
                assert np.allclose(x.astype(float), y.astype(float), equal_nan=True), (layer, c)
            else:
                assert [None if pd.isna(v) or v == "" else str(v) for v in x] == \
                       [None if pd.isna(v) or v == "" else str(v) for v in y], (layer, c)
    if suffix == ".parquet":
        geo = json.loads(pq.read_schema(G.layer_file(out, "edges")).metadata[b"geo"])
        assert geo["primary_column"] == "geometry"
        assert geo["columns"]["geometry"]["encoding"] == "WKB"
        assert geo["columns"]["geometry"]["crs"]["id"]["code"] == 32727          # PROJJSON


@pytest.mark.parametrize("suffix", list(FORMATS))
def test_a_written_network_is_read_back_by_geo_reach(built, suffix):
    from geo_reach.network.io import read_network

    ref = read_network(built / "net.gpkg", "minutes")
    net = read_network(built / f"net{suffix}", "minutes")
    assert net.n_nodes == ref.n_nodes and net.n_edges == ref.n_edges
    assert np.allclose(net.node_x, ref.node_x) and np.allclose(net.edge_minutes, ref.edge_minutes, equal_nan=True)
    assert (net.edge_from == ref.edge_from).all() and (net.edge_oneway == ref.edge_oneway).all()
    assert L.list_layers(built / f"net{suffix}") == ["edges", "network_issues", "nodes"] or suffix == ".gpkg"


def test_network_files_written_all_or_none(tmp_path, built):
    """An existing file is refused before work; a layer that cannot be written leaves nothing behind."""
    existing = tmp_path / "net.nodes.fgb"
    existing.write_text("keep")
    p = subprocess.run([sys.executable, "-m", "geo_reach", "build", f"{DEMO}:roads", "-o", str(tmp_path / "net.fgb")],
                       capture_output=True, text=True)
    assert p.returncode == 2 and "net.nodes.fgb" in p.stderr and len(p.stderr.strip().splitlines()) == 1
    assert existing.read_text() == "keep" and sorted(x.name for x in tmp_path.iterdir()) == ["net.nodes.fgb"]

    from types import SimpleNamespace

    from geo_reach.network.io import read_network

    net = read_network(built / "net.gpkg")
    edges = net.edges_frame().assign(a_very_long_field_name=1)      # too long a name for a Shapefile
    r = SimpleNamespace(network=SimpleNamespace(edges_frame=lambda: edges, nodes_frame=net.nodes_frame),
                        issues=pyogrio.read_dataframe(built / "net.gpkg", layer="network_issues"))
    with pytest.raises(OptionError, match=r"a_very_long_field_name.*Shapefile"):
        G.write_network(tmp_path / "x.shp", r)
    assert sorted(x.name for x in tmp_path.iterdir()) == ["net.nodes.fgb"]
    with pytest.raises(OptionError, match="cannot write a network as '.csv'"):
        G.network_files(tmp_path / "x.csv")
