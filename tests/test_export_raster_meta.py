"""What the result rasters say about themselves: band descriptions and units, hub categories, labelled styles.

Read back with GDAL itself: the C library that rasterio loaded, called through
``ctypes`` (``GDALGetRasterCategoryNames``, ``GDALGetDefaultRAT``,
``GDALGetDescription``, ``GDALGetRasterUnitType``; GDAL API documentation,
gdal.h), and with rasterio.  The style is parsed as SLD 1.0.0 (OGC 02-070:
``RasterSymbolizer/ColorMap/ColorMapEntry`` with ``quantity`` and ``label``).
"""

from __future__ import annotations

import ctypes
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import rasterio
from affine import Affine

sys.path.insert(0, str(Path(__file__).parent))
from helpers.kit_run import run_named  # noqa: E402

from geo_reach import CAUTION  # noqa: E402
from geo_reach.export import raster as R  # noqa: E402

T = Affine(100.0, 0.0, 480000.0, 0.0, -100.0, 6580000.0)
SLD = "{http://www.opengis.net/sld}"


def _gdal():
    """The GDAL library rasterio has loaded (found in this process's memory map)."""
    with rasterio.Env():
        pass
    for line in Path("/proc/self/maps").read_text().splitlines():
        path = line.split()[-1]
        if "libgdal" in Path(path).name:
            lib = ctypes.CDLL(path)
            break
    else:  # pragma: no cover - rasterio always loads GDAL
        raise AssertionError("rasterio's GDAL library is not loaded")
    lib.GDALOpen.restype = ctypes.c_void_p
    lib.GDALOpen.argtypes = [ctypes.c_char_p, ctypes.c_int]
    lib.GDALGetRasterBand.restype = ctypes.c_void_p
    lib.GDALGetRasterBand.argtypes = [ctypes.c_void_p, ctypes.c_int]
    lib.GDALGetRasterCategoryNames.restype = ctypes.POINTER(ctypes.c_char_p)
    lib.GDALGetRasterCategoryNames.argtypes = [ctypes.c_void_p]
    lib.GDALGetDefaultRAT.restype = ctypes.c_void_p
    lib.GDALGetDefaultRAT.argtypes = [ctypes.c_void_p]
    for f in ("GDALRATGetColumnCount", "GDALRATGetRowCount"):
        getattr(lib, f).restype = ctypes.c_int
        getattr(lib, f).argtypes = [ctypes.c_void_p]
    lib.GDALRATGetNameOfCol.restype = ctypes.c_char_p
    lib.GDALRATGetNameOfCol.argtypes = [ctypes.c_void_p, ctypes.c_int]
    lib.GDALRATGetUsageOfCol.restype = ctypes.c_int
    lib.GDALRATGetUsageOfCol.argtypes = [ctypes.c_void_p, ctypes.c_int]
    lib.GDALRATGetValueAsString.restype = ctypes.c_char_p
    lib.GDALRATGetValueAsString.argtypes = [ctypes.c_void_p, ctypes.c_int, ctypes.c_int]
    lib.GDALGetDescription.restype = ctypes.c_char_p
    lib.GDALGetDescription.argtypes = [ctypes.c_void_p]
    lib.GDALGetRasterUnitType.restype = ctypes.c_char_p
    lib.GDALGetRasterUnitType.argtypes = [ctypes.c_void_p]
    lib.GDALClose.argtypes = [ctypes.c_void_p]
    lib.GDALAllRegister()
    return lib


def gdal_read(path) -> dict:
    """Category names, raster attribute table (with column usages), band description and unit, via GDAL."""
    lib = _gdal()
    h = lib.GDALOpen(str(path).encode(), 0)
    assert h, path
    try:
        band = lib.GDALGetRasterBand(h, 1)
        description = lib.GDALGetDescription(band).decode()
        unit = lib.GDALGetRasterUnitType(band).decode()
        # GDAL's GeoTIFF driver reads the .aux.xml side file when a band's metadata or table is first asked
        # for (as gdalinfo does before listing categories); the category names are read after that
        rat = lib.GDALGetDefaultRAT(band)
        names = []
        p = lib.GDALGetRasterCategoryNames(band)
        i = 0
        while p and p[i] is not None:
            names.append(p[i].decode())
            i += 1
        table = None
        if rat:
            cols = [lib.GDALRATGetNameOfCol(rat, c).decode() for c in range(lib.GDALRATGetColumnCount(rat))]
            usage = [lib.GDALRATGetUsageOfCol(rat, c) for c in range(len(cols))]
            rows = [[lib.GDALRATGetValueAsString(rat, r, c).decode() for c in range(len(cols))]
                    for r in range(lib.GDALRATGetRowCount(rat))]
            table = {"columns": cols, "usage": usage, "rows": rows}
        return {"categories": names, "rat": table, "description": description, "unit": unit}
    finally:
        lib.GDALClose(h)


@pytest.fixture(scope="module")
def kit(tmp_path_factory):
    return run_named(tmp_path_factory.mktemp("rastermeta"))


