"""Scenarios: their inputs (edited line layers and hubs), the comparison with the baseline, the ranking.

A scenario adds or upgrades lines, closes features, or adds and removes hubs.
:func:`scenario_inputs` turns its table into line specs and hubs (checked
before any work); :func:`compare` gives the scenario minus the baseline for
the summary and the change layers; :func:`rank_scenarios` orders them.
"""

from __future__ import annotations

import copy

import numpy as np

from ..errors import InputError
from ..network.weights import MINUTES, as_weight
from ..study import Study
from .inputs import Hubs, layer_ref, layer_specs, merge_hubs, read_hubs
from .steps import Analysis

__all__ = ["scenario_inputs", "compare", "rank_scenarios", "edges_layer"]


def edges_layer(a: Analysis):
    """Edges with the cost to the nearest hub at their cheaper end (``hub_cost``, in the weight's unit)."""
    net = a.build.network
    e = net.edges_frame()
    if a.node_cost is not None:
        c = a.node_cost
        cost = np.fmin(c[net.edge_from], c[net.edge_to])
        if net.edge_closed is not None:   # a closed link carries no trip
            cost = np.where(net.edge_closed, np.nan, cost)
        e["hub_cost"] = cost
    return e


def scenario_inputs(study: Study, name: str, base_specs, base_hubs: Hubs | None):
    """Line specs and hubs of scenario ``name`` (validated against the baseline)."""
    import geopandas as gpd

    from ..ingest.layers import parse_layer_ref, read_layer

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
    closed = {}
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
                ref = parse_layer_ref(layer_ref(study, item["within"], item.get("within_layer")))
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
                # closed features stay in the network (same nodes and edges) with no cost on any weight
                frame = frame.copy()
                col = "__closed"
                if col not in frame.columns:
                    frame[col] = False
                frame.loc[frame.index.isin(fids), col] = True
                s.closed_field = col
                changes.append(f"closed {len(fids)} feature(s) of {lab} {how}")
                closed.setdefault(lab, []).extend(int(f) for f in fids)
            else:
                from ..network.costs import feature_speeds

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
             "hubs": "add_hubs" in sc or bool(sc.get("remove_hubs")), "upgraded": upgraded, "closed": closed,
             "added_layers": [s.name or parse_layer_ref(s.source).label for s in added]}
    return specs, hubs, changes, kinds


