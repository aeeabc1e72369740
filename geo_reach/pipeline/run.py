"""Run a study: everything it describes into one results folder, written atomically.

:func:`run_study` reads the inputs once, checks every scenario before the
long steps start, analyses the baseline and each scenario, compares them and
writes the folder as a whole.  :func:`run_surface` is the ``surface``
command's run.  Progress goes to the ``progress`` callback and to the
``geo_reach`` logger; nothing here prints.
"""

from __future__ import annotations

import logging
import time
from pathlib import Path

from .._meta import CAUTION, TOOL, __version__
from ..errors import GeoReachError, InputError
from ..export.tables import change_tables
from ..study import Study
from .inputs import build_or_read, layer_specs, load_rasters, read_hubs
from .outputs import sha256, summarise, write_outputs, write_surface_outputs
from .scenarios import compare, rank_scenarios, scenario_inputs
from .sections import check_sections, run_sections
from .steps import analyse

__all__ = ["run_study", "run_surface", "check_outdir", "Progress"]

log = logging.getLogger("geo_reach")


class Progress:
    """A step reporter: calls ``callback(text)`` and logs each step at INFO level.

    ``total`` is the number of steps expected (for a progress bar), or None.
    """

    def __init__(self, callback=None, total: int | None = None):
        self.callback = callback
        self.total = total

    def __call__(self, text: str) -> None:
        log.info(text)
        if self.callback is not None:
            self.callback(text)


def check_outdir(study: Study, outdir, overwrite: bool) -> None:
    """Refuse, before any work, a results folder that would destroy an input or files geo-reach did not write.

    See :func:`geo_reach.export.guard.check_io`: the study file and every
    file it names are inputs.
    """
    from ..export.guard import check_io

    inputs = ([study.path] if study.path is not None else []) + list(study.input_files())
    check_io(inputs=inputs, folder=outdir, overwrite=overwrite)


def run_study(study: Study, outdir, *, overwrite=False, scenarios=None, only_comparison=False,
              progress=None, incremental: bool = True) -> dict:
    """Run the study into ``outdir`` and return the summary.

    Parameters
    ----------
    study : Study
    outdir : str or Path
        The results folder, written as a whole: into a temporary folder
        beside it, renamed into place at the end.  A folder that already
        holds results is replaced only with ``overwrite``; a failed run
        leaves it as it was.
    scenarios : list of str, optional
        The scenarios to run (default: all).
    only_comparison : bool
        Write the comparison outputs only (``geo-reach compare``).
    progress : callable, optional
        Called with a short text as each step starts.
    incremental : bool, default True
        A scenario that closes or upgrades features or changes hubs (and
        adds no line layer) takes the baseline network with those edges
        re-costed in place and repairs the baseline's nearest-hub forests
        (:mod:`geo_reach.pipeline.changes`).  ``False`` rebuilds and
        searches every scenario in full: the reference, with identical
        results.

    Raises
    ------
    InputError
        Bad inputs or options, named by file and study key; raised before the
        long steps wherever they can be found early.
    """
    try:
        return _run_study(study, Path(outdir), overwrite, scenarios, only_comparison, progress, incremental)
    except GeoReachError as err:
        raise study.blame(err) from err


