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
from ..study import Study
from .scenarios import edges_layer
from .steps import Analysis

__all__ = ["summarise", "write_outputs", "write_surface_outputs", "write_summary", "sha256", "nodes_layer"]


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
        out["hubs"] = {"count": int(len(a.hub_table)), "joined": int(a.hub_table["joined"].sum()),
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
    """``minutes.tif``, ``nearest_hub.tif`` (and per kind), ``connection_m.tif`` for cable layers."""
    from ..export.raster import write_cog

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
    from ..export.raster import write_cog

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
        a.zones.drop(columns="geometry", errors="ignore").to_csv(folder / "zones.csv", index=False)


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
            write_layers(gpkg, layers, descriptions={k: CAUTION for k in layers})
            write_styles(gpkg, layers)
        _write_deltas(folder, base, scenarios)
        if study.outputs.map:
            _write_map(folder / "map.html", study, base, scenarios)
        write_summary(folder, summary)
        return
    layers = {"edges": edges_layer(base), "nodes": nodes_layer(base), "network_issues": base.build.issues}
    if base.hub_table is not None:
        layers["hubs"] = base.hub_table
    layers["diameter_path"] = base.diameter_path
    if base.bands is not None:
        layers["reach_bands"] = base.bands
    if base.weak is not None:
        layers["weak_regions"] = base.weak
    if base.settlements is not None:
        layers["settlements"] = base.settlements
    if base.zones is not None:
        layers["zones"] = base.zones
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
    if base.profile is not None and study.outputs.profile_png:
        from ..export.charts import plot_profile

        plot_profile(base.profile, folder / "reach_profile.png", title=f"{study.title}: reach profile")
    if study.outputs.map:
        _write_map(folder / "map.html", study, base, scenarios)
    write_summary(folder, summary)


def _write_map(path, study, base, scenarios):
    from ..export.html_map import Comparison, write_map

    edges = edges_layer(base).rename(columns={"hub_cost": "hub_minutes"})
    if "hub_minutes" not in edges:
        edges["hub_minutes"] = np.nan
    issues = base.build.issues
    weak = base.weak
    if weak is not None and base.population is not None and (weak["population"] > 0).any():
        # the map shows the regions where people live; the GeoPackage layer keeps them all
        weak = weak[weak["population"] > 0]
    kw = dict(hubs=base.hub_table, bands=base.bands[base.bands["hub_id"].isna()] if base.bands is not None else None,
              weak=weak, diameter=base.diameter_path if len(base.diameter_path) else None,
              issues=issues.rename(columns={"kind": "issue"}) if len(issues) else None,
              basemap=study.outputs.basemap, title=f"geo-reach: {study.title}")
    if scenarios:
        name, sc = next(iter(scenarios.items()))
        after = sc["edges"].rename(columns={"hub_cost": "hub_minutes"})
        if "hub_minutes" not in after:
            after["hub_minutes"] = np.nan
        change = sc["layers"].get("edge_change")
        if change is not None:
            change = change.rename(columns={"hub_cost_change": "delta_minutes"})
        comp = Comparison(before=edges, after=after, change=change,
                          before_label="Today", after_label=f"With {name}")
        write_map(path, comparison=comp, **kw)
    else:
        write_map(path, edges=edges, **kw)


# --------------------------------------------------------------------------- scenarios


def write_surface_outputs(folder: Path, study: Study, a: Analysis, summary: dict) -> None:
    """What the ``surface`` command writes: rasters, ``reach.gpkg``, styles, tables and ``summary.json``."""
    from ..export.gpkg import write_layers
    from ..export.styles import write_styles

    _write_surface_rasters(folder, a)
    layers = {"reach_bands": a.bands, "weak_regions": a.weak}
    if a.settlements is not None:
        layers["settlements"] = a.settlements
    if a.zones is not None:
        layers["zones"] = a.zones
    write_layers(folder / "reach.gpkg", layers, descriptions={k: CAUTION for k in layers})
    write_styles(folder / "reach.gpkg", layers)
    _write_tables(folder, a)
    write_summary(folder, summary)
