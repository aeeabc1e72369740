"""GeoPackage output checked against the OGC GeoPackage Encoding Standard with sqlite3 directly.

Source: OGC 12-128r18 (2021), "OGC GeoPackage Encoding Standard", version
1.3.1.  The requirement numbers quoted below are from memory of the 1.2/1.3
text (the numbering has stayed stable across those versions as far as I
recall); each check also says in words what the requirement asks, so it can
be verified against the standard.
"""

from __future__ import annotations

import re
import sqlite3
import struct
import sys
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio
import pytest
import shapely
from pyproj import CRS

sys.path.insert(0, str(Path(__file__).parent))
from helpers.export_layers import CRS as LAYER_CRS, sample_layers, summary_table  # noqa: E402

from geo_reach.errors import CRSError, InputError, OptionError, OutputError, OutputExistsError  # noqa: E402
from geo_reach.export.gpkg import write_layers  # noqa: E402


@pytest.fixture(scope="module")
def layers():
    lay = sample_layers()
    lay["summary"] = summary_table()
    return lay


@pytest.fixture(scope="module")
def gpkg(layers, tmp_path_factory):
    path = tmp_path_factory.mktemp("gpkg") / "results.gpkg"
    write_layers(path, layers, descriptions={"edges": "network links with minutes to the nearest hub"})
    return path


@pytest.fixture()
def con(gpkg):
    c = sqlite3.connect(f"file:{gpkg}?mode=ro", uri=True)
    yield c
    c.close()


FEATURE_TABLES = ("edges", "hubs", "reach_bands", "weak_regions", "diameter", "issues")


# ---------------------------------------------------------------- file level
def test_req1_sqlite3_file_header(gpkg):
    """Req 1: a SQLite version 3 database; the first 16 bytes are "SQLite format 3" and a NUL."""
    assert gpkg.read_bytes()[:16] == b"SQLite format 3\x00"


def test_req2_application_id_and_user_version(gpkg, con):
    """Req 2: application_id is 0x47504B47 ("GPKG"), user_version names the version (10200 = 1.2, ...)."""
    head = gpkg.read_bytes()[:100]
    # SQLite file format: user_version at byte offset 60, application_id at 68, both big-endian.
    assert head[68:72] == b"GPKG"
    user_version = struct.unpack(">i", head[60:64])[0]
    assert con.execute("PRAGMA application_id").fetchone()[0] == 0x47504B47
    assert con.execute("PRAGMA user_version").fetchone()[0] == user_version
    assert user_version == 10400  # we ask GDAL for GeoPackage 1.4
    assert 10200 <= user_version < 20000


def test_req3_extension_is_gpkg(tmp_path, layers):
    """Req 3: the file extension is .gpkg; other names are refused before anything is written."""
    with pytest.raises(OptionError, match=r"must end in \.gpkg"):
        write_layers(tmp_path / "results.sqlite", {"hubs": layers["hubs"]})
    assert list(tmp_path.iterdir()) == []


def test_req6_req7_integrity_and_foreign_keys(con):
    """Req 6: PRAGMA integrity_check returns "ok"; Req 7: PRAGMA foreign_key_check returns no rows."""
    assert con.execute("PRAGMA integrity_check").fetchall() == [("ok",)]
    assert con.execute("PRAGMA foreign_key_check").fetchall() == []


_ALLOWED_TYPES = re.compile(
    r"^(BOOLEAN|TINYINT|SMALLINT|MEDIUMINT|INT|INTEGER|FLOAT|DOUBLE|REAL|TEXT(\(\d+\))?|BLOB(\(\d+\))?|DATE|DATETIME"
    r"|GEOMETRY|POINT|LINESTRING|POLYGON|MULTIPOINT|MULTILINESTRING|MULTIPOLYGON|GEOMETRYCOLLECTION)$")


def test_req5_column_types_are_geopackage_types(con):
    """Req 5: user table columns are declared only with the GeoPackage data types."""
    for table in FEATURE_TABLES + ("summary",):
        cols = con.execute(f'PRAGMA table_info("{table}")').fetchall()
        assert cols, table
        for _, name, decl, *_ in cols:
            assert _ALLOWED_TYPES.match(decl), (table, name, decl)


