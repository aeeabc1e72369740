"""Write a run's outputs into a (temporary) results folder, and the summary that goes with them.

Writers only: every figure was computed before (see :mod:`.steps` and
:mod:`.scenarios`).  ``results.gpkg`` (layers), GeoTIFFs, SLD styles, CSV
tables, the reach profile chart, ``map.html`` and ``summary.json``.
"""

from __future__ import annotations

import hashlib
from pathlib import Path

import numpy as np
import pandas as pd

from .._meta import CAUTION
from ..export.jsonout import dumps
from ..export.report import write_report
from ..study import Study
from .scenarios import edges_layer
from .steps import Analysis

__all__ = ["summarise", "write_outputs", "write_surface_outputs", "write_summary", "sha256", "nodes_layer",
           "layer_descriptions"]


def layer_descriptions(layers: dict, weight) -> dict:
    """Each layer's description: the caution, and for a layer with costs on the routing weight, its unit.

    ``hub_cost`` fields (and their ``_before``/``_after``/``_change``) are in
    the weight's unit; the description names it, so the GeoPackage says
    what its numbers count (:mod:`geo_reach.glossary`).
    """
    out = {}
    for name, frame in layers.items():
        text = CAUTION
        if weight is not None and any(str(c).startswith(("hub_cost", "eccentricity", "path_cost"))
                                      for c in getattr(frame, "columns", [])):
            text = (f"Costs (hub_cost, eccentricity, path_cost) in {weight.unit_name} ({weight.unit}): routing "
                    f"weight {weight.name}, {weight.describes}; hub_minutes are always minutes. {CAUTION}")
        out[name] = text
    return out


def nodes_layer(a: Analysis):
    nodes = a.build.network.nodes_frame()
    for k, v in a.node_fields.items():
        nodes[k] = v
    return nodes


def _pop_dict(ps):
    if ps is None:
        return None
    return {"population_total": ps.population_total, "population_by_band": ps.population_by_band,
            "population_beyond": ps.population_beyond, "population_unreachable": ps.population_unreachable,
            "mean_hub_minutes": ps.population_weighted_minutes}


def _growth(g) -> dict | str:
    """The reach profile's growth class under the glossary's names."""
    if not hasattr(g, "__dict__"):
        return str(g)
    return {"kind": g.kind, "exponent": g.exponent, "rate": g.rate, "points": g.points,
            "fit_error_polynomial": g.rss_power, "fit_error_exponential": g.rss_exponential}


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
            "growth": _growth(g),
        }
    if a.hub_table is not None:
        out["hubs"] = {"count": int(len(a.hub_table)), "joined": int(a.hub_table["joined"].sum()),
                       "hub_numbers": {str(i + 1): str(h) for i, h in enumerate(a.hubs.ids)}}
    if a.surface is not None:
        g = a.grid
        out["surface"] = {"cell_m": g.cell_m, "width": g.width, "height": g.height,
                          "clipped_slopes": a.surface.clipped_slopes, "join_cells": a.surface.seed_cells,
                          "impassable_cells": a.surface.impassable_cells}
        out.update(_pop_dict(a.pop_stats) or {})
        if a.kind_pop_stats:
            out["by_kind"] = {k: _pop_dict(v) for k, v in a.kind_pop_stats.items()}
        if a.rai is not None:
            r = a.rai        # shares in % as everywhere a planner reads them (glossary: share_pct)
            out["rural_access_index"] = {"share_pct": 100.0 * r.share, "population_within": r.population_within,
                                         "population_total": r.population_total, "distance_m": r.distance_m}
        if a.weak is not None:
            top = a.weak.head(5)
            out["weak_regions"] = [{"rank": int(row["rank"]), "reason": row["reason"],
                                    "population": float(row["population"]) if pd.notna(row["population"]) else None,
                                    "area_km2": float(row["area_km2"])} for _, row in top.iterrows()]
            out["weak_regions_count"] = int(len(a.weak))
    out["notes"] = list(a.notes)
    return out


