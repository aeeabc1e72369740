"""Reading and cleaning the input layers into one table of lines in the working CRS.

Per layer: check the options, read it, drop what has no usable geometry
(reported), drop Z/M, explode multi-parts and collections, reproject,
measure the input length, drop zero-length lines, read the attributes
(speed, one-way, level, all-season, class) and turn lines that are one-way
against their digitised direction around.  Then exact duplicate lines are
removed across all layers.  Every change is reported; nothing is silent.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
import shapely
from pyproj import CRS, Transformer

from ..errors import CRSError, InputError, OptionError, where
from ..ingest.layers import LayerRef, parse_layer_ref, read_layer
from .costs import DEFAULT_SPEED_KMH, MODES, feature_speeds, parse_oneway
from .geodesy import geodesic_lengths
from .issues import IssueLog
from .table import NOISE_M

__all__ = ["read_specs", "prepare_lines", "remove_duplicate_features", "FIELD_OPTIONS"]

#: The LayerSpec options that name a field, and what each is in words (for messages).
FIELD_OPTIONS = {"speed_field": "the speed field", "class_field": "the class field",
                 "oneway_field": "the one-way field", "level_field": "the level field",
                 "all_season_field": "the all-season field"}

#: GEOS type ids of LineString, LinearRing, MultiLineString and GeometryCollection.
_LINEAR_OR_COLLECTION = [1, 2, 5, 7]


def _check_spec(i: int, spec: Any) -> None:
    """Refuse a layer's options that are out of range (before anything is read)."""
    if spec.mode not in MODES:
        raise OptionError(f"layer {i + 1}: mode '{spec.mode}' is unknown; choose one of {', '.join(MODES)}")
    if spec.speed_kmh is not None and not (np.isfinite(spec.speed_kmh) and spec.speed_kmh > 0):
        raise OptionError(f"layer {i + 1}: the layer speed (speed_kmh) {spec.speed_kmh:g} must be a positive speed "
                          "in km/h (to close features, leave them out)")
    if not (np.isfinite(spec.boarding_minutes) and spec.boarding_minutes >= 0):
        raise OptionError(f"layer {i + 1}: the boarding penalty (boarding_minutes) {spec.boarding_minutes:g} "
                          "must be zero or more minutes")
    for cls, v in (spec.class_speeds or {}).items():
        if not (np.isfinite(float(v)) and float(v) > 0):
            raise OptionError(f"layer {i + 1}: class speed {cls}={v} must be a positive speed in km/h")


def read_specs(specs: list) -> list[tuple[Any, str, tuple]]:
    """Check the options of each layer and read it.

    Returns
    -------
    list of (GeoDataFrame, label, (path, layer))
        The frame (CRS set), its label for ``src_layer`` and where it came
        from (for messages).

    Raises
    ------
    OptionError, InputError, CRSError
    """
    frames = []
    for i, spec in enumerate(specs):
        _check_spec(i, spec)
        if isinstance(spec.source, (str, LayerRef)) or hasattr(spec.source, "__fspath__"):
            ref = parse_layer_ref(spec.source)
            gdf = read_layer(ref, "lines", assume_crs=spec.assume_crs)
            label = spec.name or ref.label
            loc = (ref.path, ref.layer)
        else:
            gdf = spec.source
            label = spec.name or f"layer{i + 1}"
            loc = (label, None)
            if gdf.crs is None:
                if spec.assume_crs is None:
                    raise CRSError(f"{where(label)}the layer has no CRS; set one or give the CRS to assume "
                                   "(assume_crs)")
                gdf = gdf.set_crs(spec.assume_crs)
        for fld, words in FIELD_OPTIONS.items():
            name = getattr(spec, fld)
            if name is not None and name not in gdf.columns:
                raise InputError(f"{where(*loc)}has no field '{name}' (given as {words}, {fld}); "
                                 f"fields: {', '.join(map(str, gdf.columns.drop(gdf.geometry.name)))}")
        frames.append((gdf, label, loc))
    return frames


