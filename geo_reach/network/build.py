"""The network builder: from messy line layers to a clean, routable network.

The topology step works on one flat table of straight segments with numpy,
shapely's STRtree (GEOS) and scipy's cKDTree, never a Python loop per
feature, so a million segments build in well under a minute:

1. Read each layer, drop what has no usable geometry (reported), drop Z/M,
   explode multi-parts, reproject to the working CRS, remove exact
   duplicate features.
2. Find every pair of segments that touch or cross (STRtree ``intersects``),
   compute the meeting points in closed form, and mark them as nodes on both
   lines: a vertex where one exists, a new vertex otherwise
   (``crossing_split``).  Pairs at different levels meet only at line ends;
   an interior crossing between them is kept (``crossing_kept``).  Modes
   never meet here.
3. Trim overshoots: a line end running less than the tolerance past a node
   of its own line is cut back to it.
4. Join line ends closer than the tolerance to each other (``gap_joined``),
   then dead ends lying within the tolerance of another line's interior onto
   that line (a T-junction, also ``gap_joined``).
5. Cut every line at its nodes into edges, keeping every vertex; merge
   nodes closer than 1 mm (numeric noise); remove duplicate edges.
6. Report dead ends near other lines (``unjoined_gap``, between the
   tolerance and ten times it) and short dead-end stubs (``dangle``).
7. Attach stations (rail) and access nodes (cable); join modes only there,
   through ``transfer`` links carrying the boarding penalty.
8. Measure every edge on the ellipsoid (pyproj.Geod) and cost it.

All tolerances are metres on the ground in the working CRS, which is always
metric (the UTM zone of the data's centre unless given).

References
----------
.. [1] Karney, C. F. F. (2013). Algorithms for geodesics. Journal of Geodesy
   87, 43-55 (pyproj.Geod implements it; used for ``length_m``).
.. [2] O'Rourke, J. (1998). Computational Geometry in C, 2nd ed., section 7.7
   (segment-segment intersection by parametric cross products).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
import shapely
from pyproj import CRS, Geod, Transformer
from scipy.sparse import coo_array
from scipy.sparse.csgraph import connected_components
from scipy.spatial import cKDTree

from ..errors import CRSError, InputError, OptionError, where
from ..ingest.layers import LayerRef, parse_layer_ref, read_layer
from .costs import (DEFAULT_SPEED_KMH, MODES, feature_speeds, latency_from_length,
                    minutes_from_length, parse_oneway)
from .model import Network

__all__ = ["LayerSpec", "BuildOptions", "BuildResult", "build_network", "check_layers",
           "working_crs", "geodesic_lengths", "ISSUE_KINDS"]

#: Kinds of spot in the ``network_issues`` layer.
ISSUE_KINDS = ("gap_joined", "unjoined_gap", "dangle", "crossing_split", "crossing_kept",
               "duplicate_removed", "dropped_feature", "zero_length", "self_loop",
               "speed_defaulted", "geometry_repaired", "access_unmatched")

#: Offsets below this many metres are numeric noise (reprojection) and are joined silently.
NOISE_M = 1e-3

_GEOD = Geod(ellps="WGS84")


@dataclass
class LayerSpec:
    """One input line layer and its cost rules.

    Parameters
    ----------
    source : str, LayerRef or GeoDataFrame
        ``path`` or ``path:layername``, or a GeoDataFrame (its index is taken
        as the source feature id).
    mode : {'road', 'rail', 'cable'}
    name : str, optional
        Label used in ``src_layer`` (default: the layer name or file stem).
    speed_field, class_field : str, optional
        A field with the speed in km/h; a field with a road class looked up in
        ``class_speeds`` (over the defaults in :mod:`geo_reach.network.costs`).
    class_speeds : dict, optional
    speed_kmh : float, optional
        One speed for the whole layer (and the fallback for bad values).
    oneway_field : str, optional
        yes/true/1 = one-way in the digitised direction, -1 = against it.
    level_field : str, optional
        Vertical level; interior crossings of different levels are not joined.
    all_season_field : str, optional
        Carried to the ``all_season`` edge field (1/0).
    access_points : str, LayerRef or GeoDataFrame, optional
        Stations (rail) or access nodes (cable), snapped to the line.
    boarding_minutes : float
        Rail: penalty paid on each boarding, on the transfer link from road to rail.
    assume_crs : CRS-like, optional
        CRS to assume when the layer has none.
    """

    source: Any
    mode: str = "road"
    name: str | None = None
    speed_field: str | None = None
    class_field: str | None = None
    class_speeds: dict | None = None
    speed_kmh: float | None = None
    oneway_field: str | None = None
    level_field: str | None = None
    all_season_field: str | None = None
    access_points: Any = None
    boarding_minutes: float = 0.0
    assume_crs: Any = None


@dataclass
class BuildOptions:
    """Options shared by all layers of one build (all distances in metres on the ground)."""

    crs: Any = None
    snap_m: float = 1.0
    dangle_m: float | None = None
    access_snap_m: float = 100.0
    transfer_max_m: float = 1000.0
    transfer_walk_kmh: float = 5.0

    def __post_init__(self):
        if not (self.snap_m >= 0 and np.isfinite(self.snap_m)):
            raise OptionError(f"--snap-m {self.snap_m}: must be a distance of zero or more metres")
        if self.dangle_m is None:
            self.dangle_m = 10.0 * self.snap_m
        if self.dangle_m < 0:
            raise OptionError(f"--dangle-m {self.dangle_m}: must be zero or more metres")
        if not (self.transfer_walk_kmh > 0 and self.transfer_max_m >= 0 and self.access_snap_m >= 0):
            raise OptionError("transfer walking speed must be positive, transfer and access distances zero or more")


@dataclass
class BuildResult:
    """What :func:`build_network` returns: the network, the issues layer and the report."""

    network: Network | None
    issues: Any  # GeoDataFrame
    report: dict = field(default_factory=dict)


# ---------------------------------------------------------------------- CRS
#: Largest scale error of a given working CRS at the data's centre: tolerances are metres on the
#: ground, so a CRS whose metres differ from ground metres by more than this is refused.
MAX_SCALE_ERROR = 0.01


def working_crs(frames, crs=None) -> CRS:
    """The metric working CRS: ``crs`` if given, else the UTM zone of the data's centre.

    A given CRS must be projected in metres with a scale error under 1 % at
    the data's centre (Web Mercator, say, stretches metres by 1/cos(latitude)
    and is refused away from the equator), because every tolerance is metres
    on the ground.

    Raises
    ------
    CRSError
        ``crs`` is not a projected CRS in metres, or distorts distances too much here.
    """
    from pyproj import Proj
    from pyproj.aoi import AreaOfInterest
    from pyproj.database import query_utm_crs_info

    boxes = []
    for f in frames:
        g = f.geometry
        g = g[~(g.isna() | g.is_empty)]
        if len(g):
            tb = g.total_bounds
            tr = Transformer.from_crs(CRS.from_user_input(f.crs), 4326, always_xy=True)
            boxes.append(tr.transform_bounds(*tb, densify_pts=21))
    b = np.array(boxes)
    lon = (b[:, 0].min() + b[:, 2].max()) / 2
    lat = (b[:, 1].min() + b[:, 3].max()) / 2
    if crs is not None:
        out = CRS.from_user_input(crs)
        if not out.is_projected or out.axis_info[0].unit_name not in ("metre", "meter"):
            raise CRSError(f"--crs {crs}: the working CRS must be projected in metres (a UTM zone, say)")
        f = Proj(out).get_factors(lon, lat)
        k = max(abs(f.meridional_scale - 1), abs(f.parallel_scale - 1))
        if not np.isfinite(k) or k > MAX_SCALE_ERROR:
            raise CRSError(f"--crs {crs}: distances in it differ from the ground by {k:.1%} at the data "
                           f"({lon:.2f}, {lat:.2f}); tolerances are metres on the ground, so leave --crs out "
                           "(the UTM zone is used) or give a local projected CRS")
        return out
    info = query_utm_crs_info(datum_name="WGS 84",
                              area_of_interest=AreaOfInterest(lon, lat, lon, lat))
    info = [i for i in info if i.code.startswith("326") or i.code.startswith("327")] or info
    if not info:
        raise CRSError(f"the data's centre ({lon:.3f}, {lat:.3f}) has no UTM zone (polar?); "
                       "pass --crs with a metric projected CRS for the area")
    return CRS.from_epsg(int(info[0].code))


def geodesic_lengths(xy, index, n, crs) -> np.ndarray:
    """Geodesic length (m) of ``n`` polylines given as coordinate rows ``xy`` with owner ``index``.

    Coordinates are taken back to longitude/latitude and each consecutive pair
    of the same polyline is measured on the WGS84 ellipsoid (Karney 2013).
    """
    out = np.zeros(n)
    if len(xy) < 2:
        return out
    tr = Transformer.from_crs(crs, 4326, always_xy=True)
    lon, lat = tr.transform(xy[:, 0], xy[:, 1])
    same = index[1:] == index[:-1]
    _, _, d = _GEOD.inv(lon[:-1][same], lat[:-1][same], lon[1:][same], lat[1:][same])
    np.add.at(out, index[:-1][same], d)
    return out


# ------------------------------------------------------------------ reading
@dataclass
class _Lines:
    """Exploded, cleaned input lines of all layers, in the working CRS (row = one line)."""

    geom: np.ndarray
    layer: np.ndarray      # int: index into specs
    fid: np.ndarray        # source feature id
    mode: np.ndarray       # int: index into MODES
    level: np.ndarray
    oneway: np.ndarray     # bool (geometry already reversed for -1)
    speed: np.ndarray      # km/h (NaN for cable)
    all_season: np.ndarray  # float 1/0/NaN
    klass: np.ndarray      # object


class _Issues:
    def __init__(self):
        self.rows = []

    def add(self, kind, x, y, detail, layer="", fid=-1):
        self.rows.append((kind, float(x) if x is not None else np.nan,
                          float(y) if y is not None else np.nan, detail, layer, int(fid)))

    def add_many(self, kind, xs, ys, details, layers, fids):
        for r in zip(xs, ys, details, layers, fids):
            self.rows.append((kind, float(r[0]), float(r[1]), r[2], r[3], int(r[4])))

    def frame(self, crs):
        import geopandas as gpd

        df = pd.DataFrame(self.rows, columns=["kind", "x", "y", "detail", "src_layer", "src_fid"])
        has = df["x"].notna().to_numpy()
        df = df[has].reset_index(drop=True)
        order = np.lexsort((df["y"].to_numpy(float), df["x"].to_numpy(float), df["kind"].to_numpy(str)))
        df = df.iloc[order].reset_index(drop=True)
        geom = shapely.points(df["x"].to_numpy(float), df["y"].to_numpy(float))
        return gpd.GeoDataFrame(df.drop(columns=["x", "y"]), geometry=geom, crs=crs)


def _read_specs(specs):
    frames = []
    for i, spec in enumerate(specs):
        if spec.mode not in MODES:
            raise OptionError(f"layer {i + 1}: mode '{spec.mode}' is unknown; choose one of {', '.join(MODES)}")
        if spec.speed_kmh is not None and not (np.isfinite(spec.speed_kmh) and spec.speed_kmh > 0):
            raise OptionError(f"layer {i + 1}: --speed-kmh {spec.speed_kmh:g} must be a positive speed in km/h "
                              "(to close features, leave them out)")
        if not (np.isfinite(spec.boarding_minutes) and spec.boarding_minutes >= 0):
            raise OptionError(f"layer {i + 1}: --boarding-minutes {spec.boarding_minutes:g} must be zero or more")
        for cls, v in (spec.class_speeds or {}).items():
            if not (np.isfinite(float(v)) and float(v) > 0):
                raise OptionError(f"layer {i + 1}: class speed {cls}={v} must be a positive speed in km/h")
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
                    raise CRSError(f"{where(label)}the layer has no CRS; set one or pass assume_crs")
                gdf = gdf.set_crs(spec.assume_crs)
        for fld in ("speed_field", "class_field", "oneway_field", "level_field", "all_season_field"):
            name = getattr(spec, fld)
            if name is not None and name not in gdf.columns:
                raise InputError(f"{where(*loc)}has no field '{name}' (given as --{fld.replace('_', '-')}); "
                                 f"fields: {', '.join(map(str, gdf.columns.drop(gdf.geometry.name)))}")
        frames.append((gdf, label, loc))
    return frames


def _prepare(specs, frames, crs, issues, report):
    """Clean, explode and reproject every layer into one :class:`_Lines` table."""
    parts = []
    dropped = report["dropped_features"]
    for li, (spec, (gdf, label, loc)) in enumerate(zip(specs, frames)):
        fids = gdf.index.to_numpy()
        geoms = np.asarray(gdf.geometry.values, dtype=object)
        n = len(gdf)
        src_crs = CRS.from_user_input(gdf.crs)
        tr = None if src_crs.equals(crs) else Transformer.from_crs(src_crs, crs, always_xy=True)

        def work_xy(c):
            """A source-CRS point in the working CRS (issue points are placed there)."""
            return (float(c[0]), float(c[1])) if tr is None else tr.transform(float(c[0]), float(c[1]))
        report["input_features"] += n
        keep = np.ones(n, dtype=bool)
        null = np.array([g is None for g in geoms]) | shapely.is_missing(geoms)
        empty = ~null & shapely.is_empty(geoms)
        for i in np.nonzero(null | empty)[0]:
            dropped.append({"src_layer": label, "src_fid": int(fids[i]),
                            "reason": "no geometry" if null[i] else "empty geometry"})
            issues.add("dropped_feature", None, None, "no geometry" if null[i] else "empty geometry", label, fids[i])
        keep &= ~(null | empty)
        zm = np.zeros(n, bool)
        zm[keep] = shapely.has_z(geoms[keep])
        if hasattr(shapely, "has_m"):
            zm[keep] |= shapely.has_m(geoms[keep])
        report["z_m_dropped_features"] += int(zm.sum())
        if zm.any():   # a layer-wide fact: one spot, at the first such feature
            k = int(np.nonzero(zm)[0][0])
            x, y = work_xy(shapely.get_coordinates(shapely.point_on_surface(geoms[k]))[0])
            issues.add("geometry_repaired", x, y, f"Z/M coordinates dropped from {int(zm.sum())} feature(s) of "
                       "this layer (the network is 2-D)", label, fids[k])
        geoms = geoms.copy()
        geoms[keep] = shapely.force_2d(geoms[keep])

        # Attributes per feature.
        speed, defaulted, why, layer_default = (feature_speeds(gdf, spec.mode, spec.speed_field, spec.class_field,
                                                               spec.class_speeds, spec.speed_kmh)
                                                if spec.mode in DEFAULT_SPEED_KMH else
                                                (np.full(n, np.nan), np.zeros(n, bool), None, None))
        if layer_default:
            report["default_speeds_used"].append(f"{label}: {layer_default}")
        oneway = parse_oneway(gdf[spec.oneway_field].tolist()) if spec.oneway_field else np.zeros(n, np.int8)
        if spec.level_field:
            level = pd.to_numeric(gdf[spec.level_field], errors="coerce").fillna(0).to_numpy(float)
        else:
            level = np.zeros(n)
        if spec.all_season_field:
            a = gdf[spec.all_season_field]
            aval = pd.to_numeric(a, errors="coerce").to_numpy(float)
            s = a.astype("string").str.strip().str.lower()
            aval = np.where(s.isin(["yes", "true", "y", "t"]).fillna(False).to_numpy(), 1.0, aval)
            aval = np.where(s.isin(["no", "false", "n", "f"]).fillna(False).to_numpy(), 0.0, aval)
            aval = np.where(np.isnan(aval), np.nan, (aval > 0).astype(float))
        else:
            aval = np.full(n, np.nan)
        klass = gdf[spec.class_field].astype(object).to_numpy() if spec.class_field else np.full(n, None, object)

        # Explode collections and multi-parts; keep only line parts.
        idx = np.nonzero(keep)[0]
        g = geoms[idx]
        types = shapely.get_type_id(g)
        nonline = ~np.isin(types, [1, 2, 5, 7])  # LineString, LinearRing, MultiLineString, GeometryCollection
        for i in idx[nonline]:
            kind = shapely.get_type_id(geoms[i])
            reason = f"not a line ({shapely.GeometryType(kind).name.title().replace('string', 'String')})"
            dropped.append({"src_layer": label, "src_fid": int(fids[i]), "reason": reason})
            x, y = work_xy(shapely.get_coordinates(shapely.point_on_surface(geoms[i]))[0])
            issues.add("dropped_feature", x, y, reason, label, fids[i])
        idx = idx[~nonline]
        g = geoms[idx]
        multi = shapely.get_num_geometries(g)
        is_multi = (multi > 1) & (shapely.get_type_id(g) != 1)
        report["multipart_features"] += int(is_multi.sum())
        for k in np.nonzero(is_multi)[0]:
            x, y = work_xy(shapely.get_coordinates(shapely.point_on_surface(g[k]))[0])
            issues.add("geometry_repaired", x, y, f"multi-part line split into {multi[k]} lines",
                       label, fids[idx[k]])
        part, owner = shapely.get_parts(g, return_index=True)
        owner = idx[owner]
        ptype = shapely.get_type_id(part)
        if (ptype == 2).any():  # LinearRing -> LineString
            part = part.copy()
            part[ptype == 2] = [shapely.LineString(shapely.get_coordinates(r)) for r in part[ptype == 2]]
        notline = ~np.isin(shapely.get_type_id(part), [1, 2])
        part, owner = part[~notline], owner[~notline]

        # Repairs: non-finite coordinates; repeated vertices.
        coords, cidx = shapely.get_coordinates(part, return_index=True)
        finite = np.isfinite(coords).all(axis=1)
        if not finite.all():
            badpart = np.unique(cidx[~finite])
            for p in badpart:
                dropped.append({"src_layer": label, "src_fid": int(fids[owner[p]]), "reason": "non-finite coordinates"})
                issues.add("dropped_feature", None, None, "non-finite coordinates", label, fids[owner[p]])
            good = np.ones(len(part), bool)
            good[badpart] = False
            part, owner = part[good], owner[good]

        # Reproject.
        if tr is not None:
            part = shapely.transform(part, lambda xy: np.column_stack(tr.transform(xy[:, 0], xy[:, 1])))
        # Input length (geodesic) of every part that has geometry, before any repair.
        coords, cidx = shapely.get_coordinates(part, return_index=True)
        plen = geodesic_lengths(coords, cidx, len(part), crs)
        report["input_length_m"] += float(plen.sum())

        # Zero length (all vertices within the noise distance).
        part = shapely.remove_repeated_points(part, NOISE_M)
        zero = shapely.get_num_coordinates(part) < 2
        zero |= shapely.length(part) < NOISE_M
        for p in np.nonzero(zero)[0]:
            c = shapely.get_coordinates(part[p])[0]
            issues.add("zero_length", c[0], c[1], "line of zero length dropped", label, fids[owner[p]])
            dropped.append({"src_layer": label, "src_fid": int(fids[owner[p]]), "reason": "zero length"})
            report["dropped_length_m"] += float(plen[p])
        part, owner, plen = part[~zero], owner[~zero], plen[~zero]

        # Report defaulted speeds once per feature that survived.
        if why is not None:
            for i in np.unique(owner[defaulted[owner]]):
                c = shapely.get_coordinates(shapely.line_interpolate_point(part[owner == i][0], 0.5, normalized=True))[0]
                issues.add("speed_defaulted", c[0], c[1], why[i], label, fids[i])
                report["speed_defaulted_features"] += 1

        # Reverse one-way-against-digitising lines so one-way always means from -> to.
        ow = oneway[owner]
        if (ow == -1).any():
            part = part.copy()
            part[ow == -1] = shapely.reverse(part[ow == -1])
        parts.append(pd.DataFrame({
            "geom": part, "layer": li, "fid": fids[owner], "mode": MODES.index(spec.mode),
            "level": level[owner], "oneway": ow != 0, "speed": speed[owner],
            "all_season": aval[owner], "klass": klass[owner], "len": plen,
        }))
    table = pd.concat(parts, ignore_index=True) if parts else pd.DataFrame()
    return table


def _remove_duplicate_features(table, specs_labels, issues, report):
    """Drop exact duplicate lines (same vertices, either direction) within one mode and level."""
    if len(table) == 0:
        return table
    rounded = shapely.transform(table["geom"].to_numpy(), lambda c: np.round(c / NOISE_M) * NOISE_M)
    norm = shapely.normalize(rounded)
    wkb = shapely.to_wkb(norm)
    # One-way lines in opposite directions are a dual carriageway drawn twice, not a duplicate.
    direction = np.where(table["oneway"].to_numpy(), np.where(shapely.equals_exact(rounded, norm, 0), 1, 2), 0)
    key = pd.DataFrame({"w": wkb, "m": table["mode"].to_numpy(), "l": table["level"].to_numpy(), "d": direction})
    dup = key.duplicated(keep="first").to_numpy()
    if dup.any():
        first = key.groupby(["w", "m", "l", "d"], sort=False).ngroup().to_numpy()
        keeper = {}
        for i in np.nonzero(~dup)[0]:
            keeper[first[i]] = i
        geoms = table["geom"].to_numpy()
        mids = shapely.get_coordinates(shapely.line_interpolate_point(geoms[dup], 0.5, normalized=True))
        for (x, y), i in zip(mids, np.nonzero(dup)[0]):
            k = keeper[first[i]]
            issues.add("duplicate_removed", x, y,
                       f"same line as feature {table['fid'].iat[k]} of layer {specs_labels[table['layer'].iat[k]]}",
                       specs_labels[table["layer"].iat[i]], table["fid"].iat[i])
        report["removed_duplicate_length_m"] += float(table["len"].to_numpy()[dup].sum())
    return table[~dup].reset_index(drop=True)


# --------------------------------------------------------------- topology
def _grid_cells(box, cell, origin):
    """(box index, cell key) for every grid cell each box touches."""
    c0 = np.floor((box[:, :2] - origin) / cell).astype(np.int64)
    c1 = np.floor((box[:, 2:] - origin) / cell).astype(np.int64)
    nx = c1[:, 0] - c0[:, 0] + 1
    ny = c1[:, 1] - c0[:, 1] + 1
    cnt = nx * ny
    idx = np.repeat(np.arange(len(box), dtype=np.int64), cnt)
    k = np.arange(int(cnt.sum()), dtype=np.int64) - np.repeat(np.cumsum(cnt) - cnt, cnt)
    cx = c0[idx, 0] + k % nx[idx]
    cy = c0[idx, 1] + k // nx[idx]
    return idx, cx, cy


def box_pairs(abox, bbox=None, cell=None):
    """Pairs of boxes that overlap (touching counts), found with a uniform grid hash.

    Parameters
    ----------
    abox, bbox : ndarray of float64, shape (n, 4)
        Boxes as xmin, ymin, xmax, ymax.  Without ``bbox`` the pairs are
        within ``abox``, each once with i < j.
    cell : float, optional
        Grid cell side; default twice the median box extent.

    Returns
    -------
    i, j : ndarray of int64
        Indices into ``abox`` and ``bbox`` (or ``abox``).

    Notes
    -----
    Each box is listed in every cell it touches; a pair is reported only in
    the cell holding the lower-left corner of the two boxes' overlap, so it
    comes out exactly once.  Cost O(n + pairs) for boxes of similar size.
    """
    same = bbox is None
    bbox = abox if same else bbox
    if len(abox) == 0 or len(bbox) == 0:
        return np.zeros(0, np.int64), np.zeros(0, np.int64)
    if same:
        return _self_box_pairs(abox, cell)
    if cell is None:   # sized on the larger boxes, so neither side spreads over many cells
        ext_a = np.maximum(abox[:, 2] - abox[:, 0], abox[:, 3] - abox[:, 1])
        ext_b = np.maximum(bbox[:, 2] - bbox[:, 0], bbox[:, 3] - bbox[:, 1])
        cell = max(2.0 * float(np.median(ext_a)), 2.0 * float(np.median(ext_b)), 1e-3)
    origin = np.minimum(abox[:, :2].min(axis=0), bbox[:, :2].min(axis=0))
    ai, ax_, ay_ = _grid_cells(abox, cell, origin)
    bi, bx_, by_ = _grid_cells(bbox, cell, origin)
    ny = int(max(ay_.max(), by_.max())) + 1
    akey = ax_ * ny + ay_
    bkey = bx_ * ny + by_
    order = np.argsort(bkey, kind="stable")
    bkey_s, bi_s = bkey[order], bi[order]
    lo = np.searchsorted(bkey_s, akey, side="left")
    hi = np.searchsorted(bkey_s, akey, side="right")
    n = hi - lo
    rep = np.repeat(np.arange(len(akey), dtype=np.int64), n)
    pos = np.repeat(lo, n) + (np.arange(int(n.sum()), dtype=np.int64) - np.repeat(np.cumsum(n) - n, n))
    i = ai[rep]
    j = bi_s[pos]
    keep = (abox[i, 0] <= bbox[j, 2]) & (bbox[j, 0] <= abox[i, 2]) & (abox[i, 1] <= bbox[j, 3]) & \
        (bbox[j, 1] <= abox[i, 3])
    if same:
        keep &= i < j
    i, j, rep = i[keep], j[keep], rep[keep]
    # report each pair once: in the cell of the overlap's lower-left corner
    rx = np.maximum(abox[i, 0], bbox[j, 0])
    ry = np.maximum(abox[i, 1], bbox[j, 1])
    own = (np.floor((rx - origin[0]) / cell).astype(np.int64) == ax_[rep]) & \
        (np.floor((ry - origin[1]) / cell).astype(np.int64) == ay_[rep])
    return i[own], j[own]


def _self_box_pairs(box, cell=None):
    """:func:`box_pairs` within one set: each cell's entries are paired only with those after them."""
    if cell is None:
        ext = np.maximum(box[:, 2] - box[:, 0], box[:, 3] - box[:, 1])
        cell = max(float(np.median(ext)), 1e-3)
    origin = box[:, :2].min(axis=0)
    bi, cx, cy = _grid_cells(box, cell, origin)
    key = cx * (int(cy.max()) + 1) + cy
    order = np.argsort(key, kind="stable")
    key, bi, cx, cy = key[order], bi[order], cx[order], cy[order]
    end = np.searchsorted(key, key, side="right")
    n = end - np.arange(len(key)) - 1
    rep = np.repeat(np.arange(len(key), dtype=np.int64), n)
    pos = rep + 1 + (np.arange(int(n.sum()), dtype=np.int64) - np.repeat(np.cumsum(n) - n, n))
    i, j = bi[rep], bi[pos]
    keep = (box[i, 0] <= box[j, 2]) & (box[j, 0] <= box[i, 2]) & (box[i, 1] <= box[j, 3]) & \
        (box[j, 1] <= box[i, 3])
    i, j, rep = i[keep], j[keep], rep[keep]
    rx = np.maximum(box[i, 0], box[j, 0])
    ry = np.maximum(box[i, 1], box[j, 1])
    own = (np.floor((rx - origin[0]) / cell).astype(np.int64) == cx[rep]) & \
        (np.floor((ry - origin[1]) / cell).astype(np.int64) == cy[rep])
    i, j = i[own], j[own]
    return np.minimum(i, j), np.maximum(i, j)


