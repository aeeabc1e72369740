"""Weak regions: where people are far from a hub, hang on one link, or have none.

Three reasons, one polygon layer (:func:`weak_regions`):

``beyond_threshold``
    Contiguous areas (8-connected cells) whose minutes exceed the threshold
    or where no hub is reachable.
``single_link``
    Cells whose trip joins the network on the far side of a *bridge* of the
    travel network (an edge whose loss cuts the network in two) with no hub
    on that side: one failed link cuts them off from every hub.  Bridges
    are found exactly with Tarjan's lowpoint algorithm (:func:`bridges`) on
    the undirected travel network (edges with minutes: road, rail,
    transfer; parallel edges are not bridges).  The side is the largest one
    (the bridge nearest the hubs).
``no_hub``
    Connected parts of the travel network holding no hub at all: their
    edges buffered by one cell.

Each region carries ``population``, ``area_km2``, ``mean_hub_minutes`` (mean
over its cells with a hub reachable), the nearest network point
(``join_x``, ``join_y``, working CRS metres) and that point's minutes
(``join_minutes``, null where no hub is reachable), ``edge_id`` (the
bridge, for ``single_link``) and ``rank``: by the people affected (1 = most
people), then by their mean minutes (longer first; none reachable counts as
longest), then by area.  For a ``single_link`` region, ``population`` is the
number of people behind that one link: those who lose every hub if it fails.

Results are model estimates; local surveys, codes and licensed professional
practice decide.

References
----------
.. [1] Tarjan, R. E. (1974). A note on finding the bridges of a graph.
   Information Processing Letters 2(6), 160-161.
"""

from __future__ import annotations

from dataclasses import dataclass

import numba
import numpy as np
import pandas as pd

from ..errors import OptionError
from .bands import _polygons_by_value
from .seeding import entry_points

__all__ = ["bridges", "BridgeSides", "bridge_sides", "travel_edges", "weak_regions", "REASONS"]

#: The ``reason`` values of the weak-region layer.
REASONS = ("beyond_threshold", "single_link", "no_hub")   # their words: glossary.reason_words


def travel_edges(network) -> np.ndarray:
    """Edge ids a traveller can use: those with a travel time (road, rail, transfer)."""
    return np.nonzero(np.isfinite(np.asarray(network.edge_minutes, dtype=np.float64)))[0]


def _undirected_csr(n, u, v):
    """Adjacency of an undirected multigraph: each edge k appears at both ends with its id."""
    m = len(u)
    tail = np.concatenate([u, v]).astype(np.int64)
    head = np.concatenate([v, u]).astype(np.int64)
    eid = np.concatenate([np.arange(m), np.arange(m)]).astype(np.int64)
    order = np.argsort(tail, kind="stable")
    indptr = np.zeros(n + 1, dtype=np.int64)
    np.add.at(indptr, tail + 1, 1)
    return np.cumsum(indptr), head[order], eid[order]