class _Layer:
    """One layer being cleaned: its features, where repairs are reported, and the working-CRS transform."""

    def __init__(self, gdf: Any, label: str, crs: CRS, issues: IssueLog, report: dict) -> None:
        self.gdf = gdf
        self.label = label
        self.fids = gdf.index.to_numpy()
        self.n = len(gdf)
        src = CRS.from_user_input(gdf.crs)
        self.tr = None if src.equals(crs) else Transformer.from_crs(src, crs, always_xy=True)
        self.issues = issues
        self.report = report

    def work_xy(self, geom) -> tuple[float, float]:
        """A point on a source-CRS geometry, in the working CRS (issue points are placed there)."""
        c = shapely.get_coordinates(shapely.point_on_surface(geom))[0]
        return (float(c[0]), float(c[1])) if self.tr is None else self.tr.transform(float(c[0]), float(c[1]))

    def drop(self, i: int, reason: str, xy: tuple | None = None) -> None:
        """Report feature ``i`` dropped (with no place unless ``xy`` is given)."""
        self.report["dropped_features"].append({"src_layer": self.label, "src_fid": int(self.fids[i]),
                                                "reason": reason})
        x, y = xy if xy is not None else (None, None)
        self.issues.add("dropped_feature", x, y, reason, self.label, self.fids[i])


def _usable_geometries(lay: _Layer) -> tuple[np.ndarray, np.ndarray]:
    """Geometries with Z/M dropped, and a mask of features that have any (others dropped, reported)."""
    geoms = np.asarray(lay.gdf.geometry.values, dtype=object)
    null = np.array([g is None for g in geoms], dtype=bool) | shapely.is_missing(geoms)
    empty = ~null & shapely.is_empty(geoms)
    for i in np.nonzero(null | empty)[0]:
        lay.drop(i, "no geometry" if null[i] else "empty geometry")
    keep = ~(null | empty)
    zm = np.zeros(lay.n, bool)
    zm[keep] = shapely.has_z(geoms[keep])
    if hasattr(shapely, "has_m"):
        zm[keep] |= shapely.has_m(geoms[keep])
    lay.report["z_m_dropped_features"] += int(zm.sum())
    if zm.any():   # a layer-wide fact: one spot, at the first such feature
        k = int(np.nonzero(zm)[0][0])
        x, y = lay.work_xy(geoms[k])
        lay.issues.add("geometry_repaired", x, y, f"Z/M coordinates dropped from {int(zm.sum())} feature(s) of "
                       "this layer (the network is 2-D)", lay.label, lay.fids[k])
    geoms = geoms.copy()
    geoms[keep] = shapely.force_2d(geoms[keep])
    return geoms, keep


def _all_season(values: pd.Series) -> np.ndarray:
    """All-season flag per feature: 1.0, 0.0, or NaN where not given."""
    aval = pd.to_numeric(values, errors="coerce").to_numpy(float)
    s = values.astype("string").str.strip().str.lower()
    aval = np.where(s.isin(["yes", "true", "y", "t"]).fillna(False).to_numpy(), 1.0, aval)
    aval = np.where(s.isin(["no", "false", "n", "f"]).fillna(False).to_numpy(), 0.0, aval)
    return np.where(np.isnan(aval), np.nan, (aval > 0).astype(float))


def _attributes(spec: Any, lay: _Layer) -> dict[str, Any]:
    """Per-feature attributes of one layer: speed (and what was defaulted), one-way, level, all-season, class."""
    gdf, n = lay.gdf, lay.n
    if spec.mode in DEFAULT_SPEED_KMH:
        speed, defaulted, why, layer_default = feature_speeds(gdf, spec.mode, spec.speed_field, spec.class_field,
                                                              spec.class_speeds, spec.speed_kmh)
    else:
        speed, defaulted, why, layer_default = np.full(n, np.nan), np.zeros(n, bool), None, None
    if layer_default:
        lay.report["default_speeds_used"].append(f"{lay.label}: {layer_default}")
    oneway = parse_oneway(gdf[spec.oneway_field].tolist()) if spec.oneway_field else np.zeros(n, np.int8)
    if spec.level_field:
        level = pd.to_numeric(gdf[spec.level_field], errors="coerce").fillna(0).to_numpy(float)
    else:
        level = np.zeros(n)
    aval = _all_season(gdf[spec.all_season_field]) if spec.all_season_field else np.full(n, np.nan)
    klass = gdf[spec.class_field].astype(object).to_numpy() if spec.class_field else np.full(n, None, object)
    return {"speed": speed, "defaulted": defaulted, "why": why, "oneway": oneway, "level": level,
            "all_season": aval, "klass": klass}


