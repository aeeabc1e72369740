"""Cloud-optimised GeoTIFF output, checked against OGC 21-026 by reading the structure back.

Sources:
- OGC 21-026 (2023), "OGC Cloud Optimized GeoTIFF Standard" 1.0: the file is a
  TIFF/BigTIFF, images are tiled, reduced-resolution images (overviews) follow
  the full-resolution one, IFDs first and the smallest overview's data before
  larger ones (requirement wording here is from memory).
- GDAL's ``validate_cloud_optimized_geotiff.py`` (E. Rouault), whose checks
  :func:`cog_problems` follows, from memory.
- TIFF 6.0 (Adobe 1992) and the BigTIFF layout, for the independent parser.

Two independent readers are compared: rasterio/GDAL's ``TIFF`` metadata
items (``IFD_OFFSET``, ``BLOCK_OFFSET_0_0``) and the module's own TIFF parser.
"""

from __future__ import annotations

import numpy as np
import pytest
import rasterio
from affine import Affine
from rasterio.crs import CRS as RioCRS

from geo_reach.errors import CRSError, InputError, OptionError, OutputError, OutputExistsError
from geo_reach.export import raster as R
from geo_reach.export.raster import cog_problems, tiff_layout, write_cog

CRS = "EPSG:32727"
# 100 m cells with the origin near lon -21, lat -31 in UTM zone 27S (invented surface)
T = Affine(100.0, 0.0, 480000.0, 0.0, -100.0, 6580000.0)


def _surface(rows, cols, seed=1):
    rng = np.random.default_rng(seed)
    a = (rng.random((rows, cols)) * 120.0).astype("float32")
    a[:7, :9] = np.nan  # unreachable corner
    return a


def _write_with(driver, path, arr, nodata=-9999.0, dtype=None, resampling=None):
    """Write through the chosen GDAL driver (the COG driver, or the GTiff fallback)."""
    a, crs, nd, dt = R._check_args(path, arr, T, CRS, nodata, dtype)
    R._write(path, a, T, crs, nd, dt, R._resampling(dt, resampling), driver)
    return path


DRIVERS = ["COG", "GTiff"]


@pytest.fixture(scope="module")
def big(tmp_path_factory):
    """1100 x 700 px float surface written by both drivers."""
    d = tmp_path_factory.mktemp("cog")
    arr = _surface(700, 1100)
    return arr, {drv: _write_with(drv, d / f"{drv}.tif", arr) for drv in DRIVERS}


def test_cog_driver_is_used_when_available(tmp_path):
    assert R._cog_driver_available()  # the rasterio wheel here ships GDAL's COG driver
    p = write_cog(tmp_path / "a.tif", _surface(600, 520), T, CRS, nodata=-9999.0)
    with rasterio.open(p) as src:
        assert src.tags(ns="IMAGE_STRUCTURE").get("LAYOUT") == "COG"
    assert cog_problems(p) == []


@pytest.mark.parametrize("driver", DRIVERS)
def test_big_image_is_tiled_with_overviews_crs_nodata_deflate(big, driver):
    """OGC 21-026: tiled; overviews (we make them above 512 px); plus our CRS, nodata and DEFLATE."""
    arr, paths = big
    with rasterio.open(paths[driver]) as src:
        assert src.profile["tiled"] is True
        assert src.block_shapes == [(512, 512)]
        assert src.overviews(1) == [2, 4]  # 550x350 and 275x175: the smallest fits one 512 tile
        assert src.crs == RioCRS.from_user_input(CRS)
        assert src.nodata == -9999.0
        assert src.compression.name == "deflate"
        assert src.transform == T
        assert src.tags(ns="IMAGE_STRUCTURE").get("LAYOUT") == "COG"
        got = src.read(1)
    want = np.where(np.isnan(arr), np.float32(-9999.0), arr)
    np.testing.assert_array_equal(got, want)


@pytest.mark.parametrize("driver", DRIVERS)
def test_layout_full_resolution_ifd_first_and_smallest_overview_data_first(big, driver):
    """OGC 21-026 / GDAL COG layout: the full-resolution IFD comes first, all IFDs precede pixel data,
    overview data is stored smallest first and full-resolution data last."""
    _, paths = big
    layout = tiff_layout(paths[driver])
    ifds = layout["ifds"]
    assert [(d["width"], d["height"]) for d in ifds] == [(1100, 700), (550, 350), (275, 175)]
    assert [d["subfile_type"] & 1 for d in ifds] == [0, 1, 1]
    assert all(d["tile_width"] == d["tile_height"] == 512 for d in ifds)
    assert all(d["compression"] in (8, 32946) for d in ifds)  # 8 = Adobe DEFLATE (TIFF tag 259)
    ifd_offsets = [d["offset"] for d in ifds]
    first_data = [min(o for o in d["data_offsets"] if o) for d in ifds]
    assert ifd_offsets == sorted(ifd_offsets)
    assert max(ifd_offsets) < min(first_data)
    assert first_data[2] < first_data[1] < first_data[0]
    assert cog_problems(paths[driver]) == []


