"""The analysis of one set of inputs (the baseline, or one scenario): access, metrics, surface.

:func:`analyse` computes everything a study describes for one network and
one set of hubs and returns an :class:`Analysis`.  Commands ask for some
steps only (``geo-reach access`` runs ``{"access"}``): one code path with a
study run.  Progress is reported through the ``progress`` callback; nothing
here prints.
"""

from __future__ import annotations

import logging
from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from ..study import Study
from .inputs import Hubs, build_or_read, load_rasters, read_settlements

__all__ = ["Analysis", "ALL_STEPS", "FRICTION_FILES", "analyse", "path_frame", "zones_layer", "travel_model",
           "has_friction", "bands_note"]

log = logging.getLogger("geo_reach")

#: The steps of an analysis; a command may ask for some of them only.
ALL_STEPS = frozenset({"access", "metrics", "profile", "surface"})

#: The ``[surface]`` inputs that slow or stop walking (the friction inputs).
FRICTION_FILES = ("terrain", "landcover", "barriers")


def bands_note(weight) -> str:
    """What is in minutes and what in the weight's unit, for a study routed on a weight other than minutes."""
    return (f"routing weight {weight.name} ({weight.unit_name}): the travel-time surface, reach bands and rings, "
            f"weak regions, zones and the settlements' hub_minutes are travel time in minutes (bands are "
            f"defined in minutes); the network's hub_cost, the settlements' hub_cost, the diameter, the edge "
            f"change layers and the scenario ranking are in {weight.unit_name}")


def has_friction(study: Study) -> bool:
    """True when the study names terrain, land cover or barriers (walks then cross the friction grid)."""
    return study.surface is not None and any(k in study.surface_files for k in FRICTION_FILES)


def travel_model(study: Study, rasters=None):
    """The run's :class:`~geo_reach.analysis.travel.TravelModel`: the study's routing options and friction inputs.

    With friction inputs it walks across the study's grid (``rasters`` from
    :func:`~geo_reach.pipeline.inputs.load_rasters`) and is made once: it is
    kept in ``rasters["travel"]``, so the baseline and every scenario (which
    share the rasters) price walks with the one model.  Without them, walks
    are straight lines.
    """
    from ..analysis.travel import TravelModel

    if not has_friction(study) or rasters is None:
        return TravelModel(study.routing)
    if "travel" not in rasters:
        files = study.surface_files
        speeds = {int(k): float(v) for k, v in files.get("landcover_speeds", {}).items()} or None
        source = f"file '{study.resolve(files['landcover'])}'" if "landcover" in files else "land cover"
        rasters["travel"] = TravelModel.build(study.routing, rasters["grid"], terrain=rasters.get("terrain"),
                                              landcover=rasters.get("landcover"), landcover_speeds=speeds,
                                              barriers=rasters.get("barriers"), landcover_source=source,
                                              neighbours=study.surface.neighbours)
    return rasters["travel"]


@dataclass
class Analysis:
    """Everything computed for one set of inputs (baseline or one scenario)."""

    build: object
    hubs: Hubs | None
    weight: object = None                                 # the routing Weight of every network cost here
    travel: object = None                                 # the TravelModel that priced every walk
    node_fields: dict = field(default_factory=dict)      # per-node arrays
    hub_table: object = None
    node_cost: np.ndarray | None = None                   # any-kind cost (weight unit), NaN = none
    node_hub: np.ndarray | None = None                    # 0-based hub index, -1 = none
    kind_costs: dict = field(default_factory=dict)        # kind -> (cost, hub index into hubs)
    metrics: dict = field(default_factory=dict)
    diameter_path: object = None
    profile: object = None
    surface: object = None
    grid: object = None
    population: np.ndarray | None = None
    kind_surfaces: dict = field(default_factory=dict)
    bands: object = None
    rings: object = None                                  # disjoint reach rings (layer reach_rings)
    barriers: object = None                               # water and barrier polygons (for the map)
    pop_stats: object = None
    kind_pop_stats: dict = field(default_factory=dict)
    zones: object = None
    settlements: object = None
    weak: object = None
    rai: object = None
    connection_m: np.ndarray | None = None
    notes: list = field(default_factory=list)
    sections: dict = field(default_factory=dict)          # "criticality", "indices" -> SectionResult
    access: object = None                                 # the HubAccess (its forests repair a scenario's)


