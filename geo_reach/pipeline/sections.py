"""The study's optional analysis sections: ``[criticality]`` and ``[indices]``, run on the baseline.

Each section runs the same engine as its command (``geo-reach criticality``,
``geo-reach indices``) on the study's built network, hubs and settlements,
with the run's one travel model (:func:`~geo_reach.pipeline.steps.travel_model`:
the study's routing options and its terrain, land cover and barriers), so a
section's numbers are the command's numbers for the same inputs, and its
trips cost what the settlements layer, ``route`` and ``od`` say they cost.

Where the work runs comes from ``[compute]`` (``workers`` or ``scheduler``;
in-process by default).  Nothing here prints; notes go back with the result.

Results are model estimates; local surveys, codes and licensed professional
practice decide.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import GeoReachError, InputError
from ..study import Study

__all__ = ["SectionResult", "check_sections", "run_sections", "run_criticality", "run_indices", "settlement_points",
           "section_executor"]


@dataclass
class SectionResult:
    """What one section adds to a run.

    Attributes
    ----------
    layers : dict of str to GeoDataFrame
        Layers for ``results.gpkg`` (``link_criticality``, ``access_index`` ...).
    tables : dict of str to DataFrame
        Tables for CSV files and ``tables.xlsx`` (rounded when written).
    summary : dict
        The section's entry in ``summary.json``.
    notes : list of str
    descriptions : dict of str to str
        Layer descriptions (the caution is added when written).
    rasters : dict of str to (ndarray, Grid)
        Rasters for the results folder (``<name>.tif``).
    """

    layers: dict = field(default_factory=dict)
    tables: dict = field(default_factory=dict)
    summary: dict = field(default_factory=dict)
    notes: list = field(default_factory=list)
    descriptions: dict = field(default_factory=dict)
    rasters: dict = field(default_factory=dict)


def check_sections(study: Study, net) -> None:
    """Refuse, before the long steps, what the sections cannot use (unknown link ids)."""
    if study.criticality is not None and not study.criticality.is_hazard:
        _links(study, net)


def run_sections(study: Study, base, hubs, progress=None, timing=None) -> None:
    """Run the study's ``[criticality]`` and ``[indices]`` sections on the baseline; results in ``base.sections``."""
    import time

    for key, run in (("criticality", run_criticality), ("indices", run_indices)):
        if getattr(study, key) is None:
            continue
        if hubs is None:
            raise InputError(f"{key}: needs hubs; add a [hubs] table")
        if progress is not None:
            progress(f"{key} section")
        t0 = time.perf_counter()
        sec = run(study, base, hubs)
        base.sections[key] = sec
        base.notes += sec.notes
        if timing is not None:
            timing[f"{key}_s"] = round(time.perf_counter() - t0, 3)


def settlement_points(study: Study, crs):
    """The study's settlements as (xy, ids, people, frame): ids as the settlements layer gives them."""
    import shapely

    from .inputs import read_settlements

    t = study.settlements
    st = read_settlements(study, crs)
    ids = st[t["id_field"]].to_numpy() if t.get("id_field") in st.columns \
        else np.arange(1, len(st) + 1, dtype=np.int64)
    xy = shapely.get_coordinates(shapely.centroid(st.geometry.values)) if len(st) else np.zeros((0, 2))
    return xy, ids, st["population"].to_numpy(float), st


def section_executor(study: Study):
    """The executor ``[compute]`` asks for (a context manager; in-process by default)."""
    from ..parallel import executor

    c = study.compute
    return executor(workers=c.workers, scheduler=c.scheduler, timeout_s=c.timeout_s)


def _links(study: Study, net):
    from ..analysis.criticality import UnknownLinkError, check_links, read_link_ids

    links = study.criticality.links
    if isinstance(links, str) and links == "all":
        return None
    try:
        if isinstance(links, str):
            return read_link_ids(study.resolve(links), net)
        return check_links(net, list(links))
    except UnknownLinkError as err:
        raise UnknownLinkError(f"criticality.links: {err}") from err