def _run_study(study, outdir, overwrite, scenarios, only_comparison, progress, incremental=True):
    from ..export.atomic import atomic_dir

    check_outdir(study, outdir, overwrite)
    names = list(study.scenarios) if scenarios is None else list(scenarios)
    for n in names:
        if n not in study.scenarios:
            raise InputError(f"scenario '{n}' is not in the study (scenarios: {', '.join(study.scenarios) or 'none'})")
    # steps: build and rasters, access, metrics, surface, the sections, then per scenario 5 more, then writing
    n_sections = (study.criticality is not None) + (study.indices is not None)
    bar = Progress(progress, total=4 + n_sections + 5 * len(names) + 1)
    timing = {"started": time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime())}
    t0 = time.perf_counter()
    specs = layer_specs(study)
    # Everything that can be refused is checked before the long steps start.
    pre = build_or_read(study, specs)
    check_sections(study, pre.network)
    crs = pre.network.crs
    hubs = read_hubs(study, study.hubs, crs) if study.hubs else None
    try:
        planned = {n: scenario_inputs(study, n, specs, hubs) for n in names}
    except InputError as err:
        if study.path is not None and not str(err).startswith("file "):
            raise err.with_message(f"file '{study.path}': {err}") from err
        raise
    rasters = None
    if study.surface is not None and hubs is not None:   # a raster too large for memory is refused here, too
        rasters = load_rasters(study, pre.network, hubs)
    bar("network built" + (", rasters read" if rasters is not None else ""))
    base = analyse(study, specs, hubs, progress=bar, rasters=rasters, prebuilt=pre)
    run_sections(study, base, hubs, bar, timing)
    timing["baseline_s"] = round(time.perf_counter() - t0, 3)
    results = {}
    for n in names:
        t1 = time.perf_counter()
        bar(f"scenario {n}")
        sspecs, shubs, changes, kinds = planned[n]
        if not changes:
            log.warning("scenario %s: changes nothing (reported, still mapped)", n)
        pre_s, repair, how = _scenario_network(study, n, base, hubs, planned[n], incremental)
        scen = analyse(study, sspecs, shubs, progress=bar, with_profile=False, rasters=rasters, prebuilt=pre_s,
                       repair=repair)
        results[n] = compare(study, n, base, scen, changes, kinds)
        results[n]["node_cost"] = scen.node_cost            # for the map's scenario view
        if scen.rings is not None:
            results[n]["layers"]["reach_rings"] = scen.rings
        results[n]["tables"] = change_tables(study, base, scen)   # per settlement and zone, each hub kind
        results[n]["notes"] = scen.notes + [
            f"{k} of {v} issue spots in the scenario network" for k, v in scen.build.report["issues"].items()
            if v and v != base.build.report["issues"].get(k)]
        timing[f"scenario_{n}_s"] = round(time.perf_counter() - t1, 3)
        results[n]["reuse"] = how
    summary = {
        "tool": TOOL, "version": __version__, "caution": CAUTION, "title": study.title,
        "study": study.raw,
        "inputs": {str(p.relative_to(study.base)) if p.is_relative_to(study.base) else str(p): sha256(p)
                   for p in study.input_files() if p.is_file()},
        "baseline": summarise(study, base),
    }
    for key, sec in base.sections.items():
        summary[key] = sec.summary
    if names:
        largest = f"{max(study.surface.bands):g}" if study.surface else ""
        summary["scenarios"] = {n: {k: v for k, v in r.items()
                                    if k not in ("layers", "delta", "edges", "node_cost", "tables")}
                                for n, r in results.items()}
        summary["scenario_ranking"] = rank_scenarios(summary["scenarios"], largest, study.routing.weight)
    bar("writing outputs")
    with atomic_dir(outdir) as tmp:
        timing["total_s"] = round(time.perf_counter() - t0, 3)
        summary["timing"] = timing
        write_outputs(tmp, study, base, results, summary, only_comparison=only_comparison)
    return summary


def _scenario_network(study, name, base, hubs, planned, incremental):
    """(prebuilt BuildResult or None, Repair or None, what was reused) for one scenario."""
    from ..analysis.access import Repair
    from ..network.build import BuildResult
    from .changes import can_change_in_place, changed_network, hub_map

    full = ("the scenario network was rebuilt and routed in full; the grid, rasters and hub reading were "
            "reused from the baseline")
    sspecs, shubs, _, kinds = planned
    if not incremental or not can_change_in_place(study, kinds):
        return None, None, full
    net, edges = changed_network(base.build.network, sspecs, kinds)
    pre = BuildResult(net, base.build.issues, base.build.report)
    how = (f"the scenario network is the baseline's with {len(edges)} edge(s) re-costed in place (no rebuild); "
           "the grid, rasters and hub reading were reused from the baseline")
    if base.access is None or shubs is None:
        return pre, None, how
    hm = hub_map(hubs, shubs, study.scenarios[name].get("remove_hubs", []))
    if hm is None:
        return pre, None, how + "; the nearest hubs were searched in full"
    return pre, Repair(base.access, base.build.network, edges, hm), (
        how + "; the nearest hubs were repaired from the baseline's (only the trips that change were searched)")


def run_surface(study: Study, outdir, *, overwrite=False, progress=None) -> dict:
    """The ``surface`` command's run: the study's baseline, written as the surface outputs.

    ``OUTDIR/hub_minutes.tif``, ``nearest_hub.tif`` (and per kind), ``reach.gpkg``
    (``reach_bands``, ``weak_regions``, plus ``settlements``/``zones``) and
    ``summary.json`` with the population figures at its top level.
    """
    from ..export.atomic import atomic_dir

    outdir = Path(outdir)
    check_outdir(study, outdir, overwrite)
    if study.surface is None or study.hubs is None:
        raise InputError("a surface needs hubs and a [surface] table")
    bar = Progress(progress)
    t0 = time.perf_counter()
    specs = layer_specs(study)
    pre = build_or_read(study, specs)
    hubs = read_hubs(study, study.hubs, pre.network.crs)
    rasters = load_rasters(study, pre.network, hubs)   # refusals come before any progress line
    bar("network built, rasters read")
    a = analyse(study, specs, hubs, progress=bar, rasters=rasters, prebuilt=pre, with_profile=False)
    base = summarise(study, a)
    summary = {"tool": TOOL, "version": __version__, "caution": CAUTION,
               "population_total": base.get("population_total"),
               "population_by_band": base.get("population_by_band"),
               "population_beyond": base.get("population_beyond"),
               "population_unreachable": base.get("population_unreachable"),
               "mean_hub_minutes": base.get("mean_hub_minutes"),
               **{k: v for k, v in base.items() if not k.startswith("population_")},
               "study": study.raw}
    bar("writing outputs")
    with atomic_dir(outdir) as tmp:
        summary["timing"] = {"total_s": round(time.perf_counter() - t0, 3)}
        write_surface_outputs(tmp, study, a, summary)
    return summary
