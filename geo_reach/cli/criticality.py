"""``geo-reach criticality``: the people cut off and the time added when each link closes, or when a hazard closes many."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..errors import InputError, LayerError, MissingInputError, OptionError, where
from ..network.weights import HOPS, LENGTH_M, MINUTES
from ._common import (add_access, add_direction, add_friction, add_weight, friction_inputs, note, print_json,
                      read_network_arg, read_points_arg, report_excluded, report_left_out, routing_options,
                      travel_model_for_points)

__all__ = ["register", "parse_links", "run"]


def register(sub):
    p = sub.add_parser(
        "criticality", help="people cut off and time added when each link closes (or a hazard closes many)",
        description="Close each link in turn and count the people who lose every hub of a kind and the "
                    "person-minutes the others add (layer link_criticality, ranked); or close every link a "
                    "hazard touches at once (--hazard / --hazard-raster) and count the people affected in "
                    "place and those isolated, per hub kind and district. Results are model estimates; local "
                    "surveys, codes and licensed professional practice decide.")
    p.add_argument("network", metavar="NETWORK.gpkg", help="network GeoPackage from geo-reach build")
    p.add_argument("--hubs", required=True, metavar="LAYER", help="hub points: path or path:layername")
    p.add_argument("--hub-id-field", metavar="F", help="field with unique hub ids (default: row number from 1)")
    p.add_argument("--hub-kind-field", metavar="F",
                   help="field with the hub kind (clinic, market ...): people are counted per kind")
    p.add_argument("--settlements", metavar="LAYER",
                   help="settlement points carrying people (without them every node counts as one person)")
    p.add_argument("--population-field", metavar="F", help="field with the people of each settlement")
    p.add_argument("--settlement-id-field", metavar="F", help="field with unique settlement ids (default: row number)")
    p.add_argument("--links", default="all", metavar="all|FILE|ID,ID,...",
                   help="links to examine: all (default), a file of edge ids (one per line, or a CSV with an "
                        "edge_id column), or edge ids separated by commas")
    add_weight(p, choices=(MINUTES.name, LENGTH_M.name, HOPS.name))
    add_direction(p)
    add_access(p)
    add_friction(p)
    h = p.add_argument_group("hazard closures (one event closing many links)")
    h.add_argument("--hazard", metavar="LAYER", help="hazard polygons: every link they touch is closed")
    h.add_argument("--hazard-raster", metavar="TIF", help="hazard raster (e.g. flood depth in metres)")
    h.add_argument("--hazard-above", type=float, metavar="X",
                   help="with --hazard-raster: cells with a value above X close the links they touch")
    h.add_argument("--hazard-closes-bridges", action="store_true",
                   help="close grade-separated links too (a non-zero level from the build; kept open by default)")
    h.add_argument("--zones", metavar="LAYER", help="district polygons for the hazard figures")
    h.add_argument("--zone-id-field", metavar="F", help="field with the district id (default: row number from 1)")
    c = p.add_argument_group("where the work runs (default: in this process)")
    x = c.add_mutually_exclusive_group()
    x.add_argument("--workers", type=int, metavar="N", help="start a local cluster of N worker processes")
    x.add_argument("--scheduler", metavar="ADDRESS", help="join a running dask scheduler, e.g. tcp://host:8786")
    c.add_argument("--timeout-s", type=float, default=30.0, metavar="S",
                   help="seconds to wait for the scheduler and its workers (default 30)")
    p.add_argument("-o", "--output", required=True, metavar="OUT.gpkg", help="output GeoPackage")
    p.add_argument("--csv", metavar="FILE.csv", help="also write the table as CSV")
    p.add_argument("--json", action="store_true", help="print the top 20 links (or the hazard figures) as JSON")
    p.add_argument("--overwrite", action="store_true", help="replace existing outputs")
    p.set_defaults(func=run)


def _check_options(args):
    hazard = args.hazard is not None or args.hazard_raster is not None
    if args.population_field and not args.settlements:
        raise OptionError("--population-field is given without --settlements; give the settlement layer too")
    if args.settlements and not args.population_field:
        raise OptionError("--settlements needs --population-field F, the field with the people of each settlement")
    if args.settlement_id_field and not args.settlements:
        raise OptionError("--settlement-id-field is given without --settlements")
    if args.hazard is not None and args.hazard_raster is not None:
        raise OptionError("give either --hazard (polygons) or --hazard-raster, not both")
    if args.hazard_raster is not None and args.hazard_above is None:
        raise OptionError("--hazard-raster needs --hazard-above X, the value above which a cell is hazard")
    if args.hazard_above is not None and args.hazard_raster is None:
        raise OptionError("--hazard-above is used with --hazard-raster; give the raster too")
    if not hazard:
        for flag, val in (("--hazard-closes-bridges", args.hazard_closes_bridges), ("--zones", args.zones),
                          ("--zone-id-field", args.zone_id_field)):
            if val:
                raise OptionError(f"{flag} is used with --hazard or --hazard-raster; give a hazard too")
    elif args.links != "all":
        raise OptionError("--links examines links one at a time; a hazard closes its links together - "
                          "give one or the other")
    if args.zone_id_field and not args.zones:
        raise OptionError("--zone-id-field is given without --zones")
    if args.workers is not None and args.workers < 1:
        raise OptionError(f"--workers {args.workers}: give 1 or more worker processes")
    if not (args.timeout_s > 0):
        raise OptionError(f"--timeout-s {args.timeout_s}: give a positive number of seconds")
    return hazard


def parse_links(text: str, network):
    """``all`` -> None; a file of ids; or ids separated by commas.  Unknown ids are refused by name."""
    import re

    from ..analysis.criticality import UnknownLinkError, check_links, read_link_ids

    text = str(text).strip()
    if text == "all":
        return None
    path = Path(text)
    if path.is_file():
        return read_link_ids(path, network)
    tokens = [t.strip() for t in text.split(",")]
    if len(tokens) == 1 and not re.fullmatch(r"[+-]?\d+(\.0*)?", tokens[0]):
        raise MissingInputError(f"{where(text)}not found; --links takes all, a file of edge ids, or ids "
                                "separated by commas")
    if any(t == "" for t in tokens):
        raise UnknownLinkError(f"--links {text!r}: an empty id between commas; give edge ids separated by commas")
    return check_links(network, tokens)


def _read_settlements(args, net):
    import pandas as pd

    pts = read_points_arg(args.settlements, net, id_field=args.settlement_id_field, what="settlements",
                          id_key="settlement_id_field")
    ids = pd.Series(pts.ids)
    if ids.duplicated().any():
        raise LayerError(f"{pts.label}settlement {ids[ids.duplicated()].iloc[0]!r} has several points; "
                         "give one point per settlement")
    pf = args.population_field
    if pf not in pts.frame.columns:
        cols = [c for c in pts.frame.columns if c != pts.frame.geometry.name]
        raise MissingInputError(f"{pts.label}has no field '{pf}' for the people (fields: {', '.join(map(str, cols))}); "
                                "check --population-field")
    pop = pd.to_numeric(pts.frame[pf], errors="coerce")
    neg = (pop < 0).to_numpy()
    if neg.any():
        raise LayerError(f"{pts.label}settlement {pts.ids[neg][0]!r}: negative people in '{pf}'; fix the value")
    missing = pop.isna().to_numpy()
    if missing.any():
        note(f"{int(missing.sum())} settlements have no number in '{pf}' and count as 0 people "
             f"(first: id {pts.ids[missing][0]})")
    return pts, pop.fillna(0.0).to_numpy(float)


def run(args):
    from .._meta import CAUTION
    from ..analysis.criticality import HubTrips, added_field, link_criticality
    from ..export.guard import check_io
    from ..parallel import executor

    hazard = _check_options(args)
    links_file = args.links if args.links != "all" and Path(args.links).is_file() else None
    check_io(inputs=[args.network, args.hubs, args.settlements, args.hazard, args.hazard_raster, args.zones,
                     links_file, *friction_inputs(args)],
             files=[(args.output, "GeoPackage"), (args.csv, "CSV file")], overwrite=args.overwrite)
    opt = routing_options(args)
    net = read_network_arg(args.network, opt.weight)
    report_excluded(net, opt.weight)
    hubs = read_points_arg(args.hubs, net, id_field=args.hub_id_field, kind_field=args.hub_kind_field)
    links = None if hazard else parse_links(args.links, net)
    place_xy = people = place_ids = None
    if args.settlements:
        pts, people = _read_settlements(args, net)
        place_xy, place_ids = pts.xy, pts.ids
    every = hubs.xy if place_xy is None else np.vstack([hubs.xy, place_xy])
    travel = travel_model_for_points(args, net, every, opt)
    try:
        trips = HubTrips.prepare(net, hubs.xy, hubs.ids, hubs.kinds, weight=opt.weight.name,
                                 direction=opt.direction, place_xy=place_xy, people=people, place_ids=place_ids,
                                 max_access_m=opt.max_access_m, walk_kmh=opt.walk_kmh, travel=travel)
    except LayerError as err:
        raise LayerError(f"{hubs.label}{err}") from err
    report_left_out(trips.hub_att, hubs.ids, "hubs", args.max_access_m)
    if trips.has_places:
        report_left_out(trips.place_att, trips.place_ids, "settlements", args.max_access_m)
    if hazard:
        return _run_hazard(args, trips)
    with executor(workers=args.workers, scheduler=args.scheduler, timeout_s=args.timeout_s) as ex:
        res = link_criticality(trips, links, executor=ex)
    for msg in res.notes:
        note(msg)
    layer = res.frame(net)
    af = added_field(opt.weight.name)
    _write(args, {"link_criticality": layer},
           {"link_criticality": f"people cut off from their hub kind and {af} ({opt.weight.name}, {args.direction}) "
                                f"when each link closes; rank 1 = most critical. {CAUTION}"},
           res.table)
    if args.json:
        print_json({"links_examined": len(res.table), "weight": opt.weight.name, "direction": args.direction,
                         "people": "settlements" if trips.has_places else "nodes (one person each)",
                    "work": res.work, "top": res.top(20), "caution": CAUTION})
    top = res.table.iloc[0] if len(res.table) else None
    w = res.work
    note(f"criticality: {w['links']} links examined, work {w['full_searches']:,.1f} full searches "
         f"(naive {w['naive_full_searches']:,}); most critical: "
         + (f"edge {int(top['edge_id'])} ({top['people_cut_off']:,.0f} "
            f"{'people' if trips.has_places else 'nodes (one person each)'} cut off, {top[af]:,.1f} {af})"
            if top is not None else "none") + f" -> {args.output}{' and ' + args.csv if args.csv else ''}")
    note(CAUTION)
    return 0


def _write(args, layers, descriptions, table):
    """The GeoPackage and the CSV, all or nothing (the CSV with the caution on line 1)."""
    from ..export.atomic import OutputSet
    from ..export.gpkg import write_layers
    from ..export.tables import write_csv

    with OutputSet([args.output, args.csv]) as out:
        write_layers(out.path(args.output), layers, descriptions=descriptions)
        if args.csv:
            write_csv(out.path(args.csv), table)


def _run_hazard(args, trips):
    import shapely

    from .._meta import CAUTION
    from ..analysis.criticality import hazard_layers, raster_hazard
    from ..ingest.layers import parse_layer_ref, read_layer

    net = trips.network
    if args.hazard is not None:
        ref = parse_layer_ref(args.hazard)
        polys = read_layer(ref, "polygons").to_crs(net.crs)
        geoms = np.asarray(polys.geometry.values, dtype=object)
        geoms = geoms[~shapely.is_missing(geoms)]
        source = str(args.hazard)
    else:
        geoms = raster_hazard(args.hazard_raster, args.hazard_above, net.crs)
        source = f"{args.hazard_raster} above {args.hazard_above:g}"
    zones = zid = None
    if args.zones:
        zref = parse_layer_ref(args.zones)
        zones = read_layer(zref, "polygons").to_crs(net.crs)
        if args.zone_id_field:
            if args.zone_id_field not in zones.columns:
                cols = [c for c in zones.columns if c != zones.geometry.name]
                raise MissingInputError(f"{where(zref.path, zref.layer)}has no field '{args.zone_id_field}' "
                                        f"(fields: {', '.join(map(str, cols))}); check --zone-id-field")
            zid = zones[args.zone_id_field].to_numpy(object)
    layers, imp = hazard_layers(trips, geoms, closes_bridges=args.hazard_closes_bridges, zones=zones, zone_ids=zid)
    desc = {"hazard_links": f"links the hazard ({source}) touches; closed = 1 unless grade-separated. {CAUTION}",
            "hazard_places": f"people in the hazard (in place) and those outside it who lose a hub kind "
                             f"(isolated), {args.weight.name}. {CAUTION}"}
    if "hazard_districts" in layers:
        desc["hazard_districts"] = f"hazard figures per district. {CAUTION}"
    _write(args, layers, desc, imp.places)
    s = imp.summary
    if args.json:
        print_json({"hazard": source, "weight": args.weight.name, "direction": args.direction,
                         "people": "settlements" if trips.has_places else "nodes (one person each)", **s,
                         "districts": imp.districts.to_dict(orient="records") if imp.districts is not None else None,
                    "caution": CAUTION})
    note(f"hazard ({source}): {s['links_closed']} links closed, {s['links_kept_open']} grade-separated kept open; "
         f"{s['people_in_place']:,.0f} people in place, {s['people_isolated']:,.0f} isolated outside it, "
         f"{s['people_in_place_cut_off']:,.0f} both -> {args.output}")
    note(CAUTION)
    return 0
