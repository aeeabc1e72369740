"""Write rasters as cloud-optimised GeoTIFFs (COG), atomically, and check a file's COG layout.

A COG is a GeoTIFF laid out for reading parts of it over HTTP range
requests: internal tiles, reduced-resolution copies (overviews), the
full-resolution image's IFD (image file directory) first, every IFD before
the pixel data, and the data of the smallest overview first.  GDAL's
``COG`` driver writes exactly this; where a GDAL build lacks it, the same
layout is made with the ``GTiff`` driver (tiles, overviews built first,
``COPY_SRC_OVERVIEWS=YES``).

:func:`cog_problems` reads a file's TIFF structure with a small parser of
its own (the TIFF 6.0 and BigTIFF headers and IFDs) and reports what breaks
the layout; it follows the checks of GDAL's
``validate_cloud_optimized_geotiff.py`` (from memory) and OGC 21-026.

References
----------
.. [1] OGC 21-026 (2023). OGC Cloud Optimized GeoTIFF Standard, version 1.0.
.. [2] Adobe (1992). TIFF Revision 6.0 (IFD and tile tags); BigTIFF
   proposal (2007, 64-bit offsets, magic 43).
.. [3] Rouault, E. GDAL ``validate_cloud_optimized_geotiff.py`` and the GDAL
   COG driver documentation.
"""

from __future__ import annotations

import math
import struct
from pathlib import Path

import numpy as np

from ..errors import CRSError, OptionError, OutputError, where
from .atomic import atomic_path, check_output

__all__ = ["write_cog", "cog_problems", "tiff_layout", "BLOCK_PX", "OVERVIEW_OVER_PX"]

#: Internal tile size (pixels, square).
BLOCK_PX = 512
#: Overviews are made when the image is larger than this many pixels in either direction.
OVERVIEW_OVER_PX = 512

_DTYPES = ("uint8", "int8", "uint16", "int16", "uint32", "int32", "float32", "float64")


def _check_args(path, array, transform, crs, nodata, dtype):
    from affine import Affine
    from rasterio.crs import CRS as RioCRS

    arr = np.asarray(array)
    if arr.ndim == 2:
        arr = arr[np.newaxis]
    if arr.ndim != 3 or arr.shape[1] == 0 or arr.shape[2] == 0 or arr.shape[0] == 0:
        raise OptionError(f"{where(path)}raster array must be 2-D (rows, cols) or 3-D (bands, rows, cols) "
                          f"and not empty; got shape {np.shape(array)}")
    dtype = np.dtype(dtype if dtype is not None else arr.dtype)
    if dtype.name not in _DTYPES:
        raise OptionError(f"{where(path)}dtype {dtype.name} cannot be written; choose one of {', '.join(_DTYPES)}")
    if not isinstance(transform, Affine):
        raise OptionError(f"{where(path)}transform must be an affine.Affine (pixel to CRS coordinates), "
                          f"got {type(transform).__name__}")
    if transform.is_degenerate:
        raise OptionError(f"{where(path)}transform {tuple(transform)[:6]} is degenerate; give the real pixel size")
    if crs is None:
        raise CRSError(f"{where(path)}raster has no CRS; give the CRS of the transform")
    try:
        rio_crs = RioCRS.from_user_input(crs.to_wkt() if hasattr(crs, "to_wkt") else crs)
    except Exception as err:
        raise CRSError(f"{where(path)}CRS {crs!r} is not understood ({err}); give an EPSG code or WKT") from err
    if nodata is None:
        raise OptionError(f"{where(path)}nodata must be given (the value of cells with no data)")
    nodata = float(nodata)
    if dtype.kind in "iu":
        info = np.iinfo(dtype)
        if not (math.isfinite(nodata) and nodata == int(nodata) and info.min <= nodata <= info.max):
            raise OptionError(f"{where(path)}nodata {nodata:g} does not fit dtype {dtype.name} "
                              f"({info.min}..{info.max}, whole numbers); choose another nodata or dtype")
        nodata = int(nodata)
        if arr.dtype.kind == "f":
            if np.isnan(arr).any():
                arr = np.where(np.isnan(arr), nodata, arr)
            finite = arr[np.isfinite(arr)]
            if finite.size and (finite.min() < info.min or finite.max() > info.max
                                or not np.array_equal(finite, np.round(finite))):
                raise OptionError(f"{where(path)}values do not fit dtype {dtype.name}; choose a float dtype")
        elif arr.dtype.kind in "iu" and arr.size and (arr.min() < info.min or arr.max() > info.max):
            raise OptionError(f"{where(path)}values {arr.min()}..{arr.max()} do not fit dtype {dtype.name}")
        out = arr.astype(dtype)
    else:
        out = arr.astype(dtype)
        if not math.isnan(nodata):
            if np.finfo(dtype).min > nodata or np.finfo(dtype).max < nodata:
                raise OptionError(f"{where(path)}nodata {nodata:g} does not fit dtype {dtype.name}")
            out = np.where(np.isnan(out), dtype.type(nodata), out)  # NaN cells are written as nodata
    return np.ascontiguousarray(out), rio_crs, nodata, dtype


