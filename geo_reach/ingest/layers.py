"""Read vector layers from anything GDAL reads through pyogrio, and validate them.

A layer is named on the command line as ``path`` or ``path:layername``.
Every problem is raised as an :class:`~geo_reach.errors.InputError` naming
the file, the layer, the feature and what to do.
"""

from __future__ import annotations

import logging
import warnings
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from ..errors import CRSError, InputError, LayerError, MissingInputError, where

__all__ = ["LayerRef", "parse_layer_ref", "list_layers", "read_frame", "read_layer", "parse_crs", "GEOM_FAMILIES",
           "layer_set", "exists", "FORMATS", "PARQUET_SUFFIXES", "LAYER_SET_SUFFIXES", "check_coordinates",
           "MAX_PROJECTED_M"]

GEOM_FAMILIES = {
    "lines": {"LineString", "MultiLineString", "LinearRing"},
    "points": {"Point", "MultiPoint"},
    "polygons": {"Polygon", "MultiPolygon"},
}


#: Largest absolute projected coordinate taken as a place on Earth, in metres.  The equator is about
#: 4.0e7 m long and zone-prefixed eastings (Gauss-Krueger zones numbered into the easting) reach about
#: 4e7 m, so anything beyond 1e8 m is a fault in the data (or its CRS), not a place.
MAX_PROJECTED_M = 1e8


@dataclass(frozen=True)
class LayerRef:
    """A layer in a file: ``path`` and optional ``layer`` name."""

    path: Path
    layer: str | None = None

    @property
    def label(self) -> str:
        """Short name used in ``src_layer`` and messages: the layer name, else the file stem."""
        return self.layer if self.layer else self.path.stem

    def __str__(self) -> str:
        return f"{self.path}:{self.layer}" if self.layer else str(self.path)


def parse_layer_ref(text) -> LayerRef:
    """Parse ``path`` or ``path:layername``.

    A path that exists as given wins over a ``:layer`` reading, so file names
    holding a colon still work.

    Examples
    --------
    >>> parse_layer_ref("roads.gpkg:main_roads")
    LayerRef(path=PosixPath('roads.gpkg'), layer='main_roads')
    >>> parse_layer_ref("roads.shp").layer is None
    True
    """
    if isinstance(text, LayerRef):
        return text
    text = str(text)
    if exists(text) or ":" not in text:
        return LayerRef(Path(text))
    path, _, layer = text.rpartition(":")
    return LayerRef(Path(path), layer or None)


#: Suffixes read as GeoParquet (through pyarrow and geopandas, not a GDAL driver the wheels may lack).
PARQUET_SUFFIXES = (".parquet", ".geoparquet")
#: One-layer formats whose ``NAME.<layer>.<ext>`` files may be named together as ``NAME.<ext>`` (what
#: ``geo-reach build -o NAME.<ext>`` writes).
LAYER_SET_SUFFIXES = (".parquet", ".geoparquet", ".fgb", ".geojson", ".shp")
#: The formats the messages name: each is read and written in the tests (tests/test_formats.py).
FORMATS = "a GeoPackage, Shapefile, GeoJSON, FlatGeobuf or GeoParquet file"


def layer_set(path) -> dict[str, Path]:
    """``{layer: file}`` of the one-layer files ``NAME.<layer>.<ext>`` that ``NAME.<ext>`` stands for.

    Empty when ``path`` exists itself, has another suffix, or no such file is there.
    """
    path = Path(path)
    if path.exists() or path.suffix.lower() not in LAYER_SET_SUFFIXES:
        return {}
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        return {}
    head = f"{path.stem}."
    out = {}
    for f in sorted(folder.iterdir()):
        if f.is_file() and f.name.startswith(head) and f.suffix.lower() == path.suffix.lower():
            layer = f.name[len(head):-len(f.suffix)]
            if layer and "." not in layer:
                out[layer] = f
    return out


def exists(path) -> bool:
    """``path`` is a file or folder, or stands for a set of one-layer files (:func:`layer_set`)."""
    return Path(path).exists() or bool(layer_set(path))