def _segment_pairs(x0, y0, x1, y1, seg_line, group, level, line_start, line_end):
    """All pairs of segments that touch or cross, as the nodes they make.

    Returns arrays describing split events: (segment, t, x, y, kind) where
    kind 0 = a vertex of that segment becomes a node (t in {0, 1}), kind 1 =
    a new vertex is inserted at parameter t; plus kept crossings.
    """
    # Bounding-box candidates from a grid hash (no geometry objects); the exact test below is ours.
    boxes = np.column_stack([np.minimum(x0, x1), np.minimum(y0, y1), np.maximum(x0, x1), np.maximum(y0, y1)])
    a, b = box_pairs(boxes)
    # Same group (mode) only; neighbours along the same line share their vertex by construction.
    same_line = seg_line[a] == seg_line[b]
    m = (group[a] == group[b]) & ~(same_line & (b == a + 1))
    a, b = a[m], b[m]
    px, py = x0[a], y0[a]
    rx, ry = x1[a] - px, y1[a] - py
    qx, qy = x0[b], y0[b]
    sx, sy = x1[b] - qx, y1[b] - qy
    la = np.hypot(rx, ry)
    lb = np.hypot(sx, sy)
    den = rx * sy - ry * sx
    wx, wy = qx - px, qy - py
    with np.errstate(divide="ignore", invalid="ignore"):
        t = (wx * sy - wy * sx) / den
        u = (wx * ry - wy * rx) / den
    # Tolerances as parameters: NOISE_M along each segment.
    eta = NOISE_M / np.maximum(la, NOISE_M)
    etb = NOISE_M / np.maximum(lb, NOISE_M)
    parallel = np.abs(den) <= 1e-12 * la * lb
    ev_seg, ev_t, ev_x, ev_y, ev_new = [], [], [], [], []
    kept_x, kept_y, kept_a, kept_b = [], [], [], []

    # --- proper or touching intersections of non-parallel pairs
    q = ~parallel & (t >= -eta) & (t <= 1 + eta) & (u >= -etb) & (u <= 1 + etb)
    ia, ib, tq, uq = a[q], b[q], np.clip(t[q], 0, 1), np.clip(u[q], 0, 1)
    ta0, ta1 = tq <= eta[q], tq >= 1 - eta[q]
    ub0, ub1 = uq <= etb[q], uq >= 1 - etb[q]
    # The meeting point: an existing vertex where there is one, else the computed point.
    X = px[q] + tq * rx[q]
    Y = py[q] + tq * ry[q]
    X = np.where(ub0, qx[q], np.where(ub1, x1[ib], X))
    Y = np.where(ub0, qy[q], np.where(ub1, y1[ib], Y))
    X = np.where(ta0, px[q], np.where(ta1, x1[ia], X))
    Y = np.where(ta0, py[q], np.where(ta1, y1[ia], Y))
    interior_a = ~(ta0 | ta1)
    interior_b = ~(ub0 | ub1)
    # Level rule: different levels meet only where one of them has a line end there.
    at_end_a = (ta0 & line_start[ia]) | (ta1 & line_end[ia])
    at_end_b = (ub0 & line_start[ib]) | (ub1 & line_end[ib])
    diff_level = level[ia] != level[ib]
    join = ~diff_level | at_end_a | at_end_b
    kept = diff_level & ~join & interior_a & interior_b
    kept_x.append(X[kept]); kept_y.append(Y[kept]); kept_a.append(ia[kept]); kept_b.append(ib[kept])
    for seg, tt, e0, e1, inter in ((ia, tq, ta0, ta1, interior_a), (ib, uq, ub0, ub1, interior_b)):
        ev_seg.append(seg[join]); ev_x.append(X[join]); ev_y.append(Y[join])
        ev_t.append(np.where(e0, 0.0, np.where(e1, 1.0, tt))[join])
        ev_new.append(inter[join])

    # --- collinear overlaps: each end of one segment lying inside the other becomes a node on it
    c = parallel & (np.abs(wx * ry - wy * rx) <= NOISE_M * np.maximum(la, NOISE_M))
    if c.any():
        ca, cb = a[c], b[c]
        same_lvl = level[ca] == level[cb]
        ca, cb = ca[same_lvl], cb[same_lvl]
        for s_on, s_pt in ((ca, cb), (cb, ca)):
            for ex, ey in ((x0[s_pt], y0[s_pt]), (x1[s_pt], y1[s_pt])):
                ox, oy = x0[s_on], y0[s_on]
                dx, dy = x1[s_on] - ox, y1[s_on] - oy
                L2 = dx * dx + dy * dy
                tt = ((ex - ox) * dx + (ey - oy) * dy) / np.maximum(L2, 1e-18)
                et = NOISE_M / np.maximum(np.sqrt(L2), NOISE_M)
                inside = (tt > et) & (tt < 1 - et)
                ev_seg.append(s_on[inside]); ev_t.append(tt[inside])
                ev_x.append(ex[inside]); ev_y.append(ey[inside]); ev_new.append(np.ones(inside.sum(), bool))
            # both ends of the overlapping piece are nodes on the point segment too
            ev_seg.append(s_pt); ev_t.append(np.zeros(len(s_pt))); ev_x.append(x0[s_pt]); ev_y.append(y0[s_pt])
            ev_new.append(np.zeros(len(s_pt), bool))
            ev_seg.append(s_pt); ev_t.append(np.ones(len(s_pt))); ev_x.append(x1[s_pt]); ev_y.append(y1[s_pt])
            ev_new.append(np.zeros(len(s_pt), bool))
    cat = lambda parts, dt=float: np.concatenate(parts) if parts else np.zeros(0, dt)  # noqa: E731
    return (cat(ev_seg, np.int64), cat(ev_t), cat(ev_x), cat(ev_y), cat(ev_new, bool),
            cat(kept_x), cat(kept_y), cat(kept_a, np.int64), cat(kept_b, np.int64))