def run_criticality(study: Study, base, hubs) -> SectionResult:
    """The ``[criticality]`` section on the baseline ``base`` (an :class:`~.steps.Analysis`).

    Every link named by ``criticality.links`` closed in turn: layer
    ``link_criticality``, as ``geo-reach criticality`` writes it.

    Raises
    ------
    InputError
        An unknown link id, or a weight the criticality engine does not take.
    """
    from .._meta import CAUTION
    from ..analysis.criticality import HubTrips, added_field, link_criticality

    net = base.build.network
    routing = study.routing
    out = SectionResult()
    links = None if study.criticality.is_hazard else _links(study, net)
    place_xy = people = place_ids = None
    if study.settlements is not None:
        place_xy, place_ids, people, _ = settlement_points(study, net.crs)
    try:
        trips = HubTrips.prepare(net, hubs.xy, hubs.ids, hubs.kinds, weight=routing.weight.name,
                                 direction=routing.direction, place_xy=place_xy, people=people, place_ids=place_ids,
                                 max_access_m=routing.max_access_m, walk_kmh=routing.walk_kmh, travel=base.travel)
    except GeoReachError as err:
        raise err.with_message(f"criticality: {err}") from err
    if study.criticality.is_hazard:
        return _hazard(study, trips, out)
    with section_executor(study) as ex:
        res = link_criticality(trips, links, executor=ex)
    out.notes += [f"criticality: {n}" for n in res.notes]
    af = added_field(routing.weight.name)
    out.layers["link_criticality"] = res.frame(net)
    out.descriptions["link_criticality"] = (f"people cut off from their hub kind and {af} ({routing.weight.name}, "
                                            f"{routing.direction}) when each link closes; rank 1 = most critical")
    out.tables["link_criticality"] = res.table
    w = res.work
    out.summary = {"links_examined": int(len(res.table)), "weight": routing.weight.name,
                   "direction": routing.direction,
                   "people": "settlements" if trips.has_places else "nodes (one person each)",
                   "work": w, "top": res.top(5), "caution": CAUTION}
    return out


def _hazard(study: Study, trips, out: SectionResult) -> SectionResult:
    """One hazard closing every link it touches: who is affected in place, who is isolated (per district
    with ``[zones]``); the layers ``geo-reach criticality --hazard`` writes."""
    from .._meta import CAUTION
    from ..analysis.criticality import hazard_layers, raster_hazard
    from ..ingest.layers import parse_layer_ref, read_layer
    from .inputs import layer_ref

    net = trips.network
    crit = study.criticality
    if crit.hazard is not None:
        ref = parse_layer_ref(layer_ref(study, crit.hazard, crit.hazard_layer))
        geoms = read_layer(ref, "polygons").to_crs(net.crs).geometry.values
        source = f"{crit.hazard}{':' + crit.hazard_layer if crit.hazard_layer else ''}"
    else:
        geoms = raster_hazard(study.resolve(crit.hazard_raster), crit.hazard_above, net.crs)
        source = f"{crit.hazard_raster} above {crit.hazard_above:g}"
    zones = zone_ids = None
    if study.zones is not None:
        z = study.zones
        zones = read_layer(parse_layer_ref(layer_ref(study, z["path"], z.get("layer"))), "polygons").to_crs(net.crs)
        if z.get("id_field"):
            if z["id_field"] not in zones.columns:
                raise InputError(f"zones: no field '{z['id_field']}' for the district ids; check the id field",
                                 key="zone_id_field")
            zone_ids = zones[z["id_field"]].to_numpy(object)
    layers, imp = hazard_layers(trips, geoms, closes_bridges=crit.closes_bridges, zones=zones, zone_ids=zone_ids)
    out.layers.update(layers)
    out.descriptions = {"hazard_links": f"links the hazard ({source}) touches; closed = 1 unless grade-separated",
                        "hazard_places": f"people in the hazard (in place) and those outside it who lose a hub kind "
                                         f"(isolated), {trips.weight}",
                        "hazard_districts": "hazard figures per district"}
    out.tables["hazard_places"] = imp.places
    if imp.districts is not None:
        out.tables["hazard_districts"] = imp.districts
    out.summary = {"hazard": source, "weight": trips.weight, "direction": trips.direction,
                   "people": "settlements" if trips.has_places else "nodes (one person each)", **imp.summary,
                   "caution": CAUTION}
    return out


def _weighted_inputs(study: Study, crs):
    """Hubs with their capacity and settlements with their people, read as ``geo-reach indices`` reads them."""
    from ..analysis.indices.inputs import read_weighted_points
    from .inputs import layer_ref

    h, s, opt = study.hubs, study.settlements, study.indices
    hubs = read_weighted_points(layer_ref(study, h["path"], h.get("layer")), crs, what="hubs",
                                value_field=opt.capacity_field, value_name="capacity",
                                value_option="indices.capacity_field", default=1.0, id_field=h.get("id_field"),
                                id_option="hubs.id_field", kind_field=h.get("kind_field"),
                                kind_option="hubs.kind_field")
    st = read_weighted_points(layer_ref(study, s["path"], s.get("layer")), crs, what="settlements",
                              value_field=s["population_field"], value_name="population",
                              value_option="settlements.population_field", required=True,
                              id_field=s.get("id_field"), id_option="settlements.id_field")
    return hubs, st