def compare(study: Study, name: str, base: Analysis, scen: Analysis, changes, kinds) -> dict:
    """Scenario minus baseline: figures for the summary and the change layers."""
    import geopandas as gpd

    out = {"description": study.scenarios[name].get("description", ""), "changes": changes, "layers": {}}
    bnet, snet = base.build.network, scen.build.network
    out.update(_figure_changes(base, scen))
    # km of new or upgraded line: added layers' length plus upgraded features' length
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
                   f"{study.build.snap_m:g} m tolerance and no declared station); it was kept as a "
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
            for t in study.surface.bands:
                key = f"{t:g}"
                wa = np.nan_to_num(pop[(a <= t)]).sum()
                wb = np.nan_to_num(pop[(b <= t)]).sum()
                newly[key] = float(wb - wa)
            out["people_newly_within"] = newly
            finite = np.isfinite(delta)
            out["person_minutes_saved"] = float(-(np.nan_to_num(pop[finite]) * delta[finite]).sum())
            weak_t = study.surface.threshold
            wa = np.nan_to_num(pop[~(a <= weak_t)]).sum()
            wb = np.nan_to_num(pop[~(b <= weak_t)]).sum()
            out["people_leaving_weak_regions"] = float(wa - wb)
            out["people_cut_off"] = _people_cut_off(base, scen, pop)
        out["delta"] = np.where(np.isfinite(delta), delta, np.nan)
    out["edges"] = edges_layer(scen)
    # per-settlement and per-zone change
    if base.settlements is not None and scen.settlements is not None:
        keep = [c for c in ("settlement_id", "name", "population") if c in base.settlements.columns]
        compared = [c for c in base.settlements.columns if c.startswith(("hub_minutes", "hub_cost", "nearest_hub"))]
        out["layers"]["settlements"] = before_after(base.settlements, scen.settlements, keep, compared)
        if "hub_cost" in base.settlements.columns:
            out.update(_person_cost_saved(base, out["layers"]["settlements"]))
    if base.zones is not None and scen.zones is not None:
        keep = [c for c in ("zone_id", "name", "population") if c in base.zones.columns]
        compared = [c for c in base.zones.columns if c not in keep and c != "geometry"]
        out["layers"]["zones"] = before_after(base.zones, scen.zones, keep, compared)
    # edge change layer: each scenario edge's minutes to the nearest hub (at its cheaper end) against
    # the baseline's minutes at the same places (nodes matched by position, to 1 mm); a scenario
    # node the baseline lacks (a new junction, a new line) has no "before".
    se = out["edges"]
    if "hub_cost" in se and base.node_cost is not None:
        from scipy.spatial import cKDTree

        tree = cKDTree(np.column_stack([bnet.node_x, bnet.node_y]))
        d, k = tree.query(np.column_stack([snet.node_x, snet.node_y]))
        before_node = np.where(d < 1e-3, base.node_cost[k], np.nan)
        before = np.fmin(before_node[snet.edge_from], before_node[snet.edge_to])
        before[np.isin(snet.edge_src_layer, kinds.get("added_layers", []))] = np.nan   # a new line had no "before"
        ch = se[["edge_id", "mode", "length_m", "src_layer", "src_fid", "hub_cost", "geometry"]].copy()
        ch["hub_cost_before"] = before
        ch["hub_cost_change"] = ch["hub_cost"] - before
        ch = ch.rename(columns={"hub_cost": "hub_cost_after"})
        # Only what changed: new edges, edges that gained or lost a route, and edges whose cost moved
        # by more than a second (minutes), a metre or a link.
        b_, a_ = ch["hub_cost_before"].to_numpy(), ch["hub_cost_after"].to_numpy()
        new = np.isin(ch["src_layer"].to_numpy(), kinds.get("added_layers", []))
        least = 1 / 60 if base.weight.name == "minutes" else (1e-3 if base.weight.name == "latency_ms" else 1.0)
        moved = new | (np.isnan(b_) != np.isnan(a_)) | (np.abs(a_ - b_) >= least)
        ch = ch[moved]
        out["layers"]["edge_change"] = gpd.GeoDataFrame(ch, geometry="geometry", crs=se.crs)
    out["kinds"] = kinds
    return out


def before_after(base, scen, keep, compared):
    """A scenario layer: ``keep`` columns as they are, and ``<c>_before``, ``<c>_after``, ``<c>_change`` per
    compared column (change = after minus before for numbers; ids have no change)."""
    import geopandas as gpd
    import pandas as pd

    data = {c: base[c].to_numpy() for c in keep}
    for c in compared:
        b = base[c].to_numpy()
        a = scen[c].to_numpy() if c in scen.columns else np.full(len(base), np.nan)
        data[f"{c}_before"] = b
        data[f"{c}_after"] = a
        if np.issubdtype(np.asarray(b).dtype, np.number) and not c.startswith("nearest_hub"):
            data[f"{c}_change"] = np.asarray(a, float) - np.asarray(b, float)
    return gpd.GeoDataFrame(pd.DataFrame(data), geometry=base.geometry.values, crs=base.crs)