def _quiet(_step: str) -> None:
    return None


def analyse(study: Study, specs, hubs: Hubs | None, *, progress=None, with_profile=True,
            rasters=None, prebuilt=None, steps=ALL_STEPS, repair=None) -> Analysis:
    """Compute everything the study describes for these line layers and hubs.

    Parameters
    ----------
    study : Study
    specs : list of LayerSpec
        The line layers (ignored when ``prebuilt`` is given).
    hubs : Hubs or None
    progress : callable, optional
        Called with a short text as each step starts.
    with_profile : bool
        Compute the reach profile (scenarios skip it).
    rasters : dict, optional
        From :func:`~geo_reach.pipeline.inputs.load_rasters`, shared by the
        baseline and the scenarios.
    prebuilt : BuildResult, optional
        ``specs`` already built (the baseline's, built once to learn the CRS).
    steps : set of str
        Some of :data:`ALL_STEPS`.
    repair : Repair, optional
        ``prebuilt`` is a baseline's network changed in place (a scenario):
        the nearest hubs are repaired from the baseline's forests
        (:class:`~geo_reach.analysis.access.Repair`), with results identical
        to a search from scratch.
    """
    from ..analysis import metrics as M

    step = progress or _quiet
    if prebuilt is None:
        step("building the network")
    res = prebuilt if prebuilt is not None else build_or_read(study, specs)
    net = res.network
    routing = study.routing
    w = routing.weight
    out = Analysis(build=res, hubs=hubs, weight=w)
    out.notes += list(res.report.get("notes", ()))      # what a prebuilt network file needed read compatibly
    walks = hubs is not None and ("access" in steps or "surface" in steps)
    if walks and rasters is None and has_friction(study):
        step("reading rasters")
        rasters = load_rasters(study, net, hubs)
    out.travel = travel_model(study, rasters)
    if walks:
        from ..analysis.access import hub_access

        step("routing to hubs")
        acc = hub_access(net, hubs.xy, hubs.ids, hubs.kinds, travel=out.travel, repair=repair)
        out.access = acc
        out.notes += list(hubs.notes) + acc.notes
        out.node_cost, out.node_hub = acc.node_cost, acc.node_hub
        out.kind_costs = acc.kind_costs
        out.node_fields.update(acc.node_fields)
        t = hubs.frame.copy()
        for c in acc.hubs.columns:
            if c not in ("hub_id", "kind"):
                t[c] = acc.hubs[c].to_numpy()
        out.hub_table = t
    if "metrics" in steps:
        step("network metrics")
        m = study.metrics
        figures, d, ecc, clo = M.network_figures(net, w, exact=m.exact, samples=m.samples, seed=m.seed,
                                                 centrality=m.node_figures)
        if ecc is not None:
            out.node_fields["eccentricity"] = ecc
            out.node_fields["closeness"] = clo
        out.metrics = figures
        out.diameter_path = path_frame(net, d.path_nodes, w, d.value)
    if with_profile and "profile" in steps:
        from ..analysis.profile import random_sources, sample_profile

        src = random_sources(net, study.metrics.profile_sources, seed=study.metrics.seed)
        out.profile = sample_profile(net, src, w)
    if "surface" in steps and study.surface is not None and hubs is not None and out.node_cost is not None:
        _surface(study, out, net, hubs, step, rasters)
    return out


def path_frame(net, path_nodes, weight, value):
    """The diameter path as one LineString row (edges chained along the node path)."""
    import geopandas as gpd
    import shapely

    cols = {"path_cost": [], "weight": [], "minutes": [], "length_m": [], "edge_count": [], "from_node": [],
            "to_node": []}
    if path_nodes is None or len(path_nodes) < 2:
        return gpd.GeoDataFrame(cols, geometry=[], crs=net.crs)
    adj = net.csr(weight)
    eids = adj.edge_between(path_nodes[:-1], path_nodes[1:])
    parts = []
    for a, e in zip(path_nodes[:-1], eids):
        g = net.edge_geometry[e]
        parts.append(g if net.edge_from[e] == a else shapely.reverse(g))
    coords = np.concatenate([shapely.get_coordinates(p) if i == 0 else shapely.get_coordinates(p)[1:]
                             for i, p in enumerate(parts)])
    mins = net.edge_minutes[eids]
    return gpd.GeoDataFrame({"path_cost": [float(value)], "weight": [weight.name],
                             "minutes": [float(mins.sum()) if np.isfinite(mins).all() else np.nan],
                             "length_m": [float(net.edge_length_m[eids].sum())], "edge_count": [len(eids)],
                             "from_node": [int(path_nodes[0])], "to_node": [int(path_nodes[-1])]},
                            geometry=[shapely.LineString(coords)], crs=net.crs)