def test_every_result_raster_has_a_description_unit_and_the_caution(kit):
    _, out, _ = kit
    tifs = sorted(out.glob("*.tif"))
    assert {t.name for t in tifs} >= {"hub_minutes.tif", "nearest_hub.tif", "hub_minutes_clinic.tif", "nearest_hub_market.tif",
                                      "hub_minutes_change_far_link.tif"}
    want_units = {"hub_minutes": "minutes", "nearest_hub": "category", "hub_minutes_clinic": "minutes",
                  "hub_minutes_market": "minutes", "nearest_hub_clinic": "category", "nearest_hub_market": "category",
                  "hub_minutes_change_far_link": "minutes", "hub_minutes_change_new_clinic": "minutes"}
    for t in tifs:
        with rasterio.open(t) as ds:
            assert ds.count == 1
            assert ds.descriptions[0] and ds.units[0], t.name
            assert ds.units[0] == want_units[t.stem], t.name
            assert ds.tags()["CAUTION"] == CAUTION
            assert ds.tags(ns="IMAGE_STRUCTURE").get("LAYOUT") == "COG"      # still a COG
        g = gdal_read(t)
        assert g["unit"] == want_units[t.stem]
        assert g["description"].split(":")[0] in {"hub_minutes", "nearest_hub", "hub_minutes_clinic",
                                                  "hub_minutes_market", "nearest_hub_clinic", "nearest_hub_market",
                                                  "hub_minutes_change"}
    with rasterio.open(out / "hub_minutes_clinic.tif") as ds:
        assert ds.descriptions[0].startswith("hub_minutes_clinic: ")


def test_nearest_hub_categories_read_by_gdal(kit):
    _, out, summary = kit
    key = summary["baseline"]["hubs"]["hub_numbers"]          # the hub numbers as the run reports them
    g = gdal_read(out / "nearest_hub.tif")
    assert g["categories"][0] == ""
    assert g["categories"][1:] == ["C1 North clinic", "M1 <b>Market</b>"]
    assert [g["categories"][int(k)].split(" ")[0] for k in key] == list(key.values())
    rat = g["rat"]
    assert rat["columns"] == ["value", "hub_id", "name", "kind"]
    assert rat["usage"] == [5, 0, 2, 0]                            # GFU_MinMax, GFU_Generic, GFU_Name (gdal.h)
    assert rat["rows"] == [["1", "C1", "North clinic", "clinic"], ["2", "M1", "<b>Market</b>", "market"]]
    with rasterio.open(out / "nearest_hub.tif") as ds:
        values = set(np.unique(ds.read(1))) - {0}
        assert values <= {1, 2} and values                          # every value present has a category
        assert ds.tags(1)["CATEGORY_2"] == "M1 <b>Market</b>"       # also inside the TIFF itself
    # a kind's raster names only that kind's hubs
    g = gdal_read(out / "nearest_hub_clinic.tif")
    assert g["categories"][1] == "C1 North clinic" and g["rat"]["rows"] == [["1", "C1", "North clinic", "clinic"]]


def test_nearest_hub_style_is_labelled(kit):
    _, out, _ = kit
    root = ET.parse(out / "nearest_hub.sld").getroot()
    assert root.tag == f"{SLD}StyledLayerDescriptor" and root.get("version") == "1.0.0"
    sym = root.find(f".//{SLD}RasterSymbolizer")
    entries = sym.findall(f"{SLD}ColorMap/{SLD}ColorMapEntry")
    assert [(e.get("quantity"), e.get("label")) for e in entries] == [
        ("0", "no hub reachable"), ("1", "C1 North clinic"), ("2", "M1 <b>Market</b>")]
    colours = [e.get("color") for e in entries[1:]]
    assert len(set(colours)) == len(colours) and all(len(c) == 7 and c.startswith("#") for c in colours)
    assert entries[0].get("opacity") == "0"
    assert root.find(f".//{SLD}Abstract").text == CAUTION
    assert (out / "nearest_hub_market.sld").is_file() and (out / "nearest_hub_market.tif.aux.xml").is_file()


def test_categories_of_many_hubs_and_odd_names(tmp_path):
    hubs = pd.DataFrame({"hub_id": [f"H{i}" for i in range(1, 41)], "name": ["a & b <c>"] + [None] * 39,
                         "kind": ["clinic"] * 40})
    cats = R.hub_categories(hubs)
    arr = np.arange(40, dtype=np.int32).reshape(5, 8) + 1
    arr[0, 0] = 0
    path = R.write_result_raster(tmp_path / "nearest_hub.tif", arr,
                                 type("G", (), {"transform": T, "crs": "EPSG:32727"})(), 0, categories=cats)
    g = gdal_read(path)
    assert len(g["categories"]) == 41 and g["categories"][1] == "H1 a & b <c>" and g["categories"][40] == "H40"
    assert len(g["rat"]["rows"]) == 40
    assert len(set(R.category_colours(40))) == 40
    labels = [e.get("label") for e in ET.parse(tmp_path / "nearest_hub.sld").getroot().iter(f"{SLD}ColorMapEntry")]
    assert labels[1] == "H1 a & b <c>" and len(labels) == 41
