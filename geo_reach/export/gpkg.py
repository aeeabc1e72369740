"""Write result layers to one OGC GeoPackage, atomically (and a network as one-layer files of other formats).

GDAL's GeoPackage driver (through pyogrio) does the encoding: the SQLite
header's ``application_id`` ("GPKG") and ``user_version``, the
``gpkg_contents``, ``gpkg_spatial_ref_sys`` (with the CRS's WKT) and
``gpkg_geometry_columns`` tables, GeoPackageBinary geometries and an R-tree
spatial index per feature table.  This module adds what GDAL leaves to the
caller: one file for all layers, nothing half-written under the user's name,
checked layer names, booleans stored as 0/1 integers (the convention every
layer of this tool uses, e.g. ``oneway``), and one-line errors.

A built network may also be written as one file per layer (:func:`write_network`):
GeoParquet for large networks (read by GDAL's Parquet driver, DuckDB, geopandas,
Arrow tools), FlatGeobuf, GeoJSON or Shapefile.

References
----------
.. [1] OGC 12-128r18 (2021). OGC GeoPackage Encoding Standard, version 1.3.1.
.. [2] OGC (2023). GeoParquet specification, version 1.0.0.
.. [3] FlatGeobuf specification (flatgeobuf.org), version 3.
.. [4] Butler, H. et al. (2016). RFC 7946: The GeoJSON Format (a projected CRS is
   kept with the GeoJSON 2008 ``crs`` member, as GDAL writes it).
.. [5] ESRI (1998). ESRI Shapefile Technical Description.
"""

from __future__ import annotations

import contextlib
import os
import re
from pathlib import Path
from typing import Mapping

import numpy as np
import pandas as pd

from ..errors import CRSError, LayerError, OptionError, OutputError, where
from .atomic import atomic_path, check_output, write_error

__all__ = ["write_layers", "write_network", "write_column_descriptions", "write_layer_file", "network_files",
           "network_layers", "layer_file", "LAYER_FILE_FORMATS", "NETWORK_FORMATS", "GPKG_VERSION", "LAYER_NAME"]

#: GeoPackage version written (``user_version`` 10400).
GPKG_VERSION = "1.4"
#: Allowed layer (table) names: short, lower case, starting with a letter.
LAYER_NAME = re.compile(r"^[a-z][a-z0-9_]{0,62}$")
_RESERVED = ("gpkg_", "rtree_", "sqlite_")


def _check_name(path, name) -> str:
    if not isinstance(name, str) or not LAYER_NAME.match(name):
        raise OptionError(f"{where(path, name)}layer name {name!r} is not allowed; use lower-case letters, "
                          "digits and '_', starting with a letter, at most 63 characters")
    if name.startswith(_RESERVED):
        raise OptionError(f"{where(path, name)}layer names starting with {', '.join(_RESERVED)} are reserved "
                          "by GeoPackage and SQLite; choose another name")
    return name


def _prepare(path, name, frame) -> pd.DataFrame:
    """Validate one layer and return a copy ready for pyogrio (booleans as 0/1 integers)."""
    import geopandas as gpd

    if not isinstance(frame, pd.DataFrame):
        raise OptionError(f"{where(path, name)}expected a GeoDataFrame or DataFrame, got {type(frame).__name__}")
    if isinstance(frame, gpd.GeoDataFrame):
        if frame._geometry_column_name not in frame.columns:
            raise LayerError(f"{where(path, name)}has no active geometry column; set one with set_geometry()")
        if frame.crs is None:
            raise CRSError(f"{where(path, name)}has no CRS; every layer written needs one (set it with set_crs())")
    lowered = [str(c).lower() for c in frame.columns]
    dup = sorted({c for c in lowered if lowered.count(c) > 1})
    if dup:
        raise LayerError(f"{where(path, name)}field names {dup} differ only in case; GeoPackage field names "
                         "are case-insensitive, rename one of each pair")
    if "fid" in lowered:
        raise LayerError(f"{where(path, name, field='fid')}'fid' is the GeoPackage feature id column; "
                         "rename the field")
    out = frame.copy()
    for col in out.columns:
        s = out[col]
        if s.dtype == bool:
            out[col] = s.astype(np.int32)
        elif isinstance(s.dtype, pd.BooleanDtype):
            out[col] = s.astype("Int32")
    return out