def sha256(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as f:
        for chunk in iter(lambda: f.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def write_summary(folder: Path, summary: dict) -> None:
    """``summary.json`` (UTF-8, the one JSON encoder's rules)."""
    (Path(folder) / "summary.json").write_text(dumps(summary) + "\n", encoding="utf-8")


def _write_surface_rasters(folder: Path, a: Analysis):
    """``hub_minutes.tif``, ``nearest_hub.tif`` (and per kind), ``connection_m.tif`` for cable layers.

    Every band carries a description and unit; the nearest-hub rasters their hub names as categories
    (``<name>.tif.aux.xml``) and a labelled style (``<name>.sld``)."""
    from ..export.raster import hub_categories, write_result_raster

    g = a.grid
    cats = hub_categories(a.hubs.frame)
    write_result_raster(folder / "hub_minutes.tif", a.surface.minutes.astype(np.float32), g, np.nan)
    write_result_raster(folder / "nearest_hub.tif", a.surface.nearest_hub.astype(np.int32), g, 0, categories=cats)
    for kind, ks in a.kind_surfaces.items():
        write_result_raster(folder / f"hub_minutes_{kind}.tif", ks.minutes.astype(np.float32), g, np.nan)
        write_result_raster(folder / f"nearest_hub_{kind}.tif", ks.nearest_hub.astype(np.int32), g, 0,
                            categories=[c for c in cats if c.kind == kind])
    if a.connection_m is not None:
        write_result_raster(folder / "connection_m.tif", a.connection_m.astype(np.float32), g, np.nan)


def _write_section_rasters(folder: Path, a: Analysis):
    """The sections' rasters (``<name>.tif``, float32, NaN = no value)."""
    from ..export.raster import write_result_raster

    for sec in a.sections.values():
        for name, (values, grid) in sec.rasters.items():
            write_result_raster(folder / f"{name}.tif", np.asarray(values, np.float32), grid, np.nan)


def _write_deltas(folder: Path, base: Analysis, scenarios: dict):
    """``hub_minutes_change_<scenario>.tif``: scenario minus baseline (negative = faster)."""
    from ..export.raster import write_result_raster

    if base.surface is None:
        return
    g = base.grid
    for name, sc in scenarios.items():
        if sc.get("delta") is not None:
            write_result_raster(folder / f"hub_minutes_change_{name}.tif", sc["delta"].astype(np.float32), g, np.nan)


def _write_tables(folder: Path, study: Study, a: Analysis, scenarios: dict | None = None, baseline: bool = True):
    """The tables planners paste into reports: ``settlements.csv``, ``zones.csv``, ``<scenario>_settlements.csv``,
    ``<scenario>_zones.csv`` (rounded, see :mod:`geo_reach.export.tables`) and all of them in ``tables.xlsx``."""
    from ..export.tables import results_tables, write_csv
    from ..export.xlsx import write_workbook

    from ..export.tables import planner_round

    tables = results_tables(study, a, {n: sc.get("tables") for n, sc in (scenarios or {}).items()},
                            baseline=baseline)
    if baseline:
        for sec in a.sections.values():
            for stem, t in sec.tables.items():
                tables[stem] = planner_round(t)
    for stem, t in tables.items():
        write_csv(folder / f"{stem}.csv", t)
    write_workbook(folder / "tables.xlsx", tables, title=study.title)


def write_outputs(folder: Path, study: Study, base: Analysis, scenarios: dict, summary: dict,
                  only_comparison: bool = False):
    """Write every output of a run into ``folder`` (a fresh temporary folder).

    With ``only_comparison`` (``geo-reach compare``) only the scenario layers,
    the change rasters, the map and the summary are written.
    """
    from ..export.gpkg import write_layers
    from ..export.styles import write_styles

    if only_comparison:
        layers = {}
        for name, sc in scenarios.items():
            for lname, frame in sc["layers"].items():
                layers[f"{name}_{lname}"] = frame
        gpkg = folder / "comparison.gpkg"
        if layers:
            write_layers(gpkg, layers, descriptions=layer_descriptions(layers, base.weight))
            write_styles(gpkg, layers, cost_unit=base.weight.unit)
        _write_deltas(folder, base, scenarios)
        _write_tables(folder, study, base, scenarios, baseline=False)
        if study.outputs.map:
            _write_map(folder / "map.html", study, base, scenarios)
        write_report(folder / "report.html", study, base, scenarios, summary)
        write_summary(folder, summary)
        return
    layers = {"edges": edges_layer(base), "nodes": nodes_layer(base), "network_issues": base.build.issues}
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
        layers["zones"] = base.zones
    descriptions = {}
    for sec in base.sections.values():
        layers.update(sec.layers)
        descriptions.update({k: f"{v}. {CAUTION}" for k, v in sec.descriptions.items()})
    for name, sc in scenarios.items():
        for lname, frame in sc["layers"].items():
            layers[f"{name}_{lname}"] = frame
    gpkg = folder / "results.gpkg"
    described = layer_descriptions(layers, base.weight)
    write_layers(gpkg, layers, descriptions={k: descriptions.get(k, described[k]) for k in layers})
    write_styles(gpkg, layers, cost_unit=base.weight.unit)
    _write_tables(folder, study, base, scenarios)
    if base.surface is not None:
        _write_surface_rasters(folder, base)
        _write_deltas(folder, base, scenarios)
    _write_section_rasters(folder, base)
    if base.profile is not None and study.outputs.profile_png:
        from ..export.charts import plot_profile

        plot_profile(base.profile, folder / "reach_profile.png", title=f"{study.title}: reach profile")
    if study.outputs.map:
        _write_map(folder / "map.html", study, base, scenarios)
    write_report(folder / "report.html", study, base, scenarios, summary)
    write_summary(folder, summary)


#: How each routing weight is shown on the map: unit label, what it is, scale from the weight's unit
#: (the weight's own unit, as in the summary and on the console, but lengths in km).
_MAP_COSTS = {"minutes": ("min", "minutes", 1.0), "length_m": ("km", "distance", 1e-3),
              "hops": ("links", "links", 1.0), "latency_ms": ("ms", "latency", 1.0)}


def _write_map(path, study, base, scenarios):
    """Adapter from the pipeline's results to the map's input contract (:class:`geo_reach.export.webmap.MapInput`)."""
    import geopandas as gpd

    from ..export.webmap import MapInput, NetworkLayer, ScenarioView, write_map

    w = base.weight.name
    unit, cost_name, scale = _MAP_COSTS.get(w, (w, w, 1.0))

    def network(edges, node_cost):
        if node_cost is None:
            return None
        ecost = edges[w].to_numpy(float) * scale if w in edges.columns else None
        return NetworkLayer(edges, np.asarray(node_cost, float) * scale, ecost)

    def settlements(frame, suffix=""):
        if frame is None:
            return None
        col = lambda c: frame[f"{c}{suffix}"] if f"{c}{suffix}" in frame.columns else (  # noqa: E731
            frame[c] if c in frame.columns else None)
        minutes, hub, length = col("hub_minutes"), col("nearest_hub_name"), col("network_length_m")
        cost = col("hub_cost")
        extra = {"cost": cost.to_numpy(float) * scale} if cost is not None else {}
        return gpd.GeoDataFrame({
            "name": frame["name"].to_numpy(object) if "name" in frame.columns else None,
            "population": frame["population"].to_numpy(float) if "population" in frame.columns else np.nan,
            "minutes": minutes.to_numpy(float),
            "hub_name": hub.to_numpy(object) if hub is not None else None,
            "network_km": length.to_numpy(float) / 1000.0 if length is not None else np.nan, **extra,
        }, geometry=frame.geometry.values, crs=frame.crs)

    districts = None
    if base.zones is not None:
        z = base.zones
        names = z["name"] if "name" in z.columns else z["zone_id"]
        districts = gpd.GeoDataFrame({"name": names.astype(str).to_numpy(object),
                                      "population": z["population"].to_numpy(float),
                                      "share_beyond": z["share_beyond_pct"].to_numpy(float) / 100.0,
                                      "mean_minutes": z["mean_hub_minutes"].to_numpy(float)},
                                     geometry=z.geometry.values, crs=z.crs)
    diameter = base.diameter_path
    if diameter is not None and len(diameter):
        diameter = diameter.rename(columns={"path_cost": "cost"})
        diameter = diameter.assign(cost=diameter["cost"].to_numpy(float) * scale)
    views = []
    for name, sc in scenarios.items():
        edges = sc.get("edges")
        net = network(edges, sc.get("node_cost")) if edges is not None else None
        change = sc["layers"].get("edge_change")
        if change is not None:
            change = change.rename(columns={"hub_cost_change": "delta", "hub_cost_before": "before",
                                            "hub_cost_after": "after"})
            for c in ("delta", "before", "after"):
                change[c] = change[c].to_numpy(float) * scale
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
            settlements=settlements(after, "_after") if after is not None else None))
    bands = list(study.surface.bands) if study.surface else [30.0, 60.0, 120.0]
    m = MapInput(
        title=study.title, cost_unit=unit, cost_name=cost_name, thresholds=tuple(bands),
        share_minutes=max(bands), weak_minutes=study.surface.threshold if study.surface else None,
        network=network(base.build.network.edges_frame(), base.node_cost),
        hubs=base.hub_table, rings=base.rings, settlements=settlements(base.settlements),
        districts=districts, water=base.barriers, weak=base.weak,
        diameter=diameter if diameter is not None and len(diameter) else None,
        issues=base.build.issues if len(base.build.issues) else None, scenarios=tuple(views),
        basemap=study.outputs.basemap, **_section_map_layers(base))
    write_map(path, m)