@numba.njit(cache=True)
def _tarjan(n, indptr, adj, adj_e, roots, is_hub, n_edges):
    """Iterative DFS: discovery order, lowpoints, parents, bridges, subtree hub counts."""
    disc = np.full(n, -1, np.int64)
    low = np.zeros(n, np.int64)
    parent = np.full(n, -1, np.int64)
    pedge = np.full(n, -1, np.int64)
    it = np.zeros(n, np.int64)
    pre = np.empty(n, np.int64)
    root_of = np.full(n, -1, np.int64)
    is_bridge = np.zeros(n_edges, np.bool_)
    stack = np.empty(n, np.int64)
    t = 0
    for r in roots:
        if disc[r] != -1:
            continue
        disc[r] = t
        low[r] = t
        pre[t] = r
        root_of[r] = r
        t += 1
        it[r] = indptr[r]
        sp = 0
        stack[0] = r
        while sp >= 0:
            x = stack[sp]
            if it[x] < indptr[x + 1]:
                k = it[x]
                it[x] += 1
                y = adj[k]
                e = adj_e[k]
                if e == pedge[x]:
                    continue
                if disc[y] == -1:
                    parent[y] = x
                    pedge[y] = e
                    disc[y] = t
                    low[y] = t
                    pre[t] = y
                    root_of[y] = r
                    t += 1
                    it[y] = indptr[y]
                    sp += 1
                    stack[sp] = y
                elif disc[y] < low[x]:
                    low[x] = disc[y]
            else:
                sp -= 1
                p = parent[x]
                if p >= 0:
                    if low[x] < low[p]:
                        low[p] = low[x]
                    if low[x] > disc[p]:
                        is_bridge[pedge[x]] = True
    hubs_below = is_hub.astype(np.int64)
    for i in range(t - 1, -1, -1):
        x = pre[i]
        if parent[x] >= 0:
            hubs_below[parent[x]] += hubs_below[x]
    return is_bridge, parent, pedge, pre[:t], hubs_below, root_of


def bridges(n_nodes: int, edge_from, edge_to) -> np.ndarray:
    """Which edges of an undirected multigraph are bridges.

    Parameters
    ----------
    n_nodes : int
    edge_from, edge_to : array_like of int, shape (m,)

    Returns
    -------
    ndarray of bool, shape (m,)
        True where removing the edge disconnects its two ends.  Parallel
        edges and self-loops are never bridges.

    Notes
    -----
    O(n + m) time and memory (iterative DFS; no recursion limit).

    Examples
    --------
    >>> bridges(4, [0, 1, 2, 2], [1, 2, 0, 3]).tolist()
    [False, False, False, True]
    """
    u = np.asarray(edge_from, dtype=np.int64)
    v = np.asarray(edge_to, dtype=np.int64)
    indptr, adj, adj_e = _undirected_csr(n_nodes, u, v)
    roots = np.arange(n_nodes, dtype=np.int64)
    out = _tarjan(n_nodes, indptr, adj, adj_e, roots, np.zeros(n_nodes, np.bool_), len(u))
    return out[0]


@dataclass(frozen=True)
class BridgeSides:
    """Nodes cut off from every hub by one bridge.

    Attributes
    ----------
    group : ndarray of int64, shape (n_nodes,)
        For each node, the group it belongs to (-1 = not cut off by a single link).
    bridge_edge : ndarray of int64, shape (n_groups,)
        Edge id (network numbering) of each group's bridge.
    hub_side_node : ndarray of int64, shape (n_groups,)
        The bridge's end on the hub side.
    no_hub_component : ndarray of bool, shape (n_nodes,)
        Nodes on a travel edge in a connected part holding no hub.
    """

    group: np.ndarray
    bridge_edge: np.ndarray
    hub_side_node: np.ndarray
    no_hub_component: np.ndarray


def bridge_sides(network, hub_nodes) -> BridgeSides:
    """Group the nodes that one bridge cuts off from every hub.

    The DFS of each connected part starts at a hub, so a bridge's far side is
    its DFS subtree; that side is cut off when the subtree holds no hub.
    Each group is the largest such side (nested bridges fold into the one
    nearest the hubs).
    """
    n = network.n_nodes
    hub_nodes = np.unique(np.asarray(hub_nodes, dtype=np.int64))
    if hub_nodes.size and (hub_nodes.min() < 0 or hub_nodes.max() >= n):
        raise OptionError(f"hub node ids must be 0..{n - 1}")
    e = travel_edges(network)
    u, v = network.edge_from[e], network.edge_to[e]
    indptr, adj, adj_e = _undirected_csr(n, u, v)
    is_hub = np.zeros(n, np.bool_)
    is_hub[hub_nodes] = True
    roots = np.concatenate([hub_nodes, np.arange(n, dtype=np.int64)])
    is_bridge, parent, pedge, pre, hubs_below, root_of = _tarjan(n, indptr, adj, adj_e, roots, is_hub, len(e))
    group = np.full(n, -1, np.int64)
    cut = np.zeros(n, bool)
    ok = parent >= 0
    cut[ok] = is_bridge[pedge[ok]] & (hubs_below[ok] == 0)
    heads, hub_side = _assign_groups(pre, parent, cut, group, is_hub[root_of])
    touched = np.zeros(n, bool)
    touched[u] = True
    touched[v] = True
    no_hub = touched & ~is_hub[root_of]
    edge_ids = e[pedge[heads]] if heads.size else np.zeros(0, np.int64)
    return BridgeSides(group, edge_ids, hub_side, no_hub)


