"""Write result layers to one OGC GeoPackage, atomically.

GDAL's GeoPackage driver (through pyogrio) does the encoding: the SQLite
header's ``application_id`` ("GPKG") and ``user_version``, the
``gpkg_contents``, ``gpkg_spatial_ref_sys`` (with the CRS's WKT) and
``gpkg_geometry_columns`` tables, GeoPackageBinary geometries and an R-tree
spatial index per feature table.  This module adds what GDAL leaves to the
caller: one file for all layers, nothing half-written under the user's name,
checked layer names, booleans stored as 0/1 integers (the convention every
layer of this tool uses, e.g. ``oneway``), and one-line errors.

References
----------
.. [1] OGC 12-128r18 (2021). OGC GeoPackage Encoding Standard, version 1.3.1.
"""

from __future__ import annotations

import contextlib
import re
from pathlib import Path
from typing import Mapping

import numpy as np
import pandas as pd

from ..errors import CRSError, LayerError, OptionError, OutputError, where
from .atomic import atomic_path, check_output

__all__ = ["write_layers", "write_network", "write_column_descriptions", "GPKG_VERSION", "LAYER_NAME"]

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
                    msg = " ".join(str(err).split())[:200]
                    raise OutputError(f"{where(path, name)}could not be written ({msg}); "
                                      "check the folder is writable and has free space") from err
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


def write_network(path, result, overwrite: bool = False, issues_only: bool = False) -> Path:
    """Write a built network's layers (``edges``, ``nodes``, ``network_issues``) into one GeoPackage.

    ``result`` is a :class:`~geo_reach.network.build.BuildResult`; with
    ``issues_only`` (the ``check`` command) only ``network_issues`` is written.
    Every layer's description carries the caution.
    """
    from .._meta import CAUTION

    layers = {} if issues_only else {"edges": result.network.edges_frame(), "nodes": result.network.nodes_frame()}
    layers["network_issues"] = result.issues
    return write_layers(path, layers, overwrite=overwrite, descriptions={k: CAUTION for k in layers})
