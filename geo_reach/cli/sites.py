"""``geo-reach sites``: where P new hubs would serve people best (coverage or total minutes)."""

from __future__ import annotations

from pathlib import Path

from ._common import add_access, note

__all__ = ["register", "run", "check_options", "candidate_points", "new_hub_ids", "scenario_text", "KEYWORDS"]

#: Candidate sources that are not a layer.
KEYWORDS = ("nodes", "settlements")


def register(sub):
    from ..analysis.siting.problem import OBJECTIVES

    p = sub.add_parser("sites", help="where P new hubs would serve people best",
                       description="Chooses P sites among the candidates so that, with the existing hubs still "
                                   "open, the most people live within T of a hub (--objective coverage: the maximal "
                                   "covering location problem) or the total person-minutes to the nearest hub is "
                                   "least (--objective total-minutes: the p-median problem). Solved exactly as an "
                                   "integer programme when small enough, else by greedy addition and vertex "
                                   "substitution with a bound. Writes layer chosen_sites. Results are model "
                                   "estimates; local surveys decide.")
    p.add_argument("network", metavar="NETWORK.gpkg", help="network GeoPackage from geo-reach build")
    p.add_argument("--hubs", required=True, metavar="LAYER", help="existing hub points (they stay open)")
    p.add_argument("--hub-id-field", metavar="F", help="field with unique hub ids (default: row number from 1)")
    p.add_argument("--hub-kind-field", metavar="F", help="field with the hub kind (needed by --hub-kind)")
    p.add_argument("--hub-kind", metavar="K", help="site hubs of this kind: only existing hubs of kind K count as open")
    p.add_argument("--settlements", required=True, metavar="LAYER", help="settlement points")
    p.add_argument("--population-field", required=True, metavar="F", help="field with each settlement's population")
    p.add_argument("--settlement-id-field", metavar="F",
                   help="field with unique settlement ids (default: row number from 1)")
    p.add_argument("--candidates", required=True, metavar="LAYER|nodes|settlements",
                   help="candidate sites: a point layer (site_id = row number from 1), 'nodes' (every network "
                        "node a trip may enter at; site_id = node_id) or 'settlements' (site_id = settlement id)")
    p.add_argument("--count", required=True, type=int, metavar="P", help="number of new sites to choose")
    p.add_argument("--objective", required=True, metavar="|".join(OBJECTIVES),
                   help="coverage: most people within T of a hub; total-minutes: least person-minutes to the "
                        "nearest hub")
    p.add_argument("--within-minutes", type=float, metavar="T",
                   help="coverage: the radius T in minutes (needed); total-minutes: a new site counts for a "
                        "settlement only within T (bounds the searches; default: no bound)")
    add_access(p)
    p.add_argument("--workers", type=int, metavar="N",
                   help="run the settlement-to-candidate searches on a local cluster of N worker processes "
                        "(default: in this process; the same results either way)")
    p.add_argument("-o", "--output", required=True, metavar="OUT.gpkg", help="output GeoPackage")
    p.add_argument("--scenario-file", metavar="FILE.toml",
                   help="also write a study scenario adding the chosen sites as hubs (for geo-reach compare)")
    p.add_argument("--json", action="store_true", help="print objective, optimal, bound, gap and the sites as JSON")
    p.add_argument("--overwrite", action="store_true", help="replace existing outputs")
    p.set_defaults(func=run)


def _inputs(args) -> list:
    refs = [args.network, args.hubs, args.settlements]
    if args.candidates not in KEYWORDS or Path(args.candidates).exists():
        refs.append(args.candidates)
    return refs


