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

from dataclasses import dataclass, field
from typing import NamedTuple

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import dijkstra

from ..errors import InputError, OptionError
from ..network.model import Network
from ..network.weights import Weight, as_weight
from .attach import Attachment, attach_points

__all__ = [
    "DIRECTIONS", "NearestHub", "Route", "ODMatrix",
    "one_to_all", "nearest_hub", "nearest_hub_route_m", "shortest_path", "od_matrix", "excluded_edges",
    "attach_points", "Attachment", "check_nodes",
]

DIRECTIONS = ("to-hub", "from-hub")
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


# ====================================================================== one-to-one
@dataclass(frozen=True)
class Route:
    """A least-cost trip (from :func:`shortest_path`).

    Attributes
    ----------
    cost : float
        In the weight's unit; ``inf`` if there is no path.
    length_m : float
        Whole trip length in metres: network part plus access legs.
    access_m : float
        Length of the off-network access legs (both ends), metres.
    edges : ndarray of int64
        Edge ids in travel order, including edges travelled in part at the
        ends (empty if the trip stays on one edge or there is no path).
    nodes : ndarray of int64
        Network nodes passed, in order.
    geometry : shapely LineString or None
        The trip in the working CRS (access legs included); ``None`` if no path.
    """

    cost: float
    length_m: float
    access_m: float
    edges: np.ndarray
    nodes: np.ndarray
    geometry: object = field(default=None, compare=False)

    @property
    def found(self) -> bool:
        return bool(np.isfinite(self.cost))


def _trace(pred_row: np.ndarray, target: int) -> list[int]:
    path = [target]
    while pred_row[path[-1]] >= 0:
        path.append(int(pred_row[path[-1]]))
        if len(path) > len(pred_row) + 1:
            raise AssertionError("predecessor cycle")
    return path[::-1]


def _same_edge(network: Network, a: Attachment, b: Attachment):
    """Direct trips along one edge between legs of ``a`` and ``b`` (no node passed).

    Returns (point_a, point_b, cost, leg_a, leg_b) for every pair of road legs
    on the same edge whose direction is allowed.
    """
    import pandas as pd

    ea = np.nonzero(a.leg_edge >= 0)[0]
    eb = np.nonzero(b.leg_edge >= 0)[0]
    if not len(ea) or not len(eb):
        z = np.zeros(0, np.int64)
        return z, z, np.zeros(0), z, z
    fa = pd.DataFrame({"edge": a.leg_edge[ea], "la": ea})
    fb = pd.DataFrame({"edge": b.leg_edge[eb], "lb": eb})
    mrg = fa.merge(fb, on="edge")
    la, lb = mrg["la"].to_numpy(np.int64), mrg["lb"].to_numpy(np.int64)
    e = a.leg_edge[la]
    c = network.cost(a.weight)[e]
    df = b.leg_fraction[lb] - a.leg_fraction[la]
    ok = (df >= 0) | ~network.edge_oneway[e]
    cost = (np.abs(df) * c + a.weight.walk_cost(a.leg_walk_m[la], a.walk_kmh)
            + b.weight.walk_cost(b.leg_walk_m[lb], b.walk_kmh))
    return a.leg_point[la][ok], b.leg_point[lb][ok], cost[ok], la[ok], lb[ok]


def _as_single(network: Network, place, weight: Weight, what: str):
    if isinstance(place, Attachment):
        if place.n_points != 1:
            raise OptionError(f"{what}: give one point, not {place.n_points}")
        if place.weight != weight:
            raise OptionError(f"{what}: attached for weight '{place.weight}', not '{weight}'; attach it again")
        return place
    if np.ndim(place) != 0:
        raise OptionError(f"{what}: give one node id or one attached point")
    return int(check_nodes(network, [place])[0])