def _union_find_labels(n, i, j):
    if len(i) == 0:
        return np.arange(n)
    g = coo_array((np.ones(len(i), dtype=np.int8), (i, j)), shape=(n, n)).tocsr()
    _, lab = connected_components(g, directed=False)
    return lab


def build_network(layers, options: BuildOptions | None = None, *, progress=None) -> BuildResult:
    """Build a clean, routable network from line layers.

    Parameters
    ----------
    layers : list of LayerSpec (or of str, taken as road layers)
    options : BuildOptions, optional
    progress : callable, optional
        Called with a short step name as each step starts.

    Returns
    -------
    BuildResult
        ``network`` (a :class:`~geo_reach.network.model.Network` in the
        working CRS), ``issues`` (GeoDataFrame of points: ``kind``,
        ``detail``, ``src_layer``, ``src_fid``) and ``report`` (dict, the
        JSON report).

    Raises
    ------
    InputError
        Missing file or layer, wrong geometry type, empty layer, no CRS,
        unknown field or option.
    """
    return _run(layers, options or BuildOptions(), progress, assemble=True)


def check_layers(layers, options: BuildOptions | None = None, *, progress=None) -> BuildResult:
    """The data-quality pass: the issues and the report, without costing a network.

    Same topology rules as :func:`build_network` (so the same spots are
    reported); ``network`` in the result is ``None``.
    """
    return _run(layers, options or BuildOptions(), progress, assemble=False)


