"""Hazard closures: one event (a flood, a landslide, a snow-closed pass) closes many links at once.

:func:`hazard_links` finds the links a hazard touches (polygons, or the
cells of a raster above a threshold, :func:`raster_hazard`); links that are
grade-separated (a non-zero ``level`` kept from the build: a bridge over a
flooded valley is not under water) stay open unless asked to close them.
:func:`hazard_impact` closes those links in one go
(:meth:`~.trips.HubTrips.close`: only the subtrees below the closed links
are searched again) and keeps two groups apart, because a place can be both:

* people whose own place lies in the hazard (``in_place``);
* people outside it who lose their hub of a kind (``isolated``).

Figures are given per hub kind and per district (zones).  People are the
settlements' population; with no settlements each node stands in for one
person.

Results are model estimates; local surveys, codes and licensed professional
practice decide.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ...errors import InputError, where
from .links import added_field

__all__ = ["HazardLinks", "hazard_links", "raster_hazard", "HazardImpact", "hazard_impact", "grade_separated",
           "hazard_layers"]


def grade_separated(network) -> np.ndarray:
    """Links on another level than the ground (a non-zero ``level`` from the build; missing = 0)."""
    lv = network.extra.get("level")
    if lv is None:
        return np.zeros(network.n_edges, bool)
    lv = pd.to_numeric(pd.Series(np.asarray(lv, dtype=object)), errors="coerce").fillna(0.0).to_numpy(float)
    return lv != 0


@dataclass(frozen=True)
class HazardLinks:
    """The links a hazard touches.

    Attributes
    ----------
    touched : ndarray of int64
        Every edge the hazard intersects.
    closed : ndarray of int64
        Those closed (all touched, less the grade-separated ones kept open).
    kept_open : ndarray of int64
        Grade-separated links the hazard touches that stay open.
    """

    touched: np.ndarray
    closed: np.ndarray
    kept_open: np.ndarray


def hazard_links(network, polygons, *, closes_bridges: bool = False) -> HazardLinks:
    """Links that a hazard's polygons touch (intersect, boundary included).

    Parameters
    ----------
    network : Network
    polygons : array_like of shapely geometries
        In the network's working CRS.
    closes_bridges : bool, default False
        Close grade-separated links too.
    """
    import shapely

    geoms = np.asarray(polygons, dtype=object)
    geoms = geoms[~shapely.is_missing(geoms)] if len(geoms) else geoms
    if not len(geoms) or network.n_edges == 0:
        z = np.zeros(0, np.int64)
        return HazardLinks(z, z, z)
    tree = shapely.STRtree(network.edge_geometry)
    _, hit = tree.query(geoms, predicate="intersects")
    touched = np.unique(hit).astype(np.int64)
    gs = grade_separated(network)[touched]
    if closes_bridges:
        return HazardLinks(touched, touched, np.zeros(0, np.int64))
    return HazardLinks(touched, touched[~gs], touched[gs])


def raster_hazard(path, above: float, crs):
    """Polygons of the raster cells whose value is above ``above``, in ``crs``.

    Parameters
    ----------
    path : str or Path
        A single-band raster (e.g. flood depth in metres).
    above : float
        Cells with a value strictly greater count as the hazard; no-data
        cells never do.
    crs : CRS-like
        The network's working CRS.

    Returns
    -------
    ndarray of shapely Polygon

    Raises
    ------
    InputError
        Unreadable raster, no CRS, no data (from
        :func:`~geo_reach.ingest.rasters.read_raster`), or a threshold that is
        not a number.
    """
    import geopandas as gpd
    import shapely
    from rasterio.features import shapes

    from ...ingest.rasters import read_raster

    if above is None or not np.isfinite(above):
        raise InputError(f"{where(path)}hazard threshold {above!r} is not a number; give the value above which "
                         "a cell counts (e.g. 0.3 for 30 cm of water)")
    layer = read_raster(path)
    mask = np.isfinite(layer.data) & (layer.data > float(above))
    if not mask.any():
        return np.zeros(0, dtype=object)
    polys = [shapely.geometry.shape(g) for g, v in shapes(mask.astype(np.uint8), mask=mask,
                                                          transform=layer.transform) if v == 1]
    return np.asarray(gpd.GeoSeries(polys, crs=layer.crs).to_crs(crs).values, dtype=object)


@dataclass
class HazardImpact:
    """Result of :func:`hazard_impact`.

    Attributes
    ----------
    places : pandas.DataFrame
        One row per place (settlement, or node when none): ``place_id``,
        ``people``, ``in_hazard`` (0/1), per kind ``<kind>_<unit>_before``
        and ``_after`` (null = no hub of that kind) and ``cut_off_<kind>``
        (0/1), then ``isolated`` (outside and losing a hub kind) and
        ``cut_off_in_place`` (inside and losing a hub kind), ``zone``.
    summary : dict
        ``links_closed``, ``links_kept_open`` (grade-separated),
        ``people_in_place``, ``people_isolated``,
        ``people_in_place_cut_off``, the added cost of those who still
        reach their hubs, and the same per kind (``by_kind``).
    districts : pandas.DataFrame or None
        The same figures per zone.
    work : int
    """

    places: pd.DataFrame
    summary: dict
    districts: pd.DataFrame | None
    work: int
    notes: list = field(default_factory=list)


_UNIT = {"minutes": "minutes", "length_m": "m", "hops": "hops", "latency_ms": "ms"}


def hazard_impact(trips, links: HazardLinks, in_hazard, zone=None) -> HazardImpact:
    """Close the hazard's links and count who is affected in place and who is isolated.

    Parameters
    ----------
    trips : HubTrips
    links : HazardLinks
    in_hazard : array_like of bool, shape (n_places,)
        Whether each place (settlement, or node when none) lies in the hazard.
    zone : array_like, shape (n_places,), optional
        The district of each place (None = outside every district).

    Returns
    -------
    HazardImpact
    """
    nk = len(trips.kinds)
    res = trips.close(links.closed)
    before, after = trips.place_cost, res.place_cost
    people = trips.people
    inside = np.asarray(in_hazard, bool)
    unit = _UNIT[trips.weight]
    was = np.isfinite(before)
    lost = was & ~np.isfinite(after)
    kept = was & ~lost
    delta = np.where(kept, after - np.where(was, before, 0.0), 0.0)
    places = {"place_id": trips.place_ids, "people": people, "in_hazard": inside.astype(np.int32)}
    for k, name in enumerate(trips.kinds):
        places[f"{name}_{unit}_before"] = np.where(was[k], before[k], np.nan)
        places[f"{name}_{unit}_after"] = np.where(np.isfinite(after[k]), after[k], np.nan)
        places[f"cut_off_{name}"] = lost[k].astype(np.int32)
    any_lost = lost.any(axis=0) if nk else np.zeros(len(people), bool)
    places["isolated"] = (any_lost & ~inside).astype(np.int32)
    places["cut_off_in_place"] = (any_lost & inside).astype(np.int32)
    places["zone"] = np.full(len(people), None, object) if zone is None else np.asarray(zone, object)
    pf = pd.DataFrame(places)
    af = added_field(trips.weight)

    def figures(sel):
        out = {"people_in_place": float(people[sel & inside].sum()),
               "people_isolated": float(people[sel & any_lost & ~inside].sum()),
               "people_in_place_cut_off": float(people[sel & any_lost & inside].sum()),
               af: float((people[None, :] * delta)[:, sel].sum())}
        out["by_kind"] = {name: {"people_isolated": float(people[sel & lost[k] & ~inside].sum()),
                                 "people_in_place_cut_off": float(people[sel & lost[k] & inside].sum()),
                                 af: float((people * delta[k])[sel].sum())}
                          for k, name in enumerate(trips.kinds)}
        return out

    everyone = np.ones(len(people), bool)
    summary = {"links_closed": int(len(links.closed)), "links_kept_open": int(len(links.kept_open)),
               "people": float(people.sum()), **figures(everyone)}
    districts = None
    if zone is not None:
        zs = pd.Series(np.asarray(zone, object))
        rows = []
        for z in pd.unique(zs.dropna()):
            f = figures((zs == z).to_numpy())
            row = {"zone": z, "people": float(people[(zs == z).to_numpy()].sum())}
            row.update({k: v for k, v in f.items() if k != "by_kind"})
            for name, kf in f["by_kind"].items():
                row[f"people_isolated_{name}"] = kf["people_isolated"]
                row[f"people_in_place_cut_off_{name}"] = kf["people_in_place_cut_off"]
            rows.append(row)
        districts = pd.DataFrame(rows)
        out_z = zs.isna().to_numpy()
        if out_z.any():
            summary["people_outside_districts"] = float(people[out_z].sum())
    return HazardImpact(pf, summary, districts, int(res.work))


def hazard_layers(trips, polygons, *, closes_bridges: bool = False, zones=None, zone_ids=None):
    """The hazard's layers, as ``geo-reach criticality --hazard`` and a study's ``[criticality]`` write them.

    Parameters
    ----------
    trips : HubTrips
    polygons : array_like of shapely geometries
        The hazard (working CRS); missing geometries are ignored.
    closes_bridges : bool
        Close grade-separated links too.
    zones : GeoDataFrame of polygons, optional
        Districts (working CRS), for per-district figures.
    zone_ids : array_like, optional
        The districts' ids (default: row number from 1).

    Returns
    -------
    layers : dict of str to GeoDataFrame
        ``hazard_links`` (the links touched: ``edge_id``, ``closed``,
        ``grade_separated``), ``hazard_places`` (the :class:`HazardImpact`
        places, one point each) and, with zones, ``hazard_districts``.
    impact : HazardImpact
    """
    import geopandas as gpd
    import shapely

    net = trips.network
    geoms = np.asarray(polygons, dtype=object)
    geoms = geoms[~shapely.is_missing(geoms)] if len(geoms) else geoms
    hl = hazard_links(net, geoms, closes_bridges=closes_bridges)
    place_xy = trips.place_att.point_xy if trips.has_places else np.column_stack([net.node_x, net.node_y])
    pts = shapely.points(place_xy)
    inside = np.zeros(len(pts), bool)
    if len(geoms):
        pi, _ = shapely.STRtree(geoms).query(pts, predicate="intersects")
        inside[np.unique(pi)] = True
    zone = zid = None
    if zones is not None:
        zid = np.arange(1, len(zones) + 1).astype(object) if zone_ids is None else np.asarray(zone_ids, object)
        zone = np.full(len(pts), None, object)
        zg = np.asarray(zones.geometry.values, dtype=object)
        pi, zi = shapely.STRtree(zg).query(pts, predicate="intersects")
        order = np.lexsort((zi, pi))
        pi, zi = pi[order], zi[order]
        first = np.r_[True, pi[1:] != pi[:-1]] if len(pi) else np.zeros(0, bool)
        zone[pi[first]] = zid[zi[first]]
    imp = hazard_impact(trips, hl, inside, zone)
    grade = np.isin(hl.touched, hl.kept_open) if not closes_bridges else np.zeros(len(hl.touched), bool)
    touched = gpd.GeoDataFrame({"edge_id": hl.touched, "closed": np.isin(hl.touched, hl.closed).astype(np.int32),
                                "grade_separated": grade.astype(np.int32)},
                               geometry=net.edge_geometry[hl.touched] if len(hl.touched) else [], crs=net.crs)
    layers = {"hazard_links": touched, "hazard_places": gpd.GeoDataFrame(imp.places, geometry=pts, crs=net.crs)}
    if imp.districts is not None and zones is not None:
        zg = gpd.GeoDataFrame({"zone": zid}, geometry=zones.geometry.values, crs=net.crs)
        layers["hazard_districts"] = zg.merge(imp.districts, on="zone", how="left")
    return layers, imp
