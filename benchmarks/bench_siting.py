"""Siting benchmark (not CI): coverage, exact, 2,000 candidates, 5,000 settlements, P = 10.

Network: the routing benchmark's generated road-like graph (``bench_routing.road_like``, 250,000 nodes at
side 500).  Settlements (random populations), candidates and 20 existing hubs are random points off the
network (seeded).  Measured, in one process, ``--runs`` times (medians reported):

* ``choose_sites`` end to end (trip costs to the existing hubs and to the candidates, problem, HiGHS
  integer programme to proven optimality, pick order and gains);
* of which the integer programme alone (``solve_milp``);
* reference in the same run: HiGHS on the LP relaxation of the same model (the bound), and the greedy +
  vertex substitution heuristic (objective compared with the exact one).

Usage:  .venv/bin/python benchmarks/bench_siting.py [--runs 3] [--within 15] [--side 500]
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
    from bench_routing import road_like
    from geo_reach.analysis.indices.trips import trip_costs
    from geo_reach.analysis.siting import build_problem, choose_sites, solve, solve_milp

    ap = argparse.ArgumentParser()
    ap.add_argument("--runs", type=int, default=3)
    ap.add_argument("--within", type=float, default=15.0)
    ap.add_argument("--side", type=int, default=500)
    ap.add_argument("--settlements", type=int, default=5000)
    ap.add_argument("--candidates", type=int, default=2000)
    ap.add_argument("--hubs", type=int, default=20)
    ap.add_argument("--count", type=int, default=10)
    a = ap.parse_args()

    net = road_like(a.side)
    net.csr("minutes")
    net.csr("minutes", reverse=True)
    rng = np.random.default_rng(7)
    lo = np.array([net.node_x.min(), net.node_y.min()])
    hi = np.array([net.node_x.max(), net.node_y.max()])
    s_xy = lo + rng.random((a.settlements, 2)) * (hi - lo)
    c_xy = lo + rng.random((a.candidates, 2)) * (hi - lo)
    h_xy = lo + rng.random((a.hubs, 2)) * (hi - lo)
    pop = rng.integers(50, 5000, a.settlements).astype(float)
    trip_costs(net, s_xy[:50], h_xy[:5], within=5.0)  # compile the numba kernels and build the spatial index

    load0 = os.getloadavg()[0]
    t_all, c_all, t_milp, t_lp, t_heur = [], [], [], [], []
    res = pr = None
    for _ in range(a.runs):
        t0, c0 = time.perf_counter(), time.process_time()
        res = choose_sites(net, s_xy, pop, h_xy, c_xy, a.count, "coverage", within=a.within, method="exact")
        t_all.append(time.perf_counter() - t0)
        c_all.append(time.process_time() - c0)
        ex = trip_costs(net, s_xy, h_xy, pairs=False)
        cand = trip_costs(net, s_xy, c_xy, within=a.within, nearest=False)
        pr = build_problem("coverage", pop, ex.nearest_cost, cand.settlement, cand.hub, cand.cost, a.candidates,
                           a.within)
        out = solve_milp(pr, a.count)
        t_milp.append(out.seconds)
        lp = solve_milp(pr, a.count, relax=True)
        t_lp.append(lp.seconds)
        t0 = time.perf_counter()
        he = solve(pr, a.count, method="heuristic")
        t_heur.append(time.perf_counter() - t0)
    med = statistics.median
    print(f"## Siting\n\n{time.strftime('%Y-%m-%d')}, {platform.machine()}, {os.cpu_count()} cores, "
          f"Python {platform.python_version()}, load average at start {load0:.1f}, at end {os.getloadavg()[0]:.1f}; "
          f"{a.runs} runs, medians (wall clock; CPU time of the process where given).\n"
          f"Network: `road_like({a.side})`, {net.n_nodes:,} nodes; {a.settlements:,} settlements, "
          f"{a.candidates:,} candidates, {a.hubs} existing hubs (random points off the network); coverage within "
          f"{a.within:g} minutes, P = {a.count}; {len(pr.i):,} settlement-candidate pairs left to decide "
          f"(settlements not yet covered).\n")
    print("| measurement | median | runs |\n| --- | --- | --- |")
    print(f"| `choose_sites`, exact, end to end (costs + integer programme + gains) | **{med(t_all):.1f} s** "
          f"(CPU {med(c_all):.1f} s) | "
          f"{', '.join(f'{x:.1f}' for x in t_all)} s |")
    print(f"| integer programme alone (HiGHS `milp`, gap 0, no LP shortcut) | {med(t_milp):.2f} s | "
          f"{', '.join(f'{x:.2f}' for x in t_milp)} s |")
    print(f"| reference: HiGHS on the LP relaxation | {med(t_lp):.2f} s | {', '.join(f'{x:.2f}' for x in t_lp)} s |")
    print(f"| greedy + vertex substitution (9 starts) with LP bound | {med(t_heur):.2f} s | "
          f"{', '.join(f'{x:.2f}' for x in t_heur)} s |")
    print(f"\n- exact: {res.objective:,.0f} people within {a.within:g} min (before: {res.objective_before:,.0f}), "
          f"optimal {res.optimal}, bound {res.bound:,.0f}; LP relaxation bound {pr.reported(lp.f_bound):,.1f}; "
          f"heuristic {he.objective:,.0f} (gap to its LP bound {100 * he.gap:.3f} %)")


if __name__ == "__main__":
    main()
