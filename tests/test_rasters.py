"""Raster ingest: refusals, the analysis grid, resampling that keeps people."""

import numpy as np
import pytest
import rasterio
from affine import Affine
from pyproj import CRS

from geo_reach.errors import CRSError, InputError, MissingInputError, OptionError
from geo_reach.ingest.rasters import Grid, read_raster, resample_to_grid

UTM = CRS.from_epsg(32633)


def _write(path, data, transform, crs=UTM, nodata=None, dtype="float64"):
    with rasterio.open(path, "w", driver="GTiff", width=data.shape[1], height=data.shape[0], count=1,
                       dtype=dtype, crs=crs, transform=transform, nodata=nodata) as ds:
        ds.write(data.astype(dtype), 1)
    return path


def test_refuses_missing_not_raster_no_crs_all_nodata(tmp_path):
    with pytest.raises(MissingInputError, match="nope.tif"):
        read_raster(tmp_path / "nope.tif")
    txt = tmp_path / "pop.tif"
    txt.write_text("not a raster")
    with pytest.raises(InputError, match="pop.tif': is not a raster"):
        read_raster(txt)
    t = Affine(100, 0, 500000, 0, -100, 6000000)
    nocrs = _write(tmp_path / "nocrs.tif", np.ones((3, 3)), t, crs=None)
    with pytest.raises(CRSError, match="nocrs.tif': has no coordinate reference system"):
        read_raster(nocrs)
    empty = _write(tmp_path / "empty.tif", np.full((3, 3), -9.0), t, nodata=-9.0)
    with pytest.raises(InputError, match="empty.tif': band 1 is no data everywhere"):
        read_raster(empty)


def test_refuses_negative_population_and_no_overlap(tmp_path):
    t = Affine(100, 0, 500000, 0, -100, 6000000)
    data = np.ones((4, 4))
    data[2, 1] = -5
    neg = read_raster(_write(tmp_path / "neg.tif", data, t))
    g = Grid.from_bounds((500000, 5999600, 500400, 6000000), 100, 0, crs=UTM)
    with pytest.raises(InputError, match=r"neg.tif': negative population -5 at row 2, column 1"):
        resample_to_grid(neg, g, "population")
    far = Grid.from_bounds((700000, 5000000, 701000, 5001000), 100, 0, crs=UTM)
    ok = read_raster(_write(tmp_path / "ok.tif", np.ones((4, 4)), t))
    with pytest.raises(InputError, match="ok.tif': does not overlap the study extent"):
        resample_to_grid(ok, far, "population")
    with pytest.raises(OptionError, match="unknown raster kind"):
        resample_to_grid(ok, g, "rain")


def test_grid_from_bounds_and_memory_refusal():
    g = Grid.from_bounds((1020, 2030, 1980, 2990), 100, margin_m=50, crs=UTM)
    assert g.transform.c == 900 and g.transform.f == 3100 and g.shape == (12, 12)
    xmin, ymin, xmax, ymax = g.bounds
    assert xmin <= 970 and ymin <= 1980 and xmax >= 2030 and ymax >= 3040
    with pytest.raises(InputError, match=r"needs about .* GiB.*--cell-m \d+"):
        Grid.from_bounds((0, 0, 400000, 400000), 10, 0, crs=UTM, memory_limit_bytes=2**30)
    with pytest.raises(CRSError, match="not projected"):
        Grid.from_bounds((0, 0, 1, 1), 0.1, 0, crs="EPSG:4326")
    with pytest.raises(OptionError, match="cell size"):
        Grid.from_bounds((0, 0, 1, 1), 0, 0, crs=UTM)
    r, c = g.index([950, 5000], [3050, 3050])
    assert r.tolist() == [0, -1] and c.tolist() == [0, -1]


def test_population_aggregation_exact_blocks(tmp_path):
    # 100 m pixels onto an aligned 200 m grid: each cell holds exactly its 2x2 block of pixels.
    rng = np.random.default_rng(0)
    pop = rng.integers(0, 50, (20, 30)).astype(float)
    t = Affine(100, 0, 500000, 0, -100, 6002000)
    lay = read_raster(_write(tmp_path / "p.tif", pop, t))
    g = Grid(Affine(200, 0, 500000, 0, -200, 6002000), 15, 10, UTM, 200.0)
    res = resample_to_grid(lay, g, "population")
    blocks = pop.reshape(10, 2, 15, 2).sum(axis=(1, 3))
    np.testing.assert_allclose(res.data, blocks, rtol=1e-12)
    assert res.correction == pytest.approx(1.0, abs=1e-12)


