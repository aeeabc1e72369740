"""``geo-reach indices``: an accessibility index for every settlement (cumulative, gravity, 2SFCA, E2SFCA, BFCA)."""

from __future__ import annotations

from ._common import add_access, add_friction, friction_inputs, note

__all__ = ["register", "run", "check_options", "parse_numbers"]


def parse_numbers(text):
    """``10,20,30`` -> [10.0, 20.0, 30.0] (argparse type)."""
    import argparse

    try:
        return [float(v) for v in text.split(",") if v.strip()]
    except ValueError:
        raise argparse.ArgumentTypeError(f"'{text}' is not a comma-separated list of numbers") from None


def register(sub):
    from ..analysis.indices.measures import DECAYS, MEASURES

    p = sub.add_parser("indices", help="accessibility index of every settlement (cumulative, gravity, 2SFCA ...)",
                       description="For every settlement, how much hub supply it reaches within a catchment: "
                                   "cumulative opportunities, gravity, or a floating catchment measure (2SFCA, "
                                   "E2SFCA, BFCA). Costs are the trips from the settlement to each hub, walk legs "
                                   "included. Writes layer access_index (one row per settlement, per hub kind) and "
                                   "layer hub_catchments. Results are model estimates; local surveys decide.")
    p.add_argument("network", metavar="NETWORK.gpkg", help="network GeoPackage from geo-reach build")
    p.add_argument("--hubs", required=True, metavar="LAYER", help="hub points: path or path:layername")
    p.add_argument("--hub-id-field", metavar="F", help="field with unique hub ids (default: row number from 1)")
    p.add_argument("--hub-kind-field", metavar="F",
                   help="field with the hub kind: one index per kind (kinds never mix in one catchment)")
    p.add_argument("--capacity-field", metavar="F",
                   help="field with each hub's capacity S_j, zero or more (default 1 per hub)")
    p.add_argument("--settlements", required=True, metavar="LAYER", help="settlement points")
    p.add_argument("--population-field", required=True, metavar="F", help="field with each settlement's population")
    p.add_argument("--settlement-id-field", metavar="F",
                   help="field with unique settlement ids (default: row number from 1)")
    p.add_argument("--measure", required=True, metavar="|".join(MEASURES),
                   help="cumulative (supply within T), gravity (supply weighted by distance decay), 2sfca, "
                        "e2sfca (2SFCA with stepwise zone weights), bfca (balanced: nobody counted twice)")
    p.add_argument("--within-minutes", type=float, metavar="T",
                   help="the catchment T, in the weight's unit (minutes; metres with --weight length_m); needed "
                        "by every measure but gravity, which without it sums over every reachable hub")
    p.add_argument("--decay", metavar="|".join(DECAYS),
                   help="gravity's decay: exponential exp(-B c), power c^-B (c floored at 1), gaussian exp(-c^2/B)")
    p.add_argument("--decay-param", type=float, metavar="B", help="the decay parameter B (positive)")
    p.add_argument("--zone-minutes", type=parse_numbers, metavar="Z1,Z2,...",
                   help="e2sfca sub-zone limits (default: T/3, 2T/3, T, i.e. 10,20,30 at T = 30 as in Luo and Qi "
                        "2009); the last limit is the catchment")
    p.add_argument("--zone-weights", type=parse_numbers, metavar="W1,W2,...",
                   help="e2sfca weight of each sub-zone (default 1,0.68,0.22, Luo and Qi 2009)")
    p.add_argument("--weight", choices=["minutes", "length_m"], default="minutes",
                   help="cost each edge counts (default minutes)")
    add_access(p)
    add_friction(p)
    p.add_argument("-o", "--output", required=True, metavar="OUT.gpkg", help="output GeoPackage")
    p.add_argument("--csv", metavar="FILE.csv", help="also write the access_index table as CSV")
    p.add_argument("--overwrite", action="store_true", help="replace existing outputs")
    p.set_defaults(func=run)


