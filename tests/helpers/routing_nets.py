"""Make small :class:`~geo_reach.network.model.Network` objects from edge lists, for the routing tests.

Networks are built straight from arrays (no builder), in a metric CRS
(EPSG:3857 is used only as a label for a planar metre grid here).
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import shapely
from pyproj import CRS

from geo_reach.network.model import Network

CRS_M = CRS.from_epsg(3857)


def make_network(edges, xy=None, *, n_nodes=None, minutes=None, length_m=None, latency_ms=None,
                 oneway=None, mode=None, entry=None, geometry=None) -> Network:
    """A Network from an edge list ``[(u, v), ...]``.

    Missing per-edge arrays default to: minutes = 1, length_m = straight
    distance between the node points (or 1000 m when no coordinates),
    latency NaN, two-way, mode ``road``.  Nodes default to a circle layout.
    """
    edges = np.asarray(edges, dtype=np.int64).reshape(-1, 2)
    m = len(edges)
    n = int(n_nodes if n_nodes is not None else (edges.max() + 1 if m else 0))
    if xy is None:
        ang = 2 * np.pi * np.arange(n) / max(n, 1)
        xy = np.column_stack([1e4 * np.cos(ang), 1e4 * np.sin(ang)])
        default_len = np.full(m, 1000.0)
    else:
        xy = np.asarray(xy, dtype=np.float64)
        default_len = np.hypot(*(xy[edges[:, 1]] - xy[edges[:, 0]]).T) if m else np.zeros(0)
    fr, to = edges[:, 0], edges[:, 1]
    if geometry is None:
        geometry = shapely.linestrings(np.stack([xy[fr], xy[to]], axis=1)) if m else np.zeros(0, object)

    def arr(v, default, dtype=np.float64):
        if v is None:
            return np.array(default, dtype=dtype)
        v = np.asarray(v, dtype=dtype)
        return np.full(m, v, dtype=dtype) if v.ndim == 0 else v

    return Network(
        crs=CRS_M, node_x=xy[:, 0].copy(), node_y=xy[:, 1].copy(),
        node_entry=arr(entry, np.ones(n, bool), bool) if entry is None or np.ndim(entry) else np.full(n, bool(entry)),
        edge_from=fr.copy(), edge_to=to.copy(), edge_geometry=np.asarray(geometry, dtype=object),
        edge_length_m=arr(length_m, default_len), edge_minutes=arr(minutes, np.ones(m)),
        edge_latency_ms=arr(latency_ms, np.full(m, np.nan)), edge_oneway=arr(oneway, np.zeros(m, bool), bool),
        edge_mode=arr(mode, np.full(m, "road", object), object),
        edge_src_layer=np.full(m, "test", object), edge_src_fid=np.arange(m, dtype=np.int64),
    )


def to_networkx(net: Network, weight: str = "minutes") -> nx.DiGraph:
    """The same network as a networkx DiGraph with the cheapest parallel arc as ``w``."""
    g = nx.DiGraph()
    g.add_nodes_from(range(net.n_nodes))
    c = net.cost(weight)
    for e in range(net.n_edges):
        if np.isnan(c[e]):
            continue
        arcs = [(net.edge_from[e], net.edge_to[e])]
        if not net.edge_oneway[e]:
            arcs.append((net.edge_to[e], net.edge_from[e]))
        for u, v in arcs:
            u, v = int(u), int(v)
            if u == v:
                continue
            if not g.has_edge(u, v) or g[u][v]["w"] > c[e]:
                g.add_edge(u, v, w=float(c[e]), edge=e)
    return g


def cycle(n, **kw) -> Network:
    return make_network([(i, (i + 1) % n) for i in range(n)], **kw)


def grid(rows, cols, spacing=100.0, **kw) -> Network:
    """rows x cols grid, node id = r * cols + c, at (c * spacing, r * spacing)."""
    xy = np.array([(c * spacing, r * spacing) for r in range(rows) for c in range(cols)], dtype=float)
    edges = [(r * cols + c, r * cols + c + 1) for r in range(rows) for c in range(cols - 1)]
    edges += [(r * cols + c, (r + 1) * cols + c) for r in range(rows - 1) for c in range(cols)]
    return make_network(edges, xy, **kw)


def binary_tree(depth, **kw) -> Network:
    """Complete binary tree; node i has children 2i+1 and 2i+2."""
    n = 2 ** (depth + 1) - 1
    return make_network([((i - 1) // 2, i) for i in range(1, n)], n_nodes=n, **kw)


def random_network(rng, n, m, *, p_oneway=0.3, zero_prob=0.05, nan_prob=0.0) -> Network:
    """A random multigraph with random costs (some zero, some one-way, some missing)."""
    fr = rng.integers(0, n, m)
    to = rng.integers(0, n, m)
    minutes = rng.uniform(0.1, 10.0, m)
    minutes[rng.random(m) < zero_prob] = 0.0
    minutes[rng.random(m) < nan_prob] = np.nan
    xy = rng.uniform(0, 5000, (n, 2))
    return make_network(np.column_stack([fr, to]), xy, n_nodes=n, minutes=minutes,
                        oneway=rng.random(m) < p_oneway, latency_ms=rng.uniform(1, 5, m))