def _empty_report():
    return {
        "nodes": 0, "edges": 0, "components": 0, "largest_component_nodes": 0,
        "input_features": 0, "input_length_m": 0.0, "network_length_m": 0.0,
        "removed_duplicate_length_m": 0.0, "dropped_length_m": 0.0, "trimmed_length_m": 0.0,
        "joined_gap_length_m": 0.0, "transfer_length_m": 0.0,
        "issues": {k: 0 for k in ISSUE_KINDS},
        "dropped_features": [], "default_speeds_used": [], "speed_defaulted_features": 0,
        "multipart_features": 0, "z_m_dropped_features": 0,
        "crs": None, "snap_m": None, "dangle_m": None,
        "caution": None,
    }


def _run(layers, options, progress, assemble):
    step = progress or (lambda name: None)
    specs = [s if isinstance(s, LayerSpec) else LayerSpec(s) for s in layers]
    if not specs:
        raise OptionError("no line layer given; name at least one LAYER")
    issues = _Issues()
    report = _empty_report()
    step("reading layers")
    frames = _read_specs(specs)
    labels = [lab for _, lab, _ in frames]
    crs = working_crs([f for f, _, _ in frames], options.crs)
    from .. import CAUTION

    report["caution"] = CAUTION
    report["crs"] = crs.to_string()
    report["snap_m"] = options.snap_m
    report["dangle_m"] = options.dangle_m
    table = _prepare(specs, frames, crs, issues, report)
    if len(table) == 0:
        loc = frames[0][2]
        raise InputError(f"{where(*loc)}no usable line remains after dropping empty geometries; check the layer")
    table = _remove_duplicate_features(table, labels, issues, report)
    step("noding")
    topo = _Topology(table, options, crs, issues, report, labels)
    topo.step = step
    topo.run(specs, frames)
    net = None
    step("assembling")
    net = topo.assemble(specs)
    step("done")
    for kind in ISSUE_KINDS:
        report["issues"][kind] = sum(1 for r in issues.rows if r[0] == kind)
        report[kind] = report["issues"][kind]   # also at the top level, one key per kind
    report["nodes"] = net.n_nodes
    report["edges"] = net.n_edges
    report["components"] = net.n_components
    report["largest_component_nodes"] = int((net.component == 0).sum()) if net.n_nodes else 0
    report["network_length_m"] = float(net.edge_length_m.sum())
    report["edges_by_mode"] = {m: int((net.edge_mode == m).sum()) for m in (*MODES, "transfer") if (net.edge_mode == m).any()}
    for k in ("input_length_m", "network_length_m", "removed_duplicate_length_m", "dropped_length_m",
              "trimmed_length_m", "joined_gap_length_m", "transfer_length_m"):
        report[k] = round(report[k], 3)
    return BuildResult(net if assemble else None, issues.frame(crs), report)


