"""Builder benchmark: a generated road-like layer of ~1,000,000 segments.

Measures, in one run (medians of --runs repeats, each in a fresh process so
peak memory is the process's own):
  * end to end, file to GeoPackage (`geo-reach build`): wall time and peak RSS;
  * the topology step alone (snapping, noding, grade separation, issue
    detection, edge assembly) as timed inside build_network;
  * the reference: plain GEOS noding of the same lines with
    shapely.unary_union (which does far less), wall time and peak RSS.

    .venv/bin/python benchmarks/bench_build.py [--segments 1000000] [--runs 3]
"""

from __future__ import annotations

import argparse
import json
import platform
import statistics
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
OUT = HERE / "out"


def child_build(src, dst):
    import resource

    from geo_reach.network.build import BuildOptions, LayerSpec, build_network
    from geo_reach.export.gpkg import write_network

    marks = {}

    def progress(step):
        marks.setdefault(step, time.perf_counter())   # first time each step starts

    t0 = time.perf_counter()
    r = build_network([LayerSpec(str(src), class_field="class")], BuildOptions(), progress=progress)
    t1 = time.perf_counter()
    write_network(dst, r, overwrite=True)
    t2 = time.perf_counter()
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
    # Topology = snapping, noding, grade separation, issue detection and edge assembly: from the
    # start of noding to the end of the build, less the geodesic measurement of the edges (pyproj.Geod
    # on every vertex pair, which is measurement, not topology; reported separately).
    measuring = marks["assembling edges"] - marks["measuring geodesic lengths"]
    print(json.dumps({"end_to_end_s": t2 - t0, "topology_s": t1 - marks["noding"] - measuring,
                      "topology_with_measuring_s": t1 - marks["noding"], "measuring_s": measuring,
                      "read_s": marks["noding"] - t0, "write_s": t2 - t1, "peak_bytes": peak,
                      "edges": r.report["edges"], "nodes": r.report["nodes"]}))


def child_union(src):
    import resource

    import pyogrio
    import shapely

    gdf = pyogrio.read_dataframe(src)
    t0 = time.perf_counter()
    noded = shapely.unary_union(gdf.geometry.values)
    t1 = time.perf_counter()
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
    print(json.dumps({"union_s": t1 - t0, "peak_bytes": peak, "parts": int(shapely.get_num_geometries(noded))}))


def run_child(*args):
    p = subprocess.run([sys.executable, __file__, *args], capture_output=True, text=True, check=True)
    return json.loads(p.stdout.strip().splitlines()[-1])


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--segments", type=int, default=1_000_000)
    ap.add_argument("--runs", type=int, default=3)
    ap.add_argument("--child", choices=["build", "union"])
    ap.add_argument("src", nargs="?")
    ap.add_argument("dst", nargs="?")
    a = ap.parse_args()
    if a.child == "build":
        return child_build(a.src, a.dst)
    if a.child == "union":
        return child_union(a.src)
    sys.path.insert(0, str(HERE))
    from gen_roads import road_layer

    OUT.mkdir(exist_ok=True)
    src = OUT / f"roads_{a.segments}.gpkg"
    if not src.exists():
        road_layer(a.segments, seed=1).to_file(src, layer="roads")
    builds, unions = [], []
    for i in range(a.runs):
        builds.append(run_child("--child", "build", str(src), str(OUT / "network.gpkg")))
        unions.append(run_child("--child", "union", str(src)))
        print(f"run {i + 1}: build {builds[-1]['end_to_end_s']:.1f} s (topology {builds[-1]['topology_s']:.1f} s), "
              f"unary_union {unions[-1]['union_s']:.1f} s", file=sys.stderr)
    med = lambda xs, k: statistics.median(x[k] for x in xs)  # noqa: E731
    res = {
        "date": time.strftime("%Y-%m-%d"), "machine": f"{platform.machine()}, {platform.processor() or 'cpu'}, "
                                                       f"{__import__('os').cpu_count()} cores",
        "segments": a.segments, "runs": a.runs,
        "end_to_end_s": med(builds, "end_to_end_s"), "topology_s": med(builds, "topology_s"),
        "build_peak_gib": med(builds, "peak_bytes") / 2**30,
        "unary_union_s": med(unions, "union_s"), "unary_union_peak_gib": med(unions, "peak_bytes") / 2**30,
        "edges": builds[0]["edges"], "nodes": builds[0]["nodes"],
    }
    res["topology_over_union"] = res["topology_s"] / res["unary_union_s"]
    # Each run times both back to back, so the per-run ratio is the fairer figure on a shared machine.
    res["per_run_ratio"] = [round(b["topology_s"] / u["union_s"], 3) for b, u in zip(builds, unions)]
    res["median_per_run_ratio"] = statistics.median(res["per_run_ratio"])
    print(json.dumps(res, indent=2))


if __name__ == "__main__":
    main()