# ---------------------------------------------------------------- spatial reference systems
def test_req10_req11_spatial_ref_sys_minimum_rows(con):
    """Req 10: table gpkg_spatial_ref_sys; Req 11: it holds srs_id 4326 (WGS 84), -1 and 0 (undefined)."""
    cols = [r[1] for r in con.execute("PRAGMA table_info(gpkg_spatial_ref_sys)")]
    for c in ("srs_name", "srs_id", "organization", "organization_coordsys_id", "definition", "description"):
        assert c in cols
    rows = {r[0]: r for r in con.execute(
        "SELECT srs_id, organization, organization_coordsys_id, definition FROM gpkg_spatial_ref_sys")}
    assert {4326, -1, 0} <= set(rows)
    assert rows[4326][1].upper() == "EPSG" and rows[4326][2] == 4326
    assert CRS.from_wkt(rows[4326][3]).equals(CRS.from_epsg(4326), ignore_axis_order=True)
    assert rows[-1][3] == "undefined" and rows[0][3] == "undefined"


def test_req12_spatial_ref_sys_holds_the_real_crs_definition(con):
    """Req 12 (and 16, 26): every srs_id used by a layer has a row whose definition is that CRS's WKT."""
    used = {r[0] for r in con.execute("SELECT srs_id FROM gpkg_geometry_columns")}
    assert used == {32727}
    org, code, definition = con.execute(
        "SELECT organization, organization_coordsys_id, definition FROM gpkg_spatial_ref_sys WHERE srs_id = 32727"
    ).fetchone()
    assert (org.upper(), code) == ("EPSG", 32727)
    assert definition.startswith("PROJCS[")  # a WKT definition, not a placeholder
    crs = CRS.from_wkt(definition)
    assert crs.equals(CRS(LAYER_CRS), ignore_axis_order=True)
    assert crs.to_epsg() == 32727


def test_crs_without_epsg_code_keeps_its_definition(tmp_path):
    """A custom CRS (no authority code) still gets its full WKT into gpkg_spatial_ref_sys."""
    custom = CRS.from_proj4("+proj=tmerc +lat_0=-31 +lon_0=-21 +k=0.9996 +x_0=100000 +y_0=0 +ellps=WGS84 +units=m")
    pts = gpd.GeoDataFrame({"v": [1]}, geometry=[shapely.Point(100000, 0)], crs=custom)
    path = write_layers(tmp_path / "c.gpkg", {"pts": pts})
    with sqlite3.connect(path) as c:
        srs_id = c.execute("SELECT srs_id FROM gpkg_geometry_columns WHERE table_name='pts'").fetchone()[0]
        definition = c.execute("SELECT definition FROM gpkg_spatial_ref_sys WHERE srs_id=?", (srs_id,)).fetchone()[0]
    assert srs_id not in (-1, 0, 4326)
    back = CRS.from_wkt(definition)
    assert back.equals(custom, ignore_axis_order=True)
    assert pyogrio.read_dataframe(path, layer="pts").crs.equals(custom, ignore_axis_order=True)


# ---------------------------------------------------------------- contents
def test_req13_req14_req18_contents_rows(con, layers):
    """Req 13: table gpkg_contents; Req 14: table_name names an existing table;
    Req 18: data_type 'features' for feature tables ('attributes' for plain tables)."""
    rows = {r[0]: r[1:] for r in con.execute(
        "SELECT table_name, data_type, identifier, description, srs_id, min_x, min_y, max_x, max_y, last_change "
        "FROM gpkg_contents")}
    assert set(rows) == set(layers)
    tables = {r[0] for r in con.execute("SELECT name FROM sqlite_master WHERE type IN ('table', 'view')")}
    for name, row in rows.items():
        assert name in tables
        data_type = row[0]
        assert data_type == ("attributes" if name == "summary" else "features")
    assert rows["edges"][2] == "network links with minutes to the nearest hub"


