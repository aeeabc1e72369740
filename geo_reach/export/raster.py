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
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import CRSError, OptionError, OutputError, where
from .atomic import atomic_path, check_output, write_error

__all__ = ["write_cog", "cog_problems", "tiff_layout", "BLOCK_PX", "OVERVIEW_OVER_PX", "Category", "hub_categories",
           "write_categories", "category_sld", "write_category_sld", "category_colours", "RASTER_TERMS",
           "write_result_raster", "raster_metadata", "pam_path"]

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


def _write(tmp: Path, arr, transform, crs, nodata, dtype, resampling: str, driver: str, meta=None):
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
            _set_metadata(ds, meta or {})
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


def _set_metadata(ds, meta: dict) -> None:
    """Band descriptions, units and tags (GDAL keeps them in the file's GDAL_METADATA TIFF tag)."""
    for b in range(1, ds.count + 1):
        if meta.get("description"):
            ds.set_band_description(b, str(meta["description"]))
        if meta.get("units") is not None:
            ds.set_band_unit(b, str(meta["units"]))
        if meta.get("band_tags"):
            ds.update_tags(b, **{k: str(v) for k, v in meta["band_tags"].items()})
    if meta.get("tags"):
        ds.update_tags(**{k: str(v) for k, v in meta["tags"].items()})


def _cog_driver_available() -> bool:
    import rasterio

    with rasterio.Env() as env:
        return "COG" in env.drivers()


def write_cog(path, array, transform, crs, nodata, dtype=None, overwrite: bool = False,
              resampling: str | None = None, *, description: str | None = None, units: str | None = None,
              tags: dict | None = None, band_tags: dict | None = None) -> Path:
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
    description, units : str, optional
        Every band's description and unit (GDAL band description and unit
        type; a desktop GIS shows them beside the band).
    tags, band_tags : dict, optional
        Dataset and band metadata items (GDAL metadata, default domain).

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
            _write(tmp, arr, transform, rio_crs, nodata, dtype, _resampling(dtype, resampling), driver,
                   {"description": description, "units": units, "tags": tags, "band_tags": band_tags})
        except OutputError:
            raise
        except Exception as err:  # rasterio/GDAL errors
            raise write_error(path, err) from err
    return path


# ------------------------------------------------------------------ what the result rasters hold
#: File stem -> (glossary name, unit written as the band's unit type).  ``<kind>`` and ``<scenario>``
#: stand for the parts that vary.
RASTER_TERMS = {
    "hub_minutes_change_<scenario>": ("hub_minutes_change", "minutes"),
    "hub_minutes": ("hub_minutes", "minutes"),
    "hub_minutes_<kind>": ("hub_minutes_<kind>", "minutes"),
    "nearest_hub": ("nearest_hub", "category"),
    "nearest_hub_<kind>": ("nearest_hub_<kind>", "category"),
    "connection_m": ("connection_m", "m"),
}


def _raster_term(stem: str):
    import re

    for pattern, (name, unit) in RASTER_TERMS.items():
        rx = "^" + re.escape(pattern).replace(re.escape("<kind>"), "(?P<part>.+)") \
            .replace(re.escape("<scenario>"), "(?P<part>.+)") + "$"
        m = re.match(rx, stem)
        if m:
            part = m.groupdict().get("part")
            return (name.replace("<kind>", part) if part and "<kind>" in name else name), unit, part
    return None


def raster_metadata(stem: str) -> dict:
    """``description``, ``units`` and ``tags`` for a result raster named ``stem`` (``hub_minutes``, ``nearest_hub_clinic`` ...).

    The description is the glossary's name and meaning; the tags carry the
    tool and the caution.

    >>> raster_metadata("hub_minutes_clinic")["description"].split(":")[0]
    'hub_minutes_clinic'
    >>> raster_metadata("hub_minutes_change_new_road")["units"]
    'minutes'
    """
    from .._meta import CAUTION, TOOL, __version__
    from ..glossary import describe

    found = _raster_term(stem)
    tags = {"TIFFTAG_SOFTWARE": f"{TOOL} {__version__}", "CAUTION": CAUTION}
    if found is None:
        return {"description": stem, "units": "", "tags": tags}
    name, unit, part = found
    meaning = describe(name) or ""
    if name == "hub_minutes_change":
        meaning = (f"hub_minutes with scenario {part} minus hub_minutes today (negative: faster); empty where "
                   "neither reaches a hub.")
    if unit == "category":
        meaning += " Cell value = hub number 1..n (0 = none); the categories name each hub."
    return {"description": f"{name}: {meaning}".strip(), "units": unit, "tags": tags}