class _Topology:
    """The segment-table topology pass (see the module docstring for the steps)."""

    def __init__(self, table, options, crs, issues, report, labels):
        self.t = table
        self.o = options
        self.crs = crs
        self.issues = issues
        self.report = report
        self.labels = labels
        geoms = table["geom"].to_numpy()
        xy, line = shapely.get_coordinates(geoms, return_index=True)
        self.xy = xy
        self.vline = line                           # line of each vertex row
        ncoord = shapely.get_num_coordinates(geoms)
        self.first = np.concatenate([[0], np.cumsum(ncoord)[:-1]])  # first vertex row of each line
        self.last = self.first + ncoord - 1
        self.nlines = len(geoms)
        self.group = table["mode"].to_numpy()
        self.line_label = np.array(labels, dtype=object)[table["layer"].to_numpy()]
        self.line_fid = table["fid"].to_numpy()
        self.level = table["level"].to_numpy()
        # split events: vertex rows that are nodes; new vertices (line, vertex pos as float, x, y)
        self.node_row = np.zeros(len(xy), bool)
        self.node_row[self.first] = True
        self.node_row[self.last] = True
        self.new_line, self.new_pos, self.new_x, self.new_y = [], [], [], []
        self.deleted = np.zeros(len(xy), bool)
        self.trim_start = np.full(self.nlines, np.nan)
        self.trim_end = np.full(self.nlines, np.nan)
        self.end_free = np.ones(2 * self.nlines, bool)
        self.trimmed_nodes = []      # where an overshoot was cut back (already reported there)

    # ----------------------------------------------------------------
    def _add_new(self, line, pos, x, y):
        self.new_line.append(np.asarray(line, np.int64)); self.new_pos.append(np.asarray(pos, float))
        self.new_x.append(np.asarray(x, float)); self.new_y.append(np.asarray(y, float))

    def _line_label(self, line):
        return self.line_label[line], self.line_fid[line]

    def run(self, specs, frames):
        xy, vline = self.xy, self.vline
        seg = np.nonzero(vline[1:] == vline[:-1])[0]          # segment k runs row seg[k] -> seg[k]+1
        self.seg = seg
        sl = vline[seg]
        x0, y0, x1, y1 = xy[seg, 0], xy[seg, 1], xy[seg + 1, 0], xy[seg + 1, 1]
        line_start = seg == self.first[sl]
        line_end = seg + 1 == self.last[sl]
        ev = _segment_pairs(x0, y0, x1, y1, sl, self.group[sl], self.level[sl], line_start, line_end)
        ev_seg, ev_t, ev_x, ev_y, ev_new, kx, ky, ka, kb = ev
        # Vertex nodes
        vert = ~ev_new
        rows = seg[ev_seg[vert]] + (ev_t[vert] >= 0.5)
        self.node_row[rows] = True
        # New vertices
        nw = ev_new
        self._add_new(sl[ev_seg[nw]], (seg[ev_seg[nw]] - self.first[sl[ev_seg[nw]]]) + ev_t[nw], ev_x[nw], ev_y[nw])
        # Kept crossings (different levels), one per location.
        if len(kx):
            seen = set()
            for x, y, a, b in zip(kx, ky, ka, kb):
                key = (round(x / 0.01), round(y / 0.01))
                if key in seen:
                    continue
                seen.add(key)
                lab, fid = self._line_label(sl[a])
                lab2, fid2 = self._line_label(sl[b])
                self.issues.add("crossing_kept", x, y,
                                f"crossing kept unjoined: level {self.level[sl[a]]:g} over/under level {self.level[sl[b]]:g} "
                                f"(feature {fid2} of {lab2})", lab, fid)
        self.n_crossing_events = sum(len(a) for a in self.new_line)
        self._trim_overshoots()
        self._join_ends()
        self._report_crossings()
        self._attach_access(specs, frames)

    def _report_crossings(self):
        """One ``crossing_split`` spot per place where a crossing needed a new vertex."""
        k = self.n_crossing_events
        if k == 0:
            return
        line = np.concatenate(self.new_line)[:k]
        x = np.concatenate(self.new_x)[:k]
        y = np.concatenate(self.new_y)[:k]
        key = np.column_stack([np.round(x / NOISE_M), np.round(y / NOISE_M)]).astype(np.int64)
        if self.trimmed_nodes:
            # one point per spot: a trimmed overshoot is reported as such, not also as a crossing
            t = np.concatenate(self.trimmed_nodes)
            tk = {(int(a), int(b)) for a, b in np.round(t / NOISE_M).astype(np.int64)}
            keep = np.array([(int(a), int(b)) not in tk for a, b in key], dtype=bool)
            line, x, y, key = line[keep], x[keep], y[keep], key[keep]
            if len(key) == 0:
                return
        _, first, inv, count = np.unique(key, axis=0, return_index=True, return_inverse=True, return_counts=True)
        nlines = np.zeros(len(first), np.int64)
        pairs = np.unique(np.column_stack([inv.ravel(), line]), axis=0)
        np.add.at(nlines, pairs[:, 0], 1)
        for f, n in zip(first, nlines):
            self.issues.add("crossing_split", x[f], y[f],
                            f"lines crossing with no shared vertex were split ({n} line(s) cut)",
                            self.line_label[line[f]], self.line_fid[line[f]])

    # ----------------------------------------------------------------
    def _line_nodes_positions(self):
        """Per line, sorted positions (vertex index as float) of its nodes so far."""
        node_rows = np.nonzero(self.node_row)[0]
        pos = [node_rows - self.first[self.vline[node_rows]]]
        line = [self.vline[node_rows]]
        if self.new_line:
            line.append(np.concatenate(self.new_line)); pos.append(np.concatenate(self.new_pos))
        line = np.concatenate(line); pos = np.concatenate(pos).astype(float)
        order = np.lexsort((pos, line))
        return line[order], pos[order]

    def _trim_overshoots(self):
        """Cut back line ends that run less than the tolerance past a node of their own line."""
        snap = self.o.snap_m
        if snap <= 0:
            return
        line, pos = self._line_nodes_positions()
        nl = self.nlines
        last_pos = (self.last - self.first).astype(float)
        # nearest interior node from the start: smallest pos > 0; from the end: largest pos < last
        interior = (pos > 0) & (pos < last_pos[line])
        li, pi = line[interior], pos[interior]
        if len(li) == 0:
            return
        # (line, pos) come sorted by line then position: first and last of each run
        starts = np.full(nl, np.inf)
        ends = np.full(nl, -np.inf)
        head = np.ones(len(li), bool)
        head[1:] = li[1:] != li[:-1]
        tail = np.ones(len(li), bool)
        tail[:-1] = li[1:] != li[:-1]
        starts[li[head]] = pi[head]
        ends[li[tail]] = pi[tail]
        xy = self.xy
        seglen = np.zeros(len(xy))
        same = self.vline[1:] == self.vline[:-1]
        d = np.hypot(*(xy[1:] - xy[:-1]).T)
        seglen[:-1] = np.where(same, d, 0.0)
        cum = np.cumsum(np.concatenate([[0.0], seglen[:-1]]))  # distance from row 0 to row r (global)

        def along(lines, p):
            r = self.first[lines] + np.floor(p).astype(np.int64)
            f = p - np.floor(p)
            r2 = np.minimum(r + 1, self.last[lines])
            return cum[r] - cum[self.first[lines]] + f * (cum[r2] - cum[r])

        total = cum[self.last] - cum[self.first]
        # The end must be free: no other line end within the tolerance (else it is a junction, joined later).
        pinv, pcount, pxy, pairs = self._places()
        crowded = pcount > 1
        crowded[pairs[:, 0]] = True
        crowded[pairs[:, 1]] = True
        free = ~crowded[pinv]
        free_start, free_end = free[:nl], free[nl:]
        has = np.isfinite(starts)
        ds = np.where(has, along(np.arange(nl), np.where(has, starts, 0.0)), np.inf)
        de = np.where(has, total - along(np.arange(nl), np.where(has, ends, 0.0)), np.inf)
        self.trim_start = np.where((ds < snap) & (ds > 0) & free_start & (ds < total / 2), starts, np.nan)
        self.trim_end = np.where((de < snap) & (de > 0) & free_end & (de < total / 2), ends, np.nan)
        delta = np.zeros(len(xy) + 1, np.int64)
        for which, posarr, dist in (("start", self.trim_start, ds), ("end", self.trim_end, de)):
            ln = np.nonzero(~np.isnan(posarr))[0]
            if len(ln) == 0:
                continue
            p = posarr[ln]
            fr, lr = self.first[ln], self.last[ln]
            k = np.floor(p).astype(np.int64)
            f = p - k
            r0 = fr + k
            r1 = np.minimum(r0 + 1, lr)
            node = xy[r0] + f[:, None] * (xy[r1] - xy[r0])
            # the stub: start .. node, or node .. end; rows strictly beyond the node are deleted
            if which == "start":
                lo, hi = fr, r0 + 1                       # rows [lo, hi) then the node
                cut_lo, cut_hi = fr, fr + np.ceil(p).astype(np.int64)
            else:
                lo, hi = r0 + 1, lr + 1                   # the node then rows [lo, hi)
                cut_lo, cut_hi = r0 + 1, lr + 1
            n = hi - lo
            owner = np.repeat(np.arange(len(ln)), n)
            rows = np.repeat(lo, n) + (np.arange(n.sum()) - np.repeat(np.cumsum(n) - n, n))
            pts = np.concatenate([xy[rows], node])
            own = np.concatenate([owner, np.arange(len(ln))])
            seq = np.concatenate([rows - np.repeat(lo, n), np.where(which == "start", n, -1)])
            order = np.lexsort((seq, own))
            self.report["trimmed_length_m"] += float(geodesic_lengths(pts[order], own[order], len(ln), self.crs).sum())
            np.add.at(delta, cut_lo, 1)
            np.add.at(delta, cut_hi, -1)
            self.trimmed_nodes.append(node)
            for i in np.nonzero(dist[ln] >= NOISE_M)[0]:
                self.issues.add("gap_joined", node[i, 0], node[i, 1],
                                f"overshoot of {dist[ln[i]]:.2f} m past a junction trimmed",
                                self.line_label[ln[i]], self.line_fid[ln[i]])
        self.deleted |= np.cumsum(delta)[:-1] > 0
        self.end_free = np.concatenate([np.isnan(self.trim_start), np.isnan(self.trim_end)])

    def _drop_overshoot_crossings(self, ends, eline, exy, snap):
        k = self.n_crossing_events
        if k == 0 or len(ends) == 0:
            return
        line = np.concatenate(self.new_line)[:k]
        ex = np.concatenate(self.new_x)[:k]
        ey = np.concatenate(self.new_y)[:k]
        # pair every event with the joined ends of its own line (at most two per line)
        ev = pd.DataFrame({"line": line, "ev": np.arange(k)})
        en = pd.DataFrame({"line": eline[ends], "end": ends})
        m = ev.merge(en, on="line")
        if len(m) == 0:
            return
        evi, eni = m["ev"].to_numpy(), m["end"].to_numpy()
        near = np.hypot(ex[evi] - exy[eni, 0], ey[evi] - exy[eni, 1]) < snap
        if not near.any():
            return
        key = np.column_stack([np.round(ex / NOISE_M), np.round(ey / NOISE_M)]).astype(np.int64)
        _, kid = np.unique(key, axis=0, return_inverse=True)
        kid = kid.ravel()
        drop = np.isin(kid, np.unique(kid[evi[near]]))
        keep = ~drop
        self.new_line = [line[keep]]
        self.new_pos = [np.concatenate(self.new_pos)[:k][keep]]
        self.new_x = [ex[keep]]
        self.new_y = [ey[keep]]
        self.n_crossing_events = int(keep.sum())

    def _places(self):
        """Line ends grouped by place (to 1 mm, per mode), and pairs of places within the tolerance.

        Returns ``pinv`` (place of each end, ends ordered as :meth:`_end_rows`),
        ``pcount`` (ends per place), ``pxy`` (place coordinates: its first end)
        and ``pairs`` (place index pairs closer than ``snap_m``, any mode).
        Computed once, before any end moves.
        """
        if getattr(self, "_place_cache", None) is None:
            nl = self.nlines
            exy = self.xy[self._end_rows()]
            emode = self.group[np.concatenate([np.arange(nl), np.arange(nl)])]
            kx = np.round(exy[:, 0] / NOISE_M).astype(np.int64)
            ky = np.round(exy[:, 1] / NOISE_M).astype(np.int64)
            pinv = pd.DataFrame({"m": emode, "x": kx, "y": ky}).groupby(["m", "x", "y"], sort=False).ngroup().to_numpy()
            npl = int(pinv.max()) + 1 if len(pinv) else 0
            pcount = np.bincount(pinv, minlength=npl)
            pfirst = np.full(npl, len(pinv), np.int64)
            np.minimum.at(pfirst, pinv, np.arange(len(pinv)))
            pxy = exy[pfirst]
            r = max(self.o.snap_m, NOISE_M)
            pairs = cKDTree(pxy).query_pairs(r, output_type="ndarray") if npl else np.zeros((0, 2), np.int64)
            self._place_cache = (pinv, pcount, pxy, pairs)
        return self._place_cache

    def _end_rows(self):
        return np.concatenate([self.first, self.last])

    def _join_ends(self):
        """Join line ends to each other, then dead ends onto nearby line interiors."""
        snap = self.o.snap_m
        nl = self.nlines
        erow = self._end_rows()
        eline = np.concatenate([np.arange(nl), np.arange(nl)])
        exy = self.xy[erow].copy()
        emode = self.group[eline]
        active = self.end_free
        # 1) end-to-end clusters, within one mode, never the two ends of one line
        idx = np.nonzero(active)[0]
        self.end_target = exy.copy()
        joined_any = np.zeros(2 * nl, bool)
        if len(idx) and snap > 0:
            # Ends at one place (to 1 mm, per mode) already meet: group them first, then join places.
            pinv_all, pcount, pxy, pairs = self._places()
            pinv = pinv_all[idx]
            npl = len(pcount)
            pfirst = np.full(npl, 2 * nl, np.int64)
            np.minimum.at(pfirst, pinv_all, np.arange(2 * nl))
            pmode = emode[pfirst]
            pline = eline[pfirst]
            if len(pairs):
                i, j = pairs[:, 0], pairs[:, 1]
                ok = (pmode[i] == pmode[j]) & ~((pcount[i] == 1) & (pcount[j] == 1) & (pline[i] == pline[j]))
                i, j = i[ok], j[ok]
            else:
                i = j = np.zeros(0, np.int64)
            plab = _union_find_labels(npl, i, j)
            # representative place of each cluster: the most shared, ties -> first seen
            order = np.lexsort((pfirst, -pcount, plab))
            first_of = np.ones(npl, bool)
            first_of[1:] = plab[order][1:] != plab[order][:-1]
            rep = np.empty(plab.max() + 1, np.int64)
            rep[plab[order][first_of]] = order[first_of]
            target_place = rep[plab]                       # place -> representative place
            csize = np.bincount(plab)
            multi = (csize[plab[pinv]] > 1) | (pcount[pinv] > 1)
            # a place shared only by the two ends of one closed line is not a junction with others
            joined_any[idx[multi]] = True
            self.end_target[idx] = pxy[target_place[pinv]]
            moved_place = np.nonzero(target_place != np.arange(npl))[0]
            if len(moved_place):
                moves_p = np.hypot(*(pxy[moved_place] - pxy[target_place[moved_place]]).T)
                span = np.zeros(npl)
                np.maximum.at(span, target_place[moved_place], moves_p)
                worst = np.full(npl, -1, np.int64)
                o = np.argsort(-moves_p, kind="stable")
                worst[target_place[moved_place][o][::-1]] = moved_place[o][::-1]
                nends = np.bincount(plab, weights=pcount)
                for rp in np.nonzero(span >= NOISE_M)[0]:
                    e0 = pfirst[worst[rp]]
                    l0 = pline[worst[rp]]
                    # pulled back along its own line: the junction lies on the end's last segment
                    adj = self.xy[self.first[l0] + 1] if e0 < nl else self.xy[self.last[l0] - 1]
                    end = exy[e0]
                    d = adj - end
                    t = float(np.clip(np.dot(pxy[rp] - end, d) / max(np.dot(d, d), 1e-18), 0, 1))
                    back = t > 0 and np.hypot(*(end + t * d - pxy[rp])) < NOISE_M
                    what = (f"overshoot of {span[rp]:.2f} m past a junction of {int(nends[plab[rp]])} line ends "
                            "pulled back" if back else
                            f"gap of {span[rp]:.2f} m between {int(nends[plab[rp]])} line ends joined")
                    self.issues.add("gap_joined", pxy[rp, 0], pxy[rp, 1], what, self.line_label[l0],
                                    self.line_fid[l0])
        # A joined end that overshot its junction also crossed a line there: that crossing is an
        # artefact of the overshoot, so its new vertices are dropped (on both lines).
        self._drop_overshoot_crossings(np.nonzero(joined_any)[0], eline, exy, snap)
        # 2) dead ends onto another line's interior (T-junction)
        dead = np.nonzero(active & ~joined_any)[0]
        self.t_snapped = np.zeros(2 * nl, bool)
        if len(dead) and snap > 0:
            seg = self.seg
            sl = self.vline[seg]
            # candidates: segment boxes overlapping each dead end's box grown by the tolerance
            pbox = np.column_stack([exy[dead] - snap, exy[dead] + snap])
            a_, b_ = self.xy[seg], self.xy[seg + 1]
            sbox = np.column_stack([np.minimum(a_, b_), np.maximum(a_, b_)])
            pi, si = box_pairs(pbox, sbox)
            ok = ((emode[dead[pi]] == self.group[sl[si]]) & (eline[dead[pi]] != sl[si])
                  & ~self.deleted[seg[si]] & ~self.deleted[seg[si] + 1])
            pi, si = pi[ok], si[ok]
            if len(pi):
                ex, ey = exy[dead[pi], 0], exy[dead[pi], 1]
                ax, ay = self.xy[seg[si], 0], self.xy[seg[si], 1]
                bx, by = self.xy[seg[si] + 1, 0], self.xy[seg[si] + 1, 1]
                dx, dy = bx - ax, by - ay
                L2 = np.maximum(dx * dx + dy * dy, 1e-18)
                tt = np.clip(((ex - ax) * dx + (ey - ay) * dy) / L2, 0, 1)
                qx, qy = ax + tt * dx, ay + tt * dy
                dist = np.hypot(ex - qx, ey - qy)
                within = dist <= snap
                pi, si, ex, ey, ax, ay, bx, by, tt, qx, qy, dist = (
                    v[within] for v in (pi, si, ex, ey, ax, ay, bx, by, tt, qx, qy, dist))
                # prefer an existing vertex of the target within the tolerance of the end
                da, db = np.hypot(ex - ax, ey - ay), np.hypot(ex - bx, ey - by)
                use_a = (da <= snap) & (da <= db)
                use_b = (db <= snap) & ~use_a
                order = np.lexsort((dist, pi))
                first = np.ones(len(order), bool)
                first[1:] = pi[order][1:] != pi[order][:-1]
                for k in order[first]:
                    e = dead[pi[k]]
                    s = si[k]
                    ln = sl[s]
                    if use_a[k] or use_b[k]:
                        row = seg[s] + (1 if use_b[k] else 0)
                        self.node_row[row] = True
                        target = self.xy[row]
                    else:
                        target = np.array([qx[k], qy[k]])
                        self._add_new([ln], [seg[s] - self.first[ln] + tt[k]], [qx[k]], [qy[k]])
                    move = float(np.hypot(*(exy[e] - target)))
                    self.end_target[e] = target
                    self.t_snapped[e] = True
                    if move >= NOISE_M:
                        labl, fid = self._line_label(eline[e])
                        self.issues.add("gap_joined", target[0], target[1],
                                        f"line end {move:.2f} m from another line joined onto it (T-junction)", labl, fid)
        # apply end moves, and measure what they change: a gap joined adds length, an end pulled back
        # from an overshoot removes some (signed, geodesic, over each moved end's terminal segment)
        moved = np.nonzero(np.any(self.end_target != exy, axis=1))[0]
        if len(moved):
            adj = np.where(moved < nl, self.first[eline[moved]] + 1, self.last[eline[moved]] - 1)
            two = np.repeat(np.arange(len(moved)), 2)
            old = geodesic_lengths(np.stack([exy[moved], self.xy[adj]], axis=1).reshape(-1, 2), two, len(moved),
                                   self.crs)
            new = geodesic_lengths(np.stack([self.end_target[moved], self.xy[adj]], axis=1).reshape(-1, 2), two,
                                   len(moved), self.crs)
            self.report["joined_gap_length_m"] += float((new - old).sum())
            self.xy[erow[moved]] = self.end_target[moved]

    # ----------------------------------------------------------------
    def _node_on_segment(self, r, ln, P):
        """Make a node of line ``ln`` at the point of its segment starting at row ``r`` nearest ``P``.

        The segment's own vertex is used when the point is within 1 mm of it; returns the node's xy.
        """
        a, b = self.xy[r], self.xy[r + 1]
        d = b - a
        tt = float(np.clip(np.dot(P - a, d) / max(np.dot(d, d), 1e-18), 0, 1))
        Q = a + tt * d
        if np.hypot(*(Q - a)) < NOISE_M:
            self.node_row[r] = True
            return a.copy()
        if np.hypot(*(Q - b)) < NOISE_M:
            self.node_row[r + 1] = True
            return b.copy()
        self._add_new([ln], [r - self.first[ln] + tt], [Q[0]], [Q[1]])
        return Q

    def _attach_access(self, specs, frames):
        """Snap stations / access nodes onto their lines; plan transfer links for rail stations."""
        self.access = []  # (line, pos, x, y, station_label, fid, layer_index)
        self.transfers = []  # (rail x, y, road line, road pos, road x, y, boarding, layer index, fid)
        snap = self.o.access_snap_m
        for li, spec in enumerate(specs):
            if spec.access_points is None:
                continue
            if spec.mode == "road":
                raise OptionError(f"layer {self.labels[li]}: access points (stations) apply to rail or cable layers only")
            pts_src = spec.access_points
            if isinstance(pts_src, (str, LayerRef)) or hasattr(pts_src, "__fspath__"):
                ref = parse_layer_ref(pts_src)
                pts = read_layer(ref, "points", assume_crs=spec.assume_crs)
                plabel = ref.label
            else:
                pts = pts_src
                plabel = f"{self.labels[li]}_access"
            pts = pts[~(pts.geometry.isna() | pts.geometry.is_empty)].to_crs(self.crs)
            pts = pts.explode(index_parts=False)
            mine = np.nonzero((self.t["layer"].to_numpy() == li))[0]
            seg = self.seg
            sl = self.vline[seg]
            segmask = np.isin(sl, mine) & ~self.deleted[seg] & ~self.deleted[seg + 1]
            sidx = np.nonzero(segmask)[0]
            if len(sidx) == 0:
                continue
            segs = shapely.linestrings(np.stack([self.xy[seg[sidx]], self.xy[seg[sidx] + 1]], axis=1))
            tree = shapely.STRtree(segs)
            geoms = pts.geometry.to_numpy()
            near, dist = tree.query_nearest(geoms, max_distance=snap, return_distance=True, all_matches=False)
            got = np.zeros(len(geoms), bool)
            got[near[0]] = True
            for p in np.nonzero(~got)[0]:
                c = shapely.get_coordinates(geoms[p])[0]
                self.issues.add("access_unmatched", c[0], c[1],
                                f"{'station' if spec.mode == 'rail' else 'access node'} farther than {snap:g} m "
                                f"from layer {self.labels[li]}; not attached", plabel, pts.index[p])
            for p, k in zip(*near):
                s = sidx[k]
                Q = self._node_on_segment(seg[s], sl[s], shapely.get_coordinates(geoms[p])[0])
                self.access.append((Q[0], Q[1], li))
                if spec.mode == "rail":
                    self.transfers.append((Q, li, plabel, pts.index[p], spec.boarding_minutes))
        # Road side of each transfer: the nearest point of a road line.
        if self.transfers:
            road = MODES.index("road")
            seg = self.seg
            sl = self.vline[seg]
            sidx = np.nonzero((self.group[sl] == road) & ~self.deleted[seg] & ~self.deleted[seg + 1])[0]
            self.transfer_plan = []
            if len(sidx):
                segs = shapely.linestrings(np.stack([self.xy[seg[sidx]], self.xy[seg[sidx] + 1]], axis=1))
                tree = shapely.STRtree(segs)
                for Q, li, plabel, fid, board in self.transfers:
                    hit = tree.query_nearest(shapely.points(Q), max_distance=self.o.transfer_max_m)
                    if len(hit) == 0:
                        self.issues.add("access_unmatched", Q[0], Q[1],
                                        f"station farther than {self.o.transfer_max_m:g} m from any road; "
                                        "reachable only by rail", plabel, fid)
                        continue
                    s = sidx[hit[0]]
                    R = self._node_on_segment(seg[s], sl[s], Q)
                    self.transfer_plan.append((Q, R, board, li))
            else:
                for Q, li, plabel, fid, board in self.transfers:
                    self.issues.add("access_unmatched", Q[0], Q[1], "no road layer to connect the station to; "
                                    "reachable only by rail", plabel, fid)
        else:
            self.transfer_plan = []

    # ----------------------------------------------------------------
    def assemble(self, specs) -> Network:
        xy = self.xy
        keep = ~self.deleted
        rows = np.nonzero(keep)[0]
        line = self.vline[rows]
        pos = (rows - self.first[line]).astype(float)
        X, Y = xy[rows, 0], xy[rows, 1]
        isnode = self.node_row[rows]
        if self.new_line:
            nl_ = np.concatenate(self.new_line); np_ = np.concatenate(self.new_pos)
            nx_ = np.concatenate(self.new_x); ny_ = np.concatenate(self.new_y)
            line = np.concatenate([line, nl_]); pos = np.concatenate([pos, np_])
            X = np.concatenate([X, nx_]); Y = np.concatenate([Y, ny_])
            isnode = np.concatenate([isnode, np.ones(len(nl_), bool)])
        order = np.lexsort((pos, line))
        line, pos, X, Y, isnode = line[order], pos[order], X[order], Y[order], isnode[order]
        # Trimmed lines: drop new vertices lying in a deleted stretch.
        if hasattr(self, "trim_start"):
            ts, te = self.trim_start[line], self.trim_end[line]
            inside = ~((pos < ts - 1e-12) | (pos > te + 1e-12))
            line, pos, X, Y, isnode = line[inside], pos[inside], X[inside], Y[inside], isnode[inside]
        # Line ends are nodes.
        start = np.ones(len(line), bool); start[1:] = line[1:] != line[:-1]
        end = np.ones(len(line), bool); end[:-1] = line[1:] != line[:-1]
        isnode |= start | end
        # Collapse consecutive rows of one line at the same place (within 1 mm).
        dup = np.zeros(len(line), bool)
        close = (line[1:] == line[:-1]) & (np.hypot(X[1:] - X[:-1], Y[1:] - Y[:-1]) < NOISE_M)
        if close.any():
            # merge row k+1 into row k (keeping k's coordinates unless k+1 is the node)
            k = np.nonzero(close)[0]
            isnode[k] |= isnode[k + 1]
            dup[k + 1] = True
            # a line end must stay a row: move the end flag back
            end_k1 = end[k + 1]
            end[k[end_k1]] = True
        line, X, Y, isnode, end = line[~dup], X[~dup], Y[~dup], isnode[~dup], end[~dup]
        start = np.ones(len(line), bool); start[1:] = line[1:] != line[:-1]
        end = np.ones(len(line), bool); end[:-1] = line[1:] != line[:-1]
        isnode |= start | end
        # Lines reduced to a single row vanish (whole line inside a trimmed stretch).
        single = start & end
        if single.any():
            line, X, Y, isnode = line[~single], X[~single], Y[~single], isnode[~single]
            start = np.ones(len(line), bool); start[1:] = line[1:] != line[:-1]
            end = np.ones(len(line), bool); end[:-1] = line[1:] != line[:-1]

        # Node ids: node rows clustered within 1 mm, per mode.
        nrow = np.nonzero(isnode)[0]
        nmode = self.group[line[nrow]]
        nxy = np.column_stack([X[nrow], Y[nrow]])
        # Extra nodes: transfer endpoints are node rows already (added as new vertices).
        lab = np.empty(len(nrow), np.int64)
        base = 0
        for m in np.unique(nmode):
            sel = np.nonzero(nmode == m)[0]
            tree = cKDTree(nxy[sel])
            pairs = tree.query_pairs(NOISE_M, output_type="ndarray")
            cl = _union_find_labels(len(sel), pairs[:, 0], pairs[:, 1]) if len(pairs) else np.arange(len(sel))
            _, cl = np.unique(cl, return_inverse=True)
            lab[sel] = cl + base
            base += cl.max() + 1
        n_nodes = base
        # Node coordinates: first member of each cluster, and snap member rows to it.
        first_member = np.full(n_nodes, -1)
        first_member[lab[::-1]] = np.arange(len(lab))[::-1]
        node_x, node_y = nxy[first_member, 0], nxy[first_member, 1]
        X[nrow] = node_x[lab]; Y[nrow] = node_y[lab]
        node_mode = nmode[first_member]
        row_node = np.full(len(line), -1); row_node[nrow] = lab

        # Edges between consecutive node rows of one line.
        a = nrow[:-1]; b = nrow[1:]
        ok = line[a] == line[b]
        a, b = a[ok], b[ok]
        L = b - a + 1
        ne = len(a)
        eid = np.repeat(np.arange(ne), L)
        ridx = np.repeat(a, L) + (np.arange(L.sum()) - np.repeat(np.cumsum(L) - L, L))
        exy = np.column_stack([X[ridx], Y[ridx]])
        eline = line[a]
        efrom, eto = row_node[a], row_node[b]
        geom = shapely.linestrings(exy, indices=eid)
        self.step("measuring geodesic lengths")
        length = geodesic_lengths(exy, eid, ne, self.crs)
        self.step("assembling edges")
        planar = shapely.length(geom)

        # Drop degenerate edges (zero length between one node); report self-loops.
        zero = (efrom == eto) & (planar < NOISE_M)
        keep = ~zero
        loops = (efrom == eto) & ~zero
        for k in np.nonzero(loops)[0]:
            lab_, fid = self._line_label(eline[k])
            self.issues.add("self_loop", node_x[efrom[k]], node_y[efrom[k]],
                            f"closed loop of {length[k]:.1f} m returning to the same node", lab_, fid)
        # Duplicate edges: same node pair, same mode, same course (within the tolerance).
        t = self.t
        oneway = t["oneway"].to_numpy()[eline]
        lo, hi = np.minimum(efrom, eto), np.maximum(efrom, eto)
        direction = np.where(oneway, np.where(efrom <= eto, 1, 2), 0)
        df = pd.DataFrame({"lo": lo, "hi": hi, "m": self.group[eline], "d": direction, "k": np.arange(ne)})
        df = df[keep]
        grp = df.groupby(["lo", "hi", "m", "d"], sort=False)["k"]
        sizes = grp.transform("size").to_numpy()
        cand = df[sizes > 1]
        if len(cand):
            firsts = cand.groupby(["lo", "hi", "m", "d"], sort=False)["k"].transform("first").to_numpy()
            ks = cand["k"].to_numpy()
            others = ks != firsts
            ka, kb = firsts[others], ks[others]
            hd = shapely.hausdorff_distance(geom[ka], geom[kb])
            tol = max(self.o.snap_m, NOISE_M)
            dupe = hd <= tol
            for x, y2 in zip(ka[dupe], kb[dupe]):
                if not keep[y2]:
                    continue
                keep[y2] = False
                c = shapely.get_coordinates(shapely.line_interpolate_point(geom[y2], 0.5, normalized=True))[0]
                lab_, fid = self._line_label(eline[y2])
                labx, fidx = self._line_label(eline[x])
                self.issues.add("duplicate_removed", c[0], c[1],
                                f"edge duplicating feature {fidx} of layer {labx} removed", lab_, fid)
                self.report["removed_duplicate_length_m"] += float(length[y2])

        sel = np.nonzero(keep)[0]
        efrom, eto, geom, length, eline = efrom[sel], eto[sel], geom[sel], length[sel], eline[sel]
        # Drop nodes no edge uses (possible after dedupe) and renumber.
        used = np.zeros(n_nodes, bool); used[efrom] = True; used[eto] = True
        # Transfers need their nodes: road side R and rail side Q are node rows already.
        new_id = np.cumsum(used) - 1
        efrom, eto = new_id[efrom], new_id[eto]
        node_x, node_y, node_mode = node_x[used], node_y[used], node_mode[used]
        n_nodes = int(used.sum())

        # Costs.
        speed = t["speed"].to_numpy()[eline]
        emode = t["mode"].to_numpy()[eline]
        mode_names = np.array(MODES, dtype=object)[emode]
        minutes = np.where(np.isnan(speed), np.nan, minutes_from_length(length, speed))
        latency = np.where(mode_names == "cable", latency_from_length(length), np.nan)
        minutes = np.where(mode_names == "cable", np.nan, minutes)
        ow = t["oneway"].to_numpy()[eline]
        src_layer = np.array(self.labels, dtype=object)[t["layer"].to_numpy()[eline]]
        src_fid = t["fid"].to_numpy()[eline].astype(np.int64)
        extra = {
            "level": t["level"].to_numpy()[eline].astype(float),
            "all_season": t["all_season"].to_numpy()[eline].astype(float),
            "class": t["klass"].to_numpy()[eline],
            "speed_kmh": speed,
        }

        # Entry: road nodes; rail stations; cable access nodes.
        entry = node_mode == MODES.index("road")
        tree = cKDTree(np.column_stack([node_x, node_y]))
        for (x, y, li) in self.access:
            m = MODES.index(specs[li].mode)
            d, k = tree.query([x, y], k=min(8, n_nodes))
            for dd, kk in zip(np.atleast_1d(d), np.atleast_1d(k)):
                if dd < NOISE_M * 10 and node_mode[kk] == m:
                    entry[kk] = True
                    break

        # Transfer links: road -> rail costs the boarding penalty; rail -> road is free.
        tf_from, tf_to, tf_geom, tf_len, tf_min = [], [], [], [], []
        for Q, R, board, li in self.transfer_plan:
            dq, kq = tree.query(Q, k=min(8, n_nodes))
            dr, kr = tree.query(R, k=min(8, n_nodes))
            rail = next((k for d, k in zip(np.atleast_1d(dq), np.atleast_1d(kq))
                         if d < NOISE_M * 10 and node_mode[k] == MODES.index("rail")), None)
            road = next((k for d, k in zip(np.atleast_1d(dr), np.atleast_1d(kr))
                         if d < NOISE_M * 10 and node_mode[k] == MODES.index("road")), None)
            if rail is None or road is None:
                continue
            g = shapely.linestrings([[node_x[road], node_y[road]], [node_x[rail], node_y[rail]]])
            c = shapely.get_coordinates(g)
            ln = geodesic_lengths(c, np.zeros(len(c), np.int64), 1, self.crs)[0]
            walk = minutes_from_length(ln, self.o.transfer_walk_kmh)
            tf_from += [road, rail]; tf_to += [rail, road]
            tf_geom += [g, shapely.reverse(g)]
            tf_len += [ln, ln]
            tf_min += [float(board) + float(walk), float(walk)]
            self.report["transfer_length_m"] += 2 * ln
        if tf_from:
            k = len(tf_from)
            efrom = np.concatenate([efrom, tf_from]).astype(np.int64)
            eto = np.concatenate([eto, tf_to]).astype(np.int64)
            geom = np.concatenate([geom, np.array(tf_geom, dtype=object)])
            length = np.concatenate([length, tf_len])
            minutes = np.concatenate([minutes, tf_min])
            latency = np.concatenate([latency, np.full(k, np.nan)])
            ow = np.concatenate([ow, np.ones(k, bool)])
            mode_names = np.concatenate([mode_names, np.full(k, "transfer", object)])
            src_layer = np.concatenate([src_layer, np.full(k, "", object)])
            src_fid = np.concatenate([src_fid, np.full(k, -1, np.int64)])
            extra = {kk: np.concatenate([v, np.full(k, np.nan if v.dtype.kind == "f" else None, dtype=v.dtype)])
                     for kk, v in extra.items()}

        net = Network(
            crs=self.crs, node_x=node_x, node_y=node_y, node_entry=entry,
            edge_from=efrom.astype(np.int64), edge_to=eto.astype(np.int64), edge_geometry=geom,
            edge_length_m=length, edge_minutes=minutes, edge_latency_ms=latency,
            edge_oneway=ow.astype(bool), edge_mode=mode_names, edge_src_layer=src_layer,
            edge_src_fid=src_fid, extra=extra,
        )
        self._report_dead_ends(net)
        return net

    def _report_dead_ends(self, net):
        """``unjoined_gap`` for dead ends near other lines; ``dangle`` for short dead-end stubs."""
        snap, dangle = self.o.snap_m, self.o.dangle_m
        deg = net.degree
        dead = np.nonzero(deg == 1)[0]
        if len(dead) == 0:
            return
        # the one edge at each dead end, and the node at its other end
        own = np.full(net.n_nodes, -1, np.int64)
        own[net.edge_to] = np.arange(net.n_edges)
        own[net.edge_from] = np.arange(net.n_edges)
        own_e = own[dead]
        other = np.where(net.edge_from[own_e] == dead, net.edge_to[own_e], net.edge_from[own_e])
        far = 10.0 * snap
        pts = shapely.points(net.node_x[dead], net.node_y[dead])
        if far > 0:
            tree = shapely.STRtree(net.edge_geometry)
            pi, ei = tree.query(pts, predicate="dwithin", distance=far)
            oe = own_e[pi]
            ok = ((ei != oe) & (net.edge_from[ei] != other[pi]) & (net.edge_to[ei] != other[pi])
                  & (net.edge_mode[ei] == net.edge_mode[oe]) & (net.edge_mode[ei] != "transfer"))
            pi, ei = pi[ok], ei[ok]
            d = shapely.distance(pts[pi], net.edge_geometry[ei])
            order = np.lexsort((d, pi))
            pi, ei, d = pi[order], ei[order], d[order]
            first = np.ones(len(pi), bool)
            first[1:] = pi[1:] != pi[:-1]
            pi, ei, d = pi[first], ei[first], d[first]
            if len(pi):
                seg = shapely.shortest_line(pts[pi], net.edge_geometry[ei])
                q = shapely.get_coordinates(seg).reshape(-1, 2, 2)
                # a pair of dead ends facing each other is one gap: keep it once
                partner = np.full(len(pi), -1, np.int64)
                for end in (net.edge_from, net.edge_to):
                    hit = np.hypot(q[:, 1, 0] - net.node_x[end[ei]], q[:, 1, 1] - net.node_y[end[ei]]) < NOISE_M
                    partner = np.where(hit & (partner < 0), end[ei], partner)
                me = dead[pi]
                pos = {n: k for k, n in enumerate(me)}
                keep = np.ones(len(pi), bool)
                for k, (n, pt) in enumerate(zip(me, partner)):
                    j = pos.get(pt)
                    if j is not None and partner[j] == n and j < k:
                        keep[k] = False
                mid = (q[:, 0] + q[:, 1]) / 2
                for k in np.nonzero(keep)[0]:
                    e = own_e[pi[k]]
                    self.issues.add("unjoined_gap", mid[k, 0], mid[k, 1],
                                    f"gap of {d[k]:.2f} m left open (more than the {snap:g} m tolerance); "
                                    "join it in the source if real", net.edge_src_layer[e], net.edge_src_fid[e])
        # dangles: short dead-end edges hanging off a junction
        stub = (net.edge_mode[own_e] != "transfer") & (net.edge_length_m[own_e] < dangle) & (deg[other] >= 3)
        for n, e in zip(dead[stub], own_e[stub]):
            self.issues.add("dangle", net.node_x[n], net.node_y[n],
                            f"dead end of {net.edge_length_m[e]:.2f} m off a junction (shorter than {dangle:g} m): "
                            "an overshoot or a real stub?", net.edge_src_layer[e], net.edge_src_fid[e])