def _resampling(dtype, resampling):
    if resampling is not None:
        return str(resampling).upper()
    return "AVERAGE" if dtype.kind == "f" else "NEAREST"


def _overview_factors(height: int, width: int, block: int) -> list[int]:
    factors, f = [], 2
    while max(math.ceil(height / (f // 2)), math.ceil(width / (f // 2))) > block:
        factors.append(f)
        f *= 2
    return factors


def _write(tmp: Path, arr, transform, crs, nodata, dtype, resampling: str, driver: str):
    import rasterio
    from rasterio.enums import Resampling
    from rasterio.io import MemoryFile
    from rasterio.shutil import copy as rio_copy

    count, height, width = arr.shape
    profile = dict(driver="GTiff", height=height, width=width, count=count, dtype=dtype.name, crs=crs,
                   transform=transform, nodata=nodata, tiled=True, blockxsize=BLOCK_PX, blockysize=BLOCK_PX)
    with MemoryFile() as mem:
        with mem.open(**profile) as ds:
            ds.write(arr)
            if driver == "GTiff":
                factors = _overview_factors(height, width, OVERVIEW_OVER_PX)
                if factors:
                    ds.build_overviews(factors, getattr(Resampling, resampling.lower()))
        with mem.open() as src:
            predictor = 3 if dtype.kind == "f" else 2
            if driver == "COG":
                rio_copy(src, str(tmp), driver="COG", COMPRESS="DEFLATE", PREDICTOR="YES",
                         BLOCKSIZE=BLOCK_PX, OVERVIEWS="AUTO", OVERVIEW_RESAMPLING=resampling,
                         RESAMPLING=resampling, BIGTIFF="IF_SAFER")
            else:
                rio_copy(src, str(tmp), driver="GTiff", TILED="YES", BLOCKXSIZE=BLOCK_PX, BLOCKYSIZE=BLOCK_PX,
                         COMPRESS="DEFLATE", PREDICTOR=predictor, COPY_SRC_OVERVIEWS="YES", BIGTIFF="IF_SAFER")
    with rasterio.open(tmp) as check:  # fail here, not in the user's GIS, if something is off
        if check.crs is None or check.nodata is None and not (isinstance(nodata, float) and math.isnan(nodata)):
            raise OutputError(f"{where(tmp)}GDAL wrote no CRS or nodata")


def _cog_driver_available() -> bool:
    import rasterio

    with rasterio.Env() as env:
        return "COG" in env.drivers()


def write_cog(path, array, transform, crs, nodata, dtype=None, overwrite: bool = False,
              resampling: str | None = None) -> Path:
    """Write a raster as a cloud-optimised GeoTIFF, atomically.

    Parameters
    ----------
    path : str or Path
        The ``.tif`` file to write (built under a temporary name, then renamed).
    array : ndarray, shape (rows, cols) or (bands, rows, cols)
        Cell values; row 0 is the row at the transform's origin.  In a float
        array, NaN cells are written as ``nodata``.
    transform : affine.Affine
        Pixel (col, row) to CRS coordinates (metres in a projected CRS).
    crs : pyproj.CRS, rasterio CRS, EPSG code or WKT
        The CRS of ``transform``.
    nodata : float
        The value of cells with no data; must fit ``dtype`` (NaN allowed for floats).
    dtype : str or numpy dtype, optional
        Type stored; default the array's.
    overwrite : bool
        Replace an existing file (only once the new one is complete).
    resampling : str, optional
        Overview resampling (GDAL name); default ``average`` for floats and
        ``nearest`` for integers (classes must not be averaged).

    Returns
    -------
    Path

    Raises
    ------
    OptionError
        Bad array shape, dtype, transform or a nodata that does not fit.
    CRSError
        No or unknown CRS.
    OutputExistsError, OutputError
        As :func:`geo_reach.export.atomic.check_output`; also when GDAL fails.

    Notes
    -----
    Tiles of :data:`BLOCK_PX` pixels, DEFLATE compression with a predictor,
    overviews halving each time until the smallest fits in one tile (so
    none for an image of at most :data:`OVERVIEW_OVER_PX` pixels each way).
    Memory: the array plus one compressed copy in GDAL's memory file system.

    References
    ----------
    .. [1] OGC 21-026 (2023). OGC Cloud Optimized GeoTIFF Standard 1.0.

    Examples
    --------
    >>> import tempfile, os
    >>> from affine import Affine
    >>> p = os.path.join(tempfile.mkdtemp(), "m.tif")
    >>> a = np.arange(12, dtype="float32").reshape(3, 4)
    >>> write_cog(p, a, Affine(100, 0, 500000, 0, -100, 6570000), 32727, nodata=-1).name
    'm.tif'
    >>> cog_problems(p)
    []
    """
    path = Path(path)
    if path.suffix.lower() not in (".tif", ".tiff"):
        raise OptionError(f"{where(path)}a GeoTIFF file name must end in .tif or .tiff; choose another name")
    arr, rio_crs, nodata, dtype = _check_args(path, array, transform, crs, nodata, dtype)
    check_output(path, overwrite, "raster")
    driver = "COG" if _cog_driver_available() else "GTiff"
    with atomic_path(path, suffix=path.suffix) as tmp:
        try:
            _write(tmp, arr, transform, rio_crs, nodata, dtype, _resampling(dtype, resampling), driver)
        except OutputError:
            raise
        except Exception as err:  # rasterio/GDAL errors
            msg = " ".join(str(err).split())[:200]
            raise OutputError(f"{where(path)}could not be written ({msg}); check the folder is writable "
                              "and has free space") from err
    return path


# ------------------------------------------------------------------ TIFF structure
_TYPE_SIZE = {1: 1, 2: 1, 3: 2, 4: 4, 5: 8, 6: 1, 7: 1, 8: 2, 9: 4, 10: 8, 11: 4, 12: 8, 16: 8, 17: 8, 18: 8}
_TYPE_FMT = {1: "B", 3: "H", 4: "I", 6: "b", 8: "h", 9: "i", 16: "Q", 17: "q", 18: "Q"}
_WANTED = {254: "subfile_type", 256: "width", 257: "height", 259: "compression", 273: "strip_offsets",
           277: "samples", 322: "tile_width", 323: "tile_height", 324: "tile_offsets", 325: "tile_byte_counts"}


def tiff_layout(path) -> dict:
    """Read the structure of a TIFF or BigTIFF file: its IFDs in file order of the chain.

    Returns
    -------
    dict
        ``bigtiff`` (bool), ``byte_order`` ("II"/"MM") and ``ifds``: a list of
        dicts with ``offset`` (of the IFD), ``width``, ``height``,
        ``subfile_type``, ``compression``, ``tile_width``, ``tile_height``
        (``None`` when striped) and ``data_offsets`` (tile or strip offsets).

    Raises
    ------
    InputError
        Not a TIFF file.
    """
    from ..errors import InputError

    path = Path(path)
    with open(path, "rb") as f:
        head = f.read(16)
        if head[:2] not in (b"II", b"MM"):
            raise InputError(f"{where(path)}not a TIFF file (no II/MM byte-order mark)")
        e = "<" if head[:2] == b"II" else ">"
        magic = struct.unpack(e + "H", head[2:4])[0]
        if magic == 42:
            big, first = False, struct.unpack(e + "I", head[4:8])[0]
        elif magic == 43:
            big, first = True, struct.unpack(e + "Q", head[8:16])[0]
        else:
            raise InputError(f"{where(path)}not a TIFF file (magic {magic}, expected 42 or 43)")
        cnt_fmt, ent_size, val_size, off_fmt = ("Q", 20, 8, "Q") if big else ("H", 12, 4, "I")
        ifds, seen, offset = [], set(), first
        while offset and offset not in seen and len(ifds) < 1000:
            seen.add(offset)
            f.seek(offset)
            n = struct.unpack(e + cnt_fmt, f.read(struct.calcsize(cnt_fmt)))[0]
            raw = f.read(n * ent_size)
            nxt = struct.unpack(e + off_fmt, f.read(struct.calcsize(off_fmt)))[0]
            tags = {}
            for k in range(n):
                ent = raw[k * ent_size:(k + 1) * ent_size]
                tag, typ = struct.unpack(e + "HH", ent[:4])
                if tag not in _WANTED or typ not in _TYPE_FMT:
                    continue
                count = struct.unpack(e + ("Q" if big else "I"), ent[4:4 + (8 if big else 4)])[0]
                size = _TYPE_SIZE[typ] * count
                valfield = ent[ent_size - val_size:]
                if size <= val_size:
                    data = valfield[:size]
                else:
                    where_at = struct.unpack(e + off_fmt, valfield)[0]
                    pos = f.tell()
                    f.seek(where_at)
                    data = f.read(size)
                    f.seek(pos)
                tags[_WANTED[tag]] = list(struct.unpack(e + _TYPE_FMT[typ] * count, data))
            tiled = "tile_width" in tags
            ifds.append({
                "offset": offset,
                "width": tags.get("width", [0])[0],
                "height": tags.get("height", [0])[0],
                "subfile_type": tags.get("subfile_type", [0])[0],
                "compression": tags.get("compression", [1])[0],
                "tile_width": tags["tile_width"][0] if tiled else None,
                "tile_height": tags["tile_height"][0] if tiled else None,
                "data_offsets": tags.get("tile_offsets" if tiled else "strip_offsets", []),
            })
            offset = nxt
    return {"bigtiff": big, "byte_order": head[:2].decode(), "ifds": ifds}


def cog_problems(path) -> list[str]:
    """What keeps ``path`` from being a cloud-optimised GeoTIFF (empty list: none found).

    Checks, in the spirit of GDAL's COG validator and OGC 21-026:

    1. a TIFF or BigTIFF file;
    2. the first IFD is the full-resolution image (not a reduced-resolution one);
    3. every image (full resolution and overviews) is tiled, tiles a multiple of 16 px;
    4. overviews exist when the image is larger than 512 px either way, and
       come after the full-resolution IFD in decreasing size;
    5. IFDs are stored at increasing offsets and all before any pixel data;
    6. pixel data of the smallest overview comes first and that of the full
       resolution image last; within an image, tiles are in increasing
       offset (row-major) order.
    """
    try:
        layout = tiff_layout(path)
    except Exception as err:
        return [f"cannot read TIFF structure: {err}"]
    ifds = layout["ifds"]
    problems = []
    if not ifds:
        return ["no image file directory"]
    images = [d for d in ifds if not d["subfile_type"] & 4]  # leave out masks
    main = images[0]
    if main["subfile_type"] & 1:
        problems.append("the first IFD is a reduced-resolution image, not the full-resolution one")
    for i, d in enumerate(images):
        if d["tile_width"] is None:
            problems.append(f"image {i} ({d['width']}x{d['height']}) is not tiled")
        elif d["tile_width"] % 16 or d["tile_height"] % 16:
            problems.append(f"image {i} tile size {d['tile_width']}x{d['tile_height']} is not a multiple of 16")
    ovr = images[1:]
    if max(main["width"], main["height"]) > OVERVIEW_OVER_PX and not ovr:
        problems.append(f"image is {main['width']}x{main['height']} (> {OVERVIEW_OVER_PX} px) but has no overviews")
    for i, d in enumerate(ovr):
        prev = images[i]
        if not d["subfile_type"] & 1:
            problems.append(f"IFD {i + 1} follows the main image but is not marked reduced-resolution")
        if d["width"] >= prev["width"] and d["height"] >= prev["height"]:
            problems.append(f"overview {i} ({d['width']}x{d['height']}) is not smaller than the image before it")
    offs = [d["offset"] for d in ifds]
    if offs != sorted(offs):
        problems.append("IFDs are not stored in increasing offset order")
    data = [o for d in ifds for o in d["data_offsets"] if o]
    if data and max(offs) > min(data):
        problems.append("an IFD is stored after pixel data (IFDs must all come first)")
    firsts = [min((o for o in d["data_offsets"] if o), default=None) for d in images]
    known = [(i, o) for i, o in enumerate(firsts) if o is not None]
    for (i, a), (j, b) in zip(known, known[1:]):
        if not a > b:
            problems.append(f"pixel data of image {i} does not come after that of smaller image {j}")
    for i, d in enumerate(images):
        o = [x for x in d["data_offsets"] if x]
        if o != sorted(o):
            problems.append(f"tiles of image {i} are not in increasing offset order")
    return problems