def check_options(args):
    """Refuse inconsistent options before any file is read."""
    from ..analysis.indices.layer import catchment_bound
    from ..analysis.indices.measures import check_decay, check_zones
    from ..errors import OptionError

    t = catchment_bound(args.measure, args.within_minutes, args.weight, args.zone_minutes)
    if args.measure == "gravity":
        if args.decay is None:
            raise OptionError("--measure gravity needs --decay exponential|power|gaussian and --decay-param B")
        check_decay(args.decay, args.decay_param)
    elif args.decay is not None or args.decay_param is not None:
        raise OptionError(f"--decay and --decay-param apply to --measure gravity only, not {args.measure}")
    if args.measure == "e2sfca":
        if args.zone_weights is not None and args.zone_minutes is None:
            import numpy as np

            from ..analysis.indices.measures import E2SFCA_ZONE_FRACTIONS

            if len(args.zone_weights) != len(E2SFCA_ZONE_FRACTIONS):
                raise OptionError(f"--zone-weights: give one weight per zone ({len(E2SFCA_ZONE_FRACTIONS)} default "
                                  f"zones, {len(args.zone_weights)} weights), or give --zone-minutes too")
            check_zones(np.asarray(E2SFCA_ZONE_FRACTIONS) * t, args.zone_weights, t)
        elif args.zone_minutes is not None:
            from ..analysis.indices.measures import E2SFCA_WEIGHTS

            weights = args.zone_weights if args.zone_weights is not None else E2SFCA_WEIGHTS
            check_zones(args.zone_minutes, weights, t)
    elif args.zone_minutes is not None or args.zone_weights is not None:
        raise OptionError(f"--zone-minutes and --zone-weights apply to --measure e2sfca only, not {args.measure}")
    if not (args.walk_kmh > 0 and args.walk_kmh < float("inf")):
        raise OptionError(f"--walk-kmh {args.walk_kmh}: give a positive speed in km/h")
    if not args.max_access_m >= 0:
        raise OptionError(f"--max-access-m {args.max_access_m}: give zero or more metres")
    return t


def run(args):
    import numpy as np

    from .._meta import CAUTION
    from ..analysis.indices.inputs import read_weighted_points
    from ..analysis.indices.layer import index_layer
    from ..export.atomic import OutputSet
    from ..export.gpkg import write_layers
    from ..export.guard import check_io
    from ._common import read_network_arg, report_excluded, routing_options, travel_model_for_points

    t = check_options(args)
    check_io(inputs=[args.network, args.hubs, args.settlements, *friction_inputs(args)],
             files=[(args.output, "GeoPackage"), (args.csv, "CSV file")], overwrite=args.overwrite)
    net = read_network_arg(args.network, args.weight)
    report_excluded(net, args.weight)
    hubs = read_weighted_points(args.hubs, net.crs, what="hubs", value_field=args.capacity_field,
                                value_name="capacity", value_option="--capacity-field", default=1.0,
                                id_field=args.hub_id_field, id_option="--hub-id-field",
                                kind_field=args.hub_kind_field, kind_option="--hub-kind-field")
    st = read_weighted_points(args.settlements, net.crs, what="settlements", value_field=args.population_field,
                              value_name="population", value_option="--population-field", required=True,
                              id_field=args.settlement_id_field, id_option="--settlement-id-field")
    for msg in hubs.notes + st.notes:
        note(msg)
    zones = args.zone_minutes
    if args.measure == "e2sfca" and args.zone_weights is not None and zones is None:
        from ..analysis.indices.measures import E2SFCA_ZONE_FRACTIONS

        zones = list(np.asarray(E2SFCA_ZONE_FRACTIONS) * t)
    # the one travel model: route, od and the study price the same walks (terrain, land cover, barriers)
    travel = travel_model_for_points(args, net, np.vstack([hubs.xy, st.xy]), routing_options(args))
    layer, hub_layer, notes = index_layer(net, st, hubs, args.measure, within=t, weight=args.weight,
                                          decay=args.decay, decay_param=args.decay_param, zones=zones,
                                          zone_weights=args.zone_weights, max_access_m=args.max_access_m,
                                          walk_kmh=args.walk_kmh, travel=travel)
    for msg in notes:
        note(msg)
    unit = "minutes" if args.weight == "minutes" else "m"
    what = f"{args.measure} index within {t:g} {unit}" if np.isfinite(t) else f"{args.measure} index, unbounded"
    with OutputSet([args.output, args.csv]) as out:
        write_layers(out.path(args.output), {"access_index": layer, "hub_catchments": hub_layer},
                     descriptions={"access_index": f"{what} (settlement to hub). {CAUTION}",
                                   "hub_catchments": f"hub capacity, settlements within reach and supply-to-demand "
                                                     f"ratio ({args.measure}). {CAUTION}"})
        if args.csv:
            from ..export.tables import write_csv

            write_csv(out.path(args.csv), layer.drop(columns="geometry"))   # the caution on line 1
    reached = int((layer["hubs_within"] > 0).sum())
    note(f"indices: {args.measure} for {len(st.ids)} settlements and {len(hubs.ids)} hubs; {reached} of {len(layer)} "
         f"rows reach a hub{' within ' + format(t, 'g') + ' ' + unit if np.isfinite(t) else ''} -> {args.output}"
         f"{' and ' + args.csv if args.csv else ''}")
    note(CAUTION)
    return 0