def write_layers(path, layers: Mapping[str, pd.DataFrame], overwrite: bool = False,
                 descriptions: Mapping[str, str] | None = None) -> Path:
    """Write several layers into one GeoPackage, all or nothing.

    Parameters
    ----------
    path : str or Path
        The ``.gpkg`` file to write.  It is built under a temporary name in the
        same folder and renamed into place only when every layer is written.
    layers : mapping of str to GeoDataFrame or DataFrame
        Layer name -> table, written in the mapping's order.  GeoDataFrames
        become feature tables (each in its own CRS, which must be set); plain
        DataFrames become attribute tables (``data_type = 'attributes'``).
        Boolean columns are stored as 0/1 integers.
    overwrite : bool
        Replace an existing ``path`` (only once the new file is complete).
    descriptions : mapping of str to str, optional
        Text for ``gpkg_contents.description`` per layer.

    Returns
    -------
    Path
        ``path``.

    Raises
    ------
    OptionError
        Not a ``.gpkg`` name, no layers, or a bad layer name.
    CRSError
        A GeoDataFrame has no CRS.
    LayerError
        Field names clash (case-insensitively) or one is named ``fid``.
    OutputExistsError
        ``path`` exists and ``overwrite`` is false.
    OutputError
        The folder is missing or is a file, or GDAL fails to write a layer;
        an existing ``path`` is left as it was.

    Notes
    -----
    Spatial indexes are built when each layer is written (GDAL's default for
    GeoPackage), in O(n log n) time per layer.

    References
    ----------
    .. [1] OGC 12-128r18 (2021). OGC GeoPackage Encoding Standard 1.3.1.

    Examples
    --------
    >>> import geopandas as gpd, shapely, tempfile, os
    >>> pts = gpd.GeoDataFrame({"name": ["a"]}, geometry=[shapely.Point(500000, 6500000)], crs=32727)
    >>> folder = tempfile.mkdtemp()
    >>> write_layers(os.path.join(folder, "out.gpkg"), {"hubs": pts}).name
    'out.gpkg'
    """
    import pyogrio

    path = Path(path)
    if path.suffix.lower() != ".gpkg":
        raise OptionError(f"{where(path)}a GeoPackage file name must end in .gpkg; choose another name")
    if not layers:
        raise OptionError(f"{where(path)}no layers to write")
    names = [_check_name(path, n) for n in layers]
    if len({n for n in names}) != len(names):
        raise OptionError(f"{where(path)}layer names repeat")
    prepared = {n: _prepare(path, n, layers[n]) for n in names}
    check_output(path, overwrite, "GeoPackage")
    from .stamp import _tell_gdal, current_output_time

    _tell_gdal(current_output_time())   # gpkg_contents.last_change: the run's fixed time, not the clock
    descriptions = dict(descriptions or {})

    with atomic_path(path, suffix=".gpkg") as tmp:
        try:
            for i, (name, frame) in enumerate(prepared.items()):
                layer_options = {"SPATIAL_INDEX": "YES"}
                if name in descriptions:
                    layer_options["DESCRIPTION"] = str(descriptions[name])
                try:
                    pyogrio.write_dataframe(
                        frame, tmp, layer=name, driver="GPKG",
                        dataset_options={"VERSION": GPKG_VERSION} if i == 0 else None,
                        layer_options=layer_options,
                    )
                except Exception as err:  # pyogrio/GDAL raise several kinds
                    raise write_error(path, err, name) from err
            write_column_descriptions(tmp, {n: list(f.columns) for n, f in prepared.items()}, path)
        finally:
            for extra in ("-journal", "-wal", "-shm"):
                with contextlib.suppress(FileNotFoundError):
                    Path(str(tmp) + extra).unlink()
    return path


