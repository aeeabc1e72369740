"""``geo-reach access``: every node's nearest hub and the cost to it (per hub kind if given)."""

from __future__ import annotations

import numpy as np

from ._routing import (add_access, add_direction, add_weight, kind_name, load_network, note, read_points,
                       report_excluded, report_left_out)


def register(sub):
    p = sub.add_parser("access", help="nearest hub and the cost to it for every node",
                       description="For every network node: its nearest hub (per hub kind if given) and the "
                                   "cost of the trip. Writes layers nodes and hubs to a GeoPackage. "
                                   "Results are model estimates; local surveys decide.")
    p.add_argument("network", metavar="NETWORK.gpkg", help="network GeoPackage from geo-reach build")
    p.add_argument("--hubs", required=True, metavar="LAYER", help="hub points: path or path:layername")
    p.add_argument("--hub-id-field", metavar="F", help="field with unique hub ids (default: row number from 1)")
    p.add_argument("--hub-kind-field", metavar="F",
                   help="field with the hub kind (clinic, market, port ...): one result per kind")
    add_weight(p)
    add_direction(p)
    add_access(p)
    p.add_argument("-o", "--output", required=True, metavar="OUT.gpkg", help="output GeoPackage")
    p.add_argument("--overwrite", action="store_true", help="replace an existing output")
    p.set_defaults(func=run)


def _id_column(values, present):
    """Hub ids per node as a nullable column (integers stay integers)."""
    import pandas as pd

    vals = np.asarray(values, dtype=object)
    if len(vals) and all(isinstance(v, (int, np.integer)) for v in vals[present]):
        out = pd.array(np.where(present, vals, 0).astype(np.int64), dtype="Int64")
        out[~present] = pd.NA
        return out
    return pd.Series(np.where(present, vals, None), dtype=object).to_numpy()


def run(args):
    import geopandas as gpd
    import pandas as pd
    import shapely

    from .. import CAUTION
    from ..analysis.attach import attach_points
    from ..analysis.routing import nearest_hub
    from ..export.atomic import check_output
    from ..export.gpkg import write_layers

    check_output(args.output, args.overwrite)
    net = load_network(args.network, args.weight)
    report_excluded(net, args.weight)
    hubs = read_points(args.hubs, net, id_field=args.hub_id_field, kind_field=args.hub_kind_field, what="hubs")

    if hubs.kinds is None:
        groups = [(None, np.arange(len(hubs.ids)))]
    else:
        names = {}
        for k in pd.unique(hubs.kinds):
            nm = kind_name(k)
            if nm in names and names[nm] != k:
                from ..errors import LayerError

                raise LayerError(f"{hubs.label}hub kinds {names[nm]!r} and {k!r} give the same field name "
                                 f"'{nm}'; rename one of them")
            names[nm] = k
        groups = [(nm, np.nonzero(hubs.kinds == k)[0]) for nm, k in names.items()]

    nodes = net.nodes_frame()[["node_id", "geometry"]].copy()
    n_hub = len(hubs.ids)
    attached = np.zeros(n_hub, dtype=bool)
    access_m = np.full(n_hub, np.inf)
    served_nodes = np.zeros(n_hub, dtype=np.int64)
    served_len = np.zeros(n_hub)
    comp = np.full(n_hub, -1, dtype=np.int64)
    c = net.cost(args.weight)
    routable = ~np.isnan(c)
    half = np.where(routable, net.edge_length_m, 0.0) / 2.0
    for name, members in groups:
        att = attach_points(net, hubs.xy[members], args.weight, max_access_m=args.max_access_m,
                            walk_kmh=args.walk_kmh)
        what = "hubs" if name is None else f"hubs of kind '{name}'"
        report_left_out(att, hubs.ids[members], what, args.max_access_m)
        attached[members] = att.attached
        access_m[members] = att.access_m
        first_leg = np.full(len(members), -1)
        first_leg[att.leg_point[::-1]] = np.arange(len(att.leg_point))[::-1]
        for i, lg in enumerate(first_leg):
            if lg >= 0:
                nd = att.leg_node[lg] if att.leg_edge[lg] < 0 else net.edge_from[att.leg_edge[lg]]
                comp[members[i]] = net.component[nd]
        cost, hub = nearest_hub(net, att, args.weight, args.direction)
        has = hub >= 0
        col_id = "nearest_hub" if name is None else f"nearest_{name}"
        col_cost = f"hub_{args.weight}" if name is None else f"{name}_{args.weight}"
        ids_per_node = np.empty(net.n_nodes, dtype=object)
        ids_per_node[has] = hubs.ids[members][hub[has]]
        nodes[col_id] = _id_column(ids_per_node, has)
        nodes[col_cost] = np.where(has, cost, np.nan)
        served_nodes[members] = np.bincount(hub[has], minlength=len(members))
        for end in (net.edge_from, net.edge_to):
            h = hub[end]
            ok = h >= 0
            served_len[members] += np.bincount(h[ok], weights=half[ok], minlength=len(members))
        unreached = int((~has).sum())
        if unreached:
            note(f"{unreached} of {net.n_nodes} nodes reach no {'hub' if name is None else name} "
                 f"(null {col_id}, {col_cost})")

    # hubs alone in a component of their own (not the largest, shared with no other hub)
    alone = np.zeros(n_hub, dtype=bool)
    for i in range(n_hub):
        if comp[i] > 0 and np.sum(comp == comp[i]) == 1:
            alone[i] = True
    if alone.any():
        first = np.nonzero(alone)[0][:3]
        note(f"{int(alone.sum())} hubs are alone in a component of their own, cut off from the largest "
             f"network component: " + ", ".join(f"id {hubs.ids[i]} (component {comp[i]}, "
                                                 f"{int(np.sum(net.component == comp[i]))} nodes)" for i in first))
    data = {"hub_id": hubs.ids}
    if hubs.kinds is not None:
        data["kind"] = hubs.kinds
    data.update({
        "attached": attached.astype(np.int32),
        "access_m": np.where(np.isfinite(access_m), access_m, np.nan),
        "served_nodes": served_nodes,
        "served_length_m": served_len,
        "component": comp,
        "alone": alone.astype(np.int32),
    })
    frame = pd.DataFrame(data)
    if all(isinstance(v, (int, np.integer)) for v in hubs.ids):
        frame["hub_id"] = frame["hub_id"].astype(np.int64)
    hub_layer = gpd.GeoDataFrame(frame, geometry=shapely.points(hubs.xy), crs=net.crs)
    write_layers(args.output, {"nodes": nodes, "hubs": hub_layer}, overwrite=args.overwrite,
                 descriptions={"nodes": f"nearest hub and {args.weight} ({args.direction}). {CAUTION}",
                               "hubs": f"nodes and network length each hub serves. {CAUTION}"})
    reached = int(nodes[[c for c in nodes.columns if c.startswith("nearest_")]].notna().any(axis=1).sum())
    note(f"access: {int(attached.sum())} of {n_hub} hubs joined the network; {reached} of {net.n_nodes} nodes "
         f"reach a hub -> {args.output}")
    note(CAUTION)
    return 0
