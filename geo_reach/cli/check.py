"""``geo-reach check``: the fast data-quality pass (issues layer and report, no network)."""

from __future__ import annotations

import sys

from ._common import add_layer_options, add_output_options, emit_json, study_from_layer_args

__all__ = ["register", "run"]


def register(sub):
    p = sub.add_parser("check", help="report repairs and suspect spots without building",
                       description="Data-quality pass: the network_issues layer and the report, "
                                   "with the same rules as build.")
    add_layer_options(p)
    add_output_options(p, "ISSUES.gpkg")
    p.set_defaults(func=run)


def run(args):
    from ..export.atomic import check_output
    from ..network.build import check_layers
    from ..export.gpkg import write_network
    from ..pipeline import layer_specs

    check_output(args.output, args.overwrite)
    study = study_from_layer_args(args)
    result = check_layers(layer_specs(study), study.build)
    write_network(args.output, result, overwrite=args.overwrite, issues_only=True)
    emit_json(result.report, args.report, stdout=args.json)
    if not args.json:
        kinds = ", ".join(f"{k} {v}" for k, v in result.report["issues"].items() if v)
        print(f"issues: {kinds or 'none'} -> {args.output}", file=sys.stderr)
    return 0
