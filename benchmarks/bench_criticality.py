"""Criticality benchmark (not CI): every link of a 250,000-node road-like network, one-link incremental
scenarios, and 2 local dask workers against in-process.

Network: ``bench_routing.road_like`` (a side x side jittered grid, 10 % of links removed, 5 % one-way,
minutes from a random speed per link; 250,000 nodes and 448,992 links at side = 500).  Hubs: three
kinds placed uniformly at random (seeded): 100 clinics, 30 markets, 5 ports.  Every node stands in
for one person.

Measured in one run, medians of ``--repeat`` runs:

* one full nearest-hub pass: the project's ``hub_access`` (attach + one compiled forest search per kind and for all
  hubs), and this package's compiled forest search (per kind and for the three kinds);
* all-link criticality in-process: time, work (node settlements plus arc and seed scans, as equivalent
  full single-kind searches, and per kind), ratios to the passes above;
* one-link scenarios (a new link, an upgraded link, a closed link): ``update_forest`` for the three
  kinds against the full path (adjacency of the changed network + three forest searches), the same
  hub legs given to both;
* all-link criticality on a local cluster of 2 worker processes (warm, then with start-up).

Usage:  .venv/bin/python benchmarks/bench_criticality.py [--side 500] [--repeat 3] [--no-cluster]
Prints a Markdown block for benchmarks/RESULTS.md.
"""

from __future__ import annotations

import argparse
import os
import platform
import sys
import time

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))


from bench_routing import fmt, timed  # noqa: E402  (the shared timing helpers)


def with_edge(net, frm, to, minutes, length):
    """``net`` with one link appended (id-stable)."""
    import dataclasses

    import shapely

    g = shapely.linestrings([[(net.node_x[frm], net.node_y[frm]), (net.node_x[to], net.node_y[to])]])
    cat = np.concatenate
    return dataclasses.replace(
        net, edge_from=cat([net.edge_from, [frm]]), edge_to=cat([net.edge_to, [to]]),
        edge_geometry=cat([net.edge_geometry, np.asarray(g, dtype=object)]),
        edge_length_m=cat([net.edge_length_m, [length]]), edge_minutes=cat([net.edge_minutes, [minutes]]),
        edge_latency_ms=cat([net.edge_latency_ms, [np.nan]]), edge_oneway=cat([net.edge_oneway, [False]]),
        edge_mode=cat([net.edge_mode, ["road"]]), edge_src_layer=cat([net.edge_src_layer, ["bench"]]),
        edge_src_fid=cat([net.edge_src_fid, [-1]]))


def with_minutes(net, e, minutes):
    import dataclasses

    m = net.edge_minutes.copy()
    m[e] = minutes
    return dataclasses.replace(net, edge_minutes=m)