def _person_cost_saved(base: Analysis, layer) -> dict:
    """People times the routing weight's cost saved, over the settlements (``hub_cost`` before minus after).

    Only settlements with a hub both before and after count: those cut off
    are counted by ``people_cut_off``, those newly connected have no
    "before" to save from.
    """
    b = layer["hub_cost_before"].to_numpy(float)
    a = layer["hub_cost_after"].to_numpy(float)
    pop = np.nan_to_num(layer["population"].to_numpy(float)) if "population" in layer.columns \
        else np.ones(len(layer))
    both = np.isfinite(a) & np.isfinite(b)
    return {"person_cost_saved": float((pop[both] * (b[both] - a[both])).sum()),
            "person_cost_unit": f"person-{base.weight.unit_name}"}


def _people_cut_off(base: Analysis, scen: Analysis, pop) -> dict:
    """People who reached a hub (of each kind) before and reach none after; ``total`` = those losing every hub."""
    def lost(a, b):
        return float(np.nan_to_num(pop[np.isfinite(a) & ~np.isfinite(b)]).sum())

    out = {"total": lost(base.surface.minutes, scen.surface.minutes), "by_kind": {}}
    for kind, ks in base.kind_surfaces.items():
        sk = scen.kind_surfaces.get(kind)
        out["by_kind"][kind] = lost(ks.minutes, sk.minutes if sk is not None else np.full_like(ks.minutes, np.nan))
    return out


def _figure_changes(base: Analysis, scen: Analysis) -> dict:
    """Diameter and mean-path changes, given only when no place of today's largest part leaves it.

    A closure that splits the network shrinks its largest part, and a smaller
    part has a smaller diameter: that would read as an improvement.  Then the
    split is reported (``largest_component``: nodes before and after) and no
    change is given.  Places are matched by position (1 mm).
    """
    from scipy.spatial import cKDTree

    from ..analysis.metrics import largest_strong_component

    bm, sm = base.metrics, scen.metrics
    if not bm or not sm:
        return {}
    bnet, snet = base.build.network, scen.build.network
    bl = largest_strong_component(bnet, base.weight)
    sl = largest_strong_component(snet, scen.weight)
    out = {"largest_component": {"nodes_before": int(len(bl)), "nodes_after": int(len(sl))}}
    kept = True
    if len(bl):
        d, _ = cKDTree(np.column_stack([snet.node_x[sl], snet.node_y[sl]])).query(
            np.column_stack([bnet.node_x[bl], bnet.node_y[bl]])) if len(sl) else (np.full(len(bl), np.inf), None)
        kept = bool(np.all(d < 1e-3))
    out["largest_component"]["same_places"] = kept

    def change(a, b):
        return None if a is None or b is None or not np.isfinite(a) or not np.isfinite(b) else a - b

    if kept:
        out["diameter_change"] = change(sm["diameter"]["value"], bm["diameter"]["value"])
        out["mean_path_change"] = change(sm["mean_path"]["value"], bm["mean_path"]["value"])
    else:
        out["diameter_change"] = None
        out["mean_path_change"] = None
        out["largest_component"]["note"] = (f"the largest part of the network went from {len(bl):,} to {len(sl):,} "
                                            "nodes and lost places: diameter and mean path are not compared")
    return out


