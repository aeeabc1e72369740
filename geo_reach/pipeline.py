"""Run a study: build, access, metrics, surface, bands, regions, scenarios, outputs.

One code path for the whole analysis.  :func:`analyse` computes everything a
study describes for one set of inputs (the baseline, or a scenario) and
returns an :class:`Analysis`; :func:`run_study` runs the baseline and the
scenarios, compares them and writes the outputs into a folder atomically.

Results are model estimates; local surveys, codes and licensed professional
practice decide.
"""

from __future__ import annotations

import copy
import hashlib
import json
import time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from . import CAUTION, __version__
from .errors import InputError, where
from .network.build import BuildOptions, LayerSpec, build_network
from .study import Study

__all__ = ["Analysis", "analyse", "run_study", "holds_results", "layer_specs"]


def check_outdir(outdir: Path, overwrite: bool):
    """Refuse, before any work, an output folder that cannot be written or already holds results."""
    import os

    outdir = Path(outdir)
    if outdir.exists() and not outdir.is_dir():
        raise InputError(f"file '{outdir}': is a file, not a folder; choose another output folder")
    anc = outdir
    while not anc.exists():
        anc = anc.parent
    if not anc.is_dir():
        raise InputError(f"file '{outdir}': '{anc}' is a file, so the folder cannot be made there; "
                         "choose another output folder")
    if not os.access(anc, os.W_OK | os.X_OK):
        raise InputError(f"file '{outdir}': '{anc}' is not writable; choose another output folder")
    if holds_results(outdir) and not overwrite:
        raise InputError(f"file '{outdir}': the folder already holds results; pass --overwrite to replace them")
    if outdir.is_dir() and not holds_results(outdir) and any(outdir.iterdir()):
        # The whole folder is replaced at the end of a run: never one holding other files.
        raise InputError(f"file '{outdir}': the folder is not empty and holds no geo-reach results; "
                         "choose a new or empty folder")


def holds_results(folder) -> bool:
    """A folder holds results when it contains ``summary.json`` or ``results.gpkg``."""
    folder = Path(folder)
    return folder.is_dir() and ((folder / "summary.json").exists() or (folder / "results.gpkg").exists())


# --------------------------------------------------------------------------- inputs
def _ref(study: Study, path: str, layer: str | None):
    p = study.resolve(path)
    return f"{p}:{layer}" if layer else str(p)


def layer_specs(study: Study, tables=None) -> list[LayerSpec]:
    """LayerSpecs for ``[[lines]]`` tables (the study's own by default)."""
    out = []
    for t in (tables if tables is not None else study.lines):
        stations = None
        if t.get("stations"):
            stations = _ref(study, t["stations"], t.get("stations_layer"))
        out.append(LayerSpec(
            source=_ref(study, t["path"], t.get("layer")), mode=t.get("mode", "road"), name=t.get("name"),
            speed_field=t.get("speed_field"), class_field=t.get("class_field"), class_speeds=t.get("class_speeds"),
            speed_kmh=t.get("speed_kmh"), oneway_field=t.get("oneway_field"), level_field=t.get("level_field"),
            all_season_field=t.get("all_season_field"), access_points=stations,
            boarding_minutes=float(t.get("boarding_minutes", 0.0)), assume_crs=t.get("assume_crs")))
    return out


def build_or_read(study: Study, specs):
    """Build the network from the line layers, or read the prebuilt one the study names."""
    pre = study.network.get("prebuilt")
    if not pre:
        return build_network(specs, build_options(study))
    from .ingest.layers import list_layers, read_frame
    from .ingest.points import load_network
    from .network.build import BuildResult

    path = study.resolve(pre)
    net = load_network(path, study.routing.get("weight", "minutes"))
    issues = read_frame(path, "network_issues") if "network_issues" in list_layers(path) else None
    if issues is None:
        import geopandas as gpd

        issues = gpd.GeoDataFrame({"kind": [], "detail": [], "src_layer": [], "src_fid": []}, geometry=[], crs=net.crs)
    kinds = issues["kind"].value_counts().to_dict() if len(issues) else {}
    report = {"nodes": net.n_nodes, "edges": net.n_edges, "components": net.n_components,
              "largest_component_nodes": int((net.component == 0).sum()) if net.n_nodes else 0,
              "input_length_m": None, "network_length_m": float(net.edge_length_m.sum()),
              "issues": {k: int(v) for k, v in kinds.items()}, "crs": net.crs.to_string() if net.crs else None}
    return BuildResult(net, issues.reset_index(drop=True), report)


def build_options(study: Study) -> BuildOptions:
    n = study.network
    return BuildOptions(crs=n.get("crs"), snap_m=float(n.get("snap_m", 1.0)), dangle_m=n.get("dangle_m"),
                        access_snap_m=float(n.get("access_snap_m", 100.0)),
                        transfer_max_m=float(n.get("transfer_max_m", 1000.0)),
                        transfer_walk_kmh=float(n.get("transfer_walk_kmh", 5.0)))


@dataclass
class Hubs:
    """Hub points in the working CRS: ids, kinds, names, and the frame written as the ``hubs`` layer."""

    xy: np.ndarray
    ids: np.ndarray
    kinds: np.ndarray | None
    frame: object  # GeoDataFrame in the working CRS, one row per hub point
    notes: list = field(default_factory=list)


def read_hubs(study: Study, table: dict, crs) -> Hubs:
    """Read a hubs table (``[hubs]`` or a scenario's ``add_hubs``), as every command reads hubs.

    Ids are the ``id_field`` values (duplicates refused) or the row number
    from 1; a multi-point hub gives one point per part sharing its id.
    """
    import geopandas as gpd
    import shapely

    from .ingest.points import read_points

    pts = read_points(_ref(study, table["path"], table.get("layer")), crs, id_field=table.get("id_field"),
                      kind_field=table.get("kind_field"), what="hubs", id_option="hubs.id_field",
                      assume_crs=table.get("assume_crs"))
    ints = len(pts.ids) and all(isinstance(v, (int, np.integer)) for v in pts.ids)
    data = {"hub_id": pts.ids.astype(np.int64) if ints else pts.ids}
    nf = table.get("name_field") or ("name" if "name" in pts.frame.columns else None)
    if nf:
        if nf not in pts.frame.columns:
            raise InputError(f"{pts.label}has no field '{nf}' (hubs.name_field)")
        data["name"] = pts.frame[nf].astype(str).to_numpy(object)
    data["kind"] = pts.kinds if pts.kinds is not None else np.full(len(pts.ids), "hub", object)
    frame = gpd.GeoDataFrame(data, geometry=shapely.points(pts.xy), crs=crs)
    return Hubs(pts.xy, pts.ids, pts.kinds, frame, list(pts.notes))