def run_indices(study: Study, base, hubs) -> SectionResult:
    """The ``[indices]`` section: layer ``access_index`` (one row per settlement, measure and hub kind),
    layer ``hub_catchments``, and with a travel-time surface the raster ``hub_kinds_within.tif``.

    Costs are in minutes whatever the routing weight (the keys say
    ``within_minutes``), from settlement to hub, priced by the run's travel
    model; settlements beyond ``max_access_m`` join the network all the same,
    as in the settlements layer, so ``nearest_minutes`` is that layer's
    ``hub_minutes_<kind>`` (one trip, one number).
    """
    import geopandas as gpd
    import pandas as pd

    from .._meta import CAUTION
    from ..analysis.indices.layer import index_layer
    from ..analysis.indices.measures import E2SFCA_ZONE_FRACTIONS
    from ..errors import OptionError

    net = base.build.network
    opt = study.indices
    out = SectionResult()
    hp, st = _weighted_inputs(study, net.crs)
    out.notes += [f"indices: {n}" for n in hp.notes + st.notes]
    travel = base.travel.for_weight("minutes")
    frames, catchments = [], []
    for m in opt.measures:
        zones = opt.zone_minutes if m == "e2sfca" else None
        weights = opt.zone_weights if m == "e2sfca" else None
        if m == "e2sfca" and weights is not None and zones is None:
            zones = tuple(f * opt.within_minutes for f in E2SFCA_ZONE_FRACTIONS)
        gravity = m == "gravity"
        try:
            layer, hub_layer, notes = index_layer(
                net, st, hp, m, within=opt.within_minutes, weight="minutes",
                decay=opt.decay if gravity else None, decay_param=opt.decay_param if gravity else None,
                zones=zones, zone_weights=weights, travel=travel, always_join=True)
        except OptionError as err:
            raise err.with_message(f"indices ({m}): {err}") from err
        frames.append(layer)
        hub_layer.insert(0, "measure", m)
        catchments.append(hub_layer)
        out.notes += [f"indices ({m}): {n}" for n in notes]
    layer = gpd.GeoDataFrame(pd.concat(frames, ignore_index=True), crs=net.crs)
    hub_layer = gpd.GeoDataFrame(pd.concat(catchments, ignore_index=True), crs=net.crs)
    t = opt.within_minutes
    what = ", ".join(opt.measures) + (f" within {t:g} minutes" if t is not None else "")
    out.layers = {"access_index": layer, "hub_catchments": hub_layer}
    out.descriptions = {"access_index": f"accessibility index ({what}), settlement to hub",
                        "hub_catchments": "hub capacity, settlements within reach and supply-to-demand ratio"}
    out.tables = {"access_index": layer.drop(columns="geometry")}
    reached = {m: int((f["hubs_within"] > 0).sum()) for m, f in zip(opt.measures, frames)}
    out.summary = {"measures": list(opt.measures), "within_minutes": t, "rows": int(len(layer)),
                   "rows_reaching_a_hub": reached, "direction": "to-hub", "caution": CAUTION}
    if base.surface is not None and t is not None:
        out.rasters["hub_kinds_within"] = (_kinds_within(base, t), base.grid)
        out.summary["raster"] = "hub_kinds_within.tif"
    return out


def _kinds_within(base, t: float) -> np.ndarray:
    """Per cell, how many hub kinds have a hub within ``t`` minutes (any hub: 0 or 1 when hubs have no kinds).

    A cumulative-opportunity count over kinds (each kind one opportunity),
    read from the travel-time surfaces already computed, one per kind; no
    per-hub surface is needed.  NaN where the cell is outside the surface
    (no minutes for any kind).
    """
    surfaces = [ks.minutes for ks in base.kind_surfaces.values()] or [base.surface.minutes]
    stack = np.stack([np.asarray(m, np.float64) for m in surfaces])
    with np.errstate(invalid="ignore"):
        count = (np.isfinite(stack) & (stack <= t)).sum(axis=0).astype(np.float64)
    count[~np.isfinite(stack).any(axis=0)] = np.nan
    return count
