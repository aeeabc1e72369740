"""Study scenario benchmark (not CI): a one-link scenario's network and access step, incremental vs full.

Layer: ``gen_roads.road_layer`` (a jittered street grid of 100 m blocks cut into 3-segment polylines,
with overshoots, gaps and diagonal lanes; road classes main / feeder / track).  Hubs placed at random
(seed 5) over the area: 100 clinics, 30 markets, 5 ports, off the network (each walks to it, at most
500 m: ``max_access_m``; the walk legs are made by the travel model in both paths).  The
study has no surface, settlements or metrics: only the steps an access scenario changes are timed.

Two scenarios, as a study writes them, each on one feature near the middle of the area:
``upgrade`` (speed x 3) and ``close``.  Per scenario, medians of ``--repeat`` runs:

* full = what ``run_study(..., incremental=False)`` does: rebuild the edited layers
  (``build_network``) + ``hub_access`` from scratch (all hubs and each kind);
* full access only = ``hub_access`` from scratch on the changed network (no rebuild);
* incremental = what ``run_study`` does by default: ``changed_network`` (the baseline's network
  re-costed in place) + ``hub_access`` repairing the baseline's forests (``Repair``).

Every run checks that the incremental result equals the full one (node costs and hubs per group,
every node field).  Usage:  .venv/bin/python benchmarks/bench_scenarios.py [--segments N] [--repeat 3]
Prints a Markdown block for benchmarks/RESULTS.md.
"""

from __future__ import annotations

import argparse
import os
import platform
import sys
import tempfile
import textwrap
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))


from bench_routing import fmt, timed  # noqa: E402  (the shared timing helpers)


def cpu_model() -> str:
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                return line.split(":", 1)[1].strip()
    except OSError:
        pass
    return platform.processor() or "unknown"


def write_study(folder: Path, n_segments: int) -> Path:
    import geopandas as gpd
    import shapely

    from gen_roads import road_layer

    roads = road_layer(n_segments, seed=1)
    roads.index = np.arange(1, len(roads) + 1)         # GeoPackage feature ids
    roads.to_file(folder / "roads.gpkg", layer="roads")
    x0, y0, x1, y1 = roads.total_bounds
    mid = shapely.points((x0 + x1) / 2, (y0 + y1) / 2)
    fid = int(roads.index[np.argmin(shapely.distance(roads.geometry.values, mid))])
    rng = np.random.default_rng(5)
    kinds = ["clinic"] * 100 + ["market"] * 30 + ["port"] * 5
    xy = np.column_stack([rng.uniform(x0, x1, len(kinds)), rng.uniform(y0, y1, len(kinds))])
    gpd.GeoDataFrame({"hub_id": [f"H{i}" for i in range(len(kinds))], "kind": kinds},
                     geometry=shapely.points(xy), crs=roads.crs).to_file(folder / "hubs.gpkg", layer="hubs")
    (folder / "study.toml").write_text(textwrap.dedent(f"""
        title = "Benchmark grid"

        [[lines]]
        path = "roads.gpkg"
        layer = "roads"
        class_field = "class"

        [routing]
        max_access_m = 500

        [hubs]
        path = "hubs.gpkg"
        id_field = "hub_id"
        kind_field = "kind"

        [scenarios.upgrade]
        upgrade = [{{ layer = "roads", fids = [{fid}], speed_factor = 3.0 }}]

        [scenarios.close]
        close = [{{ layer = "roads", fids = [{fid}] }}]
    """))
    return folder / "study.toml"


def same(a, b) -> bool:
    for k in a.node_fields:
        x, y = np.asarray(a.node_fields[k]), np.asarray(b.node_fields[k])
        if x.dtype.kind == "f":
            if not np.array_equal(x, y, equal_nan=True):
                return False
        elif not all((p == q) or (p is None and q is None) or (p != p and q != q) for p, q in zip(x, y)):
            return False
    return all(np.array_equal(a.kind_costs[k][1], b.kind_costs[k][1]) for k in a.kind_costs)