def merge_hubs(a: Hubs, b: Hubs | None, remove=()) -> Hubs:
    import geopandas as gpd

    frame = a.frame if b is None else gpd.GeoDataFrame(pd.concat([a.frame, b.frame], ignore_index=True), crs=a.frame.crs)
    keep = ~frame["hub_id"].isin([str(r) for r in remove]).to_numpy()
    frame = frame[keep].reset_index(drop=True)
    if frame["hub_id"].duplicated().any():
        raise InputError(f"hub id {frame['hub_id'][frame['hub_id'].duplicated()].iloc[0]!r} is used twice "
                         "after adding the scenario's hubs; ids must be unique")
    import shapely

    kinds = frame["kind"].to_numpy(object) if a.kinds is not None else None
    return Hubs(shapely.get_coordinates(frame.geometry.values), frame["hub_id"].to_numpy(object), kinds, frame)


# --------------------------------------------------------------------------- analysis
@dataclass
class Analysis:
    """Everything computed for one set of inputs (baseline or one scenario)."""

    build: object
    hubs: Hubs
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


#: The steps of an analysis; a command may ask for some of them only.
ALL_STEPS = frozenset({"access", "metrics", "profile", "surface"})


def analyse(study: Study, specs, hubs: Hubs | None, *, progress=None, with_profile=True,
            grid=None, rasters=None, prebuilt=None, steps=ALL_STEPS) -> Analysis:
    """Compute everything the study describes for these line layers and hubs.

    ``prebuilt`` is a :class:`~geo_reach.network.build.BuildResult` of
    ``specs`` already made (the baseline's, built once to learn the CRS).
    ``steps`` limits the work to some of :data:`ALL_STEPS` (the ``access``
    command asks for ``{"access"}``: one code path with a study run).
    """
    from .analysis import metrics as M

    step = progress or (lambda s: None)
    if prebuilt is None:
        step("building the network")
    res = prebuilt if prebuilt is not None else build_or_read(study, specs)
    net = res.network
    out = Analysis(build=res, hubs=hubs)
    routing = study.routing
    w = routing["weight"]
    # ---- access
    if hubs is not None and ("access" in steps or "surface" in steps):
        from .analysis.access import hub_access

        step("routing to hubs")
        acc = hub_access(net, hubs.xy, hubs.ids, hubs.kinds, w, routing["direction"],
                         max_access_m=float(routing["max_access_m"]), walk_kmh=float(routing["walk_kmh"]))
        out.notes += list(hubs.notes) + acc.notes
        out.node_cost, out.node_hub = acc.node_cost, acc.node_hub
        out.kind_costs = acc.kind_costs
        out.node_fields.update(acc.node_fields)
        t = hubs.frame.copy()
        for c in acc.hubs.columns:
            if c not in ("hub_id", "kind"):
                t[c] = acc.hubs[c].to_numpy()
        out.hub_table = t
    # ---- metrics
    if "metrics" in steps:
        step("network metrics")
        figures, d, ecc, clo = M.network_figures(net, w, exact=bool(study.metrics["exact"]),
                                                 samples=int(study.metrics["samples"]),
                                                 seed=int(study.metrics["seed"]),
                                                 centrality=study.metrics.get("node_figures"))
        if ecc is not None:
            out.node_fields["eccentricity"] = ecc
            out.node_fields["closeness"] = clo
        out.metrics = figures
        out.diameter_path = _path_frame(net, d.path_nodes, w, d.value)
    if with_profile and "profile" in steps:
        from .analysis.profile import random_sources, sample_profile

        k = int(study.metrics["profile_sources"])
        src = random_sources(net, k, seed=int(study.metrics["seed"]))
        out.profile = sample_profile(net, src, w)
    # ---- surface
    if "surface" in steps and study.surface is not None and hubs is not None and out.node_cost is not None:
        _surface(study, out, net, hubs, step, grid, rasters)
    return out


def _path_frame(net, path_nodes, weight, value):
    """The diameter path as one LineString row (edges chained along the node path)."""
    import geopandas as gpd
    import shapely

    if path_nodes is None or len(path_nodes) < 2:
        return gpd.GeoDataFrame({"minutes": [], "length_m": [], "cost": []}, geometry=[], crs=net.crs)
    adj = net.csr(weight)
    eids = adj.edge_between(path_nodes[:-1], path_nodes[1:])
    parts = []
    for a, e in zip(path_nodes[:-1], eids):
        g = net.edge_geometry[e]
        parts.append(g if net.edge_from[e] == a else shapely.reverse(g))
    coords = np.concatenate([shapely.get_coordinates(p) if i == 0 else shapely.get_coordinates(p)[1:]
                             for i, p in enumerate(parts)])
    mins = float(np.nansum(net.edge_minutes[eids]))
    return gpd.GeoDataFrame({"cost": [float(value)], "weight": [weight], "minutes": [mins],
                             "length_m": [float(net.edge_length_m[eids].sum())], "edges": [len(eids)],
                             "from_node": [int(path_nodes[0])], "to_node": [int(path_nodes[-1])]},
                            geometry=[shapely.LineString(coords)], crs=net.crs)


def study_grid(study: Study, net, hubs: Hubs, pop_layer=None):
    """The analysis grid: bounds of network, hubs and population raster plus the margin (or the extent)."""
    from .ingest.rasters import Grid

    s = study.surface
    if "extent" in s:
        bounds = tuple(float(v) for v in s["extent"])
        margin = 0.0
    else:
        xs = [net.node_x.min(), net.node_x.max(), hubs.xy[:, 0].min(), hubs.xy[:, 0].max()]
        ys = [net.node_y.min(), net.node_y.max(), hubs.xy[:, 1].min(), hubs.xy[:, 1].max()]
        if pop_layer is not None:
            from rasterio.warp import transform_bounds

            h, w = pop_layer.data.shape
            t = pop_layer.transform
            b = (t.c, t.f + t.e * h, t.c + t.a * w, t.f)
            b = transform_bounds(pop_layer.crs, net.crs, *b)
            xs += [b[0], b[2]]
            ys += [b[1], b[3]]
        bounds = (min(xs), min(ys), max(xs), max(ys))
        margin = float(s["margin_m"])
    return Grid.from_bounds(bounds, float(s["cell_m"]), margin, crs=net.crs)


def load_rasters(study: Study, net, hubs: Hubs):
    """Read and resample the study's rasters once (the grid is shared by the scenarios)."""
    from .ingest.rasters import read_raster, resample_to_grid

    s = study.surface
    pop_layer = read_raster(study.resolve(s["population"])) if "population" in s else None
    if pop_layer is not None:
        _check_overlap(pop_layer, net, float(s["margin_m"]))
    grid = study_grid(study, net, hubs, pop_layer)
    out = {"grid": grid}
    if pop_layer is not None:
        out["population"] = resample_to_grid(pop_layer, grid, "population").data
    if "terrain" in s:
        tl = read_raster(study.resolve(s["terrain"]))
        _check_overlap(tl, net, float(s["margin_m"]))
        out["terrain"] = resample_to_grid(tl, grid, "terrain").data
    if "landcover" in s:
        ll = read_raster(study.resolve(s["landcover"]))
        _check_overlap(ll, net, float(s["margin_m"]))
        lc = resample_to_grid(ll, grid, "classes").data
        out["landcover"] = np.where(np.isnan(lc), -1, lc).astype(np.int64)
    if "barriers" in s:
        from .ingest.layers import parse_layer_ref, read_layer

        ref = parse_layer_ref(_ref(study, s["barriers"], s.get("barriers_layer")))
        out["barriers"] = read_layer(ref, "polygons").to_crs(net.crs)
    if study.settlements is not None and "population" not in out:
        out["population"] = _settlement_population(study, grid)
    return out