def shortest_path(network: Network, origin, destination, weight: Weight | str = "minutes") -> Route:
    """The least-cost trip between two places, with its edges and geometry.

    Parameters
    ----------
    network : Network
    origin, destination : int or Attachment
        A node id, or an attachment of exactly one off-network point.
    weight : str, default 'minutes'

    Returns
    -------
    Route
        ``cost`` is ``inf`` and ``geometry`` ``None`` when there is no path
        (different components, or a point left out by its attachment).

    Notes
    -----
    One Dijkstra run from the origin.  Several least-cost paths may tie;
    any one of them is returned.

    Examples
    --------
    >>> from geo_reach.analysis.routing import _demo_chain
    >>> r = shortest_path(_demo_chain(4), 0, 3, "hops")
    >>> r.cost, r.edges.tolist(), r.nodes.tolist()
    (3.0, [0, 1, 2], [0, 1, 2, 3])
    """
    import shapely

    weight = as_weight(weight)
    o = _as_single(network, origin, weight, "origin")
    d = _as_single(network, destination, weight, "destination")
    length = network.edge_length_m
    if isinstance(o, Attachment):
        g, rows = _sources_graph(network, o, weight, False, "leave")
    else:
        g, rows = _base(network, weight, False), np.array([o])
    dist, pred, _ = _search(g, rows, predecessors=True)
    dist, pred = dist[0], pred[0]
    src = int(rows[0])

    # best way to finish
    best_cost, end_node, end_leg = np.inf, -1, -1
    direct = None
    if isinstance(d, Attachment):
        _, node, cost, leg = d.arcs(network, "arrive")
        if len(node):
            tot = dist[node] + cost
            k = int(np.argmin(tot))
            best_cost, end_node, end_leg = float(tot[k]), int(node[k]), int(leg[k])
        if isinstance(o, Attachment):
            _, _, dc, la, lb = _same_edge(network, o, d)
            if len(dc):
                k = int(np.argmin(dc))
                if dc[k] < best_cost:
                    best_cost, direct = float(dc[k]), (int(la[k]), int(lb[k]))
    else:
        best_cost, end_node = float(dist[d]), d
    if not np.isfinite(best_cost):
        return Route(np.inf, np.inf, np.nan, np.zeros(0, np.int64), np.zeros(0, np.int64), None)

    o_xy = o.point_xy[0] if isinstance(o, Attachment) else None
    d_xy = d.point_xy[0] if isinstance(d, Attachment) else None
    if direct is not None:
        la, lb = direct
        e = int(o.leg_edge[la])
        fa, fb = float(o.leg_fraction[la]), float(d.leg_fraction[lb])
        piece = _edge_piece(network, e, fa, fb)
        coords = [o_xy, *shapely.get_coordinates(piece), d_xy]
        walk = float(o.leg_walk_m[la] + d.leg_walk_m[lb])
        net_len = abs(fb - fa) * length[e]
        return Route(best_cost, float(net_len + walk), walk, np.array([e], np.int64), np.zeros(0, np.int64),
                     _line(coords))

    path = _trace(pred, end_node)
    nodes = [v for v in path if v < g.n]
    walk = 0.0
    pieces: list = []
    edges: list[int] = []
    net_len = 0.0
    if isinstance(o, Attachment):
        # the first network node was reached from the virtual origin through one leg
        ent = _entry_index(g, np.array([src]), np.array([nodes[0]]))[0]
        leg = int(g.leg_of_entry[ent])
        walk += float(o.leg_walk_m[leg])
        pieces.append(np.atleast_2d(o_xy))
        e = int(o.leg_edge[leg])
        if e >= 0:
            f = float(o.leg_fraction[leg])
            to_end = 1.0 if network.edge_to[e] == nodes[0] else 0.0
            pieces.append(shapely.get_coordinates(_edge_piece(network, e, f, to_end)))
            net_len += abs(to_end - f) * length[e]
            edges.append(e)
        else:
            pieces.append(np.array([[network.node_x[nodes[0]], network.node_y[nodes[0]]]]))
    if len(nodes) > 1:
        tails, heads = np.array(nodes[:-1]), np.array(nodes[1:])
        ent = _entry_index(g, tails, heads)
        eids = g.edge_of_entry[ent]
        for t, e in zip(tails, eids):
            geom = network.edge_geometry[e]
            c = shapely.get_coordinates(geom)
            pieces.append(c if network.edge_from[e] == t else c[::-1])
        net_len += float(length[eids].sum())
        edges.extend(int(e) for e in eids)
    if isinstance(d, Attachment):
        e = int(d.leg_edge[end_leg])
        if e >= 0:
            f = float(d.leg_fraction[end_leg])
            start = 0.0 if network.edge_from[e] == end_node else 1.0
            pieces.append(shapely.get_coordinates(_edge_piece(network, e, start, f)))
            net_len += abs(f - start) * length[e]
            edges.append(e)
        else:
            pieces.append(np.array([[network.node_x[end_node], network.node_y[end_node]]]))
        walk += float(d.leg_walk_m[end_leg])
        pieces.append(np.atleast_2d(d_xy))
    if not pieces:
        pieces.append(np.array([[network.node_x[nodes[0]], network.node_y[nodes[0]]]]))
    coords = np.concatenate([np.atleast_2d(p)[:, :2] for p in pieces])
    return Route(best_cost, float(net_len + walk), walk, np.array(edges, np.int64), np.array(nodes, np.int64),
                 _line(coords))


def _edge_piece(network: Network, e: int, f0: float, f1: float):
    """The part of edge ``e`` from fraction ``f0`` to ``f1`` (reversed if f1 < f0)."""
    from shapely.ops import substring

    geom = network.edge_geometry[e]
    return substring(geom, f0, f1, normalized=True)


def _line(coords):
    """A LineString through ``coords`` without repeated points (a point if only one)."""
    import shapely

    c = np.asarray(coords, dtype=np.float64).reshape(-1, 2)
    keep = np.ones(len(c), dtype=bool)
    keep[1:] = np.any(np.diff(c, axis=0) != 0, axis=1)
    c = c[keep]
    if len(c) == 1:
        c = np.vstack([c, c])
    return shapely.linestrings(c)