def write_column_descriptions(gpkg, columns: Mapping[str, list], shown=None) -> int:
    """Describe every field the glossary knows in the standard ``gpkg_data_columns`` table.

    OGC 12-128 (GeoPackage 1.3.1), clause F.9 "Schema": the table holds, per
    feature or attribute table column, a title and a description that
    desktop GIS shows beside the field; the extension is registered in
    ``gpkg_extensions``.  Text comes from :mod:`geo_reach.glossary`; fields
    it does not know get no row.  Returns the number of rows written.

    References
    ----------
    .. [1] OGC 12-128r18 (2021). OGC GeoPackage Encoding Standard 1.3.1, Annex F.9.
    """
    import sqlite3

    from .. import glossary

    rows = []
    for table, cols in columns.items():
        for c in cols:
            if c in ("geometry", "geom", "fid"):
                continue
            d = glossary.describe(str(c))
            if d is not None:
                rows.append((table, str(c), str(c), str(c).replace("_", " "), d))
    try:
        db = sqlite3.connect(gpkg)
        try:
            db.execute("CREATE TABLE IF NOT EXISTS gpkg_data_columns (table_name TEXT NOT NULL, column_name TEXT NOT "
                       "NULL, name TEXT, title TEXT, description TEXT, mime_type TEXT, constraint_name TEXT, "
                       "CONSTRAINT pk_gdc PRIMARY KEY (table_name, column_name), CONSTRAINT gdc_tn UNIQUE "
                       "(table_name, name))")
            db.execute("CREATE TABLE IF NOT EXISTS gpkg_extensions (table_name TEXT, column_name TEXT, "
                       "extension_name TEXT NOT NULL, definition TEXT NOT NULL, scope TEXT NOT NULL, "
                       "CONSTRAINT ge_tce UNIQUE (table_name, column_name, extension_name))")
            db.executemany("INSERT OR REPLACE INTO gpkg_data_columns (table_name, column_name, name, title, "
                           "description) VALUES (?, ?, ?, ?, ?)", rows)
            db.execute("DELETE FROM gpkg_extensions WHERE table_name = 'gpkg_data_columns'")
            db.execute("INSERT INTO gpkg_extensions VALUES ('gpkg_data_columns', NULL, 'gpkg_schema', "
                       "'http://www.geopackage.org/spec/#extension_schema', 'read-write')")
            db.commit()
        finally:
            db.close()
    except sqlite3.Error as err:
        raise OutputError(f"{where(shown or gpkg)}the field descriptions could not be written ({err}); check the "
                          "folder is writable and has free space") from err
    return len(rows)


# ------------------------------------------------------------------ other formats: one file per layer
#: Vector output formats by file suffix: (GDAL driver or "GeoParquet", side-file suffixes).  A GeoPackage
#: holds every layer in one file; the others hold one layer each, so ``NAME.<ext>`` stands for the files
#: ``NAME.<layer>.<ext>`` (the naming of the ``.sld`` style files beside a GeoPackage).
LAYER_FILE_FORMATS = {
    ".parquet": ("GeoParquet", ()),
    ".geoparquet": ("GeoParquet", ()),
    ".fgb": ("FlatGeobuf", ()),
    ".geojson": ("GeoJSON", ()),
    ".shp": ("ESRI Shapefile", (".shx", ".dbf", ".prj", ".cpg")),
}
#: What ``-o`` of ``build`` and ``check`` accepts, for messages.
NETWORK_FORMATS = "GeoPackage (.gpkg), GeoParquet (.parquet), FlatGeobuf (.fgb), GeoJSON (.geojson), Shapefile (.shp)"
_SHP_FIELD_MAX, _SHP_TEXT_MAX = 10, 254   # dBASE limits (ESRI 1998, Shapefile Technical Description; common practice)


def network_layers(issues_only: bool = False) -> tuple[str, ...]:
    return ("network_issues",) if issues_only else ("edges", "nodes", "network_issues")


def layer_file(path, layer: str) -> Path:
    """``NAME.<ext>`` -> ``NAME.<layer>.<ext>``.

    >>> layer_file("out/net.parquet", "edges").as_posix()
    'out/net.edges.parquet'
    """
    path = Path(path)
    return path.with_name(f"{path.stem}.{layer}{path.suffix}")


def network_files(path, issues_only: bool = False, sides: bool = True) -> list[Path]:
    """Every file ``write_network(path)`` writes (a Shapefile's side files too, unless ``sides`` is false).

    Raises
    ------
    OptionError
        ``path`` ends in a suffix that is not one of :data:`NETWORK_FORMATS`.
    """
    path = Path(path)
    suffix = path.suffix.lower()
    if suffix == ".gpkg":
        return [path]
    if suffix not in LAYER_FILE_FORMATS:
        if path.is_dir():
            raise OptionError(f"{where(path)}is a folder; give a file name for the network, ending in one of: "
                              f"{NETWORK_FORMATS}")
        raise OptionError(f"{where(path)}cannot write a network as '{path.suffix or path.name}'; end the name in one "
                          f"of: {NETWORK_FORMATS}")
    sides = LAYER_FILE_FORMATS[suffix][1] if sides else ()
    out = []
    for layer in network_layers(issues_only):
        f = layer_file(path, layer)
        out += [f] + [f.with_suffix(s) for s in sides]
    return out