def _check_overlap(layer, net, margin_m):
    """Refuse a raster lying wholly outside the network's extent (plus the margin)."""
    from rasterio.warp import transform_bounds

    h, w = layer.data.shape
    t = layer.transform
    xs = (t.c, t.c + t.a * w)
    ys = (t.f, t.f + t.e * h)
    b = transform_bounds(layer.crs, net.crs, min(xs), min(ys), max(xs), max(ys))
    nb = (net.node_x.min() - margin_m, net.node_y.min() - margin_m, net.node_x.max() + margin_m,
          net.node_y.max() + margin_m)
    if b[0] > nb[2] or b[2] < nb[0] or b[1] > nb[3] or b[3] < nb[1]:
        raise InputError(f"file '{layer.path}': the raster does not overlap the network "
                         f"(raster {b[0]:.0f},{b[1]:.0f} - {b[2]:.0f},{b[3]:.0f}; network "
                         f"{nb[0]:.0f},{nb[1]:.0f} - {nb[2]:.0f},{nb[3]:.0f} in {net.crs.to_string()}); "
                         "check the raster's CRS and extent")


def read_settlements(study: Study, crs):
    from .ingest.layers import parse_layer_ref, read_layer

    t = study.settlements
    ref = parse_layer_ref(_ref(study, t["path"], t.get("layer")))
    gdf = read_layer(ref, "points").to_crs(crs)
    pf = t["population_field"]
    if pf not in gdf.columns:
        raise InputError(f"{where(ref.path, ref.layer)}has no field '{pf}' (settlements.population_field)")
    pop = pd.to_numeric(gdf[pf], errors="coerce")
    if (pop < 0).any():
        fid = gdf.index[(pop < 0).to_numpy()][0]
        raise InputError(f"{where(ref.path, ref.layer, fid, pf)}negative population; fix the value")
    gdf = gdf.assign(population=pop.fillna(0.0).to_numpy(float))
    return gdf


def _settlement_population(study, grid):
    s = read_settlements(study, grid.crs)
    pop = np.zeros(grid.shape)
    import shapely

    xy = shapely.get_coordinates(s.geometry.values)
    r, c = grid.index(xy[:, 0], xy[:, 1])
    ok = (r >= 0) & (r < grid.height) & (c >= 0) & (c < grid.width)
    np.add.at(pop, (r[ok], c[ok]), s["population"].to_numpy()[ok])
    return pop


def _surface(study, out, net, hubs, step, grid, rasters):
    from .analysis.bands import (band_polygons, population_stats, ring_polygons, rural_access_index, sample_points,
                                 zone_table)
    from .analysis.regions import weak_regions
    from .analysis.surface import compute_surface

    s = study.surface
    routing = study.routing
    if rasters is None:
        step("reading rasters")
        rasters = load_rasters(study, net, hubs)
    grid = rasters["grid"]
    out.grid = grid
    walk = float(routing["walk_kmh"])
    kw = dict(walk_kmh=walk, terrain=rasters.get("terrain"), landcover=rasters.get("landcover"),
              landcover_speeds={int(k): float(v) for k, v in s.get("landcover_speeds", {}).items()} or None,
              barriers=rasters.get("barriers"), direction=routing["direction"])
    if routing["weight"] != "minutes":
        out.notes.append("the travel-time surface uses minutes whatever routing.weight says")
    step("travel-time surface")
    # the surface is in minutes: with another routing weight, its node costs and hubs come from a
    # minutes routing of its own (never minutes from one routing and hubs from another)
    node_cost, node_hub = ((out.node_cost, out.node_hub) if routing["weight"] == "minutes"
                           else _minutes_costs(study, net, hubs))
    try:
        surf = compute_surface(net, node_cost, node_hub, grid, **kw)
    except InputError as err:
        if "landcover" in s and not str(err).startswith("file "):
            raise InputError(f"file '{study.resolve(s['landcover'])}': {err}") from err
        raise
    out.surface = surf
    pop = rasters.get("population")
    out.population = pop
    bands = s["bands"]
    bands_txt = [f"{b:g}" for b in bands]
    hub_ids = list(hubs.ids)
    out.bands = band_polygons(surf.minutes, surf.nearest_hub, grid, bands_txt, population=pop, hub_ids=hub_ids)
    out.rings = ring_polygons(surf.minutes, grid, bands_txt, population=pop, passable=surf.flat_kmh > 0)
    out.barriers = rasters.get("barriers")
    if pop is not None:
        out.pop_stats = population_stats(surf.minutes, pop, bands_txt)
    for kind, (kc, kh) in out.kind_costs.items():
        if routing["weight"] != "minutes":
            continue
        ks = compute_surface(net, kc, kh, grid, **kw)
        out.kind_surfaces[kind] = ks
        if pop is not None:
            out.kind_pop_stats[kind] = population_stats(ks.minutes, pop, bands_txt)
    if study.zones is not None:
        from .ingest.layers import parse_layer_ref, read_layer

        z = study.zones
        ref = parse_layer_ref(_ref(study, z["path"], z.get("layer")))
        zones = read_layer(ref, "polygons").to_crs(net.crs)
        if pop is None:
            out.notes.append("zones given without population: zone tables skipped")
        else:
            out.zones = zone_table(surf.minutes, pop, grid, zones, bands_txt, zone_field=z.get("id_field"))
    if study.settlements is not None:
        import shapely

        from .analysis.attach import attach_points
        from .analysis.routing import nearest_hub_route_m

        st = read_settlements(study, net.crs)
        sp = sample_points(surf.minutes, surf.nearest_hub, grid, st, hub_ids=hub_ids)
        sp = sp.rename(columns={"hub_id": "nearest_hub"})   # as in the nodes layer
        # network km: along the least-cost route from the node where the settlement's trip joins
        # the network (the surface's entry node at its cell) to its nearest hub
        att = attach_points(net, hubs.xy, "minutes", max_access_m=float(routing["max_access_m"]),
                            walk_kmh=float(routing["walk_kmh"]))
        route_m = nearest_hub_route_m(net, att, "minutes", routing["direction"])
        xy = shapely.get_coordinates(st.geometry.values)
        r, c = grid.index(xy[:, 0], xy[:, 1])
        inside = (r >= 0) & (r < grid.height) & (c >= 0) & (c < grid.width)
        entry = np.full(len(st), -1, np.int64)
        entry[inside] = surf.entry_node[r[inside], c[inside]]
        sp["network_km"] = np.where(entry >= 0, route_m[np.maximum(entry, 0)] / 1000.0, np.nan)
        for kind, ks in out.kind_surfaces.items():
            kp = sample_points(ks.minutes, ks.nearest_hub, grid, st, hub_ids=hub_ids)
            sp[f"nearest_{kind}"] = kp["hub_id"].to_numpy()
            sp[f"{kind}_minutes"] = kp["minutes"].to_numpy()
        out.settlements = sp
    weak_t = float(s.get("weak_minutes", max(bands)))
    hub_nodes = _hub_nodes(net, hubs, routing)
    out.weak = weak_regions(surf.minutes, surf.entry_node, grid, net, node_cost, hub_nodes, weak_t,
                            population=pop, direction=routing["direction"], passable=surf.flat_kmh > 0)
    # Rural Access Index when roads carry an all-season flag.
    allseason = net.extra.get("all_season")
    if pop is not None and allseason is not None and np.isfinite(allseason.astype(float)).any():
        road = net.edge_mode == "road"
        out.rai = rural_access_index(pop, grid, net.edge_geometry[road], np.nan_to_num(allseason[road].astype(float)) > 0)
    if (net.edge_mode == "cable").any():
        from .analysis.seeding import cable_connection_m

        out.connection_m = cable_connection_m(net, grid)


