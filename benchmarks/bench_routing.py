"""Routing core benchmark (not CI): many-to-nearest, exact diameter, sampled mean path.

Generated road-like graph: a side x side grid with jittered node positions,
10 % of the links removed at random, 5 % one-way, minutes from a random
speed per link.  About 250,000 nodes and 1 M arcs at side = 500.

Usage:  .venv/bin/python benchmarks/bench_routing.py [--side 500] [--repeat 5] [--no-networkx]
Prints a Markdown block for benchmarks/RESULTS.md.
"""

from __future__ import annotations

import argparse
import os
import platform
import statistics
import time

import numpy as np


def road_like(side: int, seed: int = 0):
    import shapely
    from pyproj import CRS

    from geo_reach.network.model import Network

    rng = np.random.default_rng(seed)
    n = side * side
    r, c = np.divmod(np.arange(n), side)
    x = c * 100.0 + rng.uniform(-30, 30, n)
    y = r * 100.0 + rng.uniform(-30, 30, n)
    h = np.arange(n)[(c < side - 1)]
    v = np.arange(n)[(r < side - 1)]
    fr = np.concatenate([h, v])
    to = np.concatenate([h + 1, v + side])
    keep = rng.random(len(fr)) > 0.10
    fr, to = fr[keep], to[keep]
    m = len(fr)
    length = np.hypot(x[to] - x[fr], y[to] - y[fr])
    speed = rng.choice([20.0, 40.0, 60.0, 90.0], m, p=[0.4, 0.3, 0.2, 0.1])
    minutes = length / (speed * 1000 / 60)
    geoms = shapely.linestrings(np.stack([np.column_stack([x[fr], y[fr]]), np.column_stack([x[to], y[to]])], axis=1))
    return Network(crs=CRS.from_epsg(32633), node_x=x, node_y=y, node_entry=np.ones(n, bool), edge_from=fr,
                   edge_to=to, edge_geometry=np.asarray(geoms, dtype=object), edge_length_m=length,
                   edge_minutes=minutes, edge_latency_ms=np.full(m, np.nan), edge_oneway=rng.random(m) < 0.05,
                   edge_mode=np.full(m, "road", object), edge_src_layer=np.full(m, "bench", object),
                   edge_src_fid=np.arange(m))


def timed(fn, repeat):
    """Run ``fn`` ``repeat`` times: its last result, the median wall time and every time (shared by the benches)."""
    out, ts = None, []
    for _ in range(repeat):
        t = time.perf_counter()
        out = fn()
        ts.append(time.perf_counter() - t)
    return out, statistics.median(ts), ts


def fmt(ts):
    """Times as a short comma-separated list, for RESULTS.md."""
    return ", ".join(f"{t:.3g}" for t in ts)


