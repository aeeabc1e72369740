"""``geo-reach surface``: the shortcut study around a built network, its outputs and refusals."""

from __future__ import annotations

import json
import sys
from pathlib import Path

import numpy as np
import pytest
import rasterio
from rasterio.transform import from_origin

sys.path.insert(0, str(Path(__file__).parent))
from studykit import CRS, X0, Y0, write_study  # noqa: E402
from helpers.cli import cli  # noqa: E402


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    d = tmp_path_factory.mktemp("surf")
    write_study(d, proposal=False)
    code, _, err = cli("build", f"{d / 'net.gpkg'}:roads", "-o", d / "built.gpkg", "--speed-field", "speed")
    assert code == 0, err
    return d


def test_surface_outputs_and_population_balance(built):
    d = built
    code, out, err = cli("surface", d / "built.gpkg", "--hubs", d / "hubs.geojson", "--hub-id-field", "hub_id",
                         "-o", d / "s1", "--population", d / "pop.tif", "--zones", f"{d / 'net.gpkg'}:zones",
                         "--zone-id-field", "zid", "--bands", "15,30,60", "--quiet")
    assert code == 0, err
    s = json.loads((d / "s1" / "summary.json").read_text())
    for k in ("population_total", "population_by_band", "population_beyond", "mean_hub_minutes"):
        assert k in s
    assert set(s["population_by_band"]) == {"15", "30", "60"}
    assert s["population_by_band"]["60"] + s["population_beyond"] == pytest.approx(s["population_total"])
    with rasterio.open(d / "s1" / "hub_minutes.tif") as ds:
        assert ds.crs is not None and ds.nodata is not None or np.isnan(ds.nodata)
    import pyogrio

    assert {"reach_bands", "weak_regions", "zones"} <= set(pyogrio.list_layers(d / "s1" / "reach.gpkg")[:, 0])


def _one_line(code, err, *words):
    assert code == 2, err
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert len(lines) == 1, err
    for w in words:
        assert w in lines[0], (w, lines[0])


def _raster(path, data, crs=CRS, origin=(X0 - 500, Y0 + 5500), nodata=-1):
    with rasterio.open(path, "w", driver="GTiff", width=data.shape[1], height=data.shape[0], count=1,
                       dtype="float32", crs=crs, transform=from_origin(*origin, 100, 100), nodata=nodata) as ds:
        ds.write(data.astype("float32"), 1)


@pytest.mark.parametrize("case, words", [
    ("nocrs", ["bad.tif", "coordinate reference system"]),
    ("nooverlap", ["bad.tif", "overlap"]),
    ("notraster", ["bad.tif"]),
    ("allnodata", ["bad.tif", "nodata"]),
    ("negative", ["bad.tif", "negative"]),
])
def test_bad_population_rasters(built, tmp_path, case, words):
    d = built
    bad = tmp_path / "bad.tif"
    if case == "nocrs":
        _raster(bad, np.ones((10, 10)), crs=None)
    elif case == "nooverlap":
        _raster(bad, np.ones((10, 10)), origin=(X0 + 900_000, Y0))
    elif case == "notraster":
        bad.write_text("not a raster")
    elif case == "allnodata":
        _raster(bad, np.full((10, 10), -1.0))
    elif case == "negative":
        a = np.ones((60, 60)); a[3, 3] = -5
        _raster(bad, a)
    before = set(tmp_path.iterdir())
    code, out, err = cli("surface", d / "built.gpkg", "--hubs", d / "hubs.geojson", "-o", tmp_path / "o",
                         "--population", bad, "--quiet")
    _one_line(code, err, *words)
    assert set(tmp_path.iterdir()) == before


def test_landcover_class_missing_from_table(built, tmp_path):
    d = built
    lc = tmp_path / "lc.tif"
    a = np.ones((60, 60)); a[10:20, 10:20] = 7
    _raster(lc, a)
    code, out, err = cli("surface", d / "built.gpkg", "--hubs", d / "hubs.geojson", "-o", tmp_path / "o",
                         "--landcover", lc, "--landcover-speeds", "1=4", "--quiet")
    _one_line(code, err, "7")


def test_grid_beyond_memory_is_refused_up_front(built, tmp_path):
    d = built
    code, out, err = cli("surface", d / "built.gpkg", "--hubs", d / "hubs.geojson", "-o", tmp_path / "o",
                         "--cell-m", "0.05", "--quiet")
    _one_line(code, err, "--cell-m")


def test_route_takes_negative_coordinates(built):
    """Regression: ``--from -21.0,-31.0`` was read as an option (the region lies west and south of 0)."""
    from pyproj import Transformer

    t = Transformer.from_crs(CRS, 4326, always_xy=True)
    a = t.transform(X0 + 20, Y0 + 20)
    b = t.transform(X0 + 2980, Y0 + 2980)
    assert a[0] < 0 and a[1] < 0
    code, out, err = cli("route", built / "built.gpkg", "--from", f"{a[0]},{a[1]}", "--to", f"{b[0]},{b[1]}")
    assert code == 0, err
    f = json.loads(out)
    # 6 km of 30 km/h grid streets (12 min, a little more on the ground) plus two 20 m walks
    assert 12.0 < f["properties"]["cost"] < 12.0 * 1.001 + 2 * 20 / 5000 * 60 + 1e-6