def main(argv=None):
    ap = argparse.ArgumentParser()
    ap.add_argument("--segments", type=int, default=1_300_000)
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args(argv)

    from geo_reach.analysis.access import Repair, hub_access
    from geo_reach.analysis.travel import TravelModel
    from geo_reach.network.build import build_network
    from geo_reach.pipeline.changes import changed_network
    from geo_reach.pipeline.inputs import layer_specs, read_hubs
    from geo_reach.pipeline.scenarios import scenario_inputs
    from geo_reach.study import load_study

    with tempfile.TemporaryDirectory() as tmp:
        t0 = time.perf_counter()
        study = load_study(write_study(Path(tmp), args.segments))
        specs = layer_specs(study)
        base = build_network(specs, study.build).network
        hubs = read_hubs(study, study.hubs, base.crs)
        travel = TravelModel(study.routing)
        t_setup = time.perf_counter() - t0

        def access(net, repair=None):
            return hub_access(net, hubs.xy, hubs.ids, hubs.kinds, travel=travel, repair=repair)

        base_acc, t_base, base_ts = timed(lambda: access(base), args.repeat)
        rows = []
        for name in ("upgrade", "close"):
            sspecs, shubs, changes, kinds = scenario_inputs(study, name, specs, hubs)

            def full():
                return access(build_network(sspecs, study.build).network)

            def incremental():
                net, edges = changed_network(base, sspecs, kinds)
                return access(net, Repair(base_acc, base, edges, np.arange(len(hubs.ids))))

            changed, edges = changed_network(base, sspecs, kinds)
            ref, t_full, full_ts = timed(full, args.repeat)
            ref2, t_acc, acc_ts = timed(lambda: access(changed), args.repeat)
            inc, t_inc, inc_ts = timed(incremental, args.repeat)
            _, t_att, att_ts = timed(lambda: travel.attach(changed, hubs.xy, roles=("arrive",)), args.repeat)
            rows.append((name, changes[0], len(edges), t_full, full_ts, t_acc, acc_ts, t_inc, inc_ts,
                         same(inc, ref) and same(inc, ref2), inc.work, base_acc.work, t_att))

    print(f"Script: `.venv/bin/python benchmarks/bench_scenarios.py --segments {args.segments} "
          f"--repeat {args.repeat}`\n")
    print(f"{time.strftime('%Y-%m-%d')}, {platform.machine()}, {os.cpu_count()} cores ({cpu_model()}), "
          f"Python {platform.python_version()}, load average at the end {os.getloadavg()[0]:.2f}.  "
          f"Network: {base.n_nodes:,} nodes, {base.n_edges:,} edges (built in {t_setup:.1f} s with the layer); "
          f"{len(hubs.ids)} hubs, 3 kinds.  Baseline `hub_access` (forests grown, 4 groups): {t_base:.3f} s "
          f"({fmt(base_ts)}).\n")
    print("| scenario | edges re-costed | full: rebuild + access | full access only | incremental: "
          "re-cost + repair | ratio to full | ratio to access only | of which hub walk legs | work / baseline work "
          "| same results |")
    print("| --- | --- | --- | --- | --- | --- | --- | --- | --- | --- |")
    for (name, what, ne, tf, fts, ta, ats, ti, its, ok, w, bw, tat) in rows:
        print(f"| {name} ({what}) | {ne} | {tf:.2f} s ({fmt(fts)}) | {ta * 1000:.0f} ms ({fmt([t * 1000 for t in ats])}) "
              f"| **{ti * 1000:.0f} ms** ({fmt([t * 1000 for t in its])}) | **{100 * ti / tf:.2f} %** "
              f"| {100 * ti / ta:.1f} % | {tat * 1000:.0f} ms | {w / bw:.4f} | {'yes' if ok else 'NO'} |")
    return 0 if all(r[9] for r in rows) else 1


if __name__ == "__main__":
    sys.exit(main())