def main():
    from scipy.sparse.csgraph import dijkstra

    from geo_reach.analysis import metrics as M
    from geo_reach.analysis.attach import attach_points
    from geo_reach.analysis.routing import nearest_hub

    ap = argparse.ArgumentParser()
    ap.add_argument("--side", type=int, default=500)
    ap.add_argument("--repeat", type=int, default=9)
    ap.add_argument("--no-networkx", action="store_true")
    ap.add_argument("--exact-side", type=int, default=100, help="grid side for the exact mean path check")
    a = ap.parse_args()

    t0 = time.perf_counter()
    net = road_like(a.side)
    t_gen = time.perf_counter() - t0
    t = time.perf_counter()
    adj = net.csr("minutes", reverse=True)
    t_csr = time.perf_counter() - t
    mat = adj.matrix
    rng = np.random.default_rng(1)
    hubs = rng.choice(net.n_nodes, 100, replace=False)
    lines = [f"- graph: {net.n_nodes:,} nodes, {net.n_edges:,} edges, {mat.nnz:,} arcs "
             f"(generated in {t_gen:.1f} s; reversed CSR built in {t_csr:.2f} s, then cached)"]

    # interleaved runs (the machine is shared): median and best of each
    xy = np.column_stack([net.node_x[hubs] + 37.0, net.node_y[hubs] + 23.0])

    def attached():
        att = attach_points(net, xy, "minutes")
        return nearest_hub(net, att, "minutes", "to-hub")

    fns = {
        "bare": lambda: dijkstra(mat, directed=True, indices=hubs, min_only=True),
        "bare_src": lambda: dijkstra(mat, directed=True, indices=hubs, min_only=True, return_predecessors=True),
        "ours": lambda: nearest_hub(net, hubs, "minutes", "to-hub"),
        "attached": attached,
    }
    times = {k: [] for k in fns}
    for _ in range(a.repeat):
        for k, f in fns.items():
            t = time.perf_counter()
            f()
            times[k].append(time.perf_counter() - t)
    med = {k: statistics.median(v) for k, v in times.items()}
    best = {k: min(v) for k, v in times.items()}
    assert np.allclose(fns["bare"](), fns["ours"]().cost)
    t_bare, t_ours = med["bare"], med["ours"]
    lines.append(f"- many-to-nearest, 100 hubs at nodes (to-hub, warm CSR), median / best of {a.repeat} interleaved: "
                 f"bare scipy `dijkstra(min_only=True)` {med['bare']:.3f} / {best['bare']:.3f} s; the same call with "
                 f"`return_predecessors=True` (needed to know *which* hub) {med['bare_src']:.3f} / "
                 f"{best['bare_src']:.3f} s; `nearest_hub` {med['ours']:.3f} / {best['ours']:.3f} s.  Ratio to the "
                 f"bare call **{med['ours'] / med['bare']:.2f}x** (median) / {best['ours'] / best['bare']:.2f}x (best); "
                 f"to the call with sources {med['ours'] / med['bare_src']:.2f}x / {best['ours'] / best['bare_src']:.2f}x")
    lines.append(f"- same with 100 off-network hubs (attach + virtual nodes): {med['attached']:.3f} / "
                 f"{best['attached']:.3f} s, ratio {med['attached'] / med['bare']:.2f}x the bare call (median)")
    lines.append(f"- cold start (CSR build + `nearest_hub`): {t_csr + t_ours:.3f} s, "
                 f"ratio {(t_csr + t_ours) / t_bare:.2f}x")
    if not a.no_networkx:
        import networkx as nx

        g = nx.DiGraph()
        tail, head, cost, _ = net.arcs("minutes", reverse=True)
        g.add_weighted_edges_from(zip(tail.tolist(), head.tolist(), cost.tolist()), weight="w")
        t = time.perf_counter()
        nx.multi_source_dijkstra_path_length(g, set(hubs.tolist()), weight="w")
        t_nx = time.perf_counter() - t
        lines.append(f"- networkx `multi_source_dijkstra_path_length` (one run): {t_nx:.2f} s; "
                     f"`nearest_hub` is **{t_nx / t_ours:.1f}x** faster, the bare scipy call {t_nx / t_bare:.1f}x")

    t = time.perf_counter()
    d = M.diameter(net, "minutes")
    t_d = time.perf_counter() - t
    lines.append(f"- exact diameter ({M.component_counts(net).largest_strong_component_nodes:,} nodes in the "
                 f"largest strong component): {d.value:.3f} min from node {d.from_node} to {d.to_node}, "
                 f"**{d.sssp_runs} single-source runs**, {t_d:.1f} s")

    t = time.perf_counter()
    est = M.mean_path(net, "minutes", exact=False, samples=200, seed=0)
    t_mp = time.perf_counter() - t
    big = M.mean_path(net, "minutes", exact=False, samples=1000, seed=1)
    rel = abs(est.value - big.value) / big.value
    lines.append(f"- mean path, 200 sources: {est.value:.4f} min (95 % CI {est.ci95_low:.4f}-{est.ci95_high:.4f}, "
                 f"half-width {100 * (est.ci95_high - est.value) / est.value:.2f} %), {t_mp:.1f} s; "
                 f"1,000 other sources give {big.value:.4f} (difference {100 * rel:.2f} %).  The exact value at this "
                 "size needs one run per node (not run here).")
    small = road_like(a.exact_side, seed=2)
    ex = M.mean_path(small, "minutes", exact=True)
    es = M.mean_path(small, "minutes", exact=False, samples=200, seed=0)
    lines.append(f"- exact check on a {small.n_nodes:,}-node graph of the same kind: exact {ex.value:.4f}, "
                 f"200-source estimate {es.value:.4f} (**{100 * abs(es.value - ex.value) / ex.value:.2f} %** off, "
                 f"CI {es.ci95_low:.4f}-{es.ci95_high:.4f})")
    print(f"## Routing core\n\n{time.strftime('%Y-%m-%d')}, {platform.processor() or platform.machine()}, "
          f"{os.cpu_count()} cores, Python {platform.python_version()}, load average at start {os.getloadavg()[0]:.1f}; "
          f"{a.repeat} runs where noted; one process.\n")
    print("\n".join(lines))


if __name__ == "__main__":
    main()
