"""Read rasters (population, terrain, land cover) and put them on one analysis grid.

A :class:`Grid` is the square-celled raster every surface is computed on: an
affine ``transform``, ``width`` x ``height`` cells of ``cell_m`` metres in the
working CRS.  :func:`read_raster` opens and validates a GeoTIFF (or anything
GDAL reads as a raster); :func:`resample_to_grid` brings a band onto the grid
with :func:`rasterio.warp.reproject`:

* ``kind="population"``: people counts, resampled so the total is kept
  (GDAL's ``sum`` resampling; on a GDAL without it, ``average`` times the
  ratio of cell areas), then scaled by the documented mass-preserving
  correction (see :func:`resample_to_grid`);
* ``kind="terrain"``: elevation in metres, bilinear;
* ``kind="classes"``: land-cover or barrier classes, nearest.

Every refusal is an :class:`~geo_reach.errors.InputError` naming the file and
what to do.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from affine import Affine
from pyproj import CRS

from ..errors import CRSError, InputError, MissingInputError, OptionError, where

__all__ = [
    "Grid",
    "RasterLayer",
    "Resampled",
    "read_raster",
    "raster_bounds",
    "resample_to_grid",
    "available_memory_bytes",
    "SURFACE_BYTES_PER_CELL",
    "RESAMPLING_KINDS",
]

#: Working memory one grid cell costs during a surface computation, bytes.
#: Counted from :func:`~geo_reach.analysis.surface.compute_surface`: float64
#: speed, pace, seed minutes, minutes and elevation (40), int64 seed node,
#: seed label, propagated label and entry node (32), the heap's float64 keys
#: and int32 items and positions (16), the int32 hub raster and masks and
#: temporaries (about 40).  The benchmark's measured peak is in
#: benchmarks/RESULTS.md, section "Surface".
SURFACE_BYTES_PER_CELL = 128

#: The resampling each kind of raster gets.
RESAMPLING_KINDS = ("population", "terrain", "classes")


def available_memory_bytes() -> int:
    """Memory the system reports as available (``MemAvailable``), bytes.

    Falls back to the physical memory size where ``/proc/meminfo`` is absent.
    """
    try:
        with open("/proc/meminfo") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except OSError:
        pass
    return int(os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES"))


@dataclass(frozen=True)
class Grid:
    """A north-up raster grid of square cells in a metric working CRS.

    Parameters
    ----------
    transform : affine.Affine
        Maps (col, row) to (x, y) of the cell's upper-left corner, metres.
    width, height : int
        Number of columns and rows.
    crs : pyproj.CRS
        The working CRS (metric).
    cell_m : float
        Cell side, metres.
    """

    transform: Affine
    width: int
    height: int
    crs: CRS
    cell_m: float

    @property
    def shape(self) -> tuple[int, int]:
        """``(height, width)``, the numpy shape of a raster on this grid."""
        return (self.height, self.width)

    @property
    def bounds(self) -> tuple[float, float, float, float]:
        """``(xmin, ymin, xmax, ymax)`` of the grid, metres."""
        x0, y0 = self.transform.c, self.transform.f
        return (x0, y0 - self.height * self.cell_m, x0 + self.width * self.cell_m, y0)

    @property
    def cell_area_km2(self) -> float:
        """Area of one cell, km²."""
        return (self.cell_m / 1000.0) ** 2

    def cell_centres(self, rows=None, cols=None):
        """x and y of cell centres (broadcast ``rows`` against ``cols``), metres."""
        rows = np.arange(self.height) if rows is None else np.asarray(rows)
        cols = np.arange(self.width) if cols is None else np.asarray(cols)
        x = self.transform.c + (cols + 0.5) * self.cell_m
        y = self.transform.f - (rows + 0.5) * self.cell_m
        return x, y

    def index(self, x, y):
        """Row and column (int64) of the cells holding points ``x``, ``y``; -1 outside."""
        x = np.asarray(x, dtype=np.float64)
        y = np.asarray(y, dtype=np.float64)
        col = np.floor((x - self.transform.c) / self.cell_m)
        row = np.floor((self.transform.f - y) / self.cell_m)
        out = (col < 0) | (col >= self.width) | (row < 0) | (row >= self.height) | ~np.isfinite(col + row)
        col = np.where(out, -1, col).astype(np.int64)
        row = np.where(out, -1, row).astype(np.int64)
        return row, col

    @staticmethod
    def memory_estimate_bytes(width: int, height: int) -> int:
        """Working memory a surface on a ``width`` x ``height`` grid needs, bytes."""
        return int(width) * int(height) * SURFACE_BYTES_PER_CELL

    @classmethod
    def from_bounds(cls, bounds, cell_m: float, margin_m: float = 0.0, crs=None,
                    memory_limit_bytes: int | None = None) -> "Grid":
        """A grid covering ``bounds`` grown by ``margin_m`` on every side.

        The origin is snapped to a multiple of ``cell_m`` so grids made from
        nearby extents line up.

        Parameters
        ----------
        bounds : (xmin, ymin, xmax, ymax)
            Study extent in the working CRS, metres.
        cell_m : float
            Cell side, metres (> 0).
        margin_m : float, default 0
            Extra band around the extent, metres (>= 0), so trips that
            leave the extent and come back are not cut off.
        crs : pyproj.CRS or anything pyproj accepts
            The working CRS; it must be projected (metric).
        memory_limit_bytes : int, optional
            Refuse grids whose :meth:`memory_estimate_bytes` is above this.
            Default: half the memory available now.

        Raises
        ------
        OptionError
            ``cell_m`` or ``margin_m`` out of range, empty or non-finite bounds.
        CRSError
            ``crs`` missing or geographic.
        InputError
            The grid would need more memory than the limit (the message gives
            the estimate and a ``--cell-m`` that would fit).

        Examples
        --------
        >>> g = Grid.from_bounds((0, 0, 1000, 500), 100, 0, crs="EPSG:32633")
        >>> g.shape
        (5, 10)
        """
        if not (cell_m and math.isfinite(cell_m) and cell_m > 0):
            raise OptionError(f"cell size {cell_m!r} m is not a positive number; give e.g. --cell-m 100")
        if not (math.isfinite(margin_m) and margin_m >= 0):
            raise OptionError(f"margin {margin_m!r} m must be zero or more")
        if crs is None:
            raise CRSError("the analysis grid needs a working CRS; give the network's CRS")
        crs = CRS.from_user_input(crs)
        if not crs.is_projected:
            raise CRSError(f"working CRS {crs.to_string()} is not projected; grids need metres (choose a UTM zone)")
        xmin, ymin, xmax, ymax = (float(b) for b in bounds)
        if not all(math.isfinite(b) for b in (xmin, ymin, xmax, ymax)) or xmax < xmin or ymax < ymin:
            raise OptionError(f"study extent {bounds!r} is empty or not finite; check the input layers")
        xmin, ymin, xmax, ymax = xmin - margin_m, ymin - margin_m, xmax + margin_m, ymax + margin_m
        x0 = math.floor(xmin / cell_m) * cell_m
        y1 = math.ceil(ymax / cell_m) * cell_m
        width = max(1, int(math.ceil((xmax - x0) / cell_m - 1e-9)))
        height = max(1, int(math.ceil((y1 - ymin) / cell_m - 1e-9)))
        limit = memory_limit_bytes if memory_limit_bytes is not None else available_memory_bytes() // 2
        need = cls.memory_estimate_bytes(width, height)
        if need > limit:
            factor = math.sqrt(need / limit)
            fit = math.ceil(cell_m * factor / 10.0) * 10
            raise InputError(
                f"a {width} x {height} grid of {cell_m:g} m cells needs about {need / 2**30:.1f} GiB, "
                f"above the limit of {limit / 2**30:.1f} GiB; coarsen the grid (e.g. --cell-m {fit:g}) "
                "or shrink the study extent")
        return cls(Affine(cell_m, 0.0, x0, 0.0, -cell_m, y1), width, height, crs, float(cell_m))


@dataclass(frozen=True)
class RasterLayer:
    """One band of a raster file, as read.

    Attributes
    ----------
    path : pathlib.Path
    data : ndarray of float64, shape (rows, cols)
        Values; ``NaN`` where the file says no data.
    transform : affine.Affine
        Of ``data`` (of the window read, when only a window was read).
    crs : pyproj.CRS
    nonfinite : int
        Cells holding NaN or an infinity that the file does not declare as
        no data (read as no data; callers report them).
    """

    path: Path
    data: np.ndarray
    transform: Affine
    crs: CRS
    nonfinite: int = 0


@dataclass(frozen=True)
class Resampled:
    """A raster brought onto a :class:`Grid`.

    Attributes
    ----------
    data : ndarray, shape ``grid.shape``
        float64 for population (people per cell, 0 where no data) and terrain
        (metres, NaN where no data); int64 for classes (-1 where no data).
    missing_cells : int
        Grid cells the source does not cover (no data after resampling).
    source_total : float
        Population only: people in source pixels whose centres fall inside
        the grid (NaN for other kinds).
    correction : float
        Population only: the factor applied so the grid total equals
        ``source_total`` (1.0 when GDAL's result already matched; NaN for
        other kinds).
    """

    data: np.ndarray
    missing_cells: int
    source_total: float = float("nan")
    correction: float = float("nan")
    nonfinite: int = 0


def _open(path):
    import rasterio
    from rasterio.errors import RasterioIOError

    path = Path(path)
    if not path.exists():
        raise MissingInputError(f"{where(path)}not found; check the path")
    if path.is_dir():
        raise InputError(f"{where(path)}is a folder; give a raster file (GeoTIFF)")
    try:
        return rasterio.open(path)
    except RasterioIOError as err:
        raise InputError(f"{where(path)}is not a raster GDAL can read; give a GeoTIFF") from err


def raster_bounds(path) -> tuple[tuple[float, float, float, float], CRS]:
    """``(xmin, ymin, xmax, ymax)`` of a raster in its own CRS, and that CRS, without reading pixels.

    Raises
    ------
    MissingInputError, InputError, CRSError
        As :func:`read_raster`.
    """
    with _open(path) as ds:
        if ds.crs is None:
            raise CRSError(f"{where(path)}has no coordinate reference system; "
                           "set one (e.g. gdal_edit.py -a_srs EPSG:XXXX) and try again")
        b = ds.bounds
        return (b.left, b.bottom, b.right, b.top), CRS.from_user_input(ds.crs)


def read_raster(path, band: int = 1, *, within=None, memory_limit_bytes: int | None = None) -> RasterLayer:
    """Read one band of a raster file (or only the window a study needs) and check it can be used.

    Parameters
    ----------
    path : str or pathlib.Path
        A GeoTIFF or any raster GDAL reads.
    band : int, default 1
        1-based band number.
    within : (bounds, crs), optional
        Read only the pixels covering ``bounds`` (xmin, ymin, xmax, ymax in
        ``crs``), plus two pixels of padding: a continent-wide raster costs
        only the study area's memory.
    memory_limit_bytes : int, optional
        Refuse, before reading, when the pixels to read would need more
        memory than this (default: half the memory available now).

    Returns
    -------
    RasterLayer

    Raises
    ------
    MissingInputError
        The file does not exist.
    InputError
        The file is not a raster, has no such band, holds no data at all in
        the window, does not overlap ``within``, or is too large to read
        (the message states the size).
    CRSError
        The raster has no coordinate reference system.
    """
    from rasterio.windows import Window, from_bounds

    path = Path(path)
    with _open(path) as ds:
        if ds.count < band or band < 1:
            raise InputError(f"{where(path)}has {ds.count} band(s), band {band} asked for; choose 1..{ds.count}")
        if ds.crs is None:
            raise CRSError(f"{where(path)}has no coordinate reference system; "
                           "set one (e.g. gdal_edit.py -a_srs EPSG:XXXX) and try again")
        if ds.transform.is_identity:
            raise InputError(f"{where(path)}has no georeferencing (identity transform); georeference it first")
        full = Window(0, 0, ds.width, ds.height)
        window = full
        if within is not None:
            from rasterio.warp import transform_bounds

            bounds, crs = within
            try:
                b = transform_bounds(crs, ds.crs, *bounds, densify_pts=21)
            except Exception as err:  # pyproj/GDAL raise several kinds for impossible transforms
                raise InputError(f"{where(path)}the study area cannot be transformed to the raster's CRS "
                                 f"({err}); reproject the raster first") from err
            w = from_bounds(*b, transform=ds.transform)
            w = Window(w.col_off - 2, w.row_off - 2, w.width + 4, w.height + 4).round_offsets().round_lengths()
            try:
                window = w.intersection(full)
            except Exception:   # rasterio raises WindowError when they do not meet
                raise InputError(f"{where(path)}does not overlap the study area; give a raster covering it "
                                 "(check its CRS)") from None
        nbytes = int(window.width) * int(window.height) * 8 * 3
        limit = memory_limit_bytes if memory_limit_bytes is not None else available_memory_bytes() // 2
        if nbytes > limit:
            raise InputError(f"{where(path)}the part to read is {int(window.width):,} x {int(window.height):,} "
                             f"pixels (about {nbytes / 2**30:,.1f} GiB in memory), above the limit of "
                             f"{limit / 2**30:,.1f} GiB; clip the raster to the study area or resample it coarser")
        data = ds.read(band, masked=True, window=window).astype(np.float64)
        arr = np.ma.filled(data, np.nan)
        nonfinite = int((~np.isfinite(np.ma.getdata(data)) & ~np.ma.getmaskarray(data)).sum())
        arr[~np.isfinite(arr)] = np.nan
        if np.all(np.isnan(arr)):
            raise InputError(f"{where(path)}band {band} is no data everywhere"
                             f"{' in the study area' if within is not None else ''}; "
                             "check the file or its nodata value")
        return RasterLayer(path, arr, ds.window_transform(window), CRS.from_user_input(ds.crs), nonfinite)


def _sum_resampling_available() -> bool:
    from rasterio.enums import Resampling

    return hasattr(Resampling, "sum")


def _source_total_inside(layer: RasterLayer, grid: Grid, values: np.ndarray) -> float:
    """People in source pixels whose centres fall inside the grid."""
    from pyproj import Transformer

    rows, cols = np.nonzero(values > 0)
    if rows.size == 0:
        return 0.0
    t = layer.transform
    xs = t.c + (cols + 0.5) * t.a + (rows + 0.5) * t.b
    ys = t.f + (cols + 0.5) * t.d + (rows + 0.5) * t.e
    if not CRS.from_user_input(layer.crs).equals(grid.crs):
        tr = Transformer.from_crs(layer.crs, grid.crs, always_xy=True)
        xs, ys = tr.transform(xs, ys)
    r, c = grid.index(xs, ys)
    inside = r >= 0
    return float(values[rows[inside], cols[inside]].sum())


def resample_to_grid(layer: RasterLayer, grid: Grid, kind: str) -> Resampled:
    """Bring ``layer`` onto ``grid`` with :func:`rasterio.warp.reproject`.

    Parameters
    ----------
    layer : RasterLayer
        As returned by :func:`read_raster`, in any CRS.
    grid : Grid
        The analysis grid (working CRS, metres).
    kind : {"population", "terrain", "classes"}
        ``population``: people per pixel; no data counts as no people; the
        result is people per grid cell.  GDAL's ``sum`` resampling spreads
        each pixel over the cells it overlaps by area; on a GDAL without it,
        ``average`` times (cell area / pixel area) is used.  The grid total is
        then scaled to the people in source pixels whose centres fall inside
        the grid (the factor is returned as ``correction``; it differs from 1
        only by the small area distortion of a change of CRS and by pixels
        cut by the grid edge).  ``terrain``: elevation, metres, bilinear.
        ``classes``: integer classes, nearest.

    Returns
    -------
    Resampled

    Raises
    ------
    OptionError
        Unknown ``kind``.
    InputError
        The raster does not overlap the grid; population has negative counts;
        classes are not whole numbers.

    Notes
    -----
    Memory: one float64 copy of the source and one of the grid.
    """
    from rasterio.enums import Resampling
    from rasterio.warp import reproject, transform_bounds

    if kind not in RESAMPLING_KINDS:
        raise OptionError(f"unknown raster kind '{kind}'; choose one of {', '.join(RESAMPLING_KINDS)}")
    path = layer.path
    src = layer.data
    rows, cols = src.shape
    t = layer.transform
    corners_x = [t.c, t.c + cols * t.a, t.c + rows * t.b, t.c + cols * t.a + rows * t.b]
    corners_y = [t.f, t.f + cols * t.d, t.f + rows * t.e, t.f + cols * t.d + rows * t.e]
    sb = (min(corners_x), min(corners_y), max(corners_x), max(corners_y))
    try:
        gb = transform_bounds(layer.crs, grid.crs, *sb, densify_pts=21)
    except Exception as err:  # pyproj/GDAL raise several kinds for impossible transforms
        raise InputError(f"{where(path)}cannot be transformed to the working CRS {grid.crs.to_string()} "
                         f"({err}); reproject it first") from err
    xb = grid.bounds
    if not (gb[0] < xb[2] and gb[2] > xb[0] and gb[1] < xb[3] and gb[3] > xb[1]):
        raise InputError(f"{where(path)}does not overlap the study extent (raster {_fmt(gb)}, "
                         f"study {_fmt(xb)} in {grid.crs.to_string()}); give a raster covering the study area")

    dst_kw = dict(dst_transform=grid.transform, dst_crs=grid.crs, src_transform=layer.transform,
                  src_crs=layer.crs)
    if kind == "population":
        valid = np.isfinite(src)
        if np.any(src[valid] < 0):
            r, c = np.argwhere(valid & (src < 0))[0]
            raise InputError(f"{where(path)}negative population {src[r, c]:g} at row {r}, column {c}; "
                             "population counts must be zero or more (fix the nodata value or the data)")
        values = np.where(valid, src, 0.0)
        dst = np.zeros(grid.shape, dtype=np.float64)
        if _sum_resampling_available():
            reproject(values, dst, resampling=Resampling.sum, src_nodata=None, dst_nodata=None,
                      init_dest_nodata=False, **dst_kw)
        else:  # pragma: no cover - GDAL < 3.1
            reproject(values, dst, resampling=Resampling.average, src_nodata=None, dst_nodata=None,
                      init_dest_nodata=False, **dst_kw)
            pix_area = abs(layer.transform.a * layer.transform.e - layer.transform.b * layer.transform.d)
            pix_area_m2 = pix_area if layer.crs.is_projected else None
            if pix_area_m2 is None:
                raise InputError(f"{where(path)}population in a geographic CRS needs GDAL >= 3.1 "
                                 "('sum' resampling); reproject the raster to a metric CRS first")
            dst *= grid.cell_m ** 2 / pix_area_m2
        dst[~np.isfinite(dst)] = 0.0
        dst[dst < 0] = 0.0
        total_in = _source_total_inside(layer, grid, values)
        got = float(dst.sum())
        if total_in == 0 and got == 0:
            correction = 1.0
        elif got > 0:
            correction = total_in / got
            dst *= correction
        else:
            correction = float("nan")
        cover = np.zeros(grid.shape, dtype=np.float64)
        reproject(valid.astype(np.float64), cover, resampling=Resampling.max, src_nodata=None,
                  dst_nodata=None, init_dest_nodata=False, **dst_kw)
        return Resampled(dst, int((cover <= 0).sum()), total_in, correction, layer.nonfinite)

    if kind == "terrain":
        dst = np.full(grid.shape, np.nan, dtype=np.float64)
        reproject(src, dst, resampling=Resampling.bilinear, src_nodata=np.nan, dst_nodata=np.nan, **dst_kw)
        return Resampled(dst, int(np.isnan(dst).sum()))

    valid = np.isfinite(src)
    if np.any(src[valid] != np.round(src[valid])):
        r, c = np.argwhere(valid & (src != np.round(src)))[0]
        raise InputError(f"{where(path)}class value {src[r, c]:g} at row {r}, column {c} is not a whole "
                         "number; give an integer class raster")
    dst = np.full(grid.shape, np.nan, dtype=np.float64)
    reproject(src, dst, resampling=Resampling.nearest, src_nodata=np.nan, dst_nodata=np.nan, **dst_kw)
    missing = np.isnan(dst)
    out = np.where(missing, -1, dst).astype(np.int64)
    return Resampled(out, int(missing.sum()))


def _fmt(b) -> str:
    return "(" + ", ".join(f"{v:.0f}" for v in b) + ")"