@dataclass(frozen=True)
class Category:
    """One value of a category raster: the hub number and the hub it stands for."""

    value: int
    hub_id: str
    name: str | None = None
    kind: str | None = None

    @property
    def label(self) -> str:
        """``<hub_id> <name>`` (the id alone for a hub without a name)."""
        return f"{self.hub_id} {self.name}" if self.name else str(self.hub_id)


def hub_categories(hubs) -> list[Category]:
    """The categories of a nearest-hub raster: hub number ``k`` is row ``k - 1`` of the hubs frame.

    ``hubs`` is a frame with ``hub_id`` and optional ``name`` and ``kind``.
    """
    import pandas as pd

    def text(v):
        return None if v is None or (not isinstance(v, str) and pd.isna(v)) else str(v)

    names = hubs["name"].tolist() if "name" in hubs.columns else [None] * len(hubs)
    kinds = hubs["kind"].tolist() if "kind" in hubs.columns else [None] * len(hubs)
    return [Category(i + 1, str(h), text(n), text(k))
            for i, (h, n, k) in enumerate(zip(hubs["hub_id"].tolist(), names, kinds))]


# GDAL raster attribute table codes (gdal.h: GDALRATFieldType and GDALRATFieldUsage, from memory;
# the tests read the table back through GDAL itself).
_GFT_INTEGER, _GFT_STRING = 0, 2
_GFU_GENERIC, _GFU_NAME, _GFU_MINMAX = 0, 2, 5


def pam_path(tif) -> Path:
    """The GDAL PAM side file of a raster: ``<file>.aux.xml``."""
    tif = Path(tif)
    return tif.with_name(tif.name + ".aux.xml")


def write_categories(tif, categories: list[Category], nodata_label: str = "") -> Path:
    """Write the categories of ``tif`` as GDAL category names and a raster attribute table.

    They go into the GDAL PAM side file ``<tif>.aux.xml`` (the place GDAL's
    GeoTIFF driver keeps both; GDAL, QGIS and rasterio's GDAL read it with
    the raster).  The table has fields ``value`` (usage MinMax), ``hub_id``,
    ``name`` (usage Name) and ``kind``; category ``k`` is named
    :attr:`Category.label`.  Written atomically.

    References
    ----------
    .. [1] GDAL documentation: "GDAL Data Model" (category names, raster
       attribute tables) and the PAM ``.aux.xml`` format (GDALPamDataset).
    """
    import xml.etree.ElementTree as ET

    cats = sorted(categories, key=lambda c: c.value)
    root = ET.Element("PAMDataset")
    band = ET.SubElement(root, "PAMRasterBand", band="1")
    names = ET.SubElement(band, "CategoryNames")
    labels = {c.value: c.label for c in cats}
    for v in range(0, (cats[-1].value if cats else 0) + 1):
        ET.SubElement(names, "Category").text = labels.get(v, nodata_label if v == 0 else "")
    rat = ET.SubElement(band, "GDALRasterAttributeTable", tableType="thematic")
    fields = (("value", _GFT_INTEGER, _GFU_MINMAX), ("hub_id", _GFT_STRING, _GFU_GENERIC),
              ("name", _GFT_STRING, _GFU_NAME), ("kind", _GFT_STRING, _GFU_GENERIC))
    for i, (name, typ, usage) in enumerate(fields):
        fd = ET.SubElement(rat, "FieldDefn", index=str(i))
        ET.SubElement(fd, "Name").text = name
        ET.SubElement(fd, "Type").text = str(typ)
        ET.SubElement(fd, "Usage").text = str(usage)
    for r, c in enumerate(cats):
        row = ET.SubElement(rat, "Row", index=str(r))
        for v in (str(c.value), c.hub_id, c.name or "", c.kind or ""):
            ET.SubElement(row, "F").text = v
    ET.indent(root)
    out = pam_path(tif)
    with atomic_path(out, suffix=".xml") as tmp:
        Path(tmp).write_bytes(ET.tostring(root, encoding="utf-8", xml_declaration=False) + b"\n")
    return out


