"""``geo-reach access``: every node's nearest hub and the cost to it (per hub kind if given)."""

from __future__ import annotations

from ._common import add_access, add_direction, add_friction, add_weight, friction_inputs, friction_table, note, \
    report_excluded

__all__ = ["register", "study_from_args", "run"]


def register(sub):
    p = sub.add_parser("access", help="nearest hub and the cost to it for every node",
                       description="For every network node: its nearest hub (per hub kind if given) and the "
                                   "cost of the trip, the hub's walk to the network included (priced as in a "
                                   "study). Writes layers nodes and hubs to a GeoPackage. "
                                   "Results are model estimates; local surveys decide.")
    p.add_argument("network", metavar="NETWORK.gpkg", help="network GeoPackage from geo-reach build")
    p.add_argument("--hubs", required=True, metavar="LAYER", help="hub points: path or path:layername")
    p.add_argument("--hub-id-field", metavar="F", help="field with unique hub ids (default: row number from 1)")
    p.add_argument("--hub-kind-field", metavar="F",
                   help="field with the hub kind (clinic, market, port ...): one result per kind")
    add_weight(p)
    add_direction(p)
    add_access(p, "hubs")
    add_friction(p)
    p.add_argument("-o", "--output", required=True, metavar="OUT.gpkg", help="output GeoPackage")
    p.add_argument("--overwrite", action="store_true", help="replace an existing output")
    p.set_defaults(func=run)


def study_from_args(args):
    """The study this command stands for: a built network, hubs and routing options."""
    from pathlib import Path

    from ..ingest.layers import parse_layer_ref
    from ..study import study_from_dict

    ref = parse_layer_ref(args.hubs)
    hubs = {"path": str(ref.path)}
    if ref.layer:
        hubs["layer"] = ref.layer
    if args.hub_id_field:
        hubs["id_field"] = args.hub_id_field
    if args.hub_kind_field:
        hubs["kind_field"] = args.hub_kind_field
    raw = {"network": {"prebuilt": str(args.network)}, "hubs": hubs,
           "routing": {"weight": args.weight.name, "direction": args.direction,
                       "max_access_m": float(args.max_access_m), "walk_kmh": float(args.walk_kmh)}}
    surface = friction_table(args, float(args.max_access_m) + 2 * float(args.cell_m))
    if surface is not None:   # the hubs' walks cross the friction grid: the study's surface inputs, no surface
        raw["surface"] = surface
    return study_from_dict(raw, Path("."), check_files=False)


def run(args):
    import geopandas as gpd

    from .._meta import CAUTION
    from ..errors import LayerError
    from ..export.gpkg import write_layers
    from ..export.guard import check_io
    from ..pipeline import analyse, build_or_read, read_hubs

    check_io(inputs=[args.network, args.hubs, *friction_inputs(args)], files=[(args.output, "GeoPackage")],
             overwrite=args.overwrite)
    study = study_from_args(args)
    built = build_or_read(study, [])
    net = built.network
    report_excluded(net, args.weight)
    hubs = read_hubs(study, study.hubs, net.crs)
    try:
        res = analyse(study, [], hubs, prebuilt=built, steps={"access"})
    except LayerError as err:   # a hub problem without its file gets it; one naming its own file (barriers) is kept
        if str(err).startswith("file '"):
            raise
        raise LayerError(f"file '{study.hubs['path']}': {err}") from err
    for msg in res.notes:
        note(msg)
    nodes = net.nodes_frame()[["node_id", "geometry"]].copy()
    for k, v in res.node_fields.items():
        nodes[k] = v
    hub_layer = res.hub_table
    w = study.routing.weight
    if hubs.kinds is None:
        hub_layer = hub_layer.drop(columns="kind")
    hub_layer = gpd.GeoDataFrame(hub_layer, geometry="geometry", crs=net.crs)
    write_layers(args.output, {"nodes": nodes, "hubs": hub_layer}, overwrite=args.overwrite,
                 descriptions={"nodes": f"nearest hub and hub_cost: {w.describes} ({w.unit}), trips "
                                        f"{args.direction}. {CAUTION}",
                               "hubs": f"nodes and network length each hub serves. {CAUTION}"})
    attached = hub_layer["joined"].to_numpy()
    reached = int(nodes[[c for c in nodes.columns if c.startswith("nearest_hub")]].notna().any(axis=1).sum())
    note(f"access: {int(attached.sum())} of {len(hubs.ids)} hubs joined the network; {reached} of {net.n_nodes} "
         f"nodes reach a hub -> {args.output}")
    note(CAUTION)
    return 0