@pytest.mark.parametrize("driver", DRIVERS)
def test_own_tiff_parser_agrees_with_gdal(big, driver):
    """Independent readers agree: GDAL's TIFF metadata items vs. the module's own IFD parser."""
    _, paths = big
    ifds = tiff_layout(paths[driver])["ifds"]
    with rasterio.open(paths[driver]) as src:
        for k, ovr in enumerate([None, 0, 1]):
            assert int(src.get_tag_item("IFD_OFFSET", "TIFF", bidx=1, ovr=ovr)) == ifds[k]["offset"]
            assert int(src.get_tag_item("BLOCK_OFFSET_0_0", "TIFF", bidx=1, ovr=ovr)) == ifds[k]["data_offsets"][0]


@pytest.mark.parametrize("driver", DRIVERS)
def test_overview_is_the_2x2_average_ignoring_nodata(big, driver):
    """Reference check of the first overview against numpy: each cell is the mean of its 2 x 2 block
    (blocks holding nodata are left out of the comparison)."""
    arr, paths = big
    with rasterio.open(paths[driver], overview_level=0) as ovr:
        got = ovr.read(1)
    blocks = arr.reshape(350, 2, 550, 2).astype(np.float64)
    full = ~np.isnan(blocks).any(axis=(1, 3))
    want = blocks.mean(axis=(1, 3))
    np.testing.assert_allclose(got[full], want[full], rtol=1e-5)


def test_small_image_has_no_overviews_but_is_tiled(tmp_path):
    p = write_cog(tmp_path / "s.tif", _surface(300, 200), T, CRS, nodata=-1.0)
    with rasterio.open(p) as src:
        assert src.overviews(1) == []
        assert src.profile["tiled"] is True
    ifds = tiff_layout(p)["ifds"]
    assert len(ifds) == 1 and ifds[0]["tile_width"] == 512
    assert cog_problems(p) == []


def test_just_over_512_px_one_way_gets_an_overview(tmp_path):
    p = write_cog(tmp_path / "w.tif", _surface(40, 513), T, CRS, nodata=-1.0)
    with rasterio.open(p) as src:
        assert src.overviews(1) == [2]
    assert cog_problems(p) == []


def test_integer_classes_use_nearest_overviews(tmp_path):
    rng = np.random.default_rng(3)
    classes = rng.integers(1, 6, size=(800, 900)).astype("uint8")
    p = write_cog(tmp_path / "c.tif", classes, T, CRS, nodata=0, dtype="uint8")
    with rasterio.open(p) as src:
        assert src.dtypes[0] == "uint8" and src.nodata == 0
        np.testing.assert_array_equal(src.read(1), classes)
    with rasterio.open(p, overview_level=0) as ovr:
        vals = set(np.unique(ovr.read(1)).tolist())
    assert vals <= {1, 2, 3, 4, 5}  # nearest: no averaged, non-class values
    assert cog_problems(p) == []


def test_multiband_and_nan_nodata(tmp_path):
    a = np.stack([_surface(600, 600, 1), _surface(600, 600, 2)])
    p = write_cog(tmp_path / "m.tif", a, T, CRS, nodata=float("nan"))
    with rasterio.open(p) as src:
        assert src.count == 2 and np.isnan(src.nodata)
        np.testing.assert_array_equal(src.read(), a)  # NaN == NaN here (assert_array_equal treats NaN as equal)
        assert src.overviews(2) == [2]
    assert cog_problems(p) == []


def test_bigtiff_is_parsed(tmp_path):
    """The parser reads BigTIFF (magic 43, 64-bit offsets) too, and agrees with GDAL."""
    from rasterio.shutil import copy as rio_copy

    src_p = tmp_path / "src.tif"
    with rasterio.open(src_p, "w", driver="GTiff", width=600, height=600, count=1, dtype="float32", crs=CRS,
                       transform=T, tiled=True, blockxsize=256, blockysize=256) as ds:
        ds.write(_surface(600, 600), 1)
        ds.build_overviews([2])
    dst = tmp_path / "big.tif"
    rio_copy(src_p, dst, driver="GTiff", BIGTIFF="YES", TILED="YES", COPY_SRC_OVERVIEWS="YES")
    layout = tiff_layout(dst)
    assert layout["bigtiff"] is True
    with rasterio.open(dst) as src:
        assert int(src.get_tag_item("IFD_OFFSET", "TIFF", bidx=1)) == layout["ifds"][0]["offset"]
    assert cog_problems(dst) == []


