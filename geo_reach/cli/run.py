"""``geo-reach run`` and ``geo-reach compare``: a whole study, or its scenarios against the baseline."""

from __future__ import annotations

import sys
from pathlib import Path

from ..glossary import reason_words

__all__ = ["register", "default_outdir", "run", "run_compare", "print_summary", "scenario_headline"]


def register(sub):
    p = sub.add_parser("run", help="run everything a study file describes",
                       description="Run a study (build, access, metrics, surface, scenarios) into a folder: "
                                   "results.gpkg, GeoTIFFs, styles, summary.json and map.html.")
    p.add_argument("study", metavar="STUDY.toml", help="the study file (TOML; paths in it are relative to it)")
    p.add_argument("-o", "--output", metavar="OUTDIR",
                   help="output folder (default: geo-reach-out/<study name> beside the study file)")
    p.add_argument("--overwrite", action="store_true", help="replace a folder that already holds results")
    p.add_argument("--quiet", action="store_true", help="no progress lines")
    p.set_defaults(func=run)

    c = sub.add_parser("compare", help="compare a study's scenarios with its baseline",
                       description="Run the baseline and the named scenarios (default: all) and write the "
                                   "comparison outputs only.")
    c.add_argument("study", metavar="STUDY.toml", help="the study file whose scenarios to compare")
    c.add_argument("--scenario", action="append", metavar="NAME", help="a scenario to compare (repeatable)")
    c.add_argument("-o", "--output", metavar="OUTDIR",
                   help="output folder (default: geo-reach-out/<study name>-compare beside the study file)")
    c.add_argument("--overwrite", action="store_true", help="replace a folder that already holds results")
    c.add_argument("--quiet", action="store_true", help="no progress lines")
    c.set_defaults(func=run_compare)


def default_outdir(study_path: Path, suffix: str = "") -> Path:
    """``geo-reach-out/<study name><suffix>`` beside the study file."""
    return study_path.parent / "geo-reach-out" / f"{study_path.stem}{suffix}"


def run(args):
    from ..pipeline import run_study
    from ..study import load_study
    from ._progress import StepDisplay

    study = load_study(args.study)
    out = Path(args.output) if args.output else default_outdir(Path(args.study))
    show = StepDisplay(not args.quiet, total=6 + 5 * len(study.scenarios))
    summary = run_study(study, out, overwrite=args.overwrite, progress=show)
    show.close()
    print_summary(summary, out)
    return 0


def run_compare(args):
    from ..pipeline import run_study
    from ..study import load_study
    from ._progress import StepDisplay

    study = load_study(args.study)
    if not study.scenarios:
        from ..errors import InputError

        raise InputError(f"file '{args.study}': the study has no [scenarios.NAME] table; add one to compare")
    out = Path(args.output) if args.output else default_outdir(Path(args.study), "-compare")
    show = StepDisplay(not args.quiet, total=6 + 5 * len(args.scenario or study.scenarios))
    summary = run_study(study, out, overwrite=args.overwrite, scenarios=args.scenario,
                        only_comparison=True, progress=show)
    show.close()
    print_summary(summary, out)
    return 0


def scenario_headline(s: dict, unit: str) -> str:
    """One line per scenario, the people it cuts off first (a loss is never hidden behind a gain)."""
    parts = []
    cut = s.get("people_cut_off") or {}
    by_kind = {k: v for k, v in (cut.get("by_kind") or {}).items() if v}
    if cut.get("total") or by_kind:
        kinds = ", ".join(f"{k} {v:,.0f}" for k, v in by_kind.items())
        parts.append(f"CUTS OFF {cut.get('total') or 0:,.0f} people from every hub"
                     + (f" (from their nearest hub of a kind: {kinds})" if kinds else ""))
    parts.append("; ".join(s["changes"]) or "changes nothing")
    parts.append(f"{s.get('new_or_upgraded_km', 0):.1f} km new/upgraded")
    newly = s.get("people_newly_within", {})
    if newly:
        parts.append("people newly within " + ", ".join(f"{k} min: {v:+,.0f}" for k, v in newly.items()))
    if s.get("person_cost_saved") is not None:     # the routing weight's own change comes first
        parts.append(f"{s.get('person_cost_unit', 'person-cost')} saved {s['person_cost_saved']:,.0f} "
                     "(settlements, the ranking's figure)")
    parts.append(f"person-minutes saved {s.get('person_minutes_saved', 0):,.0f}")
    lc = s.get("largest_component") or {}
    if lc and not lc.get("same_places", True):
        parts.append(f"network split: largest part {lc['nodes_before']:,} -> {lc['nodes_after']:,} nodes "
                     "(diameter not compared)")
    elif s.get("diameter_change") is not None:
        parts.append(f"diameter {s['diameter_change']:+.1f} {unit}")
    return "; ".join(parts)


def print_summary(summary: dict, out: Path, file=None):
    """The closing text summary: where the outputs are and the main figures."""
    file = file or sys.stdout
    b = summary["baseline"]
    n = b["network"]
    m = b["metrics"]
    p = print
    p(f"results: {out}", file=file)
    if (out / "map.html").exists():
        p(f"map:     {out / 'map.html'}", file=file)
    p(f"network: {n['nodes']} nodes, {n['edges']} edges, {n['components']} components, "
      f"{(n['network_length_m'] or 0) / 1000:.1f} km", file=file)
    d = m["diameter"]
    mp = m["mean_path"]
    unit = m.get("unit", m["weight"])
    if d["value"] is not None:
        p(f"diameter: {d['value']:.1f} {unit} (node {d['from_node']} to {d['to_node']}); "
          f"mean path {mp['value']:.1f} {unit}", file=file)
    if "population_total" in b:
        bands = b["population_by_band"]
        largest = max(bands, key=float)
        tot = b["population_total"] or 0
        p(f"people: {tot:,.0f} in all; within {largest} min: {bands[largest]:,.0f}; "
          f"beyond {largest} min or unreachable: {b['population_beyond']:,.0f}", file=file)
    weak_min = ((summary.get("study") or {}).get("surface") or {}).get("weak_minutes")
    for w in b.get("weak_regions", [])[:3]:
        p(f"  weak region #{w['rank']}: {reason_words(w['reason'], weak_min)}, {w['population'] or 0:,.0f} people, "
          f"{w['area_km2']:.1f} km2", file=file)
    crit = summary.get("criticality") or {}
    for t in (crit.get("top") or [])[:3]:
        p(f"  critical link #{t['rank']}: edge {t['edge_id']}, {t['people_cut_off'] or 0:,.0f} people cut off "
          f"(summed over hub kinds), {t.get('person_minutes_added') or 0:,.0f} person-minutes added", file=file)
    ind = summary.get("indices") or {}
    for measure, n in (ind.get("rows_reaching_a_hub") or {}).items():
        p(f"access index {measure} (within {ind.get('within_minutes')} min): {n:,} of {ind.get('rows', 0):,} "
          "settlement rows reach a hub (layer access_index)", file=file)
    for r in summary.get("scenario_ranking", []):
        s = summary["scenarios"][r["scenario"]]
        p(f"scenario {r['rank']}. {r['scenario']}: {scenario_headline(s, unit)}", file=file)
    p(summary["caution"], file=file)
