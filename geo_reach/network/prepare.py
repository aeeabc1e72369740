"""Reading and cleaning the input layers into one table of lines in the working CRS.

Per layer: check the options, read it, refuse coordinates that are no
place on Earth, drop what has no usable geometry (reported), drop Z/M,
explode multi-parts and collections, reproject, measure the input length,
drop zero-length lines, read the attributes (speed, one-way, level,
all-season, class) and turn lines that are one-way against their digitised
direction around.  Then exact duplicate lines are removed across all
layers.  Every change is reported; nothing is silent.

Attribute values the builder cannot read are handled by what a wrong guess
would cost.  A bad speed is replaced by the next rule's speed (class
table, layer speed, mode default) and reported per feature
(``speed_defaulted``): it changes one feature's travel time.  A one-way,
level or all-season value outside the documented ones is refused with
the file, layer, feature, field, value and the accepted values: a guessed
direction or level changes which roads connect and which way they can be
driven, and a guessed all-season flag changes the access index, so no
default is safe.  Null and empty values are not errors: both ways, ground
level (0), all-season unknown.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
import shapely
from pyproj import CRS, Transformer

from ..errors import CRSError, InputError, OptionError, where
from ..ingest.layers import LayerRef, check_coordinates, parse_layer_ref, read_layer
from .costs import (DEFAULT_SPEED_KMH, MODES, ONEWAY_BOTH, ONEWAY_FORWARD, ONEWAY_REVERSE, feature_speeds,
                    read_oneway)
from .geodesy import geodesic_lengths
from .issues import IssueLog
from .table import NOISE_M

__all__ = ["read_specs", "prepare_lines", "remove_duplicate_features", "read_levels", "read_all_season",
           "FIELD_OPTIONS"]

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
        check_coordinates(gdf, *loc)
        frames.append((gdf, label, loc))
    return frames


class _Layer:
    """One layer being cleaned: its features, where repairs are reported, and the working-CRS transform."""

    def __init__(self, gdf: Any, label: str, loc: tuple, crs: CRS, issues: IssueLog, report: dict) -> None:
        self.gdf = gdf
        self.label = label
        self.loc = loc
        self.fids = gdf.index.to_numpy()
        self.n = len(gdf)
        src = CRS.from_user_input(gdf.crs)
        self.tr = None if src.equals(crs) else Transformer.from_crs(src, crs, always_xy=True)
        self.issues = issues
        self.report = report

    def work_xy(self, geom: Any) -> tuple[float, float]:
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


def _refuse(lay: "_Layer", field: str, bad: np.ndarray, what: str, accepted: str) -> None:
    """Refuse the layer when any value of ``field`` is outside the accepted ones (``bad``), naming the first."""
    rows = np.nonzero(bad)[0]
    if len(rows) == 0:
        return
    i = rows[0]
    value = lay.gdf[field].iloc[i]
    more = f" (and {len(rows) - 1} more feature(s))" if len(rows) > 1 else ""
    raise InputError(f"{where(lay.loc[0], lay.loc[1], lay.fids[i], field)}{what} {value!r} cannot be read{more}; "
                     f"accepted: {accepted}; fix the value(s) or leave the field out")


def read_levels(values: pd.Series) -> tuple[np.ndarray, np.ndarray]:
    """Vertical level per feature, and which values are not whole numbers.

    Whole numbers in any form (``1``, ``"1"``, ``"1.0"``, ``-1``) are used;
    null and empty values mean ground level (0).  Anything else (``"0x"``,
    ``"1;2"``, ``0.5``, ``"bridge"``) is flagged; the builder refuses it,
    because a guessed level decides which crossing roads join.

    >>> lv, bad = read_levels(pd.Series([1, "1.0", " -1 ", None, "", "0x", 0.5, "bridge"], dtype=object))
    >>> lv.tolist(), bad.tolist()
    ([1.0, 1.0, -1.0, 0.0, 0.0, 0.0, 0.0, 0.0], [False, False, False, False, False, True, True, True])
    """
    is_bool = values.map(lambda v: isinstance(v, (bool, np.bool_))).to_numpy(bool)
    text = values.astype("string").str.strip()
    empty = (values.isna() | (text == "")).to_numpy(bool)
    num = pd.to_numeric(text.where(~pd.Series(empty, index=values.index)), errors="coerce").to_numpy(float)
    with np.errstate(invalid="ignore"):
        whole = np.isfinite(num) & (num == np.round(num))
    bad = ~empty & (~whole | is_bool)
    return np.where(whole & ~bad, num, 0.0), bad


_YES = ("yes", "true", "y", "t")
_NO = ("no", "false", "n", "f")


def read_all_season(values: pd.Series) -> tuple[np.ndarray, np.ndarray]:
    """All-season flag per feature (1.0, 0.0, NaN where not given), and which values cannot be read.

    Numbers (above zero = all-season), yes/true/y/t and no/false/n/f
    (any case) are read; null and empty values are unknown (NaN); anything
    else is flagged, and the builder refuses it.

    >>> flag, bad = read_all_season(pd.Series([1, "0", "Yes", "n", None, "", "maybe"], dtype=object))
    >>> flag.tolist(), bad.tolist()
    ([1.0, 0.0, 1.0, 0.0, nan, nan, nan], [False, False, False, False, False, False, True])
    """
    s = values.astype("string").str.strip().str.lower()
    empty = (values.isna() | (s == "")).to_numpy(bool)
    aval = pd.to_numeric(s.where(~pd.Series(empty, index=values.index)), errors="coerce").to_numpy(float)
    yes = s.isin(_YES).fillna(False).to_numpy(bool)
    no = s.isin(_NO).fillna(False).to_numpy(bool)
    aval = np.where(yes, 1.0, np.where(no, 0.0, aval))
    bad = ~empty & ~np.isfinite(aval)
    return np.where(np.isfinite(aval), (aval > 0).astype(float), np.nan), bad


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
    oneway, level, aval = np.zeros(n, np.int8), np.zeros(n), np.full(n, np.nan)
    if spec.oneway_field:
        oneway, bad = read_oneway(gdf[spec.oneway_field].tolist())
        _refuse(lay, spec.oneway_field, bad, "one-way value",
                f"{'/'.join(ONEWAY_FORWARD)} (one-way as digitised), {'/'.join(ONEWAY_REVERSE)} (one-way against "
                f"it), {'/'.join(ONEWAY_BOTH)} or empty (both ways)")
    if spec.level_field:
        level, bad = read_levels(gdf[spec.level_field])
        _refuse(lay, spec.level_field, bad, "level",
                "whole numbers such as -1, 0, 1 (empty = ground level 0)")
    if spec.all_season_field:
        aval, bad = read_all_season(gdf[spec.all_season_field])
        _refuse(lay, spec.all_season_field, bad, "all-season value",
                f"numbers (above 0 = all-season), {'/'.join(_YES)}, {'/'.join(_NO)} or empty (unknown)")
    klass = gdf[spec.class_field].astype(object).to_numpy() if spec.class_field else np.full(n, None, object)
    closed_field = getattr(spec, "closed_field", None)
    closed = (gdf[closed_field].fillna(False).to_numpy(bool) if closed_field else np.zeros(n, bool))
    return {"speed": speed, "defaulted": defaulted, "why": why, "oneway": oneway, "level": level,
            "all_season": aval, "klass": klass, "closed": closed}


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


def _check_projected(lay: "_Layer", part: np.ndarray, owner: np.ndarray) -> None:
    """Refuse lines that reprojection could not place in the working CRS (non-finite coordinates there)."""
    coords, cidx = shapely.get_coordinates(part, return_index=True)
    bad = ~np.isfinite(coords).all(axis=1)
    if bad.any():
        rows = np.unique(owner[cidx[bad]])
        more = f" (and {len(rows) - 1} more feature(s))" if len(rows) > 1 else ""
        raise InputError(f"{where(lay.loc[0], lay.loc[1], lay.fids[rows[0]])}cannot be placed in the working CRS "
                         f"(its coordinates have no finite position there){more}; give a working CRS (crs) that "
                         "covers the data, or check the layer's CRS")


def _drop_zero_length(lay: _Layer, part: np.ndarray, owner: np.ndarray,
                      plen: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
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
    if lay.tr is not None:
        tr = lay.tr
        part = shapely.transform(part, lambda xy: np.column_stack(tr.transform(xy[:, 0], xy[:, 1])))
        _check_projected(lay, part, owner)
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
        "closed": att["closed"][owner],
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
    parts = [_layer_lines(li, spec, _Layer(gdf, label, loc, crs, issues, report), crs)
             for li, (spec, (gdf, label, loc)) in enumerate(zip(specs, frames))]
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