def _parquet_problem(path: Path) -> str | None:
    """Why ``path`` is not GeoParquet (None when it is)."""
    import pyarrow.parquet as pq

    try:
        meta = pq.read_schema(path).metadata or {}
    except Exception as err:  # pyarrow raises ArrowInvalid, OSError ...
        return f"not a Parquet file ({_short(err)})"
    if b"geo" not in meta:
        return "a Parquet file without GeoParquet metadata (no 'geo' key): write it as GeoParquet, e.g. with " \
               "geopandas to_parquet or GDAL's Parquet driver"
    return None


def list_layers(path) -> list[str]:
    """Names of the vector layers in ``path`` (raises if the file is missing or not vector data).

    A GeoParquet file holds one layer, named as the file's stem; ``NAME.<ext>``
    standing for ``NAME.<layer>.<ext>`` files lists those layers.
    """
    import pyogrio

    path = Path(path)
    if not path.exists():
        found = layer_set(path)
        if found:
            return list(found)
        raise MissingInputError(f"{where(path)}not found; check the path")
    if path.suffix.lower() in PARQUET_SUFFIXES and path.is_file():
        problem = _parquet_problem(path)
        if problem:
            raise InputError(f"{where(path)}cannot be read as vector data: {problem}")
        return [path.stem]
    # GDAL's notices arrive as RuntimeWarnings (several lines each on stderr): when the file cannot be read
    # the error below carries GDAL's reason; when it can, each notice is logged as one line.
    with warnings.catch_warnings(record=True) as notices:
        warnings.simplefilter("always", RuntimeWarning)
        try:
            names = [str(n) for n in pyogrio.list_layers(path)[:, 0]]
        except Exception as err:  # pyogrio raises several DataSourceError kinds
            raise InputError(f"{where(path)}cannot be read as vector data ({_short(err)}); give {FORMATS}") \
                from err
    for n in notices:
        if issubclass(n.category, RuntimeWarning):
            logging.getLogger("geo_reach").warning("%sGDAL: %s", where(path), " ".join(str(n.message).split()))
        else:
            warnings.warn_explicit(n.message, n.category, n.filename, n.lineno)
    return names


def _short(err) -> str:
    return str(err).strip().splitlines()[0][:200] if str(err).strip() else type(err).__name__


def read_frame(path, layer=None, columns=None):
    """Read one layer as a GeoDataFrame with the source feature ids as the index.

    The index holds the feature id as the source format numbers it (the
    GeoPackage fid, the Shapefile record number from 0, ...), as pyogrio reads it.
    """
    import geopandas as gpd
    import pyogrio

    path = Path(path)
    names = list_layers(path)
    if layer is not None and layer not in names:
        raise MissingInputError(f"{where(path, layer)}no such layer; the file has: {', '.join(names)}")
    members = layer_set(path)
    if layer is None and len(names) > 1 and (path.suffix.lower() == ".gpkg" or members):
        raise InputError(f"{where(path)}holds {len(names)} layers ({', '.join(names)}); "
                         f"name one as {path}:LAYER")
    if members:
        return read_frame(members[layer or names[0]], None, columns)
    suffix = path.suffix.lower()
    try:
        if suffix in PARQUET_SUFFIXES:
            gdf = gpd.read_parquet(path, columns=columns)
            gdf.index.name = "fid"
            return gdf
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            gdf = pyogrio.read_dataframe(path, layer=layer, columns=columns, fid_as_index=True)
    except Exception as err:
        raise InputError(f"{where(path, layer)}cannot be read ({_short(err)}); check the file with a GIS") from err
    gdf.index.name = "fid"
    return gdf