def category_colours(n: int) -> list[str]:
    """``n`` colours for hub categories: hues a golden angle apart, so neighbouring numbers differ.

    >>> category_colours(3)
    ['#d9a362', '#62d9c6', '#d962c9']
    """
    import colorsys

    out = []
    for i in range(n):
        r, g, b = colorsys.hsv_to_rgb((0.0917 + i * 0.381966) % 1.0, 0.55, 0.85)
        out.append("#{:02x}{:02x}{:02x}".format(*(round(x * 255) for x in (r, g, b))))
    return out


def category_sld(categories: list[Category], layer: str, title: str | None = None) -> str:
    """An SLD 1.0.0 raster style: one colour per category, labelled ``<hub_id> <name>``.

    A ``RasterSymbolizer`` whose ``ColorMap`` (``type="values"``, the exact-value
    map GeoServer and QGIS read; readers without it interpolate between
    consecutive whole numbers, which gives the same colours on these whole-number
    cells) has one ``ColorMapEntry`` per hub with its ``label``; value 0 (no hub)
    is transparent.

    References
    ----------
    .. [1] OGC 02-070 (2002). Styled Layer Descriptor Implementation Specification 1.0.0
       (RasterSymbolizer, ColorMap, ColorMapEntry).
    """
    import xml.etree.ElementTree as ET

    from .._meta import CAUTION

    sld, xsi = "http://www.opengis.net/sld", "http://www.w3.org/2001/XMLSchema-instance"
    ET.register_namespace("", sld)
    ET.register_namespace("xsi", xsi)

    def el(parent, tag, text=None, **attrib):
        e = ET.SubElement(parent, f"{{{sld}}}{tag}", attrib)
        if text is not None:
            e.text = text
        return e

    root = ET.Element(f"{{{sld}}}StyledLayerDescriptor", {
        "version": "1.0.0",
        f"{{{xsi}}}schemaLocation": "http://www.opengis.net/sld "
                                    "http://schemas.opengis.net/sld/1.0.0/StyledLayerDescriptor.xsd"})
    nl = el(root, "NamedLayer")
    el(nl, "Name", layer)
    us = el(nl, "UserStyle")
    el(us, "Name", layer)
    el(us, "Title", title or f"{layer}: nearest hub")
    el(us, "Abstract", CAUTION)
    rule = el(el(us, "FeatureTypeStyle"), "Rule")
    el(rule, "Name", "hubs")
    rs = el(rule, "RasterSymbolizer")
    el(rs, "Opacity", "0.8")
    cmap = el(rs, "ColorMap", type="values")
    cats = sorted(categories, key=lambda c: c.value)
    el(cmap, "ColorMapEntry", color="#ffffff", quantity="0", opacity="0", label="no hub reachable")
    for c, colour in zip(cats, category_colours(len(cats))):
        el(cmap, "ColorMapEntry", color=colour, quantity=str(c.value), label=c.label)
    ET.indent(root)
    return ET.tostring(root, encoding="unicode", xml_declaration=False)


def write_category_sld(path, categories: list[Category], layer: str | None = None) -> Path:
    """Write :func:`category_sld` to ``path`` (UTF-8, atomically)."""
    path = Path(path)
    text = '<?xml version="1.0" encoding="UTF-8"?>\n' + category_sld(categories, layer or path.stem) + "\n"
    with atomic_path(path, suffix=".sld") as tmp:
        Path(tmp).write_text(text, encoding="utf-8")
    return path


def write_result_raster(path, array, grid, nodata, *, categories: list[Category] | None = None) -> Path:
    """A result raster of the pipeline: the COG with its band description, units and tags
    (:func:`raster_metadata` of the file's stem), plus, for a nearest-hub raster, its categories
    (:func:`write_categories`) and labelled style (``<stem>.sld``)."""
    path = Path(path)
    meta = raster_metadata(path.stem)
    band_tags = {f"CATEGORY_{c.value}": c.label for c in categories} if categories else None
    write_cog(path, array, grid.transform, grid.crs, nodata, overwrite=True, band_tags=band_tags, **meta)
    if categories is not None:
        write_categories(path, categories)
        write_category_sld(path.with_suffix(".sld"), categories, layer=path.stem)
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
