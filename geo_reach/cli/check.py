"""``geo-reach check``: the fast data-quality pass (issues layer and report, no network)."""

from __future__ import annotations

import sys

from ._common import add_layer_options, add_output_options, check_layer_io, emit_json, print_json, study_from_layer_args

__all__ = ["register", "run"]


def register(sub):
    p = sub.add_parser("check", help="report repairs and suspect spots without building",
                       description="Data-quality pass: the network_issues layer and the report, "
                                   "with the same rules as build.")
    add_layer_options(p)
    add_output_options(p, "ISSUES.gpkg")
    p.set_defaults(func=run)


def run(args):
    from ..export.atomic import OutputSet
    from ..export.gpkg import network_files, write_network
    from ..network.build import check_layers
    from ..pipeline import layer_specs

    check_layer_io(args, "issues file", issues_only=True)
    study = study_from_layer_args(args)
    result = check_layers(layer_specs(study), study.build)
    with OutputSet([*network_files(args.output, issues_only=True), args.report]) as out:
        write_network(args.output, result, issues_only=True, into=out)
        if args.report:
            emit_json(result.report, out.path(args.report))
    if args.json:
        print_json(result.report)
    if not args.json:
        kinds = ", ".join(f"{k} {v}" for k, v in result.report["issues"].items() if v)
        print(f"issues: {kinds or 'none'} -> {', '.join(map(str, network_files(args.output, True, sides=False)))}",
              file=sys.stderr)
    return 0