def read_layer(ref, expect: str = "lines", assume_crs=None, allow_empty: bool = False):
    """Read and validate a layer of the expected geometry family.

    Parameters
    ----------
    ref : str or LayerRef
        ``path`` or ``path:layername``.
    expect : {'lines', 'points', 'polygons'}
    assume_crs : CRS-like, optional
        Used only when the layer has no CRS; without it such a layer is refused.

    Returns
    -------
    GeoDataFrame
        Index = source feature ids; CRS always set.

    Raises
    ------
    MissingInputError, LayerError, CRSError
    """

    ref = parse_layer_ref(ref)
    gdf = read_frame(ref.path, ref.layer)
    loc = where(ref.path, ref.layer)
    geoms = gdf.geometry
    present = geoms[~(geoms.isna() | geoms.is_empty)]
    if len(present) == 0:
        if allow_empty:
            return gdf
        raise LayerError(f"{loc}the layer has no features with geometry; give a layer holding {expect}")
    kinds = set(present.geom_type.unique())
    if "GeometryCollection" in kinds:
        # Collections are exploded by callers; judge by their parts.
        kinds = (kinds - {"GeometryCollection"}) | set(present[present.geom_type == "GeometryCollection"]
                                                          .explode(index_parts=False).geom_type.unique())
    allowed = GEOM_FAMILIES[expect]
    if not kinds & allowed:
        fid = present.index[0]
        raise LayerError(f"{where(ref.path, ref.layer, fid)}is a {present.iloc[0].geom_type}, "
                         f"but {expect} are expected here; give a layer of {expect}")
    if gdf.crs is None:
        if assume_crs is None:
            raise CRSError(f"{loc}the layer has no CRS (a Shapefile without its .prj?); "
                           "add one in a GIS or give assume_crs (e.g. EPSG:32633)", key="assume_crs")
        gdf = gdf.set_crs(parse_crs(assume_crs, "assume_crs"))
    return gdf


def parse_crs(value, key: str = "crs"):
    """A :class:`pyproj.CRS` from what the user gave (``EPSG:32633``, WKT, PROJ string ...).

    Raises
    ------
    CRSError
        pyproj does not know it; the message names the option (``key``) and
        gives an example.

    Examples
    --------
    >>> parse_crs("EPSG:32633").to_epsg()
    32633
    """
    from pyproj import CRS
    from pyproj.exceptions import CRSError as ProjCRSError

    try:
        return CRS.from_user_input(value)
    except (ProjCRSError, TypeError, ValueError) as err:
        raise CRSError(f"{key} {str(value)[:80]!r}: not a coordinate reference system pyproj knows; give one "
                       "such as EPSG:32633", key=key) from err


def check_coordinates(gdf: Any, path: Any = None, layer: str | None = None) -> None:
    """Refuse coordinates that cannot be a place on Earth in the layer's CRS.

    Every x and y must be finite; in a geographic CRS longitude must lie
    within -360..360 and latitude within -90..90 degrees; in a projected CRS
    each coordinate, in metres, within :data:`MAX_PROJECTED_M`.  (Such values
    would otherwise break the spatial indexing and reprojection with an
    error naming no feature.)

    Parameters
    ----------
    gdf : GeoDataFrame
        Index = source feature ids; CRS set (without one only finiteness is checked).
    path, layer : optional
        Where the layer came from, for the message.

    Raises
    ------
    InputError
        One line naming the file, layer and first such feature, the
        coordinate, how many features have one, and what to do.
    """
    import numpy as np
    import shapely
    from pyproj import CRS

    geoms = np.asarray(gdf.geometry.values, dtype=object)
    xy, owner = shapely.get_coordinates(geoms, return_index=True)
    if len(xy) == 0:
        return
    bad = ~np.isfinite(xy).all(axis=1)
    crs = CRS.from_user_input(gdf.crs) if gdf.crs is not None else None
    rule = "coordinates must be finite numbers"
    with np.errstate(invalid="ignore"):
        if crs is not None and crs.is_geographic:
            bad |= (np.abs(xy[:, 0]) > 360) | (np.abs(xy[:, 1]) > 90)
            rule = "longitude must lie within -360..360 and latitude within -90..90 degrees"
        elif crs is not None and crs.is_projected:
            factor = crs.axis_info[0].unit_conversion_factor if crs.axis_info else 1.0
            bad |= (np.abs(xy) * factor > MAX_PROJECTED_M).any(axis=1)
            rule = f"projected coordinates must lie within {MAX_PROJECTED_M / 1000:,.0f} km of the origin"
    if not bad.any():
        return
    rows = np.unique(owner[bad])
    x, y = xy[np.nonzero(bad)[0][0]]
    if not (np.isfinite(x) and np.isfinite(y)):
        rule = "coordinates must be finite numbers"
    more = f" (and {len(rows) - 1} more feature(s))" if len(rows) > 1 else ""
    crs_name = f" in {crs.name}" if crs is not None else ""
    raise InputError(f"{where(path, layer, gdf.index[rows[0]])}coordinate ({x:.6g}, {y:.6g}) is not a place on "
                     f"Earth{crs_name}{more}: {rule}; fix the feature, or check the layer's CRS")