def _surface(study: Study, out: Analysis, net, hubs: Hubs, step, rasters):
    from ..analysis.bands import band_polygons, population_stats, ring_polygons, rural_access_index, zone_table
    from ..analysis.regions import weak_regions
    from ..analysis.surface import compute_surface

    s = study.surface
    files = study.surface_files
    routing = study.routing
    if rasters is None:
        step("reading rasters")
        rasters = load_rasters(study, net, hubs)
    grid = rasters["grid"]
    out.grid = grid
    out.notes += list(rasters.get("notes", []))
    kw = dict(walk_kmh=routing.walk_kmh, terrain=rasters.get("terrain"), landcover=rasters.get("landcover"),
              landcover_speeds={int(k): float(v) for k, v in files.get("landcover_speeds", {}).items()} or None,
              barriers=rasters.get("barriers"), direction=routing.direction, neighbours=s.neighbours,
              max_access_m=routing.max_access_m)
    if routing.weight.name != "minutes":
        out.notes.append(bands_note(routing.weight))
    step("travel-time surface")
    # the surface is in minutes: with another routing weight, its node costs and hubs come from a
    # minutes routing of its own (never minutes from one routing and hubs from another)
    minutes_acc = None
    if routing.weight.name == "minutes":
        node_cost, node_hub, kind_costs = out.node_cost, out.node_hub, out.kind_costs
    else:
        minutes_acc = _minutes_access(out.travel, net, hubs)
        node_cost, node_hub, kind_costs = minutes_acc.node_cost, minutes_acc.node_hub, minutes_acc.kind_costs
    try:
        surf = compute_surface(net, node_cost, node_hub, grid, hub_xy=hubs.xy, **kw)
    except InputError as err:
        if "landcover" in files and not str(err).startswith("file "):
            raise err.with_message(f"file '{study.resolve(files['landcover'])}': {err}") from err
        raise
    out.surface = surf
    pop = rasters.get("population")
    out.population = pop
    bands_txt = [f"{b:g}" for b in s.bands]
    hub_ids = list(hubs.ids)
    out.bands = band_polygons(surf.minutes, surf.nearest_hub, grid, bands_txt, population=pop, hub_ids=hub_ids)
    out.rings = ring_polygons(surf.minutes, grid, bands_txt, population=pop, passable=surf.flat_kmh > 0)
    out.barriers = rasters.get("barriers")
    if pop is not None:
        out.pop_stats = population_stats(surf.minutes, pop, bands_txt)
    for kind, (kc, kh) in kind_costs.items():
        from ..analysis.access import kind_name

        mine = np.array([kind_name(k) == kind for k in hubs.kinds], dtype=bool)   # this kind's hubs are seeds
        ks = compute_surface(net, kc, kh, grid, hub_xy=np.where(mine[:, None], hubs.xy, np.nan), **kw)
        out.kind_surfaces[kind] = ks
        if pop is not None:
            out.kind_pop_stats[kind] = population_stats(ks.minutes, pop, bands_txt)
    if study.zones is not None:
        from ..ingest.layers import parse_layer_ref, read_layer
        from .inputs import layer_ref

        z = study.zones
        ref = parse_layer_ref(layer_ref(study, z["path"], z.get("layer")))
        zones = read_layer(ref, "polygons").to_crs(net.crs)
        if pop is None:
            out.notes.append("zones given without population: zone tables skipped")
        else:
            summary = zone_table(surf.minutes, pop, grid, zones, bands_txt, zone_field=z.get("id_field"))
            out.zones = zones_layer(summary, zones, z.get("id_field"), z.get("name_field") or
                                    ("name" if "name" in zones.columns else None), bands_txt, s.threshold)
    if study.settlements is not None:
        out.settlements = _settlements(study, out, net, hubs)
    hub_nodes = _hub_nodes(net, hubs, out.travel)
    out.weak = weak_regions(surf.minutes, surf.entry_node, grid, net, node_cost, hub_nodes, s.threshold,
                            population=pop, direction=routing.direction, passable=surf.flat_kmh > 0)
    # Rural Access Index when roads carry an all-season flag.
    allseason = net.extra.get("all_season")
    if pop is not None and allseason is not None and np.isfinite(allseason.astype(float)).any():
        road = net.edge_mode == "road"
        out.rai = rural_access_index(pop, grid, net.edge_geometry[road],
                                     np.nan_to_num(allseason[road].astype(float)) > 0)
    if (net.edge_mode == "cable").any():
        from ..analysis.seeding import cable_connection_m

        out.connection_m = cable_connection_m(net, grid)


