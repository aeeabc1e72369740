"""Read point layers (hubs, origins, destinations): ids, kinds, one point per part.

Shared by the commands and the study pipeline, so both read inputs the same way.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import LayerError, MissingInputError, where

__all__ = ["Points", "read_points"]


@dataclass
class Points:
    """Points read from a layer, in the network's CRS."""

    xy: np.ndarray          # (p, 2), working CRS
    ids: np.ndarray         # (p,) object: id per point
    kinds: np.ndarray | None  # (p,) object, or None
    label: str              # for messages
    src_crs: object
    notes: list = field(default_factory=list)   # what was left out, for the caller to report
    frame: object = None    # the kept features (one row per point), in the network's CRS


def read_points(ref, crs, *, id_field=None, kind_field=None, what="hubs", id_key="hub_id_field",
                kind_key="hub_kind_field", assume_crs=None) -> Points:
    """Read a point layer (hubs, origins, destinations), reprojected to the network's CRS.

    Ids: the ``id_field`` values (duplicates refused), else the row number
    from 1.  ``id_key`` and ``kind_key`` name the options that gave the
    fields, for messages (the CLI and study loader show them as the flag or
    dotted key the user typed).  Multi-points become one point per part sharing the id.  Features
    without geometry (or without a kind, when kinds are asked for) are left
    out and listed in ``notes``.
    """
    from ..ingest.layers import parse_layer_ref, read_layer

    ref = parse_layer_ref(ref)
    notes = []
    gdf = read_layer(ref, expect="points", assume_crs=assume_crs)
    loc = where(ref.path, ref.layer)
    row_ids = np.arange(1, len(gdf) + 1, dtype=np.int64)
    if id_field is not None:
        if id_field not in gdf.columns:
            raise MissingInputError(f"{loc}has no field '{id_field}' for the {what} ids "
                                    f"(fields: {', '.join(map(str, gdf.columns.drop(gdf.geometry.name)))}); "
                                    f"check {id_key}", key=id_key)
        col = gdf[id_field]
        if col.isna().any():
            fid = gdf.index[col.isna().to_numpy()][0]
            raise LayerError(f"{where(ref.path, ref.layer, fid, id_field)}has no id; give every feature an id")
        dup = col[col.duplicated(keep=False)]
        if len(dup):
            fids = list(gdf.index[col.duplicated(keep=False).to_numpy()][:2])
            raise LayerError(f"{where(ref.path, ref.layer, field=id_field)}id {dup.iloc[0]!r} is used by "
                             f"features {fids[0]} and {fids[1]}; ids must be unique")
        ids = col.to_numpy(object)
    else:
        ids = row_ids.astype(object)
    kinds = None
    if kind_field is not None:
        if kind_field not in gdf.columns:
            raise MissingInputError(f"{loc}has no field '{kind_field}' for the hub kinds "
                                    f"(fields: {', '.join(map(str, gdf.columns.drop(gdf.geometry.name)))}); "
                                    f"check {kind_key}", key=kind_key)
        kinds = gdf[kind_field].to_numpy(object)
    geom = gdf.geometry
    empty = (geom.isna() | geom.is_empty).to_numpy().copy()
    if kinds is not None:
        nokind = np.array([k is None or (isinstance(k, float) and np.isnan(k)) for k in kinds])
        if nokind.any():
            notes.append(f"{loc}{int(nokind.sum())} {what} without a kind in '{kind_field}' are left out "
                 f"(first: id {ids[nokind][0]})")
        empty |= nokind
    if empty.any():
        notes.append(f"{loc}{int(empty.sum())} {what} without a point are left out (first: id {ids[empty][0]})")
    gdf = gdf.loc[~empty]
    ids = ids[~empty]
    kinds = kinds[~empty] if kinds is not None else None
    if len(gdf) == 0:
        raise LayerError(f"{loc}no {what} with a point are left; give a layer of points")
    src_crs = gdf.crs
    gdf = gdf.to_crs(crs)
    # one point per part
    import shapely

    parts = shapely.get_parts(gdf.geometry.values, return_index=True)
    pts, owner = parts
    xy = shapely.get_coordinates(pts)
    kept = gdf.iloc[owner].reset_index(drop=True)
    return Points(xy, ids[owner], kinds[owner] if kinds is not None else None, loc, src_crs, notes, kept)