def _minutes_costs(study, net, hubs):
    from .analysis.access import hub_access

    r = study.routing
    acc = hub_access(net, hubs.xy, hubs.ids, None, "minutes", r["direction"],
                     max_access_m=float(r["max_access_m"]), walk_kmh=float(r["walk_kmh"]))
    return acc.node_cost, acc.node_hub


def _hub_nodes(net, hubs, routing):
    """The node each hub joins the network at (nearest entry; -1 if left out)."""
    from .analysis.attach import attach_points

    att = attach_points(net, hubs.xy, "minutes", max_access_m=float(routing["max_access_m"]),
                        walk_kmh=float(routing["walk_kmh"]))
    out = np.full(len(hubs.ids), -1, np.int64)
    for i in range(len(hubs.ids)):
        legs = np.nonzero(att.leg_point == i)[0]
        if len(legs) == 0:
            continue
        lg = legs[np.argmin(att.leg_walk_m[legs])]
        out[i] = att.leg_node[lg] if att.leg_edge[lg] < 0 else net.edge_from[att.leg_edge[lg]]
    return out[out >= 0]


# --------------------------------------------------------------------------- outputs
def _nodes_layer(a: Analysis):
    nodes = a.build.network.nodes_frame()
    for k, v in a.node_fields.items():
        nodes[k] = v
    return nodes


def _edges_layer(a: Analysis):
    """Edges with the cost to the nearest hub at their cheaper end (``hub_minutes``)."""
    net = a.build.network
    e = net.edges_frame()
    if a.node_cost is not None:
        c = a.node_cost
        e[f"hub_{a.metrics.get('weight', 'minutes')}"] = np.fmin(c[net.edge_from], c[net.edge_to])
    return e


def _pop_dict(ps):
    if ps is None:
        return None
    return {"population_total": ps.population_total, "population_by_band": ps.population_by_band,
            "population_beyond": ps.population_beyond, "population_unreachable": ps.population_unreachable,
            "population_weighted_minutes": ps.population_weighted_minutes}


def summarise(study: Study, a: Analysis) -> dict:
    r = a.build.report
    out = {
        "network": {k: r[k] for k in ("nodes", "edges", "components", "largest_component_nodes",
                                      "input_length_m", "network_length_m", "issues", "crs")},
        "metrics": a.metrics,
    }
    if a.profile is not None:
        g = a.profile.growth
        out["reach_profile"] = {
            "sources": len(a.profile.sources),
            "steps": [{"cost": float(c), "nodes": float(n), "length_m": float(l)}
                      for c, n, l in zip(a.profile.cost, a.profile.nodes, a.profile.length_m)],
            "growth": {k: v for k, v in g.__dict__.items()} if hasattr(g, "__dict__") else str(g),
        }
    if a.hub_table is not None:
        out["hubs"] = {"count": int(len(a.hub_table)), "attached": int(a.hub_table["attached"].sum()),
                       "index_to_hub_id": {str(i + 1): str(h) for i, h in enumerate(a.hubs.ids)}}
    if a.surface is not None:
        g = a.grid
        out["surface"] = {"cell_m": g.cell_m, "width": g.width, "height": g.height,
                          "clipped_slopes": a.surface.clipped_slopes, "seed_cells": a.surface.seed_cells,
                          "impassable_cells": a.surface.impassable_cells}
        out.update(_pop_dict(a.pop_stats) or {})
        if a.kind_pop_stats:
            out["by_kind"] = {k: _pop_dict(v) for k, v in a.kind_pop_stats.items()}
        if a.rai is not None:
            out["rural_access_index"] = {k: v for k, v in a.rai.__dict__.items()
                                         if isinstance(v, (int, float, str))}
        if a.weak is not None:
            top = a.weak.head(5)
            out["weak_regions"] = [{"rank": int(row["rank"]), "reason": row["reason"],
                                    "population": float(row["population"]) if pd.notna(row["population"]) else None,
                                    "area_km2": float(row["area_km2"])} for _, row in top.iterrows()]
            out["weak_regions_count"] = int(len(a.weak))
    out["notes"] = list(a.notes)
    return out