def check_options(args):
    from ..analysis.siting.problem import OBJECTIVES
    from ..errors import OptionError

    if args.objective not in OBJECTIVES:
        raise OptionError(f"--objective '{args.objective}' is not an objective; choose one of {', '.join(OBJECTIVES)}")
    if args.within_minutes is not None and not args.within_minutes > 0:
        raise OptionError(f"--within-minutes {args.within_minutes}: give a positive number of minutes")
    if args.objective == "coverage" and args.within_minutes is None:
        raise OptionError("--objective coverage needs --within-minutes T (the people within T minutes are counted)")
    if args.count < 1:
        raise OptionError(f"--count {args.count}: give 1 or more sites")
    if args.workers is not None and args.workers < 1:
        raise OptionError(f"--workers {args.workers}: give 1 or more worker processes")
    if args.hub_kind is not None and args.hub_kind_field is None:
        raise OptionError("--hub-kind needs --hub-kind-field (the field holding the hub kinds)")
    if not (args.walk_kmh > 0 and args.walk_kmh < float("inf")):
        raise OptionError(f"--walk-kmh {args.walk_kmh}: give a positive speed in km/h")
    if not args.max_access_m >= 0:
        raise OptionError(f"--max-access-m {args.max_access_m}: give zero or more metres")


def candidate_points(args, net, st):
    """Candidate xy, ids and where they come from (for messages)."""
    import numpy as np

    from ..analysis.indices.inputs import read_weighted_points
    from ..errors import where

    if args.candidates == "settlements" and not Path(args.candidates).exists():
        return st.xy, st.ids, f"the {len(st.ids)} settlements"
    if args.candidates == "nodes" and not Path(args.candidates).exists():
        cost = net.cost("minutes")
        ok = ~np.isnan(cost)
        touch = np.zeros(net.n_nodes, bool)
        touch[net.edge_from[ok]] = True
        touch[net.edge_to[ok]] = True
        nodes = np.nonzero(touch & net.node_entry)[0]
        xy = np.column_stack([net.node_x[nodes], net.node_y[nodes]])
        return xy, nodes.astype(np.int64).astype(object), f"the {len(nodes)} network nodes a trip may enter at"
    pts = read_weighted_points(args.candidates, net.crs, what="candidates")
    for msg in pts.notes:
        note(msg)
    return pts.xy, pts.ids, f"the {len(pts.ids)} candidates in {where(pts.path, pts.layer)[:-2]}"


def new_hub_ids(existing_ids, count):
    """Ids for the new hubs that no existing hub uses: the next integers, or ``new_1`` ... for text ids."""
    import numpy as np

    ids = list(existing_ids)
    if ids and all(isinstance(v, (int, np.integer)) for v in ids):
        start = int(max(ids)) + 1
        return np.arange(start, start + count, dtype=np.int64)
    taken = {str(v) for v in ids}
    out, k = [], 1
    while len(out) < count:
        if f"new_{k}" not in taken:
            out.append(f"new_{k}")
        k += 1
    return np.array(out, dtype=object)


def scenario_text(name, description, gpkg_path, scenario_path, kind) -> str:
    """A ``[scenarios.NAME]`` table adding the sites of ``gpkg_path`` (layer chosen_sites) as hubs."""
    import json
    import os

    from .._meta import CAUTION

    rel = os.path.relpath(Path(gpkg_path).resolve(), Path(scenario_path).resolve().parent)
    q = json.dumps   # a JSON string is a valid TOML basic string: the text stays data
    hubs = f"path = {q(Path(rel).as_posix())}, layer = \"chosen_sites\", id_field = \"hub_id\", name_field = \"name\""
    if kind is not None:
        hubs += ", kind_field = \"kind\""
    return (f"# Written by geo-reach sites. {CAUTION}\n"
            "# Add this table to a study file in this folder (the path is relative to this file), then run the\n"
            "# study to compare before and after.\n"
            f"[scenarios.{name}]\n"
            f"description = {q(description)}\n"
            f"add_hubs = {{ {hubs} }}\n")


