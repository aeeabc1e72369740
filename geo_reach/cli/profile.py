"""``geo-reach profile``: nodes and network length within each cost step from a source, and the growth class."""

from __future__ import annotations

from ..errors import OptionError
from ._common import add_weight, note, print_json, read_network_arg, report_excluded

__all__ = ["register", "run"]


def register(sub):
    p = sub.add_parser("profile", help="reach profile: what lies within each cost step of a source",
                       description="How many nodes (the source itself not counted) and how much network length "
                                   "lie within each cost step from a source, with a fitted growth class "
                                   "(linear, polynomial with exponent, exponential with rate). "
                                   "Figures are model estimates; local surveys decide.")
    p.add_argument("network", metavar="NETWORK.gpkg", help="network GeoPackage from geo-reach build")
    p.add_argument("--from", dest="source", type=int, metavar="NODE_ID", help="source node id (layer nodes)")
    p.add_argument("--sources", "--sample", dest="sample", type=int, metavar="K",
                   help="average the profile over K random sources instead of one --from node")
    p.add_argument("--seed", type=int, default=0, help="seed of the --sample sources (default 0)")
    s = p.add_mutually_exclusive_group()
    s.add_argument("--steps", type=int, metavar="N",
                   help="N equal steps up to the source's eccentricity (default 20; 1-link steps for hops)")
    s.add_argument("--step", type=float, metavar="COST", help="fixed step in the weight's unit")
    add_weight(p)
    p.add_argument("--json", action="store_true", help="print the profile as JSON")
    p.add_argument("--png", metavar="FILE.png", help="write a chart")
    p.add_argument("--overwrite", action="store_true", help="replace an existing chart")
    p.set_defaults(func=run)


def run(args):
    from .._meta import CAUTION
    from ..analysis.profile import random_sources, sample_profile
    from ..analysis.routing import check_nodes
    from ..export.charts import plot_profile
    from ..export.guard import check_io

    if (args.source is None) == (args.sample is None):
        raise OptionError("give a source node with --from NODE_ID, or --sources K for K random sources")
    check_io(inputs=[args.network], files=[(args.png, "chart")], overwrite=args.overwrite)
    net = read_network_arg(args.network, args.weight)
    report_excluded(net, args.weight)
    if args.source is not None:
        try:
            sources = check_nodes(net, [args.source])
        except Exception as err:
            raise type(err)(f"--from: {err}") from err
    else:
        if args.sample < 1:
            raise OptionError(f"--sources {args.sample}: give 1 or more random sources")
        sources = random_sources(net, args.sample, args.seed)
    prof = sample_profile(net, sources, args.weight, steps=args.steps, step=args.step)
    g = prof.growth
    out = {
        "source": int(sources[0]) if args.source is not None else None,
        "sources": len(sources),
        "weight": args.weight.name,
        "unit": args.weight.unit,
        "counts_source": False,
        "reachable_nodes": prof.reachable_nodes,
        "steps": [{"cost": float(c), "nodes": float(n) if args.sample else int(n), "length_m": float(m)}
                  for c, n, m in zip(prof.cost, prof.nodes, prof.length_m)],
        "growth": {"kind": g.kind, "exponent": g.exponent, "rate": g.rate, "points": g.points},
        "caution": CAUTION,
    }
    if args.png:
        plot_profile(prof, args.png)
        note(f"profile chart -> {args.png}")
    if args.json:
        print_json(out)
    else:
        print(f"{'cost (' + args.weight.unit + ')':>20} {'nodes':>12} {'length_km':>12}")
        for c, n, m in zip(prof.cost, prof.nodes, prof.length_m):
            print(f"{c:20.6g} {n:12.6g} {m / 1000:12.3f}")
        detail = (f"exponent {g.exponent:.3f}" if g.exponent is not None else
                  f"rate {g.rate:.4g} per {args.weight.unit}" if g.rate is not None else "too few steps to fit")
        print(f"growth: {g.kind} ({detail}; fitted on {g.points} steps)")
        print(CAUTION)
    return 0
