"""``geo-reach access``: every node's nearest hub and the cost to it (per hub kind if given)."""

from __future__ import annotations

from ._routing import add_access, add_direction, add_weight, load_network, note, read_points, report_excluded


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


def run(args):
    import geopandas as gpd
    import shapely

    from .. import CAUTION
    from ..analysis.access import hub_access
    from ..errors import LayerError
    from ..export.atomic import check_output
    from ..export.gpkg import write_layers

    check_output(args.output, args.overwrite)
    net = load_network(args.network, args.weight)
    report_excluded(net, args.weight)
    hubs = read_points(args.hubs, net, id_field=args.hub_id_field, kind_field=args.hub_kind_field, what="hubs")

    try:
        res = hub_access(net, hubs.xy, hubs.ids, hubs.kinds, args.weight, args.direction,
                         max_access_m=args.max_access_m, walk_kmh=args.walk_kmh)
    except LayerError as err:
        raise LayerError(f"{hubs.label}{err}") from err
    for msg in res.notes:
        note(msg)
    nodes = net.nodes_frame()[["node_id", "geometry"]].copy()
    for k, v in res.node_fields.items():
        nodes[k] = v
    attached = res.hubs["attached"].to_numpy()
    n_hub = len(hubs.ids)
    frame = res.hubs
    hub_layer = gpd.GeoDataFrame(frame, geometry=shapely.points(hubs.xy), crs=net.crs)
    write_layers(args.output, {"nodes": nodes, "hubs": hub_layer}, overwrite=args.overwrite,
                 descriptions={"nodes": f"nearest hub and {args.weight} ({args.direction}). {CAUTION}",
                               "hubs": f"nodes and network length each hub serves. {CAUTION}"})
    reached = int(nodes[[c for c in nodes.columns if c.startswith("nearest_")]].notna().any(axis=1).sum())
    note(f"access: {int(attached.sum())} of {n_hub} hubs joined the network; {reached} of {net.n_nodes} nodes "
         f"reach a hub -> {args.output}")
    note(CAUTION)
    return 0