def test_req15_last_change_timestamp_format(con):
    """Req 15: last_change is an ISO 8601 UTC timestamp like 2021-01-01T00:00:00.000Z."""
    for (stamp,) in con.execute("SELECT last_change FROM gpkg_contents"):
        assert re.fullmatch(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d(\.\d+)?Z", stamp), stamp


def test_contents_bounds_enclose_the_features(con, layers):
    """gpkg_contents min/max x/y (informative) enclose each layer's features."""
    for name in FEATURE_TABLES:
        mnx, mny, mxx, mxy = con.execute(
            "SELECT min_x, min_y, max_x, max_y FROM gpkg_contents WHERE table_name=?", (name,)).fetchone()
        b = layers[name].total_bounds
        assert mnx <= b[0] + 1e-6 and mny <= b[1] + 1e-6 and mxx >= b[2] - 1e-6 and mxy >= b[3] - 1e-6, name


# ---------------------------------------------------------------- geometry columns and encoding
def test_req21_to_req25_geometry_columns(con, layers):
    """Req 21: table gpkg_geometry_columns; Req 22: one row per feature table; Req 23: table_name is in
    gpkg_contents; Req 24: column_name is the table's geometry column; Req 25: geometry_type_name is an
    upper-case geometry type name; Req 27: z and m are 0, 1 or 2."""
    rows = {r[0]: r[1:] for r in con.execute(
        "SELECT table_name, column_name, geometry_type_name, srs_id, z, m FROM gpkg_geometry_columns")}
    assert set(rows) == set(FEATURE_TABLES)
    expected = {"edges": "LINESTRING", "hubs": "POINT", "reach_bands": {"POLYGON", "MULTIPOLYGON"},
                "weak_regions": "POLYGON", "diameter": "LINESTRING", "issues": "POINT"}
    for name, (column, gtype, srs_id, z, m) in rows.items():
        cols = [r[1] for r in con.execute(f'PRAGMA table_info("{name}")')]
        assert column in cols
        assert gtype in (expected[name] if isinstance(expected[name], set) else {expected[name]})
        assert gtype == gtype.upper()
        assert z in (0, 1, 2) and m in (0, 1, 2)
        assert con.execute("SELECT data_type FROM gpkg_contents WHERE table_name=?", (name,)).fetchone()[0] == "features"


def test_req29_integer_primary_key(con):
    """Req 29 (from memory): each feature table has a column of type INTEGER that is its PRIMARY KEY."""
    for name in FEATURE_TABLES:
        pk = [r for r in con.execute(f'PRAGMA table_info("{name}")') if r[5] == 1]
        assert len(pk) == 1 and pk[0][2] == "INTEGER", name


def _parse_gpb(blob: bytes):
    """Parse a GeoPackageBinary blob (standard type): header fields and the WKB geometry after it."""
    assert blob[:2] == b"GP"
    version, flags = blob[2], blob[3]
    little = flags & 1
    env_kind = (flags >> 1) & 0b111
    empty = (flags >> 4) & 1
    extended = (flags >> 5) & 1
    srs_id = struct.unpack("<i" if little else ">i", blob[4:8])[0]
    env_len = {0: 0, 1: 32, 2: 48, 3: 48, 4: 64}[env_kind]
    envelope = struct.unpack(("<" if little else ">") + "d" * (env_len // 8), blob[8:8 + env_len])
    return version, extended, empty, srs_id, envelope, blob[8 + env_len:]


def test_req19_geometries_are_geopackage_binary(con, layers):
    """Req 19: geometries are stored as GeoPackageBinary blobs: 'GP' magic, version 0, flags, srs_id,
    optional envelope, then ISO WKB.  The srs_id in each blob matches gpkg_geometry_columns and the WKB
    decodes (with shapely) to the geometry that was written."""
    for name in FEATURE_TABLES:
        column, srs = con.execute(
            "SELECT column_name, srs_id FROM gpkg_geometry_columns WHERE table_name=?", (name,)).fetchone()
        blobs = [r[0] for r in con.execute(f'SELECT "{column}" FROM "{name}" ORDER BY fid')]
        assert len(blobs) == len(layers[name])
        for blob, want in zip(blobs, layers[name].geometry):
            version, extended, empty, srs_id, env, wkb = _parse_gpb(blob)
            assert (version, extended, empty, srs_id) == (0, 0, 0, srs)
            got = shapely.from_wkb(wkb)
            assert got.normalize().equals_exact(want.normalize(), 1e-6) or got.equals(want)
            if env:
                minx, maxx, miny, maxy = env[:4]
                assert np.allclose((minx, miny, maxx, maxy), want.bounds)


# ---------------------------------------------------------------- spatial index
def test_rtree_spatial_index_on_every_feature_table(con, layers):
    """R-tree Spatial Indexes extension (GeoPackage Annex F.3, requirements numbered about 75-88 from memory):
    a virtual table rtree_<table>_<column> using rtree with columns id, minx, maxx, miny, maxy, registered
    in gpkg_extensions as 'gpkg_rtree_index'.  Its rows must enclose every feature's bounds (R-tree stores
    float32, rounded outwards)."""
    for name in FEATURE_TABLES:
        column = con.execute("SELECT column_name FROM gpkg_geometry_columns WHERE table_name=?", (name,)).fetchone()[0]
        rtree = f"rtree_{name}_{column}"
        sql = con.execute("SELECT sql FROM sqlite_master WHERE name=?", (rtree,)).fetchone()[0]
        assert re.search(r"CREATE VIRTUAL TABLE .* USING rtree\(\s*id\s*,\s*minx\s*,\s*maxx\s*,\s*miny\s*,\s*maxy",
                         sql, re.I | re.S), sql
        ext = con.execute("SELECT extension_name FROM gpkg_extensions WHERE table_name=? AND column_name=?",
                          (name, column)).fetchall()
        assert ("gpkg_rtree_index",) in ext
        rows = dict((r[0], r[1:]) for r in con.execute(f'SELECT id, minx, maxx, miny, maxy FROM "{rtree}"'))
        fids = [r[0] for r in con.execute(f'SELECT fid FROM "{name}" ORDER BY fid')]
        assert sorted(rows) == fids
        for fid, geom in zip(fids, layers[name].geometry):
            minx, maxx, miny, maxy = rows[fid]
            b = geom.bounds
            tol = 1.0  # float32 at ~6.5e6 m has a step of 0.5 m
            assert minx <= b[0] + tol and maxx >= b[2] - tol and miny <= b[1] + tol and maxy >= b[3] - tol


def test_rtree_answers_a_window_query(con, layers):
    """The index is usable: a window query through it finds exactly the features whose bounds meet the window."""
    edges = layers["edges"]
    x0, y0, x1, y1 = edges.total_bounds
    w = (x0 - 1, y0 - 1, x0 + 1100, y0 + 600)
    got = {r[0] for r in con.execute(
        "SELECT id FROM rtree_edges_geom WHERE maxx >= ? AND minx <= ? AND maxy >= ? AND miny <= ?",
        (w[0], w[2], w[1], w[3]))}
    b = edges.geometry.bounds
    want = set((np.nonzero(((b.maxx >= w[0]) & (b.minx <= w[2]) & (b.maxy >= w[1]) & (b.miny <= w[3])).to_numpy())[0]
                + 1).tolist())  # fid starts at 1
    assert got == want and got


# ---------------------------------------------------------------- read back
def test_every_layer_reads_back_with_pyogrio(gpkg, layers):
    """Write-then-read round trip: every layer, every row, every field, every geometry."""
    names = [str(n) for n in pyogrio.list_layers(gpkg)[:, 0]]
    assert sorted(names) == sorted(layers)
    for name, want in layers.items():
        got = pyogrio.read_dataframe(gpkg, layer=name)
        assert len(got) == len(want)
        if isinstance(want, gpd.GeoDataFrame):
            assert got.crs.equals(want.crs)
            assert all(a.equals(b) for a, b in zip(got.geometry, want.geometry))
        for col in want.columns:
            if col == getattr(want, "_geometry_column_name", None):
                continue
            w, g = want[col], got[col]
            if pd.api.types.is_numeric_dtype(w):
                np.testing.assert_allclose(g.to_numpy(float), w.to_numpy(float), equal_nan=True, err_msg=f"{name}.{col}")
            else:
                assert g.tolist() == w.tolist(), (name, col)


def test_read_back_field_types(tmp_path):
    """int, float with nulls, unicode text, bool (stored as 0/1 integer), nullable int and bool."""
    frame = gpd.GeoDataFrame({
        "count": np.array([3, -7, 2**40], dtype=np.int64),
        "small": np.array([1, 2, 3], dtype=np.int32),
        "minutes": [1.25, np.nan, 1e-9],
        "name": ["Ær\u00f8 Landing", "\u6771\u6751 \u2014 \U0001F6A7", None],
        "oneway": [True, False, True],
        "maybe": pd.array([True, None, False], dtype="boolean"),
        "opt_int": pd.array([5, None, 7], dtype="Int64"),
    }, geometry=[shapely.Point(1, 2), shapely.Point(3, 4), shapely.Point(5, 6)], crs=LAYER_CRS)
    path = write_layers(tmp_path / "types.gpkg", {"types": frame})
    info = pyogrio.read_info(path, layer="types")
    ftypes = dict(zip(info["fields"], info["dtypes"]))
    assert ftypes["count"] == "int64"
    assert ftypes["small"] == "int32"
    assert ftypes["minutes"] == "float64"
    assert ftypes["name"] == "object"
    assert ftypes["oneway"] == "int32"  # bool -> 0/1 integer, not a GDAL boolean subtype
    got = pyogrio.read_dataframe(path, layer="types")
    assert got["count"].tolist() == [3, -7, 2**40]
    assert got["small"].tolist() == [1, 2, 3]
    assert got["minutes"].iloc[0] == 1.25 and np.isnan(got["minutes"].iloc[1]) and got["minutes"].iloc[2] == 1e-9
    assert got["name"].iloc[0] == "Ær\u00f8 Landing" and got["name"].iloc[1] == "\u6771\u6751 \u2014 \U0001F6A7"
    assert got["name"].iloc[2] is None or pd.isna(got["name"].iloc[2])
    assert got["oneway"].tolist() == [1, 0, 1] and got["oneway"].dtype.kind == "i"
    assert got["maybe"].iloc[0] == 1 and pd.isna(got["maybe"].iloc[1]) and got["maybe"].iloc[2] == 0
    assert got["opt_int"].iloc[0] == 5 and pd.isna(got["opt_int"].iloc[1]) and got["opt_int"].iloc[2] == 7
    with sqlite3.connect(path) as c:
        decl = {r[1]: r[2] for r in c.execute('PRAGMA table_info("types")')}
        assert decl["oneway"] in ("MEDIUMINT", "INTEGER", "INT")  # not BOOLEAN
        assert c.execute('SELECT typeof(oneway), oneway FROM "types" ORDER BY fid').fetchall() == [
            ("integer", 1), ("integer", 0), ("integer", 1)]


def test_mixed_single_and_multi_polygons_promoted(tmp_path):
    frame = gpd.GeoDataFrame({"v": [1, 2]}, geometry=[
        shapely.box(0, 0, 1, 1), shapely.MultiPolygon([shapely.box(2, 2, 3, 3), shapely.box(4, 4, 5, 5)])], crs=LAYER_CRS)
    path = write_layers(tmp_path / "m.gpkg", {"regions": frame})
    got = pyogrio.read_dataframe(path, layer="regions")
    assert got.geometry.iloc[1].equals(frame.geometry.iloc[1])
    assert got.geometry.iloc[0].area == 1.0


# ---------------------------------------------------------------- bad input, nothing lost
def test_refuses_existing_file_without_overwrite(gpkg, layers):
    before = gpkg.read_bytes()
    with pytest.raises(OutputExistsError, match="already exists; replace it with overwrite"):
        write_layers(gpkg, {"hubs": layers["hubs"]})
    assert gpkg.read_bytes() == before


def test_path_under_an_existing_file_is_a_one_line_output_error(tmp_path, layers):
    blocker = tmp_path / "notes.txt"
    blocker.write_text("keep me")
    with pytest.raises(OutputError, match=r"is a file, not a folder") as info:
        write_layers(blocker / "out.gpkg", {"hubs": layers["hubs"]})
    assert isinstance(info.value, InputError)  # the CLI turns InputError into exit status 2
    assert "\n" not in str(info.value)
    assert blocker.read_text() == "keep me"


def test_missing_folder_is_an_output_error(tmp_path, layers):
    with pytest.raises(OutputError, match="does not exist; create it first"):
        write_layers(tmp_path / "nope" / "out.gpkg", {"hubs": layers["hubs"]})


def test_failure_midway_leaves_old_file_and_no_temporary_files(tmp_path, layers, monkeypatch):
    path = write_layers(tmp_path / "keep.gpkg", {"hubs": layers["hubs"]})
    old = path.read_bytes()
    real = pyogrio.write_dataframe
    calls = []

    def flaky(df, p, **kw):
        calls.append(kw["layer"])
        if len(calls) == 2:
            raise pyogrio.errors.DataSourceError("disk full (simulated)")
        return real(df, p, **kw)

    monkeypatch.setattr(pyogrio, "write_dataframe", flaky)
    with pytest.raises(OutputError, match=r"layer 'edges': cannot write it: the disk is full"):
        write_layers(path, {"hubs": layers["hubs"], "edges": layers["edges"]}, overwrite=True)
    assert path.read_bytes() == old
    assert sorted(p.name for p in tmp_path.iterdir()) == ["keep.gpkg"]


def test_overwrite_replaces_whole_file(tmp_path, layers):
    path = write_layers(tmp_path / "o.gpkg", {"hubs": layers["hubs"], "edges": layers["edges"]})
    write_layers(path, {"issues": layers["issues"]}, overwrite=True)
    assert [str(n) for n in pyogrio.list_layers(path)[:, 0]] == ["issues"]


@pytest.mark.parametrize("name, msg", [
    ("Edges", "not allowed"), ("1st", "not allowed"), ("a b", "not allowed"), ("gpkg_x", "reserved"),
    ("rtree_x", "reserved"), ("x" * 64, "not allowed"),
])
def test_bad_layer_names(tmp_path, layers, name, msg):
    with pytest.raises(OptionError, match=msg):
        write_layers(tmp_path / "n.gpkg", {name: layers["hubs"]})
    assert not (tmp_path / "n.gpkg").exists()


def test_layer_without_crs_refused(tmp_path):
    frame = gpd.GeoDataFrame({"v": [1]}, geometry=[shapely.Point(0, 0)])
    with pytest.raises(CRSError, match=r"layer 'pts': has no CRS"):
        write_layers(tmp_path / "c.gpkg", {"pts": frame})


def test_fields_clashing_by_case_refused(tmp_path):
    frame = gpd.GeoDataFrame({"Name": ["a"], "name": ["b"]}, geometry=[shapely.Point(0, 0)], crs=LAYER_CRS)
    with pytest.raises(InputError, match="differ only in case"):
        write_layers(tmp_path / "c.gpkg", {"pts": frame})


def test_no_layers_refused(tmp_path):
    with pytest.raises(OptionError, match="no layers"):
        write_layers(tmp_path / "c.gpkg", {})



def test_field_descriptions_in_gpkg_data_columns(tmp_path):
    """OGC 12-128r18 (2021), Annex F.9 (schema extension): column titles and descriptions from the glossary."""
    import sqlite3

    import geopandas as gpd
    import shapely

    from geo_reach import glossary
    from geo_reach.export.gpkg import write_layers

    frame = gpd.GeoDataFrame({"hub_minutes": [1.5], "population": [10.0], "my_own_field": ["x"]},
                             geometry=[shapely.Point(500000, 6500000)], crs=32727)
    out = write_layers(tmp_path / "d.gpkg", {"settlements": frame})
    with sqlite3.connect(out) as db:
        rows = dict(db.execute("select column_name, description from gpkg_data_columns "
                               "where table_name = 'settlements'").fetchall())
        ext = db.execute("select extension_name, scope from gpkg_extensions "
                         "where table_name = 'gpkg_data_columns'").fetchall()
    assert rows == {"hub_minutes": glossary.describe("hub_minutes"), "population": glossary.describe("population")}
    assert "minutes" in rows["hub_minutes"] and ext == [("gpkg_schema", "read-write")]
    assert pyogrio.read_dataframe(out, layer="settlements")["hub_minutes"].tolist() == [1.5]
