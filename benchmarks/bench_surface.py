"""Benchmark: travel-time surface on a 4000 x 4000 grid with a 250,000-node network.

Targets (issues 4 and 11): ``compute_surface`` with the default 16-neighbour
moves, exact seeds and the hubs as seeds under 30 s and 4 GiB peak; the
accumulation timed against scikit-image's ``MCP_Geometric`` (8 neighbours) on
the same friction grid and start cells, for our 8- and 16-neighbour kernels.

Each measurement runs in a fresh child process so its peak resident memory
(``ru_maxrss``) is its own; three runs each, medians reported.  The network
is synthetic (a jittered lattice with a share of links dropped, invented
here), 400 km x 400 km at 100 m cells.

Usage::

    python benchmarks/bench_surface.py            # 3 runs of each, prints a Markdown block
    python benchmarks/bench_surface.py --runs 1 --size 1000   # quick look
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import resource
import statistics
import subprocess
import sys
import time

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
#: The hub nodes of the generated case (filled by make_case).
HUBS = np.zeros(40, dtype=np.int64)
sys.path.insert(0, os.path.dirname(HERE))


def make_case(size: int, n_nodes: int, seed: int = 0):
    """A jittered-lattice road network covering a size x size grid of 100 m cells, plus node costs."""
    import shapely
    import scipy.sparse as sp
    from scipy.sparse.csgraph import dijkstra
    from pyproj import CRS

    from geo_reach.ingest.rasters import Grid
    from geo_reach.network.model import Network

    rng = np.random.default_rng(seed)
    cell = 100.0
    extent = size * cell
    side = int(round(np.sqrt(n_nodes)))
    step = extent / side
    gx, gy = np.meshgrid(np.arange(side), np.arange(side))
    x = (gx.ravel() + 0.5) * step + rng.uniform(-0.3, 0.3, side * side) * step
    y = (gy.ravel() + 0.5) * step + rng.uniform(-0.3, 0.3, side * side) * step
    idx = np.arange(side * side).reshape(side, side)
    right = np.column_stack([idx[:, :-1].ravel(), idx[:, 1:].ravel()])
    down = np.column_stack([idx[:-1, :].ravel(), idx[1:, :].ravel()])
    edges = np.vstack([right, down])
    edges = edges[rng.random(len(edges)) < 0.65]
    u, v = edges[:, 0], edges[:, 1]
    mid = np.column_stack([(x[u] + x[v]) / 2 + rng.uniform(-0.1, 0.1, len(u)) * step,
                           (y[u] + y[v]) / 2 + rng.uniform(-0.1, 0.1, len(u)) * step])
    coords = np.stack([np.column_stack([x[u], y[u]]), mid, np.column_stack([x[v], y[v]])], axis=1)
    geoms = shapely.linestrings(coords)
    length = shapely.length(geoms)
    kmh = rng.choice([30.0, 50.0, 80.0], len(u), p=[0.5, 0.35, 0.15])
    minutes = length / 1000.0 / kmh * 60.0
    m = len(u)
    crs = CRS.from_epsg(32633)
    net = Network(crs=crs, node_x=x, node_y=y, node_entry=np.ones(len(x), bool), edge_from=u, edge_to=v,
                  edge_geometry=geoms, edge_length_m=length, edge_minutes=minutes,
                  edge_latency_ms=np.full(m, np.nan), edge_oneway=np.zeros(m, bool),
                  edge_mode=np.full(m, "road", object), edge_src_layer=np.full(m, "bench", object),
                  edge_src_fid=np.arange(m))
    hubs = rng.choice(len(x), 40, replace=False)
    HUBS[:] = hubs
    g = sp.csr_array((minutes, (u, v)), shape=(len(x), len(x)))
    dist, _, src = dijkstra(g, directed=False, indices=hubs, min_only=True, return_predecessors=True)
    hub_pos = {h: i for i, h in enumerate(hubs)}
    node_hub = np.array([hub_pos.get(s, -1) for s in src], dtype=np.int64)
    grid = Grid.from_bounds((0, 0, extent, extent), cell, 0, crs=crs)
    assert grid.shape == (size, size), grid.shape
    # Hilly terrain: smoothed noise (2 km features), relief of a few hundred metres, slopes mostly < 0.3.
    from scipy.ndimage import gaussian_filter

    z = gaussian_filter(rng.normal(0, 1, (size, size)).astype(np.float32), 20).astype(np.float64)
    z *= 150.0 / z.std()
    return net, dist, node_hub, grid, z


def child(what: str, size: int, n_nodes: int):
    net, cost, node_hub, grid, z = make_case(size, n_nodes)
    from geo_reach.analysis.accumulate import accumulate
    from geo_reach.analysis.seeding import entry_points, seed_raster
    from geo_reach.analysis.surface import compute_surface

    # compile/warm the kernels on a tiny case so timings exclude the one-off compile
    s = np.full((4, 4), np.inf)
    s[0, 0] = 0.0
    for nb in (8, 16):
        accumulate(np.ones((4, 4)), s, 1.0, neighbours=nb)
        accumulate(np.ones((4, 4)), s, 1.0, elevation=np.zeros((4, 4)), neighbours=nb)
    from geo_reach.analysis.pointwalk import seed_points

    seed_points(np.ones((4, 4)), 1.0, [0.5], [0.5], [0.0])
    seed_points(np.ones((4, 4)), 1.0, [0.5], [0.5], [0.0], elevation=np.zeros((4, 4)))
    out = {"what": what}
    if what in ("surface", "surface_terrain", "surface8"):
        hub_xy = np.column_stack([net.node_x, net.node_y])[HUBS]
        t = time.perf_counter()
        res = compute_surface(net, cost, node_hub, grid, walk_kmh=5.0,
                              terrain=z if what == "surface_terrain" else None,
                              neighbours=8 if what == "surface8" else 16, hub_xy=hub_xy)
        out["seconds"] = time.perf_counter() - t
        out["seed_cells"] = res.seed_cells
        out["reached"] = int(np.isfinite(res.minutes).sum())
        out["checksum"] = float(np.nansum(res.minutes))
    elif what in ("ours", "ours16", "mcp"):
        # Same friction (random 1..8 km/h), same start cells (every seeded cell, cost 0).
        rng = np.random.default_rng(1)
        kmh = rng.uniform(1.0, 8.0, grid.shape)
        seeds = seed_raster(entry_points(net, cost, grid.cell_m / 2), grid)
        starts = np.isfinite(seeds.minutes)
        out["starts"] = int(starts.sum())
        if what in ("ours", "ours16"):
            s0 = np.where(starts, 0.0, np.inf)
            t = time.perf_counter()
            r = accumulate(kmh, s0, 1.0, neighbours=16 if what == "ours16" else 8)
            out["seconds"] = time.perf_counter() - t
            out["checksum"] = float(np.nansum(r.minutes))
        else:
            from skimage.graph import MCP_Geometric

            pts = np.argwhere(starts)
            t = time.perf_counter()
            cum, _ = MCP_Geometric(0.06 / kmh, fully_connected=True).find_costs(pts)
            out["seconds"] = time.perf_counter() - t
            out["checksum"] = float(np.nansum(cum))
    out["peak_gib"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024 / 2**30
    print(json.dumps(out))


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--child")
    ap.add_argument("--size", type=int, default=4000)
    ap.add_argument("--nodes", type=int, default=250_000)
    ap.add_argument("--runs", type=int, default=3)
    ap.add_argument("--what", default="surface,surface_terrain,surface8,ours,ours16,mcp")
    a = ap.parse_args()
    if a.child:
        child(a.child, a.size, a.nodes)
        return
    results = {}
    for run in range(a.runs):
        for what in a.what.split(","):
            p = subprocess.run([sys.executable, __file__, "--child", what, "--size", str(a.size),
                                "--nodes", str(a.nodes)], capture_output=True, text=True, check=True)
            r = json.loads(p.stdout.strip().splitlines()[-1])
            print(f"run {run + 1} {what}: {r}", file=sys.stderr)
            results.setdefault(what, []).append(r)
    med = {w: statistics.median(r["seconds"] for r in rs) for w, rs in results.items()}
    peak = {w: max(r["peak_gib"] for r in rs) for w, rs in results.items()}
    print(f"date {time.strftime('%Y-%m-%d')}; machine {platform.machine()}, {os.cpu_count()} cores, "
          f"Python {platform.python_version()}; grid {a.size} x {a.size}, {a.nodes} nodes; {a.runs} runs")
    for w in results:
        print(f"| {w} | {med[w]:.2f} s | {peak[w]:.2f} GiB | {[round(r['seconds'], 2) for r in results[w]]} |")
    for ours in ("ours", "ours16"):
        if ours in results and "mcp" in results:
            per_run = [m["seconds"] / o["seconds"] for o, m in zip(results[ours], results["mcp"])]
            print(f"MCP_Geometric (8) / {ours} per run: {[round(x, 2) for x in per_run]}; "
                  f"median {statistics.median(per_run):.2f}")
            cs = [(o["checksum"], m["checksum"]) for o, m in zip(results[ours], results["mcp"])]
            print(f"checksums (sum of minutes) {ours} vs MCP: {cs[0]}")
    for w in ("surface", "surface_terrain", "surface8"):
        if w in results:
            print(f"{w}: seed cells {results[w][0]['seed_cells']}, reached {results[w][0]['reached']}, "
                  f"sum of minutes {results[w][0]['checksum']}")


if __name__ == "__main__":
    main()
