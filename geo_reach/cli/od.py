"""``geo-reach od``: least costs between every origin and every destination (or the K nearest)."""

from __future__ import annotations

import numpy as np

from ..errors import OptionError
from ._common import (add_access, add_friction, add_weight, friction_inputs, note, read_network_arg, read_points_arg,
                      report_excluded, report_left_out, routing_options, travel_model_for_points)

__all__ = ["register", "run"]


def register(sub):
    p = sub.add_parser("od", help="origin-destination costs between two point layers",
                       description="Least cost and its length from every origin to every destination (or to "
                                   "the K cheapest), as layer od_pairs (straight connecting lines) and CSV. "
                                   "The walks to and from the network (or straight between two places when "
                                   "cheaper) follow the same model as a study's settlements. "
                                   "Results are model estimates; local surveys decide.")
    p.add_argument("network", metavar="NETWORK.gpkg", help="network GeoPackage from geo-reach build")
    p.add_argument("--origins", required=True, metavar="LAYER", help="origin points: path or path:layername")
    p.add_argument("--destinations", required=True, metavar="LAYER", help="destination points")
    p.add_argument("--origin-id-field", metavar="F", help="field with unique origin ids (default: row number from 1)")
    p.add_argument("--destination-id-field", metavar="F",
                   help="field with unique destination ids (default: row number from 1)")
    p.add_argument("--nearest", type=int, metavar="K", help="keep only the K cheapest destinations per origin")
    add_weight(p)
    add_access(p)
    add_friction(p)
    p.add_argument("-o", "--output", required=True, metavar="OUT.gpkg", help="output GeoPackage")
    p.add_argument("--csv", metavar="FILE.csv", help="also write the pairs as CSV")
    p.add_argument("--overwrite", action="store_true", help="replace existing outputs")
    p.set_defaults(func=run)


def run(args):
    import geopandas as gpd
    import pandas as pd
    import shapely

    from .._meta import CAUTION
    from ..export.atomic import OutputSet
    from ..export.gpkg import write_layers
    from ..export.guard import check_io

    if args.nearest is not None and args.nearest < 1:
        raise OptionError(f"--nearest {args.nearest}: give 1 or more")
    check_io(inputs=[args.network, args.origins, args.destinations, *friction_inputs(args)],
             files=[(args.output, "GeoPackage"), (args.csv, "CSV file")], overwrite=args.overwrite)
    opt = routing_options(args)
    net = read_network_arg(args.network, opt.weight)
    report_excluded(net, opt.weight)
    o = read_points_arg(args.origins, net, id_field=args.origin_id_field, what="origins", id_key="origin_id_field")
    d = read_points_arg(args.destinations, net, id_field=args.destination_id_field, what="destinations",
                        id_key="destination_id_field")
    model = travel_model_for_points(args, net, np.concatenate([o.xy, d.xy]), opt)
    oa = model.attach(net, o.xy, roles=("leave",))
    da = model.attach(net, d.xy, roles=("arrive",))
    report_left_out(oa, o.ids, "origins", args.max_access_m)
    report_left_out(da, d.ids, "destinations", args.max_access_m)
    oi = np.nonzero(oa.attached)[0]
    di = np.nonzero(da.attached)[0]
    part = model.od(net, oa.subset(oi), da.subset(di), exact=True)
    n_o, n_d = len(o.ids), len(d.ids)
    cost = np.full((n_o, n_d), np.inf)
    length = np.full((n_o, n_d), np.inf)
    cost[np.ix_(oi, di)] = part.cost
    length[np.ix_(oi, di)] = part.length_m
    far = f"farther than the largest access distance ({opt.max_access_m:g} m) from the network"
    shut = "walks to no place to join the network (barriers or impassable ground all round)"
    why = np.full((n_o, n_d), "", dtype=object)
    why[~np.isfinite(cost)] = f"no path on {opt.weight.name}: the two lie in parts of the network no trip joins"
    why[:, ~da.attached] = f"destination {far}"
    why[:, da.blocked] = f"destination {shut}"
    why[~oa.attached, :] = f"origin {far}"
    why[oa.blocked, :] = f"origin {shut}"
    rows_o, rows_d, rank = [], [], []
    for a in range(n_o):
        if args.nearest is not None:
            fin = np.nonzero(np.isfinite(cost[a]))[0]
            order = fin[np.lexsort((length[a, fin], cost[a, fin]))][: args.nearest]
            if len(order) == 0:   # kept, with a null destination and the reason
                rows_o.append(np.array([a]))
                rows_d.append(np.array([-1]))
                rank.append(np.array([0]))
                continue
            rows_o.append(np.full(len(order), a))
            rows_d.append(order)
            rank.append(np.arange(1, len(order) + 1))
        else:
            rows_o.append(np.full(n_d, a))
            rows_d.append(np.arange(n_d))
    ro = np.concatenate(rows_o) if rows_o else np.zeros(0, np.int64)
    rd = np.concatenate(rows_d) if rows_d else np.zeros(0, np.int64)
    none = rd < 0
    rdx = np.maximum(rd, 0)
    c = np.where(none, np.inf, cost[ro, rdx]) if len(ro) else np.zeros(0)
    ln = np.where(none, np.inf, length[ro, rdx]) if len(ro) else np.zeros(0)
    reason = why[ro, rdx] if len(ro) else np.zeros(0, object)
    if none.any():
        reason[none] = np.where(oa.blocked[ro[none]], f"origin {shut}",
                                np.where(~oa.attached[ro[none]], f"origin {far}",
                                         f"no destination reachable on {opt.weight.name}"))
    dest = d.ids[rdx].astype(object) if len(ro) else np.zeros(0, object)
    dest[none] = None
    data = {
        "origin_id": o.ids[ro] if len(ro) else np.zeros(0, object),
        "destination_id": dest,
        "trip_cost": np.where(np.isfinite(c), c, np.nan),
        "length_m": np.where(np.isfinite(c), ln, np.nan),
        "weight": np.full(len(ro), opt.weight.name, dtype=object),
        "reason": reason,
    }
    if args.nearest is not None:
        r = np.concatenate(rank) if rank else np.zeros(0, np.int64)
        data["rank"] = pd.array(np.where(r > 0, r, 0), dtype="Int64")
        data["rank"][r == 0] = pd.NA
    frame = pd.DataFrame(data)
    for col, ids in (("origin_id", o.ids), ("destination_id", d.ids)):
        if all(isinstance(v, (int, np.integer)) for v in ids):
            frame[col] = frame[col].astype("Int64")
    ends = np.where(none[:, None], o.xy[ro], d.xy[rdx]) if len(ro) else np.zeros((0, 2))
    lines = shapely.linestrings(np.stack([o.xy[ro], ends], axis=1)) if len(ro) else []
    layer = gpd.GeoDataFrame(frame, geometry=np.asarray(lines, dtype=object), crs=net.crs)
    with OutputSet([args.output, args.csv]) as out:
        write_layers(out.path(args.output), {"od_pairs": layer},
                     descriptions={"od_pairs": f"least cost ({opt.weight.describes}, {opt.weight.unit}) between "
                                               f"origins and destinations. {CAUTION}"})
        if args.csv:
            from ..export.tables import write_csv

            write_csv(out.path(args.csv), frame)   # the caution on line 1, as every table geo-reach writes
    unreached = int((~np.isfinite(c)).sum())
    note(f"od: {len(frame)} rows ({n_o} origins x {'the K nearest' if args.nearest else n_d} destinations), "
         f"{unreached} without a path (reason given) -> {args.output}{' and ' + args.csv if args.csv else ''}")
    note(CAUTION)
    return 0