def _settlements(study, out, net, hubs):
    """The settlements layer (glossary names): ids, names, people, minutes to the nearest hub (and per kind),
    the nearest hub's id and name, and the network length of the trip.

    Each settlement's trip is priced from its own position by the run's
    travel model (never read from its grid cell), so the minutes are those
    ``route`` and ``od`` give for the same trip.
    """
    import geopandas as gpd
    import shapely

    from ..analysis.access import kind_groups

    t = study.settlements
    st = read_settlements(study, net.crs)
    ids = st[t["id_field"]].to_numpy() if t.get("id_field") in st.columns \
        else np.arange(1, len(st) + 1, dtype=np.int64)
    data = {"settlement_id": ids}
    nf = t.get("name_field") or ("name" if "name" in st.columns else None)
    if nf:
        if nf not in st.columns:
            raise InputError(f"settlements: no field '{nf}' for the names; check the name field",
                             key="settlement_name_field")
        data["name"] = st[nf].astype(str).to_numpy(object)
    data["population"] = st["population"].to_numpy(float)
    layer = gpd.GeoDataFrame(data, geometry=st.geometry.values, crs=st.crs)
    names = np.asarray(hubs.names, dtype=object)
    hub_ids = np.asarray(hubs.ids, dtype=object)
    xy = shapely.get_coordinates(shapely.centroid(st.geometry.values)) if len(st) else np.zeros((0, 2))
    model = out.travel.for_weight("minutes")
    role = "leave" if model.options.reverse else "arrive"
    places = model.attach(net, xy, roles=(role,), always_join=True)   # every settlement's people count
    groups = dict(kind_groups(hubs.kinds)) if hubs.kinds is not None else {}
    trips = model.hub_trips(net, places, hubs.xy, groups, exact=True)

    def columns(tr):
        has = (tr.hub >= 0) & np.isfinite(tr.cost)
        minutes = np.where(has, tr.cost, np.nan)
        hub = np.where(has, hub_ids[np.maximum(tr.hub, 0)], None)
        return has, minutes, hub

    has, layer["hub_minutes"], layer["nearest_hub"] = columns(trips[None])
    layer["nearest_hub_name"] = np.where(has, names[np.maximum(trips[None].hub, 0)], None)
    layer["network_length_m"] = np.where(has, trips[None].network_m, np.nan)
    for kind in groups:
        _, layer[f"hub_minutes_{kind}"], layer[f"nearest_hub_{kind}"] = columns(trips[kind])
    if out.weight.name != "minutes":
        layer["hub_cost"] = _weight_costs(out.travel, net, xy, hubs, role)
    people = layer["population"].to_numpy(float)
    shown = layer["settlement_id"].to_numpy()
    off = _off_grid(out.grid, xy)
    beyond = places.attached & (places.access_m > model.max_access_m)
    if beyond.any():
        out.notes.append(f"{int(beyond.sum())} settlements ({people[beyond].sum():,.0f} people) lie farther than the "
                         f"largest access distance ({model.max_access_m:g} m) from the network; they walk to the "
                         f"nearest places to join it all the same: {', '.join(str(v) for v in shown[beyond][:5])}"
                         f"{' ...' if beyond.sum() > 5 else ''}")
    for mask, why in ((~places.attached & ~places.blocked & ~off, "have no network to join"),
                      (places.blocked & ~off, "cannot walk to any place to join the network (barriers or "
                                              "impassable ground all round)"),
                      (places.attached & ~has, "reach no hub over the network")):
        if mask.any():
            out.notes.append(f"{int(mask.sum())} settlements ({people[mask].sum():,.0f} people) {why}: "
                             f"{', '.join(str(v) for v in shown[mask][:5])}{' ...' if mask.sum() > 5 else ''}; "
                             "their minutes are empty")
    if off.any():
        out.notes.append(f"{int(off.sum())} settlements ({people[off].sum():,.0f} people) lie outside the grid: "
                         f"{', '.join(str(v) for v in shown[off][:5])}{' ...' if off.sum() > 5 else ''}; "
                         "their people are left out of the bands and zones"
                         f"{' and they have no minutes (walks cross the grid)' if model.on_grid else ''}; "
                         "widen surface.extent")
    return layer


