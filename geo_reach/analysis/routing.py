"""Routing core: cost-weighted geodesics on a :class:`~geo_reach.network.model.Network`.

One private engine (:func:`_search`, a thin layer over
:func:`scipy.sparse.csgraph.dijkstra` on the network's cached CSR adjacency)
sits behind every public function; the public functions validate and
delegate.  Arrays in, arrays out: node ids are row numbers ``0..n_nodes-1``
and geometry is attached only by :func:`shortest_path` (its ``geometry``).

Shared parameter texts
----------------------
weight : Weight or {'minutes', 'length_m', 'latency_ms', 'hops'}
    The cost each edge counts (``hops``: 1 per link).  Edges with no value
    for it (``NaN``: a cable has no minutes) are left out of the routing;
    :func:`excluded_edges` counts them.  Zero-cost edges are real, free arcs.
places (sources, hubs, origins, destinations)
    Either node ids (int or array_like of int) or an
    :class:`~geo_reach.analysis.attach.Attachment` of off-network points made
    by :func:`~geo_reach.analysis.attach.attach_points` for the same weight.
    Off-network points are joined as virtual nodes (the network itself is
    never changed); points left out by the attachment get ``inf`` costs.
direction : {'to-hub', 'from-hub'}
    ``to-hub`` (default) costs the trip from each place to its hub, solved as
    one search from all hubs on the reversed graph; ``from-hub`` the trip
    from the hub.

"No path" is ``inf`` cost and ``-1`` index everywhere; there is no other
sentinel.

References
----------
.. [1] Dijkstra, E. W. (1959). A note on two problems in connexion with
   graphs. Numerische Mathematik 1, 269-271.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import dijkstra

from ..errors import InputError, OptionError
from ..network.model import Network
from ..network.weights import Weight, as_weight
from .attach import Attachment, attach_points
from .options import DIRECTIONS

__all__ = [
    "DIRECTIONS", "NearestHub", "one_to_all", "nearest_hub", "nearest_hub_route_m", "excluded_edges",
    "attach_points", "Attachment", "check_nodes",
]
_NONE = -9999  # scipy's "no predecessor / no source" value, never returned to callers


# ====================================================================== engine
class _Graph(NamedTuple):
    """A CSR matrix with virtual nodes appended after the ``n`` network nodes."""

    matrix: sp.csr_array
    n: int                    # network nodes; rows n.. are virtual
    edge_of_entry: np.ndarray  # edge id per stored entry (-1 for virtual arcs)
    leg_of_entry: np.ndarray   # attachment leg per stored entry (-1 for network arcs)


def _check_direction(direction: str) -> bool:
    """True when the search runs on the reversed graph."""
    if direction not in DIRECTIONS:
        raise OptionError(f"direction {direction!r} is not known; choose one of {', '.join(DIRECTIONS)}",
                          key="direction")
    return direction == "to-hub"


def check_nodes(network: Network, nodes) -> np.ndarray:
    """Validate node ids; return them as int64.

    Raises
    ------
    InputError
        A node id is not a row of the network (0..n_nodes-1).
    """
    arr = np.asarray(nodes)
    if arr.size and not np.issubdtype(arr.dtype, np.integer):
        if np.issubdtype(arr.dtype, np.floating) and np.all(arr == np.round(arr)):
            arr = arr.astype(np.int64)
        else:
            raise InputError(f"node id {arr.flat[0]!r} is not an integer; node ids run 0..{network.n_nodes - 1}")
    arr = arr.astype(np.int64)
    bad = (arr < 0) | (arr >= network.n_nodes)
    if bad.any():
        raise InputError(f"node id {int(arr[bad].flat[0])} is not in the network "
                         f"(node ids run 0..{network.n_nodes - 1}); pick a node_id from the nodes layer")
    return arr


def _base(network: Network, weight: Weight, reverse: bool) -> _Graph:
    adj = network.csr(weight, reverse=reverse)
    return _Graph(adj.matrix, network.n_nodes, adj.edge_of_entry, np.full(len(adj.edge_of_entry), -1, np.int64))


def _with_virtual(g: _Graph, group, node, cost, leg, n_groups: int) -> _Graph:
    """Append ``n_groups`` virtual nodes whose only arcs go *out* to network nodes.

    Parallel virtual arcs to one node are reduced to the cheapest (ties: the
    lowest leg).  Network rows are copied unchanged, so the cost is O(nnz).
    """
    m = g.matrix
    n_all = m.shape[0]
    order = np.lexsort((leg, cost, node, group))
    group, node, cost, leg = group[order], node[order], cost[order], leg[order]
    keep = np.ones(len(group), dtype=bool)
    keep[1:] = (group[1:] != group[:-1]) | (node[1:] != node[:-1])
    group, node, cost, leg = group[keep], node[keep], cost[keep], leg[keep]
    counts = np.bincount(group, minlength=n_groups)
    indptr = np.concatenate([m.indptr, m.indptr[-1] + np.cumsum(counts)])
    size = n_all + n_groups
    idx_dtype = np.int32 if size < 2**31 - 1 and len(indptr) and indptr[-1] < 2**31 - 1 else np.int64
    mat = sp.csr_array((np.concatenate([m.data, cost]),
                        np.concatenate([m.indices, node]).astype(idx_dtype),
                        indptr.astype(idx_dtype)), shape=(size, size))
    return _Graph(mat, g.n, np.concatenate([g.edge_of_entry, np.full(len(node), -1, np.int64)]),
                  np.concatenate([g.leg_of_entry, leg]))


def _search(g: _Graph, sources, *, min_only: bool = False, predecessors: bool = False, limit: float = np.inf):
    """The engine: Dijkstra from ``sources`` on ``g``; returns (dist, pred, origin).

    ``pred`` and ``origin`` are ``None`` unless asked for (``origin`` only with
    ``min_only``).  scipy's -9999 is mapped to -1.
    """
    sources = np.asarray(sources, dtype=np.int64)
    if sources.size == 0:
        shape = (g.matrix.shape[0],) if min_only else (0, g.matrix.shape[0])
        return (np.full(shape, np.inf), np.full(shape, -1, np.int64) if predecessors else None,
                np.full(shape, -1, np.int64) if min_only else None)
    out = dijkstra(g.matrix, directed=True, indices=sources, return_predecessors=predecessors or min_only,
                   min_only=min_only, limit=limit)
    if min_only:
        dist, pred, origin = out
        pred = np.where(pred == _NONE, -1, pred).astype(np.int64) if predecessors else None
        origin = np.where(origin == _NONE, -1, origin).astype(np.int64)
        return dist, pred, origin
    if predecessors:
        dist, pred = out
        return dist, np.where(pred == _NONE, -1, pred).astype(np.int64), None
    return out, None, None


def _entry_index(g: _Graph, tail, head) -> np.ndarray:
    """Index of the stored entry ``tail -> head`` in ``g.matrix`` (vectorised; -1 if none)."""
    m = g.matrix
    n_all = m.shape[0]
    rows = np.repeat(np.arange(n_all, dtype=np.int64), np.diff(m.indptr))
    keys = rows * n_all + m.indices.astype(np.int64)
    if len(keys) > 1 and np.any(keys[1:] < keys[:-1]):
        raise AssertionError("CSR rows are expected to have sorted indices")
    q = np.asarray(tail, np.int64) * n_all + np.asarray(head, np.int64)
    pos = np.searchsorted(keys, q)
    pos = np.minimum(pos, max(len(keys) - 1, 0))
    ok = (len(keys) > 0) & (keys[pos] == q) if len(keys) else np.zeros(q.shape, bool)
    return np.where(ok, pos, -1)


def _sources_graph(network: Network, places, weight: Weight, reverse: bool, role_if_points: str):
    """The graph to search and the source rows for ``places`` (nodes or an Attachment)."""
    g = _base(network, weight, reverse)
    if isinstance(places, Attachment):
        if places.weight != weight:
            raise OptionError(f"the points were attached for weight '{places.weight}', not '{weight}'; "
                              "attach them again for this weight")
        point, node, cost, leg = places.arcs(network, role_if_points)
        g = _with_virtual(g, point, node, cost, leg, places.n_points)
        return g, g.n + np.arange(places.n_points, dtype=np.int64)
    return g, check_nodes(network, places)


def excluded_edges(network: Network, weight: Weight | str) -> int:
    """Number of edges left out of routing on ``weight`` (no value for it)."""
    return int(np.isnan(network.cost(weight)).sum())


# ====================================================================== one-to-all
def one_to_all(network: Network, sources, weight: Weight | str = "minutes", *, reverse: bool = False,
               limit: float = np.inf) -> np.ndarray:
    """Least cost from each source to every node.

    Parameters
    ----------
    network : Network
    sources : int, array_like of int, or Attachment
        Node ids or attached off-network points (see module notes).
    weight : str, default 'minutes'
        See module notes; the result is in its unit.
    reverse : bool, default False
        Cost of the trips *to* each source from every node instead.
    limit : float, default inf
        Stop searching beyond this cost; farther nodes get ``inf``.

    Returns
    -------
    ndarray of float64
        Shape (n_nodes,) for a single int source, else (n_sources, n_nodes).
        ``inf`` where no path exists.

    Notes
    -----
    One Dijkstra run per source, O(m + n log n) each, memory n_sources x n.
    """
    weight = as_weight(weight)
    scalar = np.ndim(sources) == 0 and not isinstance(sources, Attachment)
    role = "arrive" if reverse else "leave"
    g, rows = _sources_graph(network, np.atleast_1d(sources) if scalar else sources, weight, reverse, role)
    dist, _, _ = _search(g, rows, limit=limit)
    dist = np.atleast_2d(dist)[:, : g.n]
    return dist[0] if scalar else dist


# ====================================================================== many-to-nearest
class NearestHub(NamedTuple):
    """Result of :func:`nearest_hub` (unpacks as ``cost, hub``).

    Attributes
    ----------
    cost : ndarray of float64, shape (n_nodes,)
        Cost of the trip between each node and its nearest hub, in the
        weight's unit (``inf`` where no hub is reachable).
    hub : ndarray of int64, shape (n_nodes,)
        Index of that hub in the given hubs (``-1`` where none).
    """

    cost: np.ndarray
    hub: np.ndarray


def nearest_hub(network: Network, hubs, weight: Weight | str = "minutes", direction: str = "to-hub", *,
                limit: float = np.inf) -> NearestHub:
    """Every node's nearest hub and the cost to it, in one multi-source search.

    Parameters
    ----------
    network : Network
    hubs : array_like of int, or Attachment
        Hub node ids or attached off-network hub points.
    weight : str, default 'minutes'
    direction : {'to-hub', 'from-hub'}, default 'to-hub'
        See module notes.
    limit : float, default inf
        Costs beyond it count as unreachable.

    Returns
    -------
    NearestHub
        ``(cost, hub)`` arrays of shape (n_nodes,).  Ties between hubs at
        equal cost go to whichever the search settles first.

    Notes
    -----
    One run of :func:`scipy.sparse.csgraph.dijkstra` with ``min_only=True``
    from all hubs at once: O(m + n log n) whatever the number of hubs.

    Examples
    --------
    >>> from geo_reach.analysis.routing import _demo_chain
    >>> cost, hub = nearest_hub(_demo_chain(6), [0, 5], "hops")
    >>> cost.tolist(), hub.tolist()
    ([0.0, 1.0, 2.0, 2.0, 1.0, 0.0], [0, 0, 0, 1, 1, 1])
    """
    weight = as_weight(weight)
    reverse = _check_direction(direction)
    role = "arrive" if reverse else "leave"
    if isinstance(hubs, Attachment):
        g, rows = _sources_graph(network, hubs, weight, reverse, role)
        dist, _, origin = _search(g, rows, min_only=True, limit=limit)
        hub = np.where(origin[: g.n] >= g.n, origin[: g.n] - g.n, -1)
        return NearestHub(dist[: g.n], hub.astype(np.int64))
    hubs = check_nodes(network, np.atleast_1d(hubs))
    g = _base(network, weight, reverse)
    dist, _, origin = _search(g, np.unique(hubs), min_only=True, limit=limit)
    first = np.full(network.n_nodes, -1, np.int64)
    first[hubs[::-1]] = np.arange(len(hubs) - 1, -1, -1)  # lowest hub index per node
    hub = np.where(origin >= 0, first[np.maximum(origin, 0)], -1)
    return NearestHub(dist, hub.astype(np.int64))


# ====================================================================== tree lengths
def nearest_hub_route_m(network: Network, hubs, weight: Weight | str = "minutes",
                        direction: str = "to-hub") -> np.ndarray:
    """Length in metres of each node's least-cost route to (or from) its nearest hub.

    Parameters
    ----------
    network : Network
    hubs : array_like of int, or Attachment
        As in :func:`nearest_hub`.
    weight, direction
        As in :func:`nearest_hub`: the route is the one that search finds.

    Returns
    -------
    ndarray of float64, shape (n_nodes,)
        Metres along the route: network edges, the partial edge at an
        off-network hub's entry and that hub's short access leg; NaN where no
        hub is reachable.

    Notes
    -----
    One multi-source search with predecessors, then the lengths along the
    search tree by pointer jumping (no per-node path tracing).
    """
    weight = as_weight(weight)
    reverse = _check_direction(direction)
    role = "arrive" if reverse else "leave"
    g, rows = _sources_graph(network, hubs, weight, reverse, role)
    dist, pred, _ = _search(g, np.unique(rows), min_only=True, predecessors=True)
    att = hubs if isinstance(hubs, Attachment) else None
    lengths = _tree_lengths(g, network, pred[None, :], att)[0][: network.n_nodes]
    return np.where(np.isfinite(dist[: network.n_nodes]), lengths, np.nan)


def _tree_lengths(g: _Graph, network: Network, pred: np.ndarray, att: Attachment | None,
                  walk: bool = True) -> np.ndarray:
    """Length (m) along the shortest-path trees ``pred`` (shape (b, N)) from each root to every node.

    With ``walk`` false only the network part counts (the partial edge at an
    off-network root, not its walk).  Pointer jumping: O(N log depth) per
    tree, fully vectorised.
    """
    b, n_all = pred.shape
    head = np.tile(np.arange(n_all), b)
    tail = pred.ravel()
    has = tail >= 0
    arc = np.zeros(b * n_all)
    ent = _entry_index(g, tail[has], head[has])
    e = g.edge_of_entry[ent]
    lens = np.zeros(len(ent))
    net = e >= 0
    lens[net] = network.edge_length_m[e[net]]
    if att is not None and (~net).any():
        leg = g.leg_of_entry[ent[~net]]
        le = att.leg_edge[leg]
        hd = head[has][~net]
        part = np.zeros(len(leg))
        on = le >= 0
        # leaving leg: partial edge from the fraction to whichever end was reached
        to_end = network.edge_to[le[on]] == hd[on]
        f = att.leg_fraction[leg][on]
        part[on] = np.where(to_end, 1.0 - f, f) * network.edge_length_m[le[on]]
        lens[~net] = part + (att.leg_walk_m[leg] if walk else 0.0)
    arc[has] = lens
    acc = arc.reshape(b, n_all).copy()
    up = pred.copy()
    r = np.arange(b)[:, None]
    while True:
        live = up >= 0
        if not live.any():
            break
        safe = np.where(live, up, 0)
        acc = np.where(live, acc + acc[r, safe], acc)
        up = np.where(live, up[r, safe], -1)
    return acc


# ====================================================================== doctest helper
def _demo_chain(n: int) -> Network:
    """A chain 0-1-...-(n-1) of 1 km, 1 minute two-way road links (for the doctests)."""
    import shapely
    from pyproj import CRS

    x = np.arange(n) * 1000.0
    y = np.zeros(n)
    fr = np.arange(n - 1)
    to = fr + 1
    geoms = shapely.linestrings(np.stack([np.column_stack([x[fr], y[fr]]), np.column_stack([x[to], y[to]])], axis=1))
    m = n - 1
    return Network(crs=CRS.from_epsg(3857), node_x=x, node_y=y, node_entry=np.ones(n, bool),
                   edge_from=fr, edge_to=to, edge_geometry=np.asarray(geoms, dtype=object),
                   edge_length_m=np.full(m, 1000.0), edge_minutes=np.ones(m), edge_latency_ms=np.full(m, np.nan),
                   edge_oneway=np.zeros(m, bool), edge_mode=np.full(m, "road", object),
                   edge_src_layer=np.full(m, "demo", object), edge_src_fid=np.arange(m))
