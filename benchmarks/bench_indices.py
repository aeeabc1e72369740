"""Accessibility indices benchmark (not CI): 2SFCA for 10,000 settlements and 500 hubs on a 250,000-node network.

The network is the routing benchmark's generated road-like graph (``bench_routing.road_like``: a jittered
500 x 500 lattice of 100 m links, 10 % removed, 5 % one-way, 20-90 km/h).  Settlements and hubs are random
points over it (seeded), off the network: each joins it by walk legs as ``attach_points`` makes them.

Measured, in one process, interleaved, ``--runs`` times (medians reported):

* ``trip_costs`` + ``two_step`` (the whole index from points: attach, prune, bounded searches, formula);
* of which ``attach_points`` for the same points (timed apart: the walk-leg geometry);
* reference: scipy's ``dijkstra`` alone, 500 searches bounded by T from the hubs' nearest nodes on the
  bare network (no walk legs, no pairs): the floor of any bounded-search approach.

Usage:  .venv/bin/python benchmarks/bench_indices.py [--runs 3] [--within 30] [--side 500]
Prints a Markdown block for benchmarks/RESULTS.md.
"""

from __future__ import annotations

import argparse
import os
import platform
import statistics
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).parent))


def main():
    from scipy.sparse.csgraph import dijkstra
    from scipy.spatial import cKDTree

    from bench_routing import road_like
    from geo_reach.analysis.attach import attach_points
    from geo_reach.analysis.indices.measures import two_step
    from geo_reach.analysis.indices.trips import trip_costs

    ap = argparse.ArgumentParser()
    ap.add_argument("--runs", type=int, default=3)
    ap.add_argument("--within", type=float, nargs="+", default=[30.0])
    ap.add_argument("--side", type=int, default=500)
    ap.add_argument("--settlements", type=int, default=10_000)
    ap.add_argument("--hubs", type=int, default=500)
    a = ap.parse_args()

    net = road_like(a.side)
    net.csr("minutes")
    net.csr("minutes", reverse=True)
    rng = np.random.default_rng(42)
    lo = np.array([net.node_x.min(), net.node_y.min()])
    hi = np.array([net.node_x.max(), net.node_y.max()])
    s_xy = lo + rng.random((a.settlements, 2)) * (hi - lo)
    h_xy = lo + rng.random((a.hubs, 2)) * (hi - lo)
    pop = rng.integers(50, 5000, a.settlements).astype(float)
    cap = rng.integers(1, 10, a.hubs).astype(float)
    hub_nodes = cKDTree(np.column_stack([net.node_x, net.node_y])).query(h_xy)[1]
    rev = net.csr("minutes", reverse=True).matrix
    attach_points(net, s_xy[:10], "minutes")          # build the cached spatial index outside the timings
    trip_costs(net, s_xy[:50], h_xy[:5], within=5.0)  # compile the numba kernels outside the timings

    load0 = os.getloadavg()[0]
    lines = []
    for t in a.within:
        times = {"index": [], "cpu": [], "attach": [], "bare": []}
        out = None
        for _ in range(a.runs):
            t0, c0 = time.perf_counter(), time.process_time()
            tc = trip_costs(net, s_xy, h_xy, within=t)
            index, ratio = two_step(tc.settlement, tc.hub, cap, pop, tc.n_settlements)
            times["index"].append(time.perf_counter() - t0)
            times["cpu"].append(time.process_time() - c0)
            out = (tc, index)
            t0 = time.perf_counter()
            attach_points(net, s_xy, "minutes")
            attach_points(net, h_xy, "minutes")
            times["attach"].append(time.perf_counter() - t0)
            t0 = time.perf_counter()
            for s in range(0, len(hub_nodes), 25):
                dijkstra(rev, indices=hub_nodes[s:s + 25], limit=t)
            times["bare"].append(time.perf_counter() - t0)
        med = {k: statistics.median(v) for k, v in times.items()}
        tc, index = out
        has = np.bincount(tc.hub, weights=pop[tc.settlement], minlength=a.hubs) > 0
        cons = abs(float(pop @ index) - float(cap[has].sum())) / float(cap[has].sum())
        lines.append(
            f"| T = {t:g} min | **{med['index']:.1f} s** (CPU {med['cpu']:.1f} s) | {med['attach']:.1f} s | {med['bare']:.1f} s | "
            f"{med['index'] / med['bare']:.1f}x | {tc.n_pairs:,} | "
            f"{', '.join(f'{x:.1f}' for x in times['index'])} s |")
        lines.append(f"|  | (2SFCA conservation check: relative error {cons:.1e}; "
                     f"{int((index > 0).sum()):,} settlements with a hub within T) | | | | | |")
    print(f"## Accessibility indices\n\n{time.strftime('%Y-%m-%d')}, {platform.machine()}, {os.cpu_count()} cores, "
          f"Python {platform.python_version()}, load average at start {load0:.1f}, at end {os.getloadavg()[0]:.1f}; "
          f"{a.runs} runs each, medians (wall clock; CPU time of the process beside it).\n"
          f"Network: `road_like({a.side})`, {net.n_nodes:,} nodes, {net.n_edges:,} edges; {a.settlements:,} settlements "
          f"and {a.hubs:,} hubs, random points off the network.\n")
    print("| case | 2SFCA from points (`trip_costs` + `two_step`) | of which `attach_points` (same points, timed "
          "apart) | reference: bare scipy `dijkstra`, 500 searches to T | ratio | pairs within T | runs |")
    print("| --- | --- | --- | --- | --- | --- | --- |")
    print("\n".join(lines))


if __name__ == "__main__":
    main()