@pytest.mark.parametrize("cell,dx", [(250.0, 37.0), (60.0, 13.0), (100.0, 50.0)])
def test_population_total_preserved_same_crs(tmp_path, cell, dx):
    # Unaligned coarser, finer and half-shifted grids: GDAL's area-weighted 'sum' alone keeps the total.
    rng = np.random.default_rng(1)
    pop = rng.uniform(0, 100, (25, 35))
    pop[rng.random(pop.shape) < 0.1] = -1
    t = Affine(100, 0, 500000, 0, -100, 6002500)
    lay = read_raster(_write(tmp_path / "p.tif", pop, t, nodata=-1))
    g = Grid.from_bounds((499000 + dx, 5999000, 505000, 6004000), cell, 0, crs=UTM)
    res = resample_to_grid(lay, g, "population")
    total = pop[pop >= 0].sum()
    assert res.data.sum() == pytest.approx(total, rel=1e-6)
    assert res.correction == pytest.approx(1.0, rel=1e-6)
    assert (res.data >= 0).all()


def test_population_total_preserved_across_crs(tmp_path):
    # A population raster in geographic degrees resampled onto a UTM grid: the people whose pixels lie
    # inside the grid are all kept (1e-6 relative), and GDAL's own result is already within 2 %.
    rng = np.random.default_rng(2)
    pop = rng.uniform(0, 20, (40, 50))
    t = Affine(0.001, 0, 15.0, 0, -0.001, 52.0)
    lay = read_raster(_write(tmp_path / "geo.tif", pop, t, crs=CRS.from_epsg(4326)))
    g = Grid.from_bounds((480000, 5750000, 510000, 5770000), 50, 0, crs=UTM)
    res = resample_to_grid(lay, g, "population")
    assert res.source_total == pytest.approx(pop.sum(), rel=1e-12)  # the raster lies wholly inside
    assert res.data.sum() == pytest.approx(pop.sum(), rel=1e-6)
    assert abs(res.correction - 1) < 0.02


def test_terrain_bilinear_reproduces_a_plane(tmp_path):
    # Bilinear interpolation is exact for a linear function (common practice); away from the edges the
    # resampled terrain must equal the plane at the cell centres.
    t = Affine(100, 0, 500000, 0, -100, 6002000)
    rows, cols = np.indices((20, 20))
    x = 500000 + (cols + 0.5) * 100
    y = 6002000 - (rows + 0.5) * 100
    plane = lambda X, Y: 0.02 * (X - 500000) - 0.03 * (Y - 6000000) + 100  # noqa: E731
    lay = read_raster(_write(tmp_path / "z.tif", plane(x, y), t))
    g = Grid(Affine(70, 0, 500300, 0, -70, 6001700), 15, 15, UTM, 70.0)
    res = resample_to_grid(lay, g, "terrain")
    gx, gy = g.cell_centres()
    expect = plane(gx[None, :], gy[:, None])
    np.testing.assert_allclose(res.data, expect, rtol=0, atol=1e-6)
    assert res.missing_cells == 0


def test_classes_nearest_keep_values(tmp_path):
    rng = np.random.default_rng(4)
    cls = rng.choice([1, 4, 9], (30, 30)).astype(float)
    cls[:3, :3] = 255
    t = Affine(100, 0, 500000, 0, -100, 6003000)
    lay = read_raster(_write(tmp_path / "lc.tif", cls, t, nodata=255, dtype="uint8"))
    g = Grid.from_bounds((499800, 6000000, 503000, 6003000), 80, 0, crs=UTM)
    res = resample_to_grid(lay, g, "classes")
    assert set(np.unique(res.data)) <= {-1, 1, 4, 9}
    assert res.data[0, 0] == -1 and res.missing_cells > 0
    # nearest: the grid cell holding a pixel centre has that pixel's class
    r, c = g.index(500000 + 10.5 * 100, 6003000 - 12.5 * 100)
    assert res.data[r, c] == cls[12, 10]