def rank_scenarios(results: dict, largest_band: str, weight=None) -> list[dict]:
    """Rank: scenarios that cut nobody off first, by people newly within the largest band, then by
    person-minutes saved per km of new line; scenarios that cut people off last, fewest cut off first.

    Closures and hub-only changes have no new line: they are ranked by
    person-minutes saved alone, and the ranking says so.

    With a routing weight other than minutes, the scenarios that cut nobody
    off are ranked by the weight's own change instead: ``person_cost_saved``
    (settlements' people times their ``hub_cost`` saved, e.g. person-metres)
    per km of new or upgraded line, else alone; the bands, in minutes, do
    not rank them.  Without settlements there is no such figure, and the
    minutes ranking is kept and says so.
    """
    weight = MINUTES if weight is None else as_weight(weight)
    if weight is not MINUTES and all(r.get("person_cost_saved") is not None for r in results.values()) and results:
        return _rank_by_cost(results, weight, largest_band)
    rows = []
    for name, r in results.items():
        newly = (r.get("people_newly_within") or {}).get(largest_band, 0.0)
        pm = r.get("person_minutes_saved", 0.0)
        km = r.get("new_or_upgraded_km", 0.0)
        cut = (r.get("people_cut_off") or {}).get("total", 0.0) or 0.0
        cut_any = _cut_any(r)
        per_km = pm / km if km > 0 else None
        why = ("person-minutes per km of new or upgraded line" if km > 0 else
               "person-minutes alone (no new or upgraded line)")
        if cut_any > 0:
            why = (f"ranked after every scenario that cuts nobody off: {cut_any:,.0f} people lose their hub "
                   f"(of some kind); then {why}")
        rows.append({"scenario": name, "people_cut_off": cut, "people_newly_within_largest_band": newly,
                     "person_minutes_saved": pm, "person_minutes_saved_per_km": per_km, "ranked_by": why,
                     "_cut_any": cut_any})
    # Per-km and raw person-minutes are different units: line scenarios are ordered among themselves
    # by person-minutes per km, then closures and hub-only changes by person-minutes.
    rows.sort(key=lambda r: (r["_cut_any"] > 0, r["_cut_any"], -r["people_newly_within_largest_band"],
                             r["person_minutes_saved_per_km"] is None,
                             -(r["person_minutes_saved_per_km"] if r["person_minutes_saved_per_km"] is not None
                               else r["person_minutes_saved"])))
    for i, r in enumerate(rows, 1):
        r["rank"] = i
        del r["_cut_any"]
    if weight is not MINUTES:
        for r in rows:
            r["ranked_by"] += (f" (routing weight {weight.name}: no settlements, so no {weight.unit_name} "
                               "per person to rank by; travel time ranks instead)")
    return rows


def _cut_any(r: dict) -> float:
    cut = r.get("people_cut_off") or {}
    return max([cut.get("total", 0.0) or 0.0, *(cut.get("by_kind", {}) or {}).values()], default=0.0)


def _rank_by_cost(results: dict, weight, largest_band: str) -> list[dict]:
    """The ranking on a routing weight other than minutes: by its own change (see :func:`rank_scenarios`)."""
    unit = f"person-{weight.unit_name}"
    rows = []
    for name, r in results.items():
        saved = float(r["person_cost_saved"])
        km = r.get("new_or_upgraded_km", 0.0)
        pm = r.get("person_minutes_saved", 0.0)
        per_km = saved / km if km > 0 else None
        why = (f"{unit} saved per km of new or upgraded line" if km > 0 else
               f"{unit} saved alone (no new or upgraded line)")
        why += f" (routing weight {weight.name}: settlements' hub_cost before minus after, times their people)"
        cut_any = _cut_any(r)
        if cut_any > 0:
            why = (f"ranked after every scenario that cuts nobody off: {cut_any:,.0f} people lose their hub "
                   f"(of some kind); then {why}")
        rows.append({"scenario": name, "people_cut_off": (r.get("people_cut_off") or {}).get("total", 0.0) or 0.0,
                     "people_newly_within_largest_band": (r.get("people_newly_within") or {}).get(largest_band, 0.0),
                     "person_minutes_saved": pm,
                     "person_minutes_saved_per_km": pm / km if km > 0 else None,
                     "person_cost_saved": saved, "person_cost_saved_per_km": per_km, "person_cost_unit": unit,
                     "ranked_by": why, "_cut_any": cut_any})
    rows.sort(key=lambda r: (r["_cut_any"] > 0, r["_cut_any"], r["person_cost_saved_per_km"] is None,
                             -(r["person_cost_saved_per_km"] if r["person_cost_saved_per_km"] is not None
                               else r["person_cost_saved"])))
    for i, r in enumerate(rows, 1):
        r["rank"] = i
        del r["_cut_any"]
    return rows


# --------------------------------------------------------------------------- run
