"""Read point layers that carry a number per point: hubs with a capacity, settlements with a population.

Every refusal names the file, the layer, the feature (its source feature id)
and the field, then what to do.  Features without a point (or without a
kind, when kinds are asked for) are left out and listed in ``notes`` for the
caller to report; nothing is dropped silently.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ...errors import CRSError, LayerError, MissingInputError, where

__all__ = ["WeightedPoints", "read_weighted_points"]


@dataclass
class WeightedPoints:
    """Points in the network's CRS with an id, an optional kind and a value each.

    Attributes
    ----------
    xy : ndarray of float64, shape (n, 2)
        Working-CRS coordinates (metres).
    ids : ndarray of object, shape (n,)
        The id field's values, else the row number from 1 (as ``read_points``).
    kinds : ndarray of object or None
    values : ndarray of float64, shape (n,)
        The value field (capacity, population), or the default.
    fids : ndarray, shape (n,)
        Source feature ids (for messages).
    path, layer : the source, for messages.
    notes : list of str
        What was left out.
    """

    xy: np.ndarray
    ids: np.ndarray
    kinds: np.ndarray | None
    values: np.ndarray
    fids: np.ndarray
    path: object
    layer: str | None
    notes: list = field(default_factory=list)

    @property
    def label(self) -> str:
        return where(self.path, self.layer)

    def take(self, sel) -> "WeightedPoints":
        sel = np.asarray(sel)
        return WeightedPoints(self.xy[sel], self.ids[sel], None if self.kinds is None else self.kinds[sel],
                              self.values[sel], self.fids[sel], self.path, self.layer, list(self.notes))


def _fields(gdf) -> str:
    return ", ".join(map(str, gdf.columns.drop(gdf.geometry.name)))


def read_weighted_points(ref, crs, *, what: str, value_field: str | None = None, value_name: str = "value",
                         value_option: str = "--value-field", default: float = 1.0, required: bool = False,
                         id_field: str | None = None, id_option: str = "--id-field",
                         kind_field: str | None = None, kind_option: str = "--kind-field") -> WeightedPoints:
    """Read a point layer with one number per point, reprojected to ``crs``.

    Parameters
    ----------
    ref : str or LayerRef
        ``path`` or ``path:layername``.
    crs : CRS-like
        The network's working CRS.
    what : str
        What the points are, plural (``hubs``, ``settlements``, ``candidates``), for messages.
    value_field : str, optional
        Field holding the number; without it every point gets ``default``
        (refused when ``required``).
    value_name, value_option : str
        How messages name the value (``capacity``) and its option (``--capacity-field``).
    id_field, kind_field : str, optional
        Unique ids (else the row number from 1) and kinds.

    Returns
    -------
    WeightedPoints

    Raises
    ------
    MissingInputError
        A named field does not exist.
    LayerError
        A value missing, not a number, negative or not finite (zero is
        allowed); an id missing or repeated; a multi-point of several points.
    CRSError
        The layer has no CRS.
    """
    from ...ingest.layers import parse_layer_ref, read_layer

    ref = parse_layer_ref(ref)
    try:
        gdf = read_layer(ref, expect="points")
    except CRSError as err:
        raise CRSError(f"{where(ref.path, ref.layer)}the {what} layer has no CRS (a Shapefile without its "
                       ".prj?); set its CRS in a GIS and try again") from err
    loc = where(ref.path, ref.layer)
    notes: list[str] = []
    fids = gdf.index.to_numpy()
    n = len(gdf)
    # ids
    if id_field is not None:
        if id_field not in gdf.columns:
            raise MissingInputError(f"{loc}has no field '{id_field}' for the {what} ids (fields: {_fields(gdf)}); "
                                    f"check {id_option}")
        col = gdf[id_field]
        if col.isna().any():
            raise LayerError(f"{where(ref.path, ref.layer, fids[col.isna().to_numpy()][0], id_field)}has no id; "
                             "give every feature an id")
        dup = col.duplicated(keep=False).to_numpy()
        if dup.any():
            a, b = fids[dup][:2]
            raise LayerError(f"{where(ref.path, ref.layer, field=id_field)}id {col[dup].iloc[0]!r} is used by "
                             f"features {a} and {b}; ids must be unique")
        ids = col.to_numpy(object)
    else:
        ids = np.arange(1, n + 1, dtype=np.int64).astype(object)
    # kinds
    kinds = None
    keep = np.ones(n, bool)
    if kind_field is not None:
        if kind_field not in gdf.columns:
            raise MissingInputError(f"{loc}has no field '{kind_field}' for the {what} kinds "
                                    f"(fields: {_fields(gdf)}); check {kind_option}")
        kinds = gdf[kind_field].to_numpy(object)
        nokind = pd.isna(gdf[kind_field]).to_numpy()
        if nokind.any():
            notes.append(f"{loc}{int(nokind.sum())} {what} without a kind in '{kind_field}' are left out "
                         f"(first: feature {fids[nokind][0]})")
            keep &= ~nokind
    # geometry: one point per feature
    import shapely

    geom = gdf.geometry.to_numpy()
    empty = (pd.isna(gdf.geometry) | gdf.geometry.is_empty).to_numpy()
    if empty.any():
        notes.append(f"{loc}{int(empty.sum())} {what} without a point are left out "
                     f"(first: feature {fids[empty][0]})")
        keep &= ~empty
    parts = np.zeros(n, np.int64)
    parts[~empty] = shapely.get_num_geometries(geom[~empty])
    multi = parts > 1
    if multi.any():
        k = int(np.nonzero(multi)[0][0])
        raise LayerError(f"{where(ref.path, ref.layer, fids[k])}is a multi-point of {parts[k]} points; "
                         f"give one point per feature (split it in a GIS)")
    # values
    if value_field is not None:
        if value_field not in gdf.columns:
            raise MissingInputError(f"{loc}has no field '{value_field}' for the {what} {value_name} "
                                    f"(fields: {_fields(gdf)}); check {value_option}")
        raw = gdf[value_field]
        num = pd.to_numeric(raw, errors="coerce").to_numpy(dtype=np.float64, na_value=np.nan)
        missing = pd.isna(raw).to_numpy()
        bad_text = ~missing & np.isnan(num)
        for mask, msg in ((missing & keep, f"no {value_name}; give every feature a {value_name} of zero or more"),
                          (bad_text & keep, None)):
            if mask.any():
                k = int(np.nonzero(mask)[0][0])
                text = msg or f"{raw.iloc[k]!r} is not a number; give a {value_name} of zero or more"
                raise LayerError(f"{where(ref.path, ref.layer, fids[k], value_field)}{text}")
        bad = keep & (~np.isfinite(num) | (num < 0))
        if bad.any():
            k = int(np.nonzero(bad)[0][0])
            what_v = "negative" if num[k] < 0 else "not a finite number:"
            raise LayerError(f"{where(ref.path, ref.layer, fids[k], value_field)}{what_v} {value_name} {num[k]:g}; "
                             f"give zero or more")
        values = num
    else:
        if required:
            raise MissingInputError(f"{loc}no field named for the {what} {value_name}; give {value_option}")
        values = np.full(n, float(default))
    gdf = gdf.loc[keep]
    if len(gdf) == 0:
        raise LayerError(f"{loc}no {what} with a point are left; give a layer of points")
    pts = gdf.to_crs(crs).geometry.to_numpy()
    pts = np.array([p if p.geom_type == "Point" else shapely.get_geometry(p, 0) for p in pts], dtype=object)
    xy = shapely.get_coordinates(pts)
    return WeightedPoints(xy, ids[keep], None if kinds is None else kinds[keep], values[keep], fids[keep],
                          ref.path, ref.layer, notes)