def _check_shapefile(path, name, frame) -> None:
    cols = [str(c) for c in frame.columns if c != getattr(frame, "_geometry_column_name", None)]
    long = [c for c in cols if len(c.encode()) > _SHP_FIELD_MAX]
    if long:
        raise OptionError(f"{where(path, name, field=long[0])}field names over {_SHP_FIELD_MAX} characters do not "
                          "fit a Shapefile; write a GeoPackage (.gpkg) or GeoParquet (.parquet) instead")
    for c in cols:
        s = frame[c]
        if s.dtype == object or pd.api.types.is_string_dtype(s.dtype):
            n = s.dropna().astype(str).map(lambda v: len(v.encode())).max() if s.notna().any() else 0
            if n > _SHP_TEXT_MAX:
                raise OptionError(f"{where(path, name, field=c)}text of {n} bytes does not fit a Shapefile "
                                  f"field ({_SHP_TEXT_MAX}); write a GeoPackage (.gpkg) or GeoParquet (.parquet)")


def write_layer_file(path, name: str, frame, into=None) -> None:
    """Write one layer as a one-layer file in the format of ``path``'s suffix.

    ``into`` maps each file of the layer (``path`` and side files) to where it
    is written (an :class:`~geo_reach.export.atomic.OutputSet`'s temporaries);
    the layer is first written under its own name into a hidden temporary
    folder, so names inside the file (GeoJSON ``name``, Shapefile side files)
    are the final ones.  GeoParquet is written with pyarrow (GeoParquet 1.0
    metadata, geometry as WKB, CRS as PROJJSON); FlatGeobuf without its
    spatial index, so the features keep their order (ids are row numbers).
    """
    import shutil

    import pyogrio

    from .atomic import temp_name

    path = Path(path)
    driver, sides = LAYER_FILE_FORMATS[path.suffix.lower()]
    frame = _prepare(path, name, frame)
    if driver == "ESRI Shapefile":
        _check_shapefile(path, name, frame)
    folder = path.parent if str(path.parent) else Path(".")
    work = folder / temp_name()
    work.mkdir()
    try:
        target = work / path.name
        try:
            if driver == "GeoParquet":
                frame.to_parquet(target, index=False)
            else:
                opts = {"SPATIAL_INDEX": "NO"} if driver == "FlatGeobuf" else {}
                pyogrio.write_dataframe(frame, target, layer=name if driver == "GeoJSON" else None, driver=driver,
                                        layer_options=opts or None)
        except Exception as err:  # pyarrow/pyogrio/GDAL raise several kinds
            raise write_error(path, err, name) from err
        for f in [path] + [path.with_suffix(s) for s in sides]:
            src = work / f.name
            dest = into.path(f) if into is not None else f
            if src.exists():        # a missing side file is reported by the OutputSet ("was not written")
                os.replace(src, dest)
    finally:
        shutil.rmtree(work, ignore_errors=True)


def write_network(path, result, overwrite: bool = False, issues_only: bool = False, into=None) -> Path:
    """Write a built network's layers (``edges``, ``nodes``, ``network_issues``).

    ``path`` ending in ``.gpkg`` gives one GeoPackage holding the layers;
    ``NAME.parquet`` (GeoParquet, for large networks), ``NAME.fgb``,
    ``NAME.geojson`` or ``NAME.shp`` give one file per layer,
    ``NAME.edges.<ext>``, ``NAME.nodes.<ext>`` and ``NAME.network_issues.<ext>``
    (:func:`network_files`), all written or none.  ``result`` is a
    :class:`~geo_reach.network.build.BuildResult`; with ``issues_only`` (the
    ``check`` command) only ``network_issues`` is written.  A GeoPackage
    layer's description carries the caution.  ``into`` is an
    :class:`~geo_reach.export.atomic.OutputSet` holding :func:`network_files`
    (a command that writes other files in the same set).
    """
    from .._meta import CAUTION
    from .atomic import OutputSet

    path = Path(path)
    files = network_files(path, issues_only)
    layers = {} if issues_only else {"edges": result.network.edges_frame(), "nodes": result.network.nodes_frame()}
    layers["network_issues"] = result.issues
    if path.suffix.lower() == ".gpkg":
        if into is not None:
            write_layers(into.path(path), layers, overwrite=True, descriptions={k: CAUTION for k in layers})
            return path
        return write_layers(path, layers, overwrite=overwrite, descriptions={k: CAUTION for k in layers})
    if into is None:
        for f in files:
            check_output(f, overwrite, "network file")
        with OutputSet(files) as out:
            for name, frame in layers.items():
                write_layer_file(layer_file(path, name), name, frame, into=out)
        return path
    for name, frame in layers.items():
        write_layer_file(layer_file(path, name), name, frame, into=into)
    return path