# ====================================================================== origin-destination
@dataclass(frozen=True)
class ODMatrix:
    """Costs and lengths between every origin and every destination (from :func:`od_matrix`).

    Attributes
    ----------
    cost : ndarray of float64, shape (n_origins, n_destinations)
        Least cost in the weight's unit; ``inf`` where no path.
    length_m : ndarray of float64, shape (n_origins, n_destinations)
        Length in metres of that least-cost trip (access legs included);
        ``inf`` where no path.
    """

    cost: np.ndarray
    length_m: np.ndarray


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


def _tree_lengths(g: _Graph, network: Network, pred: np.ndarray, att: Attachment | None) -> np.ndarray:
    """Length (m) along the shortest-path trees ``pred`` (shape (b, N)) from each root to every node.

    Pointer jumping: O(N log depth) per tree, fully vectorised.
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
        lens[~net] = part + att.leg_walk_m[leg]
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


def od_matrix(network: Network, origins, destinations, weight: Weight | str = "minutes", *,
              batch: int | None = None) -> ODMatrix:
    """Least cost and its length between every origin and every destination.

    Parameters
    ----------
    network : Network
    origins, destinations : array_like of int, or Attachment
        Node ids or attached off-network points (see module notes).
    weight : str, default 'minutes'
    batch : int, optional
        Origins searched together (memory ~ 3 x batch x n_nodes x 8 bytes);
        chosen automatically if not given.

    Returns
    -------
    ODMatrix

    Notes
    -----
    One Dijkstra run per origin with predecessors; trip lengths follow the
    least-cost tree (ties between equal-cost trips go to the shorter
    arrival).  Points on the same edge may also travel directly along it.
    A trip from a point to itself walks its access leg out and back (twice
    the access cost), since every trip joins the network.
    Cost O(n_origins (m + n log n)).
    """
    weight = as_weight(weight)
    o_att = origins if isinstance(origins, Attachment) else None
    d_att = destinations if isinstance(destinations, Attachment) else None
    g, rows = _sources_graph(network, origins, weight, False, "leave")
    if d_att is not None:
        if d_att.weight != weight:
            raise OptionError(f"destinations attached for weight '{d_att.weight}', not '{weight}'; attach again")
        dpt, dnode, dcost, dleg = d_att.arcs(network, "arrive")
        n_d = d_att.n_points
        dlen = d_att.leg_walk_m[dleg].copy()
        de = d_att.leg_edge[dleg]
        on = de >= 0
        from_end = network.edge_from[de[on]] == dnode[on]
        f = d_att.leg_fraction[dleg][on]
        dlen[on] += np.where(from_end, f, 1.0 - f) * network.edge_length_m[de[on]]
    else:
        dnode = check_nodes(network, np.atleast_1d(destinations))
        n_d = len(dnode)
        dpt = np.arange(n_d, dtype=np.int64)
        dcost = np.zeros(n_d)
        dlen = np.zeros(n_d)
    n_o = len(rows)
    cost = np.full((n_o, n_d), np.inf)
    lmat = np.full((n_o, n_d), np.inf)
    n_all = g.matrix.shape[0]
    if batch is None:
        batch = int(max(1, min(256, 5e6 // max(n_all, 1))))
    # group the arrival arcs by destination; per destination keep the cheapest (ties: shortest)
    col = np.argsort(dpt, kind="stable")
    dpt_s, dnode_s, dcost_s, dlen_s = dpt[col], dnode[col], dcost[col], dlen[col]
    starts = np.nonzero(np.r_[True, dpt_s[1:] != dpt_s[:-1]])[0] if len(dpt_s) else np.zeros(0, np.int64)
    targets = dpt_s[starts]
    for s in range(0, n_o, batch):
        r = rows[s:s + batch]
        dist, pred, _ = _search(g, r, predecessors=True)
        if not len(starts):
            continue
        tl = _tree_lengths(g, network, pred, o_att)
        tot = dist[:, dnode_s] + dcost_s[None, :]
        totl = tl[:, dnode_s] + dlen_s[None, :]
        best = np.minimum.reduceat(tot, starts, axis=1)
        seg = np.repeat(np.arange(len(starts)), np.diff(np.r_[starts, len(dpt_s)]))
        tie = tot == best[:, seg]
        bestl = np.minimum.reduceat(np.where(tie, totl, np.inf), starts, axis=1)
        cost[s:s + len(r), targets] = best
        lmat[s:s + len(r), targets] = bestl
    if o_att is not None and d_att is not None:
        pa, pb, dc, la, lb = _same_edge(network, o_att, d_att)
        if len(dc):
            e = o_att.leg_edge[la]
            dl = (np.abs(d_att.leg_fraction[lb] - o_att.leg_fraction[la]) * network.edge_length_m[e]
                  + o_att.leg_walk_m[la] + d_att.leg_walk_m[lb])
            better = dc < cost[pa, pb]
            # several legs may hit one pair: apply cheapest last
            order = np.argsort(-dc[better], kind="stable")
            pa, pb, dc, dl = pa[better][order], pb[better][order], dc[better][order], dl[better][order]
            cost[pa, pb] = dc
            lmat[pa, pb] = dl
    lmat[~np.isfinite(cost)] = np.inf
    return ODMatrix(cost, lmat)


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