# ---------------------------------------------------------------- the check can fail
def test_cog_problems_flags_a_striped_file_without_overviews(tmp_path):
    p = tmp_path / "plain.tif"
    with rasterio.open(p, "w", driver="GTiff", width=1100, height=700, count=1, dtype="float32", crs=CRS,
                       transform=T) as ds:
        ds.write(_surface(700, 1100), 1)
    problems = cog_problems(p)
    assert any("not tiled" in m for m in problems)
    assert any("no overviews" in m for m in problems)


def test_cog_problems_flags_overviews_added_after_the_data(tmp_path):
    p = tmp_path / "late.tif"
    with rasterio.open(p, "w", driver="GTiff", width=1100, height=700, count=1, dtype="float32", crs=CRS,
                       transform=T, tiled=True, blockxsize=512, blockysize=512) as ds:
        ds.write(_surface(700, 1100), 1)
    with rasterio.open(p, "r+") as ds:
        ds.build_overviews([2, 4])
    problems = cog_problems(p)
    assert any("IFD is stored after pixel data" in m for m in problems)
    assert any("does not come after that of smaller image" in m for m in problems)


def test_tiff_layout_refuses_non_tiff(tmp_path):
    p = tmp_path / "x.tif"
    p.write_bytes(b"PK\x03\x04 not a tiff")
    with pytest.raises(InputError, match="not a TIFF file"):
        tiff_layout(p)
    assert cog_problems(p) and "cannot read TIFF structure" in cog_problems(p)[0]


# ---------------------------------------------------------------- bad input, nothing lost
def test_bad_arguments(tmp_path):
    a = _surface(10, 10)
    with pytest.raises(CRSError, match="no CRS"):
        write_cog(tmp_path / "a.tif", a, T, None, nodata=-1)
    with pytest.raises(OptionError, match="must be 2-D"):
        write_cog(tmp_path / "a.tif", np.zeros(5), T, CRS, nodata=-1)
    with pytest.raises(OptionError, match="transform must be an affine.Affine"):
        write_cog(tmp_path / "a.tif", a, (100, 0, 0, 0, -100, 0), CRS, nodata=-1)
    with pytest.raises(OptionError, match="degenerate"):
        write_cog(tmp_path / "a.tif", a, Affine(0, 0, 0, 0, 0, 0), CRS, nodata=-1)
    with pytest.raises(OptionError, match="nodata -1 does not fit dtype uint8"):
        write_cog(tmp_path / "a.tif", np.ones((4, 4), "uint8"), T, CRS, nodata=-1)
    with pytest.raises(OptionError, match="nodata must be given"):
        write_cog(tmp_path / "a.tif", a, T, CRS, nodata=None)
    with pytest.raises(OptionError, match="values do not fit dtype int16"):
        write_cog(tmp_path / "a.tif", a * 1000, T, CRS, nodata=-1, dtype="int16")
    with pytest.raises(OptionError, match=r"must end in \.tif"):
        write_cog(tmp_path / "a.png", a, T, CRS, nodata=-1)
    with pytest.raises(CRSError, match="not understood"):
        write_cog(tmp_path / "a.tif", a, T, "EPSG:999999", nodata=-1)
    assert list(tmp_path.iterdir()) == []


def test_existing_file_kept_without_overwrite_and_replaced_with_it(tmp_path):
    p = write_cog(tmp_path / "a.tif", _surface(20, 20), T, CRS, nodata=-1)
    old = p.read_bytes()
    with pytest.raises(OutputExistsError, match="already exists"):
        write_cog(p, _surface(30, 30), T, CRS, nodata=-1)
    assert p.read_bytes() == old
    write_cog(p, _surface(30, 30), T, CRS, nodata=-1, overwrite=True)
    with rasterio.open(p) as src:
        assert src.shape == (30, 30)


def test_path_under_a_file_is_output_error(tmp_path):
    blocker = tmp_path / "f"
    blocker.write_text("x")
    with pytest.raises(OutputError, match="is a file, not a folder") as info:
        write_cog(blocker / "a.tif", _surface(5, 5), T, CRS, nodata=-1)
    assert isinstance(info.value, InputError) and "\n" not in str(info.value)


def test_gdal_failure_leaves_old_file_and_no_temporary(tmp_path, monkeypatch):
    p = write_cog(tmp_path / "a.tif", _surface(20, 20), T, CRS, nodata=-1)
    old = p.read_bytes()

    def boom(tmp, *a, **k):
        tmp.write_bytes(b"half")
        raise rasterio.errors.RasterioIOError("disk full (simulated)")

    monkeypatch.setattr(R, "_write", boom)
    with pytest.raises(OutputError, match=r"cannot write it: the disk is full"):
        write_cog(p, _surface(30, 30), T, CRS, nodata=-1, overwrite=True)
    assert p.read_bytes() == old
    assert [x.name for x in tmp_path.iterdir()] == ["a.tif"]