def _sha256(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as f:
        for chunk in iter(lambda: f.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def _clean(o):
    if isinstance(o, dict):
        return {str(k): _clean(v) for k, v in o.items()}
    if isinstance(o, (list, tuple)):
        return [_clean(v) for v in o]
    if isinstance(o, (np.integer,)):
        return int(o)
    if isinstance(o, (np.floating, float)):
        f = float(o)
        return None if not np.isfinite(f) else round(f, 6)
    if isinstance(o, np.bool_):
        return bool(o)
    if isinstance(o, np.ndarray):
        return _clean(o.tolist())
    return o


def _write_surface_rasters(folder: Path, a: Analysis):
    """``minutes.tif``, ``nearest_hub.tif`` (and per kind), ``connection_m.tif`` for cable layers."""
    from .export.raster import write_cog

    g = a.grid
    write_cog(folder / "minutes.tif", a.surface.minutes.astype(np.float32), g.transform, g.crs, np.nan)
    write_cog(folder / "nearest_hub.tif", a.surface.nearest_hub.astype(np.int32), g.transform, g.crs, 0)
    for kind, ks in a.kind_surfaces.items():
        write_cog(folder / f"minutes_{kind}.tif", ks.minutes.astype(np.float32), g.transform, g.crs, np.nan)
        write_cog(folder / f"nearest_{kind}.tif", ks.nearest_hub.astype(np.int32), g.transform, g.crs, 0)
    if a.connection_m is not None:
        write_cog(folder / "connection_m.tif", a.connection_m.astype(np.float32), g.transform, g.crs, np.nan)


def _write_deltas(folder: Path, base: Analysis, scenarios: dict):
    """``delta_minutes_<scenario>.tif``: scenario minus baseline (negative = faster)."""
    from .export.raster import write_cog

    if base.surface is None:
        return
    g = base.grid
    for name, sc in scenarios.items():
        if sc.get("delta") is not None:
            write_cog(folder / f"delta_minutes_{name}.tif", sc["delta"].astype(np.float32), g.transform, g.crs,
                      np.nan)


def _write_tables(folder: Path, a: Analysis):
    """The tables planners paste into reports: ``settlements.csv`` and ``zones.csv``."""
    if a.settlements is not None:
        a.settlements.drop(columns="geometry").to_csv(folder / "settlements.csv", index=False)
    if a.zones is not None:
        a.zones.zones.drop(columns="geometry", errors="ignore").to_csv(folder / "zones.csv", index=False)


def write_outputs(folder: Path, study: Study, base: Analysis, scenarios: dict, summary: dict,
                  only_comparison: bool = False):
    """Write every output of a run into ``folder`` (a fresh temporary folder).

    With ``only_comparison`` (``geo-reach compare``) only the scenario layers,
    the change rasters, the map and the summary are written.
    """
    from .export.gpkg import write_layers
    from .export.styles import write_styles

    if only_comparison:
        layers = {}
        for name, sc in scenarios.items():
            for lname, frame in sc["layers"].items():
                layers[f"{name}_{lname}"] = frame
        gpkg = folder / "comparison.gpkg"
        if layers:
            write_layers(gpkg, layers, descriptions={k: CAUTION for k in layers})
            write_styles(gpkg, layers)
        _write_deltas(folder, base, scenarios)
        if study.outputs.get("map", True):
            _write_map(folder / "map.html", study, base, scenarios)
        (folder / "summary.json").write_text(json.dumps(_clean(summary), indent=2) + "\n")
        return
    layers = {"edges": _edges_layer(base), "nodes": _nodes_layer(base), "network_issues": base.build.issues}
    if base.hub_table is not None:
        layers["hubs"] = base.hub_table
    layers["diameter_path"] = base.diameter_path
    if base.rings is not None:
        layers["reach_rings"] = base.rings
    if base.bands is not None:
        layers["reach_bands"] = base.bands
    if base.weak is not None:
        layers["weak_regions"] = base.weak
    if base.settlements is not None:
        layers["settlements"] = base.settlements
    if base.zones is not None:
        layers["zones"] = base.zones.zones
    for name, sc in scenarios.items():
        for lname, frame in sc["layers"].items():
            layers[f"{name}_{lname}"] = frame
    gpkg = folder / "results.gpkg"
    write_layers(gpkg, layers, descriptions={k: CAUTION for k in layers})
    write_styles(gpkg, layers)
    _write_tables(folder, base)
    if base.surface is not None:
        _write_surface_rasters(folder, base)
        _write_deltas(folder, base, scenarios)
    if base.profile is not None and study.outputs.get("profile_png", True):
        from .analysis.profile import plot_profile

        plot_profile(base.profile, folder / "reach_profile.png", title=f"{study.title}: reach profile")
    if study.outputs.get("map", True):
        _write_map(folder / "map.html", study, base, scenarios)
    (folder / "summary.json").write_text(json.dumps(_clean(summary), indent=2) + "\n")


#: How each routing weight is shown on the map: unit label, what it is, scale from the weight's unit.
_MAP_COSTS = {"minutes": ("min", "minutes", 1.0), "length_m": ("km", "distance", 1e-3),
              "hops": ("hops", "hops", 1.0), "latency_ms": ("ms", "latency", 1.0)}


def _write_map(path, study, base, scenarios):
    """Adapter from the pipeline's results to the map's input contract (export.webmap.MapInput)."""
    import geopandas as gpd

    from .export.webmap import MapInput, NetworkLayer, ScenarioView, write_map

    w = study.routing.get("weight", "minutes")
    unit, cost_name, scale = _MAP_COSTS.get(w, (w, w, 1.0))

    def network(edges, node_cost):
        if node_cost is None:
            return None
        ecost = edges[w].to_numpy(float) * scale if w in edges.columns else None
        return NetworkLayer(edges, np.asarray(node_cost, float) * scale, ecost)

    hub_names = {}
    if base.hub_table is not None and "name" in base.hub_table.columns:
        hub_names = dict(zip(base.hub_table["hub_id"].astype(str), base.hub_table["name"]))

    def settlements(frame, minutes_field):
        if frame is None:
            return None
        nf = (study.settlements or {}).get("name_field") or "name"
        near = frame["nearest_hub"] if "nearest_hub" in frame.columns else pd.Series([None] * len(frame))
        return gpd.GeoDataFrame({
            "name": frame[nf].to_numpy(object) if nf in frame.columns else None,
            "population": frame["population"].to_numpy(float) if "population" in frame.columns else np.nan,
            "minutes": frame[minutes_field].to_numpy(float),
            "hub_name": [hub_names.get(str(h), None if h is None or h != h else str(h)) for h in near],
            "network_km": frame["network_km"].to_numpy(float) if "network_km" in frame.columns else np.nan,
        }, geometry=frame.geometry.values, crs=frame.crs)

    districts = None
    if base.zones is not None:
        z = base.zones.zones
        nf = (study.zones or {}).get("name_field") or (study.zones or {}).get("id_field") or "zone"
        pop = z["population"].to_numpy(float)
        with np.errstate(invalid="ignore", divide="ignore"):
            share = np.where(pop > 0, z["population_beyond"].to_numpy(float) / pop, np.nan)
        districts = gpd.GeoDataFrame({"name": z[nf].astype(str).to_numpy(object) if nf in z.columns else None,
                                      "population": pop, "share_beyond": share,
                                      "mean_minutes": z["mean_minutes"].to_numpy(float)},
                                     geometry=z.geometry.values, crs=z.crs)
    diameter = base.diameter_path
    if diameter is not None and len(diameter):
        diameter = diameter.assign(cost=diameter["cost"].to_numpy(float) * scale)
    views = []
    for name, sc in scenarios.items():
        edges = sc.get("edges")
        net = network(edges, sc.get("node_cost")) if edges is not None else None
        change = sc["layers"].get("edge_change")
        if change is not None:
            change = change.rename(columns={"delta_minutes": "delta", "minutes_before": "before",
                                            "minutes_after": "after"})
        proposed = None
        if edges is not None:
            k = sc.get("kinds", {})
            new = np.array(edges["src_layer"].isin(k.get("added_layers", [])), dtype=bool)
            for lab, fids in k.get("upgraded", {}).items():
                new = new | np.array((edges["src_layer"] == lab) & edges["src_fid"].isin(fids), dtype=bool)
            proposed = edges[new & (edges["mode"] != "transfer").to_numpy()] if new.any() else None
        after = sc["layers"].get("settlements")
        views.append(ScenarioView(
            name=name, description=sc.get("description", ""), network=net, change=change, proposed=proposed,
            rings=sc["layers"].get("reach_rings"),
            settlements=settlements(after, "minutes_after") if after is not None else None))
    bands = [float(b) for b in study.surface["bands"]] if study.surface else [30.0, 60.0, 120.0]
    weak_t = float(study.surface.get("weak_minutes", max(bands))) if study.surface else None
    m = MapInput(
        title=study.title, cost_unit=unit, cost_name=cost_name, thresholds=tuple(bands),
        share_minutes=max(bands), weak_minutes=weak_t,
        network=network(base.build.network.edges_frame(), base.node_cost),
        hubs=base.hub_table, rings=base.rings, settlements=settlements(base.settlements, "minutes"),
        districts=districts, water=base.barriers, weak=base.weak,
        diameter=diameter if diameter is not None and len(diameter) else None,
        issues=base.build.issues if len(base.build.issues) else None, scenarios=tuple(views),
        basemap=bool(study.outputs.get("basemap", False)))
    write_map(path, m)


# --------------------------------------------------------------------------- scenarios
def scenario_inputs(study: Study, name: str, base_specs, base_hubs: Hubs | None):
    """Line specs and hubs of scenario ``name`` (validated against the baseline)."""
    import geopandas as gpd

    from .ingest.layers import parse_layer_ref, read_layer

    sc = study.scenarios[name]
    specs = [copy.copy(s) for s in base_specs]
    labels = [s.name or parse_layer_ref(s.source).label for s in specs]
    # a [[lines]] table is named by its label (name, else layer name, else file stem) or its layer name
    index = {}
    for i, (t, lab) in enumerate(zip(study.lines, labels)):
        index.setdefault(lab, i)
        if t.get("layer"):
            index.setdefault(t["layer"], i)
    changes = []
    upgraded = {}
    for key in ("upgrade", "close"):   # upgrades first, so a scenario may upgrade and close one feature
        for i, item in enumerate(sc.get(key, [])):
            lab = item.get("layer")
            if lab not in index:
                raise InputError(f"scenarios.{name}.{key}[{i}].layer: '{lab}' is not a line layer of the study "
                                 f"(layers: {', '.join(labels)})")
            k = index[lab]
            s = specs[k]
            lab = labels[k]
            frame = s.source if isinstance(s.source, gpd.GeoDataFrame) else read_layer(parse_layer_ref(s.source), "lines",
                                                                                       assume_crs=s.assume_crs)
            if "within" in item:
                ref = parse_layer_ref(_ref(study, item["within"], item.get("within_layer")))
                poly = read_layer(ref, "polygons").to_crs(frame.crs)
                hit = frame.geometry.intersects(poly.union_all()) & frame.geometry.notna()
                fids = list(frame.index[hit.to_numpy()])
                how = f"inside {ref.label}"
            else:
                fids = list(item.get("fids", []))
                how = "by id"
            missing = [f for f in fids if f not in frame.index]
            if missing:
                raise InputError(f"scenarios.{name}.{key}[{i}].fids: feature {missing[0]} does not exist in layer "
                                 f"'{lab}'; use the feature ids shown as src_fid in the edges layer")
            if key == "close":
                frame = frame.drop(index=fids)
                changes.append(f"closed {len(fids)} feature(s) of {lab} {how}")
            else:
                from .network.costs import feature_speeds

                frame = frame.copy()
                col = "__speed_kmh"
                speed, _, _, _ = feature_speeds(frame, s.mode, s.speed_field, s.class_field, s.class_speeds, s.speed_kmh)
                frame[col] = speed
                sel = frame.index.isin(fids)
                if "speed_kmh" in item:
                    frame.loc[sel, col] = float(item["speed_kmh"])
                    what = f"set to {float(item['speed_kmh']):g} km/h"
                else:
                    frame.loc[sel, col] = frame.loc[sel, col] * float(item["speed_factor"])
                    what = f"speed x {float(item['speed_factor']):g}"
                s.speed_field = col
                changes.append(f"{len(fids)} feature(s) of {lab} {how}: {what}")
                upgraded.setdefault(lab, []).extend(int(f) for f in fids)
            s.source = frame
            s.name = lab
    added = layer_specs(study, sc.get("add_lines", []))
    taken = set(labels)
    for s in added:
        lab = s.name or parse_layer_ref(s.source).label
        if lab in taken:   # a proposal named like an existing layer: keep its features apart
            s.name = f"{lab}_{name}"
        taken.add(s.name or lab)
    for s in added:
        changes.append(f"added line layer {s.name or parse_layer_ref(s.source).label}")
    specs = specs + added
    hubs = base_hubs
    if "add_hubs" in sc or sc.get("remove_hubs"):
        extra = read_hubs(study, sc["add_hubs"], base_hubs.frame.crs) if "add_hubs" in sc else None
        missing = [r for r in sc.get("remove_hubs", []) if str(r) not in set(map(str, base_hubs.ids))]
        if missing:
            raise InputError(f"scenarios.{name}.remove_hubs: hub {missing[0]!r} is not a hub of the study")
        hubs = merge_hubs(base_hubs, extra, sc.get("remove_hubs", []))
        if extra is not None:
            changes.append(f"added {len(extra.ids)} hub(s)")
        if sc.get("remove_hubs"):
            changes.append(f"removed {len(sc['remove_hubs'])} hub(s)")
    kinds = {"lines": bool(added) or any(k in sc for k in ("upgrade",)), "closure": "close" in sc,
             "hubs": "add_hubs" in sc or bool(sc.get("remove_hubs")), "upgraded": upgraded,
             "added_layers": [s.name or parse_layer_ref(s.source).label for s in added]}
    return specs, hubs, changes, kinds


def compare(study: Study, name: str, base: Analysis, scen: Analysis, changes, kinds) -> dict:
    """Scenario minus baseline: figures for the summary and the change layers."""
    import geopandas as gpd

    out = {"description": study.scenarios[name].get("description", ""), "changes": changes, "layers": {}}
    bm, sm = base.metrics, scen.metrics
    def change(a, b):
        return None if a is None or b is None or not np.isfinite(a) or not np.isfinite(b) else a - b

    out["diameter_change"] = change(sm["diameter"]["value"], bm["diameter"]["value"])
    out["mean_path_change"] = change(sm["mean_path"]["value"], bm["mean_path"]["value"])
    # km of new or upgraded line: added layers' length plus upgraded features' length
    bnet, snet = base.build.network, scen.build.network
    new_km = 0.0
    base_layers = set(bnet.edge_src_layer)
    new_mask = ~np.isin(snet.edge_src_layer, list(base_layers)) & (snet.edge_mode != "transfer")
    new_km += float(snet.edge_length_m[new_mask].sum()) / 1000
    for lab, fids in kinds.get("upgraded", {}).items():
        m = (snet.edge_src_layer == lab) & np.isin(snet.edge_src_fid, fids)
        new_km += float(snet.edge_length_m[m].sum()) / 1000
    # a proposed layer that touches nothing forms components of its own: report it
    for lab in kinds.get("added_layers", []):
        mine = snet.edge_src_layer == lab
        if not mine.any():
            continue
        comps = np.unique(snet.component[snet.edge_from[mine]])
        others = ~mine & (snet.edge_mode != "transfer")
        shared = np.isin(snet.component[snet.edge_from[others]], comps).any()
        if not shared:
            msg = (f"proposed layer {lab} touches nothing in the network (no junction within the "
                   f"{build_options(study).snap_m:g} m tolerance and no declared station); it was kept as a "
                   "separate part and changes no trip")
            changes.append(msg)
            out["touches_nothing"] = out.get("touches_nothing", []) + [lab]
    out["new_or_upgraded_km"] = new_km
    out["changed_anything"] = bool(changes)
    delta = None
    if base.surface is not None and scen.surface is not None:
        a, b = base.surface.minutes, scen.surface.minutes
        delta = b - a
        both_nan = np.isnan(a) & np.isnan(b)
        delta = np.where(both_nan, np.nan, np.where(np.isnan(a), -np.inf, np.where(np.isnan(b), np.inf, delta)))
        pop = base.population
        if pop is not None:
            newly = {}
            for t in study.surface["bands"]:
                key = f"{t:g}"
                wa = np.nan_to_num(pop[(a <= t)]).sum()
                wb = np.nan_to_num(pop[(b <= t)]).sum()
                newly[key] = float(wb - wa)
            out["people_newly_within"] = newly
            finite = np.isfinite(delta)
            out["person_minutes_saved"] = float(-(np.nan_to_num(pop[finite]) * delta[finite]).sum())
            weak_t = float(study.surface.get("weak_minutes", max(study.surface["bands"])))
            wa = np.nan_to_num(pop[~(a <= weak_t)]).sum()
            wb = np.nan_to_num(pop[~(b <= weak_t)]).sum()
            out["people_leaving_weak_regions"] = float(wa - wb)
        out["delta"] = np.where(np.isfinite(delta), delta, np.nan)
    out["edges"] = _edges_layer(scen)
    # per-settlement and per-zone change
    if base.settlements is not None and scen.settlements is not None:
        s = base.settlements[["geometry"]].copy()
        for col in base.settlements.columns:
            if col not in ("geometry",):
                s[col] = base.settlements[col].to_numpy()
        s["minutes_after"] = scen.settlements["minutes"].to_numpy()
        s["delta_minutes"] = s["minutes_after"] - s["minutes"]
        out["layers"]["settlements"] = gpd.GeoDataFrame(s, geometry="geometry", crs=base.settlements.crs)
    if base.zones is not None and scen.zones is not None:
        z = base.zones.zones.copy()
        wm = [c for c in z.columns if "weighted" in c or c.endswith("minutes")]
        for c in wm:
            z[f"{c}_after"] = scen.zones.zones[c].to_numpy()
            z[f"{c}_delta"] = z[f"{c}_after"] - z[c]
        out["layers"]["zones"] = z
    # edge change layer: each scenario edge's minutes to the nearest hub (at its cheaper end) against
    # the baseline's minutes at the same places (nodes matched by position, to 1 mm); a scenario
    # node the baseline lacks (a new junction, a new line) has no "before".
    se = out["edges"]
    if "hub_minutes" in se and base.node_cost is not None:
        from scipy.spatial import cKDTree

        tree = cKDTree(np.column_stack([bnet.node_x, bnet.node_y]))
        d, k = tree.query(np.column_stack([snet.node_x, snet.node_y]))
        before_node = np.where(d < 1e-3, base.node_cost[k], np.nan)
        before = np.fmin(before_node[snet.edge_from], before_node[snet.edge_to])
        before[np.isin(snet.edge_src_layer, kinds.get("added_layers", []))] = np.nan   # a new line had no "before"
        ch = se[["edge_id", "mode", "length_m", "src_layer", "src_fid", "hub_minutes", "geometry"]].copy()
        ch["minutes_before"] = before
        ch["delta_minutes"] = ch["hub_minutes"] - before
        ch = ch.rename(columns={"hub_minutes": "minutes_after"})
        # Only what changed: new edges, edges that gained or lost a route, and edges whose minutes
        # moved by more than a second.
        b_, a_ = ch["minutes_before"].to_numpy(), ch["minutes_after"].to_numpy()
        new = np.isin(ch["src_layer"].to_numpy(), kinds.get("added_layers", []))
        moved = new | (np.isnan(b_) != np.isnan(a_)) | (np.abs(a_ - b_) >= 1 / 60)
        ch = ch[moved]
        out["layers"]["edge_change"] = gpd.GeoDataFrame(ch, geometry="geometry", crs=se.crs)
    out["kinds"] = kinds
    return out


def rank_scenarios(results: dict, largest_band: str) -> list[dict]:
    """Rank by people newly within the largest band, then person-minutes saved per km of new line.

    Closures and hub-only changes have no new line: they are ranked by
    person-minutes saved alone, and the ranking says so.
    """
    rows = []
    for name, r in results.items():
        newly = (r.get("people_newly_within") or {}).get(largest_band, 0.0)
        pm = r.get("person_minutes_saved", 0.0)
        km = r.get("new_or_upgraded_km", 0.0)
        per_km = pm / km if km > 0 else None
        rows.append({"scenario": name, "people_newly_within_largest_band": newly,
                     "person_minutes_saved": pm, "person_minutes_saved_per_km": per_km,
                     "ranked_by": "person-minutes per km of new or upgraded line" if km > 0 else
                     "person-minutes alone (no new or upgraded line)"})
    # Per-km and raw person-minutes are different units: line scenarios are ordered among themselves
    # by person-minutes per km, then closures and hub-only changes by person-minutes.
    rows.sort(key=lambda r: (-r["people_newly_within_largest_band"],
                             r["person_minutes_saved_per_km"] is None,
                             -(r["person_minutes_saved_per_km"] if r["person_minutes_saved_per_km"] is not None
                               else r["person_minutes_saved"])))
    for i, r in enumerate(rows, 1):
        r["rank"] = i
    return rows


# --------------------------------------------------------------------------- run
def run_study(study: Study, outdir, *, overwrite=False, scenarios=None, only_comparison=False,
              progress=True, log=print) -> dict:
    """Run the study into ``outdir`` and return the summary.

    The folder is written as a whole: into a temporary folder beside it,
    renamed into place at the end.  A folder that already holds results is
    replaced only with ``overwrite``; a failed run leaves it as it was.
    """
    from .export.atomic import atomic_dir

    outdir = Path(outdir)
    check_outdir(outdir, overwrite)
    names = list(study.scenarios) if scenarios is None else list(scenarios)
    for n in names:
        if n not in study.scenarios:
            raise InputError(f"scenario '{n}' is not in the study (scenarios: {', '.join(study.scenarios) or 'none'})")
    # steps: build, rasters, access, metrics, surface, then per scenario 5 more, then writing
    bar = _Progress(progress, total=5 + 5 * len(names) + 1)
    timing = {"started": time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime())}
    t0 = time.perf_counter()
    specs = layer_specs(study)
    # Everything that can be refused is checked before the long steps start.
    pre = build_or_read(study, specs)
    crs = pre.network.crs
    hubs = read_hubs(study, study.hubs, crs) if study.hubs else None
    try:
        planned = {n: scenario_inputs(study, n, specs, hubs) for n in names}
    except InputError as err:
        if study.path is not None and not str(err).startswith("file "):
            raise InputError(f"file '{study.path}': {err}") from err
        raise
    bar("network built")
    rasters = None
    if study.surface is not None and hubs is not None:
        bar("reading rasters")
        rasters = load_rasters(study, pre.network, hubs)
    base = analyse(study, specs, hubs, progress=bar, rasters=rasters, prebuilt=pre)
    timing["baseline_s"] = round(time.perf_counter() - t0, 3)
    results = {}
    for n in names:
        t1 = time.perf_counter()
        bar(f"scenario {n}")
        sspecs, shubs, changes, kinds = planned[n]
        if not changes:
            log(f"scenario {n}: changes nothing (reported, still mapped)")
        scen = analyse(study, sspecs, shubs, progress=bar, with_profile=False, rasters=rasters)
        results[n] = compare(study, n, base, scen, changes, kinds)
        results[n]["node_cost"] = scen.node_cost            # for the map's scenario view
        if scen.rings is not None:
            results[n]["layers"]["reach_rings"] = scen.rings
        results[n]["proposal_notes"] = scen.notes + [
            f"{k} of {v} issue spots in the scenario network" for k, v in scen.build.report["issues"].items()
            if v and v != base.build.report["issues"].get(k)]
        timing[f"scenario_{n}_s"] = round(time.perf_counter() - t1, 3)
        results[n]["reuse"] = ("the scenario network was rebuilt and routed in full; the grid, rasters and "
                               "hub reading were reused from the baseline")
    summary = {
        "tool": "geo-reach", "version": __version__, "caution": CAUTION, "title": study.title,
        "study": study.raw,
        "inputs": {str(p.relative_to(study.base)) if p.is_relative_to(study.base) else str(p): _sha256(p)
                   for p in study.input_files() if p.is_file()},
        "baseline": summarise(study, base),
    }
    if names:
        largest = f"{max(study.surface['bands']):g}" if study.surface else ""
        summary["scenarios"] = {n: {k: v for k, v in r.items() if k not in ("layers", "delta", "edges", "node_cost")}
                                for n, r in results.items()}
        summary["scenario_ranking"] = rank_scenarios(summary["scenarios"], largest)
    bar("writing outputs")
    with atomic_dir(outdir) as tmp:
        timing["total_s"] = round(time.perf_counter() - t0, 3)
        summary["timing"] = timing
        write_outputs(tmp, study, base, results, summary, only_comparison=only_comparison)
    bar.close()
    return summary


class _Progress:
    """Progress on stderr: a tqdm bar over the steps on a terminal, timed lines otherwise (logs, CI)."""

    def __init__(self, enabled, total=None):
        import sys

        self.enabled = enabled
        self.t0 = time.perf_counter()
        self.out = sys.stderr
        self.bar = None
        if enabled and total and getattr(self.out, "isatty", lambda: False)():
            from tqdm import tqdm

            self.bar = tqdm(total=total, file=self.out, unit="step", leave=False,
                            bar_format="{desc:<34.34} {bar} {n_fmt}/{total_fmt} [{elapsed}]")

    def __call__(self, step):
        if not self.enabled:
            return
        if self.bar is not None:
            if self.bar.n < self.bar.total:
                self.bar.update(1)
            self.bar.set_description_str(step)
        else:
            print(f"[{time.perf_counter() - self.t0:6.1f} s] {step} ...", file=self.out, flush=True)

    def close(self):
        if not self.enabled:
            return
        if self.bar is not None:
            self.bar.close()
        print(f"[{time.perf_counter() - self.t0:6.1f} s] done", file=self.out, flush=True)


def run_surface(study: Study, outdir, *, overwrite=False, progress=True) -> dict:
    """The ``surface`` command's run: the study's baseline, written as the surface outputs.

    ``OUTDIR/minutes.tif``, ``nearest_hub.tif`` (and per kind), ``reach.gpkg``
    (``reach_bands``, ``weak_regions``, plus ``settlements``/``zones``) and
    ``summary.json`` with the population figures at its top level.
    """
    from .export.atomic import atomic_dir
    from .export.gpkg import write_layers
    from .export.styles import write_styles

    outdir = Path(outdir)
    check_outdir(outdir, overwrite)
    if study.surface is None or study.hubs is None:
        raise InputError("a surface needs hubs and a [surface] table")
    bar = _Progress(progress)
    t0 = time.perf_counter()
    specs = layer_specs(study)
    pre = build_or_read(study, specs)
    hubs = read_hubs(study, study.hubs, pre.network.crs)
    bar("reading rasters")
    rasters = load_rasters(study, pre.network, hubs)
    a = analyse(study, specs, hubs, progress=bar, rasters=rasters, prebuilt=pre, with_profile=False)
    base = summarise(study, a)
    summary = {"tool": "geo-reach", "version": __version__, "caution": CAUTION,
               "population_total": base.get("population_total"),
               "population_by_band": base.get("population_by_band"),
               "population_beyond": base.get("population_beyond"),
               "population_unreachable": base.get("population_unreachable"),
               "population_weighted_minutes": base.get("population_weighted_minutes"),
               **{k: v for k, v in base.items() if not k.startswith("population_")},
               "study": study.raw}
    bar("writing outputs")
    with atomic_dir(outdir) as tmp:
        _write_surface_rasters(tmp, a)
        layers = {"reach_bands": a.bands, "weak_regions": a.weak}
        if a.settlements is not None:
            layers["settlements"] = a.settlements
        if a.zones is not None:
            layers["zones"] = a.zones.zones
        write_layers(tmp / "reach.gpkg", layers, descriptions={k: CAUTION for k in layers})
        write_styles(tmp / "reach.gpkg", layers)
        _write_tables(tmp, a)
        summary["timing"] = {"total_s": round(time.perf_counter() - t0, 3)}
        (tmp / "summary.json").write_text(json.dumps(_clean(summary), indent=2) + "\n")
    bar.close()
    return summary
