"""``geo-reach metrics``: how well the network holds together (components, diameter, mean path, efficiency)."""

from __future__ import annotations


import numpy as np

from ..analysis.options import MetricsOptions
from ._common import add_weight, note, print_json, report_excluded

__all__ = ["register", "study_from_args", "run"]

_M = MetricsOptions()


def register(sub):
    p = sub.add_parser("metrics", help="diameter, mean path, efficiency and components of a network",
                       description="Network figures on one weight: components, exact diameter of the largest "
                                   "strongly connected component, mean path (exact or sampled), global "
                                   "efficiency; with -o per-node eccentricity and closeness and the diameter "
                                   "path. Figures are model estimates; local surveys decide.")
    p.add_argument("network", metavar="NETWORK.gpkg", help="network GeoPackage from geo-reach build")
    add_weight(p)
    p.add_argument("--json", action="store_true", help="print the figures as JSON")
    p.add_argument("--exact", action="store_true",
                   help="exact mean path and efficiency even above 5,000 nodes (one search per node)")
    p.add_argument("--sources", "--samples", dest="samples", type=int, default=_M.samples, metavar="K",
                   help=f"random sources for the estimates above 5,000 nodes (default {_M.samples})")
    p.add_argument("--seed", type=int, default=_M.seed, help=f"seed of the source sample (default {_M.seed})")
    p.add_argument("-o", "--output", metavar="NODES.gpkg",
                   help="write layers nodes (eccentricity, closeness) and diameter_path (one search per node)")
    p.add_argument("--overwrite", action="store_true", help="replace an existing output")
    p.set_defaults(func=run)


def study_from_args(args):
    """The study this command stands for: a built network and the metrics options."""
    from pathlib import Path

    from ..study import study_from_dict

    raw = {"network": {"prebuilt": str(args.network)}, "routing": {"weight": args.weight.name},
           "metrics": {"exact": bool(args.exact), "samples": int(args.samples), "seed": int(args.seed),
                       "node_figures": bool(args.output)}}
    return study_from_dict(raw, Path("."), check_files=False)


def run(args):
    from .._meta import CAUTION
    from ..export.guard import check_io
    from ..pipeline import analyse, build_or_read

    check_io(inputs=[args.network], files=[(args.output, "GeoPackage")], overwrite=args.overwrite)
    study = study_from_args(args)
    built = build_or_read(study, [])
    for msg in built.report.get("notes", ()):
        note(msg)
    net = built.network
    excluded = report_excluded(net, args.weight)
    res = analyse(study, [], None, prebuilt=built, steps={"metrics"})
    out = dict(res.metrics)
    eff, eff_exact = out["global_efficiency"], out["global_efficiency_exact"]
    mp, dia = out["mean_path"], out["diameter"]
    if not np.isfinite(eff):
        note("global efficiency is undefined: some distinct nodes are joined at zero cost on this weight "
             "(written as null)")
    out.update({"excluded_edges": excluded, "caution": CAUTION})
    if args.output:
        _write(args, net, res)
    if args.json:
        print_json(out)
    else:
        u = args.weight.unit
        print(f"nodes {net.n_nodes}, edges {net.n_edges}, components {out['components']} "
              f"(largest {out['largest_component_nodes']} nodes; largest two-way connected "
              f"{out['largest_two_way_component_nodes']})")
        print(f"diameter {dia['value']:.6g} {u} from node {dia['from_node']} to node {dia['to_node']} "
              f"({dia['searches']} searches)")
        print(f"mean path {mp['value']:.6g} {u} " + ("(exact)" if mp["exact"] else
              f"(95% CI {mp['range_95_low']:.6g}-{mp['range_95_high']:.6g}, {mp['sources']} sources)"))
        print(f"global efficiency {eff:.6g} per {u}" + ("" if eff_exact else " (estimated)")
              if np.isfinite(eff) else "global efficiency undefined (zero-cost trips between distinct nodes)")
        print(CAUTION)
    return 0


def _write(args, net, res):
    from .._meta import CAUTION
    from ..export.gpkg import write_layers

    nodes = net.nodes_frame()[["node_id", "geometry"]].copy()
    nodes["eccentricity"] = res.node_fields["eccentricity"]
    clo = res.node_fields["closeness"]
    nodes["closeness"] = np.where(np.isfinite(clo), clo, np.nan)
    layers = {"nodes": nodes}
    if res.diameter_path is not None and len(res.diameter_path):
        layers["diameter_path"] = res.diameter_path
    write_layers(args.output, layers, overwrite=args.overwrite,
                 descriptions={"nodes": f"eccentricity ({args.weight.unit_name}) and harmonic closeness "
                                        f"(per {args.weight.unit}) of trips from each node. {CAUTION}",
                               "diameter_path": f"one least-cost path realising the diameter. {CAUTION}"})
    note(f"metrics: per-node figures -> {args.output}")