def main():
    from bench_routing import road_like

    from geo_reach.analysis.access import hub_access
    from geo_reach.analysis.attach import attach_points
    from geo_reach.analysis.criticality import (HubTrips, SearchGraph, Seeds, grow_forest, link_criticality,
                                                network_change, update_forest)

    ap = argparse.ArgumentParser()
    ap.add_argument("--side", type=int, default=500)
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--no-cluster", action="store_true")
    a = ap.parse_args()

    load0 = os.getloadavg()[0]
    net = road_like(a.side)
    rng = np.random.default_rng(5)
    counts = {"clinic": 100, "market": 30, "port": 5}
    ext = (a.side - 1) * 100.0
    xy = np.vstack([np.column_stack([rng.uniform(0, ext, c), rng.uniform(0, ext, c)]) for c in counts.values()])
    kinds = np.concatenate([[k] * c for k, c in counts.items()]).astype(object)
    ids = np.arange(len(xy)).astype(object)

    # --- baseline and one full nearest-hub pass
    t = time.perf_counter()
    graph = SearchGraph.from_network(net)
    t_graph = time.perf_counter() - t
    trips, t_prep, _ = timed(lambda: HubTrips.prepare(net, xy, ids, kinds, graph=graph), 1)
    hub_access(net, xy, ids, kinds)   # warm the caches (CSR, attach trees) as a repeated pass would have
    _, t_access, ts_access = timed(lambda: hub_access(net, xy, ids, kinds), a.repeat)
    _, t_forests, ts_forests = timed(lambda: [grow_forest(graph, s) for s in trips.seeds], a.repeat)
    t_kind = {}
    for k, s in zip(trips.kinds, trips.seeds):
        _, t_kind[k], _ = timed(lambda s=s: grow_forest(graph, s), a.repeat)
    unit = np.mean([f.work for f in trips.forests])

    # --- every link, in-process
    link_criticality(trips, links=np.arange(100))   # compile outside the timing
    res, t_all, ts_all = timed(lambda: link_criticality(trips), a.repeat)
    per_kind = {}
    for k, name in enumerate(trips.kinds):
        one = HubTrips.prepare(net, xy[kinds == name], graph=graph)
        r1 = link_criticality(one)
        per_kind[name] = (r1.work["full_searches"] - 1.0, float(np.mean(one.forests[0].preorder[2][one.forests[0].via >= 0].sum() / net.n_nodes)))

    # --- one-link scenarios
    n = net.n_nodes
    side = a.side
    mid = (side // 2) * side + side // 2
    cases = {}
    # a new link across three blocks (300 m) at 90 km/h
    new_net = with_edge(net, mid, mid + 3 * side, 0.3 / 90 * 60, 300.0)
    cases["new link (300 m, 90 km/h)"] = (new_net, None)
    # upgraded and closed links: those carrying the largest subtree of the deepest forest, and the one at its
    # 99th percentile (most links carry a leaf or two: a typical closure costs almost nothing)
    deep = max(range(len(trips.forests)), key=lambda k: trips.forests[k].preorder[2][trips.forests[k].via >= 0].sum())
    fd = trips.forests[deep]
    carried = np.nonzero((fd.via >= 0) & (fd.parent >= 0))[0]
    sizes = fd.preorder[2][carried]
    big = int(fd.via[carried[np.argmax(sizes)]])
    p99 = int(fd.via[carried[np.argsort(sizes)[int(0.99 * (len(sizes) - 1))]]])
    sub = {e: int(fd.preorder[2][carried][fd.via[carried] == e].max()) for e in (big, p99)}
    name = trips.kinds[deep]
    cases[f"upgraded link {p99} (minutes / 3; {sub[p99]:,} nodes below it, {name})"] = (
        with_minutes(net, p99, net.edge_minutes[p99] / 3), [p99])
    cases[f"closed link {p99} ({sub[p99]:,} nodes below it, {name})"] = (with_minutes(net, p99, np.nan), [p99])
    cases[f"closed link {big} (the largest subtree: {sub[big]:,} nodes, {name})"] = (
        with_minutes(net, big, np.nan), [big])
    scen_rows = []
    for label, (new, edges) in cases.items():
        t = time.perf_counter()
        att = attach_points(new, xy, "minutes")
        t_att = time.perf_counter() - t
        seeds = [Seeds.from_attachment(new, att, "to-hub", hubs=np.nonzero(trips.hub_kind == k)[0])
                 for k in range(len(trips.kinds))]
        changed = list(range(net.n_edges, new.n_edges)) if edges is None else edges

        def full():
            g = SearchGraph.from_network(new)
            return [grow_forest(g, s) for s in seeds]

        def incremental(edges=changed):
            ch = network_change(net, new, "minutes", edges=[e for e in edges if e < net.n_edges])
            return [update_forest(graph, f, ch, s, old_seeds=o) for f, s, o in zip(trips.forests, seeds, trips.seeds)]

        def incremental_diff():
            ch = network_change(net, new, "minutes")
            return [update_forest(graph, f, ch, s, old_seeds=o) for f, s, o in zip(trips.forests, seeds, trips.seeds)]

        ref, t_full, _ = timed(full, a.repeat)
        inc, t_inc, ts_inc = timed(incremental, a.repeat)
        _, t_diff, _ = timed(incremental_diff, a.repeat)
        g_new = SearchGraph.from_network(new)
        _, t_search_only, _ = timed(lambda: [grow_forest(g_new, s) for s in seeds], a.repeat)
        same = all(np.array_equal(x.cost, y.cost) and np.array_equal(x.hub, y.hub) for x, y in zip(inc, ref))
        work = sum(f.work for f in inc)
        scen_rows.append((label, t_full, t_search_only, t_inc, ts_inc, t_diff, t_att, work, same))

    # --- two local workers
    cluster = None
    if not a.no_cluster:
        from geo_reach.parallel import executor

        t = time.perf_counter()
        with executor(workers=2, timeout_s=120) as ex:
            t_up = time.perf_counter() - t
            link_criticality(trips, links=np.arange(100), executor=ex)     # workers load the compiled kernel
            res2, t_cl, ts_cl = timed(lambda: link_criticality(trips, executor=ex), a.repeat)
        same2 = res2.table.equals(res.table)
        cluster = (t_up, t_cl, ts_cl, same2)

    # --- report
    print(f"### Criticality ({time.strftime('%Y-%m-%d')}, {platform.machine()}, {os.cpu_count()} cores, "
          f"Python {platform.python_version()}, load average at start {load0:.1f}, medians of {a.repeat})\n")
    print(f"- network: {n:,} nodes, {net.n_edges:,} links, {graph.n_arcs:,} arcs; hubs {counts}; "
          f"every node one person; arcs table {t_graph:.2f} s; baseline (attach + 3 forests) {t_prep:.2f} s")
    print(f"- one full nearest-hub pass: `hub_access` (attach, one forest search per kind and all hubs) **{t_access:.3f} s** "
          f"({fmt(ts_access)}); compiled forests, 3 kinds {t_forests:.3f} s ({fmt(ts_forests)}); per kind "
          + ", ".join(f"{k} {v:.3f} s" for k, v in t_kind.items()))
    w = res.work
    print(f"- **every link ({w['links']:,}), in-process: {t_all:.1f} s** ({fmt(ts_all)}); target < 60 s: "
          f"{'met' if t_all < 60 else 'NOT met'}")
    print(f"- work: {w['full_searches']:.1f} equivalent full single-kind searches (3 baseline + repairs; "
          f"{w['ops']:,} settlements and scans, {unit:,.0f} per full search); naive {w['naive_full_searches']:,} "
          f"(one search per link and kind); target <= 300: {'met' if w['full_searches'] <= 300 else 'NOT met'}")
    print("- work per kind alone (equivalent searches for the repairs; mean depth of the forest = sum of the "
          "subtree sizes / n): " + ", ".join(f"{k} {v[0]:.1f} (depth {v[1]:.1f})" for k, v in per_kind.items()))
    print(f"- time ratios: every link / `hub_access` = **{t_all / t_access:.1f}x**; / compiled 3-kind forests = "
          f"{t_all / t_forests:.1f}x; time-equivalent single-kind searches = {t_all / (t_forests / 3):.0f}")
    print("\n| one-link scenario (3 kinds) | full: adjacency + 3 searches | 3 searches only | incremental "
          "(changed edges given) | ratio | incremental (edges found by comparing) | attach hubs (both paths) "
          "| work (settlements + scans) | same costs and hubs |")
    print("| --- | --- | --- | --- | --- | --- | --- | --- | --- |")
    for label, tf, ts_, ti, tsi, td, ta, wk, same in scen_rows:
        print(f"| {label} | {tf * 1000:.1f} ms | {ts_ * 1000:.1f} ms | **{ti * 1000:.2f} ms** ({fmt([x * 1000 for x in tsi])}) "
              f"| {ti / tf * 100:.1f} % of full ({ti / ts_ * 100:.1f} % of searches only) | {td * 1000:.1f} ms | "
              f"{ta * 1000:.0f} ms | {wk:,} | {'yes' if same else 'NO'} |")
    if cluster:
        t_up, t_cl, ts_cl, same2 = cluster
        print(f"\n- 2 local workers, every link: **{t_cl:.1f} s** warm ({fmt(ts_cl)}), cluster start {t_up:.1f} s; "
              f"speed-up over in-process **{t_all / t_cl:.2f}x** warm, {t_all / (t_cl + t_up):.2f}x counting the "
              f"start; target >= 1.7x: {'met' if t_all / t_cl >= 1.7 else 'NOT met'}; same table: {same2}")
    print(f"- load average at the end {os.getloadavg()[0]:.1f}")


if __name__ == "__main__":
    main()
