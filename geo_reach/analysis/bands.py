"""Reach bands, population counts, zone tables, point sampling and the Rural Access Index.

All functions take rasters on one :class:`~geo_reach.ingest.rasters.Grid`:
``minutes`` (float64, NaN = no hub reachable), ``nearest_hub`` (1-based hub
number, 0 = none) and ``population`` (people per cell).  A cell counts as
within a band of ``t`` minutes when its minutes are ``<= t``; bands are
nested (the 60-minute band holds the 30-minute one).  Areas are cell counts
times the cell area, so they match the population sums exactly.

Thresholds are given as written (``"60"``, ``45``, ``"7.5"``); the text form
is the key of :attr:`PopulationStats.population_by_band` and the suffix of
zone-table fields (``share_within_60``, ``share_within_7_5``).

Results are model estimates; local surveys, codes and licensed professional
practice decide.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..errors import CRSError, InputError, OptionError

__all__ = [
    "parse_thresholds",
    "band_polygons",
    "ring_polygons",
    "PopulationStats",
    "population_stats",
    "ZoneSummary",
    "zone_table",
    "sample_points",
    "RuralAccess",
    "rural_access_index",
    "RAI_DISTANCE_M",
]

#: The Rural Access Index distance: 2 km of an all-season road (Roberts, KC & Rastogi 2006).
RAI_DISTANCE_M = 2000.0


def parse_thresholds(thresholds) -> list[tuple[str, float]]:
    """``(text as written, minutes)`` pairs, sorted by minutes.

    Raises
    ------
    OptionError
        Empty, not a number, not positive, or repeated.

    Examples
    --------
    >>> parse_thresholds(["60", 30, "7.5"])
    [('7.5', 7.5), ('30', 30.0), ('60', 60.0)]
    """
    if isinstance(thresholds, (str, int, float)):
        thresholds = [thresholds]
    out = []
    for t in thresholds:
        text = t.strip() if isinstance(t, str) else (f"{t:g}" if isinstance(t, float) else str(t))
        try:
            v = float(text)
        except ValueError as err:
            raise OptionError(f"band threshold '{t}' is not a number of minutes; give e.g. 30,60,120") from err
        if not np.isfinite(v) or v <= 0:
            raise OptionError(f"band threshold '{t}' must be a positive number of minutes")
        out.append((text, v))
    if not out:
        raise OptionError("give at least one band threshold in minutes, e.g. 30,60,120")
    vals = [v for _, v in out]
    if len(set(vals)) != len(vals):
        raise OptionError(f"band thresholds repeat a value ({', '.join(k for k, _ in out)}); give each once")
    return sorted(out, key=lambda kv: kv[1])


def _field_suffix(key: str) -> str:
    return key.replace(".", "_").replace("-", "_")


def _check_shapes(grid, **arrays):
    for name, a in arrays.items():
        if a is not None and np.shape(a) != grid.shape:
            raise OptionError(f"{name} raster has shape {np.shape(a)}, grid is {grid.shape}; resample it onto the grid")


def _polygons_by_value(labels: np.ndarray, mask: np.ndarray, transform) -> dict:
    """Polygons of each label value (``rasterio.features.shapes``), grouped as MultiPolygons."""
    import shapely
    from rasterio.features import shapes

    groups: dict = {}
    if not mask.any():
        return groups
    for geom, value in shapes(labels, mask=mask, transform=transform, connectivity=4):
        groups.setdefault(int(value), []).append(shapely.geometry.shape(geom))
    return {k: shapely.MultiPolygon(v) if len(v) > 1 else shapely.MultiPolygon([v[0]]) for k, v in groups.items()}


def band_polygons(minutes, nearest_hub, grid, thresholds, population=None, hub_ids=None):
    """Reach-band polygons, combined and per hub (layer ``reach_bands``).

    Parameters
    ----------
    minutes : ndarray of float64, shape ``grid.shape``
        Minutes to the nearest hub; NaN = none reachable.
    nearest_hub : ndarray of int, shape ``grid.shape``
        1-based hub number; 0 = none.
    grid : Grid
    thresholds : sequence of str or number
        Band limits, minutes.
    population : ndarray of float64, shape ``grid.shape``, optional
        People per cell.
    hub_ids : sequence, optional
        The id to report for hub number ``k`` is ``hub_ids[k - 1]``; default ``k``.

    Returns
    -------
    geopandas.GeoDataFrame
        One row per band for all hubs together (``hub_id`` null, cells
        dissolved), then one per band and hub reaching any cell within it.
        Fields: ``within_minutes`` (float, minutes), ``hub_id`` (nullable),
        ``area_km2``, ``population`` (people; NaN without a population
        raster), geometry (MultiPolygon, grid CRS).  A band holds every cell
        with ``minutes <= within_minutes``.

    Notes
    -----
    One :func:`rasterio.features.shapes` pass over the grid per threshold
    for the per-hub bands and one for the combined band.
    """
    import geopandas as gpd

    _check_shapes(grid, minutes=minutes, nearest_hub=nearest_hub, population=population)
    keys = parse_thresholds(thresholds)
    minutes = np.asarray(minutes, dtype=np.float64)
    hub = np.asarray(nearest_hub).astype(np.int32)
    pop = None if population is None else np.asarray(population, dtype=np.float64)
    n_hubs = int(hub.max()) if hub.size else 0
    ids = list(range(1, n_hubs + 1)) if hub_ids is None else list(hub_ids)
    if len(ids) < n_hubs:
        raise OptionError(f"hub_ids has {len(ids)} ids but the raster names hub {n_hubs}")
    rows = []
    cell_km2 = grid.cell_area_km2
    for key, t in keys:
        with np.errstate(invalid="ignore"):
            within = minutes <= t
        if not within.any():
            continue
        combined = _polygons_by_value(within.astype(np.uint8), within, grid.transform)
        rows.append({"within_minutes": t, "hub_id": None, "area_km2": within.sum() * cell_km2,
                     "population": float(pop[within].sum()) if pop is not None else np.nan,
                     "geometry": combined[1]})
        per = _polygons_by_value(np.where(within, hub, 0).astype(np.int32), within & (hub > 0), grid.transform)
        counts = np.bincount(hub[within], minlength=n_hubs + 1)
        people = np.bincount(hub[within], weights=pop[within], minlength=n_hubs + 1) if pop is not None else None
        for h in sorted(per):
            rows.append({"within_minutes": t, "hub_id": ids[h - 1], "area_km2": counts[h] * cell_km2,
                         "population": float(people[h]) if people is not None else np.nan,
                         "geometry": per[h]})
    frame = pd.DataFrame(rows, columns=["within_minutes", "hub_id", "area_km2", "population", "geometry"])
    frame["within_minutes"] = frame["within_minutes"].astype(np.float64)
    frame["area_km2"] = frame["area_km2"].astype(np.float64)
    frame["population"] = frame["population"].astype(np.float64)
    if all(isinstance(i, (int, np.integer)) for i in ids):
        frame["hub_id"] = frame["hub_id"].astype("Int64")
    return gpd.GeoDataFrame(frame, geometry="geometry", crs=grid.crs)


def ring_polygons(minutes, grid, thresholds, population=None, passable=None):
    """Disjoint reach rings (layer ``reach_rings``): within the first threshold, between each pair, beyond the last.

    Where :func:`band_polygons` gives nested bands (the 60-minute band holds
    the 30-minute one), each cell here lies in exactly one ring, so the rings
    can be drawn side by side and their people add up to the total.

    Parameters
    ----------
    minutes : ndarray of float64, shape ``grid.shape``
        Minutes to the nearest hub; NaN = none reachable.
    grid : Grid
    thresholds : sequence of str or number
        Band limits, minutes.
    population : ndarray of float64, shape ``grid.shape``, optional
        People per cell.
    passable : ndarray of bool, shape ``grid.shape``, optional
        Cells one can be in; impassable cells (open water, barriers) belong
        to no ring.  Without it, every cell belongs to one.

    Returns
    -------
    geopandas.GeoDataFrame
        One row per ring holding any cell, nearest first.  Fields:
        ``from_minutes`` (float, exclusive lower bound; 0 for the first ring,
        whose cells have ``0 <= minutes <= to_minutes``), ``to_minutes``
        (float, inclusive upper bound; null for the last ring, which also
        holds the passable cells no hub reaches), ``area_km2``,
        ``population`` (people; NaN without a population raster), geometry
        (MultiPolygon, grid CRS).

    Notes
    -----
    A cell with ``minutes == t`` is within ``t``, as for the bands and the
    population counts (:func:`population_stats`), so the ring populations
    are the differences of the band populations.  One
    :func:`rasterio.features.shapes` pass over the grid.

    Examples
    --------
    >>> import numpy as np
    >>> from geo_reach.ingest.rasters import Grid
    >>> g = Grid.from_bounds((0, 0, 3000, 1000), 1000.0, 0.0, crs="EPSG:32633")
    >>> r = ring_polygons(np.array([[10.0, 30.0, np.nan]]), g, [30, 60])
    >>> r[["from_minutes", "to_minutes", "area_km2"]].to_numpy().tolist()
    [[0.0, 30.0, 2.0], [60.0, nan, 1.0]]
    """
    import geopandas as gpd

    _check_shapes(grid, minutes=minutes, population=population, passable=passable)
    keys = parse_thresholds(thresholds)
    minutes = np.asarray(minutes, dtype=np.float64)
    pop = None if population is None else np.where(np.isfinite(population), population, 0.0)
    ring = np.full(grid.shape, len(keys), dtype=np.int32)          # beyond the last, or unreachable
    with np.errstate(invalid="ignore"):
        for i in range(len(keys) - 1, -1, -1):
            ring[minutes <= keys[i][1]] = i
    inside = np.ones(grid.shape, bool) if passable is None else np.asarray(passable, dtype=bool)
    polys = _polygons_by_value(ring + 1, inside, grid.transform)   # labels from 1: 0 is never a ring
    counts = np.bincount((ring + 1)[inside], minlength=len(keys) + 2)
    people = (np.bincount((ring + 1)[inside], weights=pop[inside], minlength=len(keys) + 2)
              if pop is not None else None)
    rows = []
    for k in sorted(polys):
        i = k - 1
        rows.append({"from_minutes": keys[i - 1][1] if i > 0 else 0.0,
                     "to_minutes": keys[i][1] if i < len(keys) else np.nan,
                     "area_km2": counts[k] * grid.cell_area_km2,
                     "population": float(people[k]) if people is not None else np.nan,
                     "geometry": polys[k]})
    frame = pd.DataFrame(rows, columns=["from_minutes", "to_minutes", "area_km2", "population", "geometry"])
    for c in ("from_minutes", "to_minutes", "area_km2", "population"):
        frame[c] = frame[c].astype(np.float64)
    return gpd.GeoDataFrame(frame, geometry="geometry", crs=grid.crs)


@dataclass(frozen=True)
class PopulationStats:
    """People by reach band.

    Attributes
    ----------
    population_total : float
        People on the grid.
    population_by_band : dict of str to float
        Threshold as written -> people with minutes <= threshold (nested).
    population_beyond : float
        People beyond the largest band or with no hub reachable.
    population_unreachable : float
        People with no hub reachable at all.
    population_weighted_minutes : float
        Population-weighted mean minutes over the people with a hub
        reachable (NaN when nobody is).
    """

    population_total: float
    population_by_band: dict
    population_beyond: float
    population_unreachable: float
    population_weighted_minutes: float


def population_stats(minutes, population, thresholds) -> PopulationStats:
    """Count people within each band, beyond them, and the weighted mean minutes.

    Parameters
    ----------
    minutes, population : ndarray, same shape
        Minutes (NaN = unreachable) and people per cell.
    thresholds : sequence of str or number

    Returns
    -------
    PopulationStats

    Examples
    --------
    >>> import numpy as np
    >>> s = population_stats(np.array([10.0, 50.0, np.nan]), np.array([1.0, 2.0, 4.0]), ["30", "60"])
    >>> s.population_by_band, s.population_beyond, round(s.population_weighted_minutes, 3)
    ({'30': 1.0, '60': 3.0}, 4.0, 36.667)
    """
    minutes = np.asarray(minutes, dtype=np.float64)
    pop = np.asarray(population, dtype=np.float64)
    if minutes.shape != pop.shape:
        raise OptionError(f"population raster has shape {pop.shape}, minutes {minutes.shape}; they must match")
    keys = parse_thresholds(thresholds)
    pop = np.where(np.isfinite(pop), pop, 0.0)
    total = float(pop.sum())
    reach = np.isfinite(minutes)
    by = {}
    # cumulative, ring by ring, so nested bands can never shrink by a rounding of the sum
    acc, prev = 0.0, -np.inf
    for key, t in keys:
        with np.errstate(invalid="ignore"):
            acc += float(pop[(minutes > prev) & (minutes <= t)].sum())
        by[key] = acc
        prev = t
    within_max = by[keys[-1][0]]
    reach_pop = float(pop[reach].sum())
    weighted = float((pop[reach] * minutes[reach]).sum() / reach_pop) if reach_pop > 0 else float("nan")
    return PopulationStats(total, by, total - within_max, total - reach_pop, weighted)


@dataclass(frozen=True)
class ZoneSummary:
    """Per-zone reach figures.

    Attributes
    ----------
    zones : geopandas.GeoDataFrame
        The zones (grid CRS) with ``zone`` (the id field, or the row
        number), ``population``, ``share_within_<t>`` per threshold (0..1,
        NaN for a zone with nobody), ``population_beyond`` and
        ``mean_minutes`` (population-weighted, over people with a hub
        reachable).
    population_outside : float
        People in cells whose centre lies in no zone.
    population_total : float
        People on the grid; equals ``zones.population.sum() + population_outside``.
    """

    zones: object
    population_outside: float
    population_total: float


def zone_table(minutes, population, grid, zones, thresholds, zone_field: str | None = None) -> ZoneSummary:
    """Population reach statistics per zone polygon.

    Each cell belongs to the zone holding its centre (rasterised with
    :func:`rasterio.features.rasterize`); where zones overlap the later
    feature wins, so no person is counted twice.

    Parameters
    ----------
    minutes, population : ndarray of float64, shape ``grid.shape``
    grid : Grid
    zones : geopandas.GeoDataFrame
        Polygons, any CRS (reprojected to the grid's).
    thresholds : sequence of str or number
    zone_field : str, optional
        Field holding the zone id; default the row number.

    Returns
    -------
    ZoneSummary

    Raises
    ------
    CRSError
        The zones have no CRS.
    InputError
        ``zone_field`` is missing from the layer.
    """
    from rasterio.features import rasterize

    _check_shapes(grid, minutes=minutes, population=population)
    keys = parse_thresholds(thresholds)
    if zones.crs is None:
        raise CRSError("zone layer has no coordinate reference system; set one and try again")
    if zone_field is not None and zone_field not in zones.columns:
        raise InputError(f"zone layer: field '{zone_field}' is missing (fields: {', '.join(map(str, zones.columns))}); "
                         "name an existing id field")
    z = zones.to_crs(grid.crs) if not zones.crs.equals(grid.crs) else zones
    z = z.reset_index(drop=True)
    shapes_ = [(g, i + 1) for i, g in enumerate(z.geometry.values) if g is not None and not g.is_empty]
    idx = rasterize(shapes_, out_shape=grid.shape, transform=grid.transform, fill=0, dtype="int32",
                    all_touched=False) if shapes_ else np.zeros(grid.shape, np.int32)
    minutes = np.asarray(minutes, dtype=np.float64)
    pop = np.asarray(population, dtype=np.float64)
    pop = np.where(np.isfinite(pop), pop, 0.0)
    n = len(z)
    flat_idx = idx.ravel()
    flat_pop = pop.ravel()
    flat_min = minutes.ravel()
    zpop = np.bincount(flat_idx, weights=flat_pop, minlength=n + 1)
    reach = np.isfinite(flat_min)
    zreach = np.bincount(flat_idx[reach], weights=flat_pop[reach], minlength=n + 1)
    zweighted = np.bincount(flat_idx[reach], weights=flat_pop[reach] * flat_min[reach], minlength=n + 1)
    out = z.copy()
    out.insert(0, "zone", z[zone_field].to_numpy() if zone_field else np.arange(n))
    out["population"] = zpop[1:]
    within_max = None
    with np.errstate(invalid="ignore", divide="ignore"):
        for key, t in keys:
            w = reach & (flat_min <= t)
            zw = np.bincount(flat_idx[w], weights=flat_pop[w], minlength=n + 1)
            out[f"share_within_{_field_suffix(key)}"] = np.where(zpop[1:] > 0, zw[1:] / zpop[1:], np.nan)
            within_max = zw
        out["population_beyond"] = zpop[1:] - within_max[1:]
        out["mean_minutes"] = np.where(zreach[1:] > 0, zweighted[1:] / zreach[1:], np.nan)
    total = float(flat_pop.sum())
    outside = float(zpop[0])
    if not np.isclose(zpop.sum(), total, rtol=1e-9, atol=1e-9):  # pragma: no cover - bincount invariant
        raise AssertionError("zone totals do not add up to the grid total")
    return ZoneSummary(out, outside, total)


def sample_points(minutes, nearest_hub, grid, points, hub_ids=None):
    """Minutes and nearest hub at each point's cell (e.g. settlements).

    Parameters
    ----------
    minutes, nearest_hub : ndarray, shape ``grid.shape``
    grid : Grid
    points : geopandas.GeoDataFrame
        Points, any CRS (reprojected to the grid's for sampling; the result
        keeps the input geometry and CRS).
    hub_ids : sequence, optional
        Report ``hub_ids[k - 1]`` for hub number ``k``.

    Returns
    -------
    geopandas.GeoDataFrame
        A copy of ``points`` with ``minutes`` (NaN outside the grid or
        unreachable) and ``hub_id`` (nullable).
    """
    import shapely

    _check_shapes(grid, minutes=minutes, nearest_hub=nearest_hub)
    if points.crs is None:
        raise CRSError("point layer has no coordinate reference system; set one and try again")
    p = points.to_crs(grid.crs) if not points.crs.equals(grid.crs) else points
    geom = p.geometry.values
    pt = shapely.get_coordinates(shapely.centroid(geom)) if len(geom) else np.zeros((0, 2))
    r, c = grid.index(pt[:, 0], pt[:, 1])
    inside = r >= 0
    m = np.full(len(points), np.nan)
    h = np.zeros(len(points), dtype=np.int64)
    m[inside] = np.asarray(minutes)[r[inside], c[inside]]
    h[inside] = np.asarray(nearest_hub)[r[inside], c[inside]]
    out = points.copy()
    out["minutes"] = m
    if hub_ids is None:
        out["hub_id"] = pd.array([int(k) if k > 0 else pd.NA for k in h], dtype="Int64")
    else:
        ids = list(hub_ids)
        out["hub_id"] = [ids[k - 1] if k > 0 else None for k in h]
    return out


@dataclass(frozen=True)
class RuralAccess:
    """The Rural Access Index.

    Attributes
    ----------
    share : float
        People within ``distance_m`` of an all-season road / all people (0..1;
        NaN when the grid holds nobody).
    population_within, population_total : float
    distance_m : float
    """

    share: float
    population_within: float
    population_total: float
    distance_m: float


def rural_access_index(population, grid, roads, all_season, distance_m: float = RAI_DISTANCE_M) -> RuralAccess:
    """Share of people living within 2 km of an all-season road.

    A cell counts as within when its centre is within ``distance_m`` of an
    all-season road (the roads are buffered by ``distance_m`` and the
    buffers rasterised by cell centre; the buffer's arcs have 16 segments
    a quarter circle, so the edge may sit up to ``distance_m * (1 - cos(pi/64))``,
    2.4 m at 2 km, inside the true circle).

    Parameters
    ----------
    population : ndarray of float64, shape ``grid.shape``
        People per cell.  The index is defined for the *rural* population:
        pass a raster with urban people removed for the standard figure.
    grid : Grid
    roads : sequence of shapely geometries, or GeoSeries/GeoDataFrame
        Road centre lines in the grid's CRS (a GeoDataFrame is reprojected).
    all_season : array_like of bool, or str
        Per road, whether it is passable all year; with a GeoDataFrame,
        may name its field.
    distance_m : float, default 2000

    Returns
    -------
    RuralAccess

    References
    ----------
    .. [1] Roberts, P., KC, S. & Rastogi, C. (2006). Rural Access Index: A
       Key Development Indicator. World Bank Transport Papers TP-10.
    .. [2] United Nations (2017). SDG indicator 9.1.1: proportion of the
       rural population who live within 2 km of an all-season road.
    """
    import shapely
    from rasterio.features import rasterize

    _check_shapes(grid, population=population)
    if not (np.isfinite(distance_m) and distance_m > 0):
        raise OptionError(f"access distance {distance_m!r} m must be a positive number")
    if hasattr(roads, "geometry"):
        if roads.crs is not None and not roads.crs.equals(grid.crs):
            roads = roads.to_crs(grid.crs)
        if isinstance(all_season, str):
            if all_season not in roads.columns:
                raise InputError(f"road layer: field '{all_season}' is missing; name the all-season flag field")
            all_season = roads[all_season].fillna(0).to_numpy()
        geoms = np.asarray(roads.geometry.values, dtype=object)
    else:
        geoms = np.asarray(list(roads), dtype=object)
    flag = np.asarray(all_season).astype(bool)
    if flag.shape != geoms.shape:
        raise OptionError(f"all_season has {flag.size} values for {geoms.size} roads")
    pop = np.asarray(population, dtype=np.float64)
    pop = np.where(np.isfinite(pop), pop, 0.0)
    total = float(pop.sum())
    keep = geoms[flag]
    keep = keep[~shapely.is_empty(keep) & ~shapely.is_missing(keep)] if keep.size else keep
    if keep.size:
        buf = shapely.buffer(keep, distance_m, quad_segs=16)
        near = rasterize(((b, 1) for b in buf), out_shape=grid.shape, transform=grid.transform, fill=0,
                         dtype="uint8", all_touched=False).astype(bool)
        within = float(pop[near].sum())
    else:
        within = 0.0
    share = within / total if total > 0 else float("nan")
    return RuralAccess(share, within, total, float(distance_m))
