"""``geo-reach build``: line layers to a routable network GeoPackage with a repair report."""

from __future__ import annotations

import sys

from ._common import add_layer_options, add_output_options, check_layer_io, emit_json, print_json, study_from_layer_args

__all__ = ["register", "run"]


def register(sub):
    p = sub.add_parser("build", help="build a clean, routable network from line layers",
                       description="Build a clean, routable network from line layers; write layers "
                                   "edges, nodes and network_issues to a GeoPackage.")
    add_layer_options(p)
    add_output_options(p, "NETWORK.gpkg")
    p.set_defaults(func=run)


def run(args):
    from ..export.atomic import OutputSet
    from ..export.gpkg import network_files, write_network
    from ..pipeline import build_or_read, layer_specs

    check_layer_io(args, "network file")
    study = study_from_layer_args(args)
    result = build_or_read(study, layer_specs(study))
    with OutputSet([*network_files(args.output), args.report]) as out:
        write_network(args.output, result, into=out)
        if args.report:
            emit_json(result.report, out.path(args.report))
    if args.json:
        print_json(result.report)
    if not args.json:
        r = result.report
        kinds = ", ".join(f"{k} {v}" for k, v in r["issues"].items() if v)
        print(f"network: {r['nodes']} nodes, {r['edges']} edges, {r['components']} components "
              f"({r['network_length_m'] / 1000:.1f} km) -> "
              f"{', '.join(map(str, network_files(args.output, sides=False)))}", file=sys.stderr)
        print(f"issues: {kinds or 'none'} (layer network_issues)", file=sys.stderr)
    return 0