def _line_parts(lay: _Layer, geoms: np.ndarray, keep: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Explode collections and multi-parts into single lines (non-lines dropped, multi-parts reported).

    Returns the parts and the feature (row of the layer) each came from.
    """
    idx = np.nonzero(keep)[0]
    g = geoms[idx]
    nonline = ~np.isin(shapely.get_type_id(g), _LINEAR_OR_COLLECTION)
    for i in idx[nonline]:
        kind = shapely.get_type_id(geoms[i])
        reason = f"not a line ({shapely.GeometryType(kind).name.title().replace('string', 'String')})"
        lay.drop(i, reason, lay.work_xy(geoms[i]))
    idx = idx[~nonline]
    g = geoms[idx]
    multi = shapely.get_num_geometries(g)
    is_multi = (multi > 1) & (shapely.get_type_id(g) != 1)
    lay.report["multipart_features"] += int(is_multi.sum())
    for k in np.nonzero(is_multi)[0]:
        x, y = lay.work_xy(g[k])
        lay.issues.add("geometry_repaired", x, y, f"multi-part line split into {multi[k]} lines",
                       lay.label, lay.fids[idx[k]])
    part, owner = shapely.get_parts(g, return_index=True)
    owner = idx[owner]
    ptype = shapely.get_type_id(part)
    if (ptype == 2).any():  # LinearRing -> LineString
        part = part.copy()
        part[ptype == 2] = [shapely.LineString(shapely.get_coordinates(r)) for r in part[ptype == 2]]
    notline = ~np.isin(shapely.get_type_id(part), [1, 2])
    return part[~notline], owner[~notline]


def _drop_nonfinite(lay: _Layer, part: np.ndarray, owner: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Drop parts with non-finite coordinates (reported)."""
    coords, cidx = shapely.get_coordinates(part, return_index=True)
    finite = np.isfinite(coords).all(axis=1)
    if finite.all():
        return part, owner
    badpart = np.unique(cidx[~finite])
    for p in badpart:
        lay.drop(owner[p], "non-finite coordinates")
    good = np.ones(len(part), bool)
    good[badpart] = False
    return part[good], owner[good]


def _drop_zero_length(lay: _Layer, part, owner, plen):
    """Drop lines whose vertices all lie within 1 mm (``zero_length``); repeated vertices are removed."""
    part = shapely.remove_repeated_points(part, NOISE_M)
    zero = shapely.get_num_coordinates(part) < 2
    zero |= shapely.length(part) < NOISE_M
    for p in np.nonzero(zero)[0]:
        c = shapely.get_coordinates(part[p])[0]
        lay.issues.add("zero_length", c[0], c[1], "line of zero length dropped", lay.label, lay.fids[owner[p]])
        lay.report["dropped_features"].append({"src_layer": lay.label, "src_fid": int(lay.fids[owner[p]]),
                                               "reason": "zero length"})
        lay.report["dropped_length_m"] += float(plen[p])
    return part[~zero], owner[~zero], plen[~zero]


def _layer_lines(li: int, spec: Any, lay: _Layer, crs: CRS) -> pd.DataFrame:
    """The cleaned lines of one layer (see :func:`prepare_lines`)."""
    lay.report["input_features"] += lay.n
    geoms, keep = _usable_geometries(lay)
    att = _attributes(spec, lay)
    part, owner = _line_parts(lay, geoms, keep)
    part, owner = _drop_nonfinite(lay, part, owner)
    if lay.tr is not None:
        tr = lay.tr
        part = shapely.transform(part, lambda xy: np.column_stack(tr.transform(xy[:, 0], xy[:, 1])))
    # input length (geodesic) of every part that has geometry, before any repair
    coords, cidx = shapely.get_coordinates(part, return_index=True)
    plen = geodesic_lengths(coords, cidx, len(part), crs)
    lay.report["input_length_m"] += float(plen.sum())
    part, owner, plen = _drop_zero_length(lay, part, owner, plen)
    if att["why"] is not None:   # defaulted speeds, once per feature that survived
        for i in np.unique(owner[att["defaulted"][owner]]):
            c = shapely.get_coordinates(shapely.line_interpolate_point(part[owner == i][0], 0.5, normalized=True))[0]
            lay.issues.add("speed_defaulted", c[0], c[1], att["why"][i], lay.label, lay.fids[i])
            lay.report["speed_defaulted_features"] += 1
    # one-way against the digitised direction: turn the line round, so one-way always means from -> to
    ow = att["oneway"][owner]
    if (ow == -1).any():
        part = part.copy()
        part[ow == -1] = shapely.reverse(part[ow == -1])
    return pd.DataFrame({
        "geom": part, "layer": li, "fid": lay.fids[owner], "mode": MODES.index(spec.mode),
        "level": att["level"][owner], "oneway": ow != 0, "speed": att["speed"][owner],
        "all_season": att["all_season"][owner], "klass": att["klass"][owner], "len": plen,
    })


def prepare_lines(specs: list, frames: list, crs: CRS, issues: IssueLog, report: dict) -> pd.DataFrame:
    """Clean, explode and reproject every layer into one table of lines.

    Parameters
    ----------
    specs : list of LayerSpec
    frames : list
        As returned by :func:`read_specs`.
    crs : pyproj.CRS
        The working CRS.
    issues, report
        Where repairs are recorded.

    Returns
    -------
    DataFrame
        One row per line: ``geom`` (working CRS), ``layer`` (index into
        ``specs``), ``fid``, ``mode`` (index into MODES), ``level``,
        ``oneway`` (bool; the geometry is already reversed for -1),
        ``speed`` (km/h, NaN for cable), ``all_season`` (1/0/NaN), ``klass``
        and ``len`` (geodesic input length, m).
    """
    parts = [_layer_lines(li, spec, _Layer(gdf, label, crs, issues, report), crs)
             for li, (spec, (gdf, label, _loc)) in enumerate(zip(specs, frames))]
    return pd.concat(parts, ignore_index=True) if parts else pd.DataFrame()


def remove_duplicate_features(table: pd.DataFrame, labels: list[str], issues: IssueLog,
                              report: dict) -> pd.DataFrame:
    """Drop exact duplicate lines (same vertices to 1 mm, either direction) within one mode and level.

    One-way lines in opposite directions are a dual carriageway drawn twice,
    not a duplicate.  Each removed line is reported (``duplicate_removed``)
    and its length added to ``removed_duplicate_length_m``.
    """
    if len(table) == 0:
        return table
    rounded = shapely.transform(table["geom"].to_numpy(), lambda c: np.round(c / NOISE_M) * NOISE_M)
    norm = shapely.normalize(rounded)
    direction = np.where(table["oneway"].to_numpy(), np.where(shapely.equals_exact(rounded, norm, 0), 1, 2), 0)
    key = pd.DataFrame({"w": shapely.to_wkb(norm), "m": table["mode"].to_numpy(), "l": table["level"].to_numpy(),
                        "d": direction})
    dup = key.duplicated(keep="first").to_numpy()
    if not dup.any():
        return table.reset_index(drop=True)
    first = key.groupby(["w", "m", "l", "d"], sort=False).ngroup().to_numpy()
    keeper = {}
    for i in np.nonzero(~dup)[0]:
        keeper[first[i]] = i
    mids = shapely.get_coordinates(shapely.line_interpolate_point(table["geom"].to_numpy()[dup], 0.5,
                                                                  normalized=True))
    for (x, y), i in zip(mids, np.nonzero(dup)[0]):
        k = keeper[first[i]]
        issues.add("duplicate_removed", x, y,
                   f"same line as feature {table['fid'].iat[k]} of layer {labels[table['layer'].iat[k]]}",
                   labels[table["layer"].iat[i]], table["fid"].iat[i])
    report["removed_duplicate_length_m"] += float(table["len"].to_numpy()[dup].sum())
    return table[~dup].reset_index(drop=True)