def _assign_groups(pre, parent, cut, group, rooted_at_hub):
    """Pre-order pass: a node starts a group when its tree edge is a cutting bridge and its parent is in none."""
    heads = []
    hub_side = []
    for x in pre:
        p = parent[x]
        if p < 0 or not rooted_at_hub[x]:
            continue
        if group[p] >= 0:
            group[x] = group[p]
        elif cut[x]:
            group[x] = len(heads)
            heads.append(x)
            hub_side.append(p)
    return np.asarray(heads, dtype=np.int64), np.asarray(hub_side, dtype=np.int64)


def weak_regions(minutes, entry_node, grid, network, node_cost, hub_nodes, threshold_minutes: float,
                 population=None, direction: str = "to-hub", passable=None):
    """The weak-region layer: far, single-link and hub-less areas, ranked by people, then minutes.

    Parameters
    ----------
    minutes : ndarray of float64, shape ``grid.shape``
        Minutes to the nearest hub (NaN = none), as from
        :func:`~geo_reach.analysis.surface.compute_surface`.
    entry_node : ndarray of int64, shape ``grid.shape``
        The node each cell's trip passes through after joining the network
        (-1 = none), from the same surface.
    grid : Grid
    network : Network
    node_cost : ndarray of float64, shape (n_nodes,)
        Network minutes between each node and its nearest hub (NaN/inf = none).
    hub_nodes : array_like of int
        Node ids where the hubs join the network.
    threshold_minutes : float
        Cells beyond this are ``beyond_threshold``.
    population : ndarray of float64, shape ``grid.shape``, optional
        People per cell (population fields are NaN without it).
    direction : {"to-hub", "from-hub"}
        As used for the surface (for the entry points' minutes).
    passable : ndarray of bool, shape ``grid.shape``, optional
        Cells one can be in (False for barriers such as open water); impassable
        cells are never part of a ``beyond_threshold`` region.

    Returns
    -------
    geopandas.GeoDataFrame
        Fields ``rank``, ``reason``, ``population``, ``area_km2``,
        ``mean_hub_minutes``, ``join_x``, ``join_y``, ``join_minutes``,
        ``edge_id`` (nullable), geometry (MultiPolygon, grid CRS).  Regions
        of different reasons may overlap.

    Notes
    -----
    The nearest network point of a ``beyond_threshold`` region is the road
    sample (spacing one cell) or station closest to its polygon; of a
    ``single_link`` region, the bridge's end on the hub side; of a
    ``no_hub`` region, its node closest to the polygon's representative
    point.  ``area_km2`` counts whole cells, except for ``no_hub`` where it
    is the buffer polygon's area; ``population`` counts cells by centre (a
    cell under the buffers of two hub-less parts counts for one of them).
    Cost: one connected-component labelling, one polygon tracing per reason,
    O(n + m) for the bridges; 14 s for 16 million cells and 16,000 regions in
    the surface benchmark case.
    """
    import geopandas as gpd
    import shapely
    from rasterio.features import rasterize
    from scipy import ndimage

    minutes = np.asarray(minutes, dtype=np.float64)
    entry_node = np.asarray(entry_node, dtype=np.int64)
    for name, a in (("minutes", minutes), ("entry_node", entry_node), ("population", population)):
        if a is not None and np.shape(a) != grid.shape:
            raise OptionError(f"{name} raster has shape {np.shape(a)}, grid is {grid.shape}")
    if not (np.isfinite(threshold_minutes) and threshold_minutes > 0):
        raise OptionError(f"threshold {threshold_minutes!r} minutes must be a positive number")
    node_cost = np.asarray(node_cost, dtype=np.float64)
    if node_cost.shape != (network.n_nodes,):
        raise OptionError(f"node_cost has shape {node_cost.shape}; expected one value per node ({network.n_nodes})")
    pop = None if population is None else np.where(np.isfinite(population), population, 0.0)
    cell_km2 = grid.cell_area_km2
    rows = []

    # -- beyond the threshold: 8-connected components of far or unreachable cells
    with np.errstate(invalid="ignore"):
        far = ~(minutes <= threshold_minutes)
        if passable is not None:
            far &= np.asarray(passable, dtype=bool)
    labels, n_far = ndimage.label(far, structure=np.ones((3, 3), bool))
    if n_far:
        polys = _polygons_by_value(labels.astype(np.int32), far, grid.transform)
        pts = entry_points(network, node_cost, grid.cell_m, direction)
        tree = shapely.STRtree(shapely.points(pts.x, pts.y)) if len(pts) else None
        counts = np.bincount(labels.ravel(), minlength=n_far + 1)
        people = np.bincount(labels.ravel(), weights=pop.ravel(), minlength=n_far + 1) if pop is not None else None
        fin = np.isfinite(minutes).ravel()
        msum = np.bincount(labels.ravel()[fin], weights=minutes.ravel()[fin], minlength=n_far + 1)
        mcnt = np.bincount(labels.ravel()[fin], minlength=n_far + 1)
        keys = sorted(polys)
        near = np.full(n_far + 1, -1, np.int64)
        if tree is not None and keys:
            pairs = tree.query_nearest(np.array([polys[k] for k in keys], dtype=object), all_matches=False)
            near[np.asarray(keys)[pairs[0]]] = pairs[1]
        for k in keys:
            j = near[k]
            rows.append({
                "reason": "beyond_threshold",
                "population": float(people[k]) if people is not None else np.nan,
                "area_km2": counts[k] * cell_km2,
                "mean_hub_minutes": msum[k] / mcnt[k] if mcnt[k] else np.nan,
                "join_x": pts.x[j] if j >= 0 else np.nan, "join_y": pts.y[j] if j >= 0 else np.nan,
                "join_minutes": pts.minutes[j] if j >= 0 else np.nan, "edge_id": None,
                "geometry": polys[k]})

    def per_label(lab, n_lab):
        """Cell count, people, and finite-minute sum and count per label 0..n_lab (0 = none)."""
        flat = lab.ravel()
        cnt = np.bincount(flat, minlength=n_lab + 1)
        ppl = np.bincount(flat, weights=pop.ravel(), minlength=n_lab + 1) if pop is not None else None
        fin = np.isfinite(minutes).ravel()
        msum = np.bincount(flat[fin], weights=minutes.ravel()[fin], minlength=n_lab + 1)
        mcnt = np.bincount(flat[fin], minlength=n_lab + 1)
        return cnt, ppl, msum, mcnt

    # -- one link from every hub
    sides = bridge_sides(network, hub_nodes)
    if sides.bridge_edge.size:
        g1 = np.where(entry_node >= 0, sides.group[np.maximum(entry_node, 0)] + 1, 0).astype(np.int32)
        polys = _polygons_by_value(g1, g1 > 0, grid.transform)
        cnt, ppl, msum, mcnt = per_label(g1, sides.bridge_edge.size)
        for k1 in sorted(polys):
            node = sides.hub_side_node[k1 - 1]
            rows.append({
                "reason": "single_link", "population": float(ppl[k1]) if ppl is not None else np.nan,
                "area_km2": cnt[k1] * cell_km2, "mean_hub_minutes": msum[k1] / mcnt[k1] if mcnt[k1] else np.nan,
                "join_x": network.node_x[node], "join_y": network.node_y[node],
                "join_minutes": node_cost[node] if np.isfinite(node_cost[node]) else np.nan,
                "edge_id": int(sides.bridge_edge[k1 - 1]), "geometry": polys[k1]})

    # -- parts of the network with no hub (where buffers of two parts overlap, a cell counts for the later)
    if sides.no_hub_component.any():
        e = travel_edges(network)
        comp = _components(network.n_nodes, network.edge_from[e], network.edge_to[e])
        geoms = np.asarray(network.edge_geometry, dtype=object)[e]
        ecomp = comp[network.edge_from[e]]
        bad = np.unique(comp[sides.no_hub_component])
        buffers = shapely.buffer(geoms, grid.cell_m)
        eorder = np.argsort(ecomp, kind="stable")
        elo, ehi = np.searchsorted(ecomp[eorder], bad), np.searchsorted(ecomp[eorder], bad, side="right")
        norder = np.argsort(comp, kind="stable")
        nlo, nhi = np.searchsorted(comp[norder], bad), np.searchsorted(comp[norder], bad, side="right")
        polys = []
        for i in range(len(bad)):
            poly = shapely.union_all(buffers[eorder[elo[i]:ehi[i]]])
            polys.append(poly if poly.geom_type == "MultiPolygon" else shapely.MultiPolygon([poly]))
        lab = rasterize(((p, i + 1) for i, p in enumerate(polys)), out_shape=grid.shape,
                        transform=grid.transform, fill=0, dtype="int32")
        cnt, ppl, msum, mcnt = per_label(lab, len(polys))
        for i, poly in enumerate(polys):
            nodes = norder[nlo[i]:nhi[i]]
            rp = poly.representative_point()
            j = nodes[np.argmin(np.hypot(network.node_x[nodes] - rp.x, network.node_y[nodes] - rp.y))]
            rows.append({
                "reason": "no_hub", "population": float(ppl[i + 1]) if ppl is not None else np.nan,
                "area_km2": poly.area / 1e6, "mean_hub_minutes": msum[i + 1] / mcnt[i + 1] if mcnt[i + 1] else np.nan,
                "join_x": network.node_x[j], "join_y": network.node_y[j], "join_minutes": np.nan,
                "edge_id": None, "geometry": poly})

    cols = ["rank", "reason", "population", "area_km2", "mean_hub_minutes", "join_x", "join_y",
            "join_minutes", "edge_id", "geometry"]
    frame = pd.DataFrame(rows, columns=cols[1:])
    for c in ("population", "area_km2", "mean_hub_minutes", "join_x", "join_y", "join_minutes"):
        frame[c] = frame[c].astype(np.float64)
    frame["edge_id"] = pd.array([None if v is None or (isinstance(v, float) and np.isnan(v)) else int(v)
                                 for v in frame["edge_id"]], dtype="Int64")
    # people first; among equals, the longer mean trip (no hub reachable = longest), then the larger area
    mins = np.nan_to_num(frame["mean_hub_minutes"].to_numpy(), nan=np.inf)
    order = np.lexsort((-frame["area_km2"].to_numpy(), -mins, -np.nan_to_num(frame["population"].to_numpy(), nan=-1.0)))
    frame = frame.iloc[order].reset_index(drop=True)
    frame.insert(0, "rank", np.arange(1, len(frame) + 1, dtype=np.int64))
    return gpd.GeoDataFrame(frame, geometry="geometry", crs=grid.crs)


def _components(n, u, v):
    import scipy.sparse as sp
    from scipy.sparse.csgraph import connected_components

    g = sp.csr_array((np.ones(len(u)), (u, v)), shape=(n, n))
    return connected_components(g, directed=False)[1]