def run(args):
    import geopandas as gpd
    import numpy as np
    import pandas as pd
    import shapely

    from .._meta import CAUTION
    from ..analysis.access import kind_name
    from ..analysis.indices.inputs import read_weighted_points
    from ..analysis.siting import choose_sites
    from ..errors import LayerError, OptionError, where
    from ..export.atomic import OutputSet
    from ..export.gpkg import write_layers
    from ..export.guard import check_io
    from ._common import print_json, read_network_arg, report_excluded

    check_options(args)
    check_io(inputs=_inputs(args), files=[(args.output, "GeoPackage"), (args.scenario_file, "scenario file")],
             overwrite=args.overwrite)
    net = read_network_arg(args.network, "minutes")
    report_excluded(net, "minutes")
    hubs = read_weighted_points(args.hubs, net.crs, what="hubs", id_field=args.hub_id_field,
                                id_option="--hub-id-field", kind_field=args.hub_kind_field,
                                kind_option="--hub-kind-field")
    st = read_weighted_points(args.settlements, net.crs, what="settlements", value_field=args.population_field,
                              value_name="population", value_option="--population-field", required=True,
                              id_field=args.settlement_id_field, id_option="--settlement-id-field")
    for msg in hubs.notes + st.notes:
        note(msg)
    open_ = np.ones(len(hubs.ids), bool)
    if args.hub_kind is not None:
        kinds = hubs.kinds.astype(str)
        open_ = kinds == str(args.hub_kind)
        if not open_.any():
            present = ", ".join(sorted(set(kinds))[:10])
            raise LayerError(f"{where(hubs.path, hubs.layer, field=args.hub_kind_field)}no hub of kind "
                             f"'{args.hub_kind}' (kinds: {present}); check --hub-kind")
    c_xy, c_ids, c_what = candidate_points(args, net, st)
    if args.count > len(c_ids):
        raise OptionError(f"--count {args.count}: larger than {c_what}; give at most {len(c_ids)}")
    from ..parallel import executor

    with executor(workers=args.workers) as ex:
        res = choose_sites(net, st.xy, st.values, hubs.xy[open_], c_xy, args.count, args.objective,
                           within=args.within_minutes, max_access_m=args.max_access_m, walk_kmh=args.walk_kmh,
                           executor=ex)
    for msg in res.notes:
        note(msg)
    n = len(res.sites)
    site_ids = c_ids[res.sites]
    kind = args.hub_kind
    frame = pd.DataFrame({
        "site_id": site_ids, "order": np.arange(1, n + 1, dtype=np.int64),
        "people_newly_within": res.people_newly_within, "person_minutes_saved": res.person_minutes_saved,
        "hub_id": new_hub_ids(hubs.ids, n),
        "kind": np.full(n, kind if kind is not None else "hub", dtype=object),
        "name": np.array([f"new site {k}" for k in range(1, n + 1)], dtype=object)})
    if all(isinstance(v, (int, np.integer)) for v in site_ids):
        frame["site_id"] = frame["site_id"].astype(np.int64)
    layer = gpd.GeoDataFrame(frame, geometry=shapely.points(c_xy[res.sites]), crs=net.crs)
    t = args.within_minutes
    what = (f"coverage within {t:g} minutes" if args.objective == "coverage"
            else "total person-minutes" + (f" (sites counting within {t:g} minutes)" if t is not None else ""))
    with OutputSet([args.output, args.scenario_file]) as out:
        write_layers(out.path(args.output), {"chosen_sites": layer},
                     descriptions={"chosen_sites": f"{n} new sites for {what}, in pick order. {CAUTION}"})
        if args.scenario_file:
            word = kind_name(kind) if kind is not None else "hub"
            text = scenario_text(f"new_{word}_sites", f"{n} new {kind if kind is not None else 'hub'} sites "
                                 f"chosen by geo-reach sites for {what}", args.output, args.scenario_file, kind)
            out.path(args.scenario_file).write_text(text, encoding="utf-8")
    if args.json:
        summary = res.summary()
        summary["sites"] = [{"site_id": s, "order": int(o), "people_newly_within": float(a),
                             "person_minutes_saved": float(b)}
                            for s, o, a, b in zip(frame["site_id"].tolist(), frame["order"], frame["people_newly_within"],
                                                  frame["person_minutes_saved"])]
        summary["caution"] = CAUTION
        print_json(summary)
    unit = "people within T" if args.objective == "coverage" else "person-minutes"
    gap = "optimal" if res.optimal else (f"gap {100 * res.gap:.2f} % to the bound" if res.gap is not None else "no bound")
    note(f"sites: {n} of {c_what} chosen ({res.method}, {gap}); {unit} {res.objective_before:,.1f} -> "
         f"{res.objective:,.1f} -> {args.output}{' and ' + args.scenario_file if args.scenario_file else ''}")
    note(CAUTION)
    return 0