def _section_map_layers(base) -> dict:
    """The sections' map layers: links by people cut off, settlements (with their names) by index."""
    out = {}
    crit = base.sections.get("criticality")
    if crit is not None and "link_criticality" in crit.layers:
        out["criticality"] = crit.layers["link_criticality"]
    ind = base.sections.get("indices")
    if ind is not None and "access_index" in ind.layers:
        ix = ind.layers["access_index"]
        st = base.settlements
        if st is not None and "name" in st.columns and len(ix):
            names = dict(zip(st["settlement_id"].tolist(), st["name"].tolist()))
            ix = ix.assign(name=[names.get(v) for v in ix["settlement_id"].tolist()])
        out["indices"] = ix
    return out


def write_surface_outputs(folder: Path, study: Study, a: Analysis, summary: dict) -> None:
    """What the ``surface`` command writes: rasters, ``reach.gpkg``, styles, tables and ``summary.json``."""
    from ..export.gpkg import write_layers
    from ..export.styles import write_styles

    _write_surface_rasters(folder, a)
    layers = {"reach_rings": a.rings, "reach_bands": a.bands, "weak_regions": a.weak}
    if a.settlements is not None:
        layers["settlements"] = a.settlements
    if a.zones is not None:
        layers["zones"] = a.zones
    write_layers(folder / "reach.gpkg", layers, descriptions=layer_descriptions(layers, a.weight))
    write_styles(folder / "reach.gpkg", layers, cost_unit="min")
    _write_tables(folder, study, a)
    write_report(folder / "report.html", study, a, {}, summary)
    write_summary(folder, summary)