def _weight_costs(travel, net, xy, hubs: Hubs, role) -> np.ndarray:
    """Each settlement's ``hub_cost``: the trip to its nearest hub priced and chosen on the routing weight.

    The same trip model as the nodes' ``hub_cost`` (the study's weight and
    walk); the hub may differ from ``nearest_hub`` (the nearest by minutes).
    NaN where no hub is reachable on the weight.
    """
    places = travel.attach(net, xy, roles=(role,), always_join=True)
    tr = travel.hub_trips(net, places, hubs.xy, {}, exact=True)[None]
    return np.where((tr.hub >= 0) & np.isfinite(tr.cost), tr.cost, np.nan)


def _off_grid(grid, xy) -> np.ndarray:
    """Points outside ``grid`` (none when there is no grid)."""
    if grid is None or not len(xy):
        return np.zeros(len(xy), bool)
    r, _ = grid.index(xy[:, 0], xy[:, 1])
    return r < 0


def zones_layer(zone_summary, zones, id_field, name_field, bands_txt, threshold):
    """The zones layer in the glossary's names: ids, names, people per band, shares in percent."""
    z = zone_summary.zones
    out = z[["geometry"]].copy() if "geometry" in z.columns else None
    data = {"zone_id": z["zone"].to_numpy() if id_field else np.arange(1, len(z) + 1)}
    if name_field and name_field in zones.columns:
        data["name"] = zones[name_field].astype(str).to_numpy(object)
    data["population"] = z["population"].to_numpy(float)
    for b in bands_txt:
        col = [c for c in z.columns if c.startswith("share_within_") and c.endswith(b.replace(".", "_"))]
        share = z[col[0]].to_numpy(float) if col else np.full(len(z), np.nan)
        data[f"population_within_{b}"] = share * data["population"]
        data[f"share_within_{b}_pct"] = 100.0 * share
    data["population_beyond"] = z["population_beyond"].to_numpy(float)
    with np.errstate(invalid="ignore", divide="ignore"):
        data["share_beyond_pct"] = np.where(data["population"] > 0,
                                            100.0 * data["population_beyond"] / data["population"], np.nan)
    data["mean_hub_minutes"] = z["mean_minutes"].to_numpy(float)
    import geopandas as gpd
    import pandas as pd

    frame = pd.DataFrame(data)
    geom = out.geometry.values if out is not None else zones.geometry.values
    return gpd.GeoDataFrame(frame, geometry=geom, crs=zones.crs)


def _minutes_access(travel, net, hubs: Hubs):
    """Nearest hub by minutes (for the surface when the study routes on another weight)."""
    from ..analysis.access import hub_access

    return hub_access(net, hubs.xy, hubs.ids, hubs.kinds, travel=travel.for_weight("minutes"))


def _hub_nodes(net, hubs: Hubs, travel) -> np.ndarray:
    """The node each hub joins the network at (its cheapest walk; hubs left out are dropped)."""
    model = travel.for_weight("minutes")
    role = "arrive" if model.options.reverse else "leave"
    att = model.attach(net, hubs.xy, roles=(role,))
    walk = att.walk(role)
    out = np.full(len(hubs.ids), -1, np.int64)
    for i in range(len(hubs.ids)):
        legs = np.nonzero(att.leg_point == i)[0]
        if len(legs) == 0:
            continue
        lg = legs[np.argmin(walk[legs])]
        out[i] = att.leg_node[lg] if att.leg_edge[lg] < 0 else net.edge_from[att.leg_edge[lg]]
    return out[out >= 0]
