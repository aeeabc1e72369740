"""Settlement-to-hub trip costs within a bound: the one cost function of the indices and siting models.

:func:`trip_costs` is the single place where the accessibility indices
(:mod:`geo_reach.analysis.indices`) and the location models
(:mod:`geo_reach.analysis.siting`) get their costs.  It prices every trip
exactly as ``geo-reach od`` and ``geo-reach route`` do (one trip, one number):

* both ends are off-network points joined by
  :func:`~geo_reach.analysis.attach.attach_points` (walk legs at the walking
  speed, every entry it offers, one-way links respected on the partial edges);
* a trip may also run directly along one edge between the two ends' entry
  points, when the edge's direction allows it;
* the network part is a least-cost path on :meth:`Network.csr`.

Only pairs whose cost is at most ``within`` are kept (sparse), found by one
Dijkstra search per point of the smaller side, cut off at ``within``
(``limit`` in :func:`scipy.sparse.csgraph.dijkstra`): never a full matrix.
The least cost to the nearest hub, unbounded, comes from one more
multi-source search.

How it works: the network's arcs plus one virtual node per point.  A trip's
start point has arcs *out* onto the network (its "leave" arcs), its end point
arcs *in* from the network ("arrive" arcs), and a start and end point on the
same edge get a direct arc.  Since start points have no arcs in and end
points none out, no path can pass through a point.  Searching forward from
the starts, or backward from the ends, gives the same costs; the side with
fewer points is searched.

The walk model lives here only through :func:`_side`: straight walks from
``attach_points``, or, given the run's
:class:`~geo_reach.analysis.travel.TravelModel`, its walks (terrain, land
cover, barriers) and its straight walks between a settlement and a hub
within reach - the trips ``route``, ``od`` and the settlements layer price.

References
----------
.. [1] Dijkstra, E. W. (1959). A note on two problems in connexion with
   graphs. Numerische Mathematik 1, 269-271.
"""

from __future__ import annotations

from dataclasses import dataclass

import numba
import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import dijkstra

from ...errors import OptionError
from ..attach import Attachment, attach_points

__all__ = ["TripCosts", "trip_costs", "bounded_task", "DIRECTIONS"]

#: Trip directions: ``to-hub`` (settlement to hub, the default) or ``from-hub``.
DIRECTIONS = ("to-hub", "from-hub")

#: Distances held at once by one batch of searches (floats); 8 million = 64 MB.
_BATCH_FLOATS = 8_000_000


@dataclass(frozen=True)
class TripCosts:
    """Least trip costs between settlements and hubs, kept where at most ``within``.

    Attributes
    ----------
    settlement, hub : ndarray of int64, shape (k,)
        The pairs, sorted by settlement then hub (indices into the inputs).
    cost : ndarray of float64, shape (k,)
        Least cost of the trip in the weight's unit (minutes, metres), each
        ``<= within``.
    n_settlements, n_hubs : int
    within : float
        The bound the pairs were cut at (``inf`` = none), weight's unit.
    weight, direction : str
    nearest_cost : ndarray of float64, shape (n_settlements,)
        Least cost to any hub, whatever ``within`` says; ``inf`` where no hub
        is reachable (not computed: all NaN).
    nearest_hub : ndarray of int64, shape (n_settlements,)
        That hub's index; -1 where none.
    settlement_attached, hub_attached : ndarray of bool
        Points within ``max_access_m`` of the network (the others have no trips).
    settlement_access_m, hub_access_m : ndarray of float64
        Distance in metres from each point to the nearest place it may join the network.
    """

    settlement: np.ndarray
    hub: np.ndarray
    cost: np.ndarray
    n_settlements: int
    n_hubs: int
    within: float
    weight: str
    direction: str
    nearest_cost: np.ndarray
    nearest_hub: np.ndarray
    settlement_attached: np.ndarray
    hub_attached: np.ndarray
    settlement_access_m: np.ndarray
    hub_access_m: np.ndarray

    @property
    def n_pairs(self) -> int:
        return len(self.cost)

    def dense(self) -> np.ndarray:
        """The pairs as a dense (n_settlements, n_hubs) array, ``inf`` where no pair (small cases only)."""
        out = np.full((self.n_settlements, self.n_hubs), np.inf)
        out[self.settlement, self.hub] = self.cost
        return out

    def subset_hubs(self, keep) -> "TripCosts":
        """The same table for the hubs ``keep`` only (renumbered 0..len(keep)-1; nearest not kept)."""
        keep = np.asarray(keep, dtype=np.int64)
        new = np.full(self.n_hubs, -1, np.int64)
        new[keep] = np.arange(len(keep))
        sel = new[self.hub] >= 0
        nan = np.full(self.n_settlements, np.nan)
        return TripCosts(self.settlement[sel], new[self.hub[sel]], self.cost[sel], self.n_settlements, len(keep),
                         self.within, self.weight, self.direction, nan, np.full(self.n_settlements, -1, np.int64),
                         self.settlement_attached, self.hub_attached[keep], self.settlement_access_m,
                         self.hub_access_m[keep])


# --------------------------------------------------------------------------- graph
@dataclass(frozen=True)
class _Side:
    """The virtual arcs of one side's points: (point, node, cost) with the Attachment behind them."""

    n: int
    point: np.ndarray
    node: np.ndarray
    cost: np.ndarray
    att: Attachment | None
    attached: np.ndarray
    access_m: np.ndarray


def _side(network, xy, nodes, weight, role, max_access_m, walk_kmh, travel=None, always_join=False,
          reach_m=None) -> _Side:
    """Virtual arcs joining points to the network: the walk model's single entry point.

    With ``travel`` (a :class:`~geo_reach.analysis.travel.TravelModel` for
    this weight) the points walk as it prices walks (terrain, land cover,
    barriers); else straight lines at ``walk_kmh``.  With ``reach_m`` too,
    every entry within that many metres is offered besides, unpruned (the
    settlements' exact rule, see :func:`trip_costs`).
    """
    if nodes is not None:
        nodes = np.asarray(nodes, dtype=np.int64)
        bad = (nodes < 0) | (nodes >= network.n_nodes)
        if bad.any():
            raise OptionError(f"node id {int(nodes[bad][0])} is not in the network (0..{network.n_nodes - 1})")
        n = len(nodes)
        return _Side(n, np.arange(n, dtype=np.int64), nodes, np.zeros(n), None, np.ones(n, bool), np.zeros(n))
    pts = np.asarray(xy, dtype=np.float64).reshape(-1, 2)
    if travel is not None:
        att = travel.attach(network, pts, roles=(role,), always_join=always_join)
        if reach_m is not None and len(pts):
            from ..travel import keep_legs

            wide = travel.attach(network, pts, roles=(role,), reach_m=np.full(len(pts), float(reach_m)))
            att = keep_legs(att, wide, np.ones(len(pts), bool))
    else:
        att = attach_points(network, pts, weight, max_access_m=max_access_m, walk_kmh=walk_kmh,
                            always_join=always_join)
    point, node, cost, _ = att.arcs(network, role)
    return _Side(att.n_points, point, node, cost, att, att.attached, att.access_m)


def _direct_arcs(network, start: _Side, end: _Side, weight: str):
    """Trips straight along one edge from a start point's entry to an end point's entry.

    Returns (start point, end point, cost) for every pair of edge legs on the
    same edge whose direction is allowed (forward, or any way on a two-way edge).
    """
    z = np.zeros(0, np.int64)
    if start.att is None or end.att is None:
        return z, z, np.zeros(0)
    a, b = start.att, end.att
    la = np.nonzero(a.leg_edge >= 0)[0]
    lb = np.nonzero(b.leg_edge >= 0)[0]
    if not len(la) or not len(lb):
        return z, z, np.zeros(0)
    # join the legs on their edge: sort b's legs by edge, find each a-leg's run of b-legs
    lb = lb[np.argsort(b.leg_edge[lb], kind="stable")]
    eb = b.leg_edge[lb]
    lo = np.searchsorted(eb, a.leg_edge[la], side="left")
    hi = np.searchsorted(eb, a.leg_edge[la], side="right")
    cnt = hi - lo
    ia = np.repeat(la, cnt)
    if not len(ia):
        return z, z, np.zeros(0)
    offs = np.arange(cnt.sum()) - np.repeat(np.cumsum(cnt) - cnt, cnt)
    ib = lb[np.repeat(lo, cnt) + offs]
    e = a.leg_edge[ia]
    df = b.leg_fraction[ib] - a.leg_fraction[ia]
    ok = (df >= 0) | ~network.edge_oneway[e]
    ia, ib, e, df = ia[ok], ib[ok], e[ok], df[ok]
    # the start side's legs are walked leaving their point, the end side's arriving at theirs
    cost = np.abs(df) * network.cost(weight)[e] + a.leg_leave_cost[ia] + b.leg_arrive_cost[ib]
    pa, pb = a.leg_point[ia].astype(np.int64), b.leg_point[ib].astype(np.int64)
    keep = _cheapest_pairs(pa, pb, cost, a.n_points, b.n_points)
    return pa[keep], pb[keep], cost[keep]


@numba.njit(cache=True, nogil=True)
def _group(keys, n_keys):
    """Counting sort: ``order`` lists the items key by key, ``start[k]:start[k + 1]`` those of key k."""
    start = np.zeros(n_keys + 1, np.int64)
    for k in keys:
        start[k + 1] += 1
    for k in range(n_keys):
        start[k + 1] += start[k]
    pos = start[:-1].copy()
    order = np.empty(len(keys), np.int64)
    for i in range(len(keys)):
        order[pos[keys[i]]] = i
        pos[keys[i]] += 1
    return order, start


@numba.njit(cache=True, nogil=True)
def _cheapest_pairs(a, b, cost, n_a, n_b):
    """Indices of the cheapest item per (a, b) pair (the first of ties)."""
    order, start = _group(a, n_a)
    best = np.full(n_b, -1, np.int64)
    keep = np.zeros(len(a), np.bool_)
    for p in range(n_a):
        ks = order[start[p]:start[p + 1]]
        for k in ks:
            j = best[b[k]]
            if j < 0 or cost[k] < cost[j]:
                best[b[k]] = k
        for k in ks:
            j = best[b[k]]
            if j >= 0:
                keep[j] = True
                best[b[k]] = -1
    return np.nonzero(keep)[0]


@numba.njit(cache=True, nogil=True)
def _dominated(point, node, cost, n_points, n_nodes, indptr, indices, data):
    """Flag the virtual arcs that no least-cost trip uses (exact, see :func:`_prune`)."""
    order, start = _group(point, n_points)
    drop = np.zeros(len(point), np.bool_)
    best = np.full(n_nodes, np.inf)
    owner = np.full(n_nodes, -1, np.int64)
    for p in range(n_points):
        ks = order[start[p]:start[p + 1]]
        ks = ks[np.argsort(cost[ks], kind="mergesort")]
        for k in ks:                     # cheapest arc per node; dearer parallel arcs dropped
            v = node[k]
            if owner[v] < 0:
                owner[v] = k
                best[v] = cost[k]
            else:
                drop[k] = True
        for k in ks:                     # one pass in cost order along the network arcs among them
            u = node[k]
            if owner[u] != k:
                continue
            cu = best[u]
            for e in range(indptr[u], indptr[u + 1]):
                v = indices[e]
                if owner[v] >= 0 and cu + data[e] < best[v]:
                    best[v] = cu + data[e]
                    drop[owner[v]] = True
        for k in ks:
            best[node[k]] = np.inf
            owner[node[k]] = -1
    return drop


def _prune(side: _Side, adj) -> _Side:
    """Drop the virtual arcs of ``side`` that no least-cost trip can use; every cost stays the same.

    An arc from point p to node v (cost c) is dropped when another of p's
    arcs reaches v more cheaply through network arcs, strictly (c_u + w_uv <
    c): any trip through the dropped arc is beaten by one through the kept
    arc, so every least cost is unchanged.  Also drops the dearer of parallel
    arcs.  ``adj`` is the network adjacency in the direction the arcs run
    (forward for arcs leaving a point; reversed for arcs arriving at one).
    With walking 5-20 times slower than the network, most of the entries
    ``attach_points`` offers (up to 1 km beyond the nearest) are dropped here.
    """
    if not len(side.point):
        return side
    m = adj.matrix
    drop = _dominated(side.point, side.node, side.cost, side.n, m.shape[0], m.indptr.astype(np.int64),
                      m.indices.astype(np.int64), m.data.astype(np.float64))
    keep = ~drop
    return _Side(side.n, side.point[keep], side.node[keep], side.cost[keep], side.att, side.attached, side.access_m)


#: Points attached at once on the larger side (legs are dropped once pruned: bounded memory).
_CHUNK = 20_000


def _chunked(network, xy, nodes, weight, role, max_access_m, walk_kmh, other: _Side, big_is_start: bool,
             travel=None, always_join=False, reach_m=None):
    """The larger side's pruned arcs, attached chunk by chunk, and the direct arcs to the ``other`` side."""
    adj = network.csr(weight, reverse=not big_is_start)
    if nodes is not None:
        side = _side(network, None, nodes, weight, role, max_access_m, walk_kmh)
        z = np.zeros(0, np.int64)
        return _prune(side, adj), (z, z, np.zeros(0))
    xy = np.asarray(xy, dtype=np.float64).reshape(-1, 2)
    parts, dparts = [], []
    for s in range(0, max(len(xy), 1), _CHUNK):
        side = _side(network, xy[s:s + _CHUNK], None, weight, role, max_access_m, walk_kmh, travel, always_join,
                     reach_m)
        pa, pb, dc = _direct_arcs(network, side, other, weight) if big_is_start else \
            _direct_arcs(network, other, side, weight)
        if big_is_start:
            pa = pa + s
        else:
            pb = pb + s
        dparts.append((pa, pb, dc))
        side = _prune(side, adj)
        parts.append(_Side(side.n, side.point + s, side.node, side.cost, None, side.attached, side.access_m))
    cat = np.concatenate
    side = _Side(len(xy), cat([q.point for q in parts]), cat([q.node for q in parts]), cat([q.cost for q in parts]),
                 None, cat([q.attached for q in parts]), cat([q.access_m for q in parts]))
    direct = tuple(cat([d[k] for d in dparts]) for k in range(3))
    return side, direct


def _with_straight_walks(direct, travel, s_xy, h_xy, s_joined, h_joined, to_hub: bool):
    """``direct`` (start point, end point, cost) plus the walks straight between a settlement and a hub.

    Walks within ``max_access_m``, between places that both join the
    network (a place left out stays out, as :meth:`TravelModel.route` has it).
    """
    si, hi = np.nonzero(s_joined)[0], np.nonzero(h_joined)[0]
    if to_hub:
        w = travel.direct(s_xy[si], h_xy[hi])
        pa, pb = si[w.src], hi[w.dst]
    else:
        w = travel.direct(h_xy[hi], s_xy[si])
        pa, pb = hi[w.src], si[w.dst]
    if not len(w.cost):
        return direct
    return (np.concatenate([direct[0], pa.astype(np.int64)]), np.concatenate([direct[1], pb.astype(np.int64)]),
            np.concatenate([direct[2], w.cost.astype(np.float64)]))


def _csr(n: int, base, tail, head, cost) -> sp.csr_array:
    """``base`` (an (n0, n0) CSR, n0 <= n) with the arcs ``tail -> head`` added, as an (n, n) CSR.

    Parallel arcs are kept: scipy's Dijkstra relaxes each and so takes the
    cheapest (``tests/test_indices_trips.py`` pins that behaviour).  Explicit
    zero costs stay arcs.
    """
    n0 = base.shape[0]
    order, start = _group(tail.astype(np.int64), n)
    cnt_base = np.zeros(n, np.int64)
    cnt_base[:n0] = np.diff(base.indptr)
    cnt = cnt_base + np.diff(start)
    indptr = np.zeros(n + 1, np.int64)
    np.cumsum(cnt, out=indptr[1:])
    nnz = int(indptr[-1])
    idx = np.empty(nnz, np.int64)
    val = np.empty(nnz)
    brow = np.repeat(np.arange(n0, dtype=np.int64), np.diff(base.indptr))
    bpos = indptr[brow] + (np.arange(len(brow)) - base.indptr[brow])
    idx[bpos] = base.indices
    val[bpos] = base.data
    erow = tail[order].astype(np.int64)
    epos = indptr[erow] + cnt_base[erow] + (np.arange(len(order)) - start[erow])
    idx[epos] = head[order]
    val[epos] = cost[order]
    it = np.int32 if n < 2**31 - 1 and nnz < 2**31 - 1 else np.int64
    return sp.csr_array((val, idx.astype(it), indptr.astype(it)), shape=(n, n))


def _graph(network, weight, start: _Side, end: _Side, direct, reverse: bool) -> sp.csr_array:
    """Network arcs + start points (rows N..) with arcs out + end points (rows N+ns..) with arcs in."""
    n = network.n_nodes
    s0, e0 = n, n + start.n
    dpa, dpb, dc = direct
    tail = np.concatenate([s0 + start.point, end.node, s0 + dpa])
    head = np.concatenate([start.node, e0 + end.point, e0 + dpb])
    cost = np.concatenate([start.cost, end.cost, dc])
    if reverse:
        tail, head = head, tail
    return _csr(n + start.n + end.n, network.csr(weight, reverse=reverse).matrix, tail, head, cost)


def _bounded(g: sp.csr_array, sources: np.ndarray, targets: np.ndarray, within: float):
    """Pairs (source k, target t, cost) with cost <= within, by batches of scipy's bounded Dijkstra."""
    nt = g.shape[0]
    batch = int(max(1, min(len(sources), _BATCH_FLOATS // max(nt, 1))))
    out_s, out_t, out_c = [], [], []
    for s in range(0, len(sources), batch):
        rows = sources[s:s + batch]
        dist = dijkstra(g, directed=True, indices=rows, limit=within)
        d = dist[:, targets]
        k, t = np.nonzero(np.isfinite(d) & (d <= within))
        out_s.append(k + s)
        out_t.append(t)
        out_c.append(d[k, t])
    if not out_s:
        z = np.zeros(0, np.int64)
        return z, z, np.zeros(0)
    return (np.concatenate(out_s).astype(np.int64), np.concatenate(out_t).astype(np.int64),
            np.concatenate(out_c).astype(np.float64))


def bounded_task(chunk, shared: dict):
    """One chunk of sources of :func:`_bounded` on an executor: ``chunk`` = (offset, sources).

    ``shared`` holds the graph's CSR arrays (``data``, ``indices``,
    ``indptr``, ``n``), the ``targets`` and the bound ``within``; sent to
    each worker once.  Returns the pairs with source numbers offset back.
    """
    offset, rows = chunk
    g = sp.csr_array((shared["data"], shared["indices"], shared["indptr"]), shape=(shared["n"], shared["n"]))
    a, b, c = _bounded(g, rows, shared["targets"], shared["within"])
    return a + offset, b, c


def _bounded_on(executor, g: sp.csr_array, sources: np.ndarray, targets: np.ndarray, within: float):
    """:func:`_bounded` with the sources in chunks on ``executor``; the same pairs in the same order.

    Each source's search is independent and runs the same code on the same
    graph, so the pairs (and their costs, to the last bit) equal the
    in-process run's.
    """
    if executor is None or executor.n_workers <= 1 or len(sources) < 2:
        return _bounded(g, sources, targets, within)
    n_chunks = min(len(sources), 4 * executor.n_workers)
    cuts = np.linspace(0, len(sources), n_chunks + 1).astype(np.int64)
    chunks = [(int(a), sources[a:b]) for a, b in zip(cuts[:-1], cuts[1:]) if b > a]
    shared = {"data": g.data, "indices": g.indices, "indptr": g.indptr, "n": g.shape[0],
              "targets": targets, "within": within}
    parts = executor.map(bounded_task, chunks, shared=shared)
    return tuple(np.concatenate([p[i] for p in parts]) for i in range(3))


def trip_costs(network, settlement_xy, hub_xy=None, *, hub_nodes=None, within: float = np.inf,
               weight: str = "minutes", direction: str = "to-hub", max_access_m: float = 5000.0,
               walk_kmh: float = 5.0, pairs: bool = True, nearest: bool = True,
               nearest_among=None, travel=None, always_join: bool = False, executor=None) -> TripCosts:
    """Least trip costs between settlements and hubs, every pair within ``within``, plus the nearest hub.

    Parameters
    ----------
    network : Network
    settlement_xy : array_like of float, shape (n_settlements, 2)
        Settlement points in the network's working CRS (metres).
    hub_xy : array_like of float, shape (n_hubs, 2), optional
        Hub points in the working CRS.  Give this or ``hub_nodes``.
    hub_nodes : array_like of int, optional
        Hubs sitting exactly at these network nodes (no walk leg at the hub end).
    within : float, default inf
        Keep pairs whose cost is at most this (weight's unit); also the
        cut-off of each search.  Must be positive.
    weight : {'minutes', 'length_m', 'latency_ms', 'hops'}, default 'minutes'
    direction : {'to-hub', 'from-hub'}, default 'to-hub'
        ``to-hub``: the trip from the settlement to the hub.
    max_access_m, walk_kmh : float
        As in :func:`~geo_reach.analysis.attach.attach_points`: points farther
        than ``max_access_m`` metres from the network have no trips; walk legs
        are costed at ``walk_kmh``.
    pairs : bool, default True
        Compute the pairs (False: only the nearest hub).
    nearest : bool, default True
        Compute each settlement's nearest hub, unbounded (False: NaN).
    nearest_among : array_like of int, optional
        The nearest hub is sought among these hubs only (indices; default
        all).  Lets one call serve existing hubs (nearest) and candidate
        sites (pairs) while the settlements are attached once.
    travel : TravelModel, optional
        The run's travel model (:class:`~geo_reach.analysis.travel.TravelModel`):
        every walk is priced as it prices walks (terrain, land cover,
        barriers), its ``max_access_m`` and ``walk_kmh`` replace those given,
        and a settlement within ``max_access_m`` of a hub point may also walk
        straight to it (as ``route`` and the settlements layer allow), so
        the trips cost what every other view says.  Default: straight walks
        onto the network only.
    always_join : bool, default False
        Settlements farther than ``max_access_m`` from the network join it
        at their nearest places all the same (the settlements layer's rule).
    executor : geo_reach.parallel.Executor, optional
        Where the bounded searches run (chunks of sources; default here).
        The pairs are the same, in the same order, to the last bit.

    Returns
    -------
    TripCosts

    Raises
    ------
    OptionError
        ``within`` not positive, unknown weight or direction, neither or both
        of ``hub_xy`` and ``hub_nodes``.

    Notes
    -----
    Cost: one search per point of the smaller side, each stopped at
    ``within`` (O(m' + n' log n') for the n' nodes and m' arcs within reach),
    plus one full multi-source search for the nearest hub.  Memory: the
    pairs, the graph with the pruned access arcs, one batch of distance rows
    (at most 64 MB) and the access legs of at most ``_CHUNK`` points at a
    time.  Costs equal
    :func:`~geo_reach.analysis.routing.od_matrix` on the same attachments.

    References
    ----------
    .. [1] Dijkstra, E. W. (1959). A note on two problems in connexion with
       graphs. Numerische Mathematik 1, 269-271.

    Examples
    --------
    A chain of three 1-minute links; a settlement at node 0 and hubs at nodes 1 and 3:

    >>> t = trip_costs(_demo_chain(4), [[0.0, 0.0]], hub_nodes=[1, 3], within=2.5)
    >>> t.hub.tolist(), t.cost.tolist(), t.nearest_cost.tolist()
    ([0], [1.0], [1.0])
    """
    if direction not in DIRECTIONS:
        raise OptionError(f"unknown direction '{direction}'; choose one of {', '.join(DIRECTIONS)}")
    within = float(within)
    if not within > 0:
        raise OptionError(f"within {within:g}: give a positive bound (the weight's unit)")
    if (hub_xy is None) == (hub_nodes is None):
        raise OptionError("give the hubs either as points (hub_xy) or as network nodes (hub_nodes)")
    network.cost(weight)  # validates the weight
    if travel is not None:
        travel = travel.for_weight(weight)
        max_access_m, walk_kmh = travel.max_access_m, travel.walk_kmh
    to_hub = direction == "to-hub"
    s_role, h_role = ("leave", "arrive") if to_hub else ("arrive", "leave")
    s_xy = np.asarray(settlement_xy, dtype=np.float64).reshape(-1, 2)
    ns, nh = len(s_xy), (len(np.atleast_1d(hub_nodes)) if hub_nodes is not None else len(np.reshape(hub_xy, (-1, 2))))
    # the smaller side is attached whole; the larger one by chunks (attach, direct arcs, prune, drop the legs)
    # Settlements (always_join with the run's model) are priced by the settlements' exact rule: a trip of at
    # most T walks at most T / c at either end (c: the least cost of walking a metre), so offering every entry
    # that near, unpruned, finds every pair within T exactly (TravelModel.hub_trips, exact=True).
    exact = travel is not None and always_join and travel.least_walk_cost_per_m() > 0
    reach = within / travel.least_walk_cost_per_m() if exact and np.isfinite(within) else None
    if ns <= nh:
        settle = _side(network, s_xy, None, weight, s_role, max_access_m, walk_kmh, travel, always_join, reach)
        hubs, direct = _chunked(network, hub_xy, hub_nodes, weight, h_role, max_access_m, walk_kmh, settle,
                                big_is_start=not to_hub, travel=travel, reach_m=reach)
        settle = _prune(settle, network.csr(weight, reverse=not to_hub))
    else:
        hubs = _side(network, hub_xy, hub_nodes, weight, h_role, max_access_m, walk_kmh, travel, reach_m=reach)
        settle, direct = _chunked(network, s_xy, None, weight, s_role, max_access_m, walk_kmh, hubs,
                                  big_is_start=to_hub, travel=travel, always_join=always_join, reach_m=reach)
        hubs = _prune(hubs, network.csr(weight, reverse=to_hub))
    if travel is not None and hub_xy is not None:
        direct = _with_straight_walks(direct, travel, s_xy, np.asarray(hub_xy, np.float64).reshape(-1, 2),
                                      settle.attached, hubs.attached, to_hub)
    start, end = (settle, hubs) if to_hub else (hubs, settle)
    n = network.n_nodes
    s_rows = n + np.arange(start.n, dtype=np.int64)
    e_rows = n + start.n + np.arange(end.n, dtype=np.int64)
    graphs: dict = {}

    def graph(reverse):
        if reverse not in graphs:
            graphs[reverse] = _graph(network, weight, start, end, direct, reverse)
        return graphs[reverse]

    z = np.zeros(0, np.int64)
    si, hi, cost = z, z, np.zeros(0)
    if pairs and start.n and end.n:
        if start.n <= end.n:   # forward from each start point
            a, b, cost = _bounded_on(executor, graph(False), s_rows, e_rows, within)
        else:                  # backward from each end point
            b, a, cost = _bounded_on(executor, graph(True), e_rows, s_rows, within)
        si, hi = (a, b) if to_hub else (b, a)
        order = np.lexsort((hi, si))
        si, hi, cost = si[order], hi[order], cost[order]

    near_c = np.full(ns, np.nan)
    near_h = np.full(ns, -1, np.int64)
    priced_exactly = exact and nearest and hub_xy is not None and ns
    if nearest and not priced_exactly:   # else the exact rule below gives the nearest hub: search once
        near_c[:] = np.inf
        among = (np.arange(hubs.n, dtype=np.int64) if nearest_among is None
                 else np.unique(np.asarray(nearest_among, dtype=np.int64)))
        if len(among) and ns:
            # those hubs at once: backward from the ends (to-hub) or forward from the starts (from-hub)
            h_base, s_cols = (n + start.n, s_rows) if to_hub else (n, e_rows)
            dist, _, src = dijkstra(graph(to_hub), directed=True, indices=h_base + among, min_only=True,
                                    return_predecessors=True)
            near_c = dist[s_cols].astype(np.float64)
            src = src[s_cols]
            near_h = np.where((src >= 0) & np.isfinite(near_c), src - h_base, -1).astype(np.int64)
        use = np.isin(hi, among) if nearest_among is not None else np.ones(len(cost), bool)
        if use.any():
            # the pairs' own least cost wins, so the nearest hub and the pairs agree to the last bit
            ui, uh, uc = si[use], hi[use], cost[use]
            first = np.nonzero(np.r_[True, ui[1:] != ui[:-1]])[0]
            best = np.minimum.reduceat(uc, first)
            seg = np.repeat(np.arange(len(first)), np.diff(np.r_[first, len(uc)]))
            is_best = uc == best[seg]
            pick = np.full(len(first), -1, np.int64)
            pick[seg[is_best][::-1]] = uh[is_best][::-1]   # ties: the lowest hub index
            near_c[ui[first]] = best
            near_h[ui[first]] = pick
    if priced_exactly:
        # the nearest hub (unbounded) by the very function that prices the settlements layer: one trip, one number
        among = None if nearest_among is None else np.unique(np.asarray(nearest_among, dtype=np.int64))
        model = travel.for_direction(direction)
        places = model.attach(network, s_xy, roles=(s_role,), always_join=True)   # as the settlements layer
        trips = model.hub_trips(network, places, np.asarray(hub_xy, np.float64).reshape(-1, 2),
                                None if among is None else {"among": among}, exact=True)[None if among is None
                                                                                          else "among"]
        near_c = np.where(np.isfinite(trips.cost), trips.cost, np.inf).astype(np.float64)
        near_h = np.where(np.isfinite(trips.cost), trips.hub, -1).astype(np.int64)
    return TripCosts(si, hi, cost, ns, hubs.n, within, weight, direction, near_c, near_h,
                     settle.attached, hubs.attached, settle.access_m, hubs.access_m)


def _demo_chain(n: int):
    """A chain 0-1-...-(n-1) of 1 km, 1 minute two-way road links along y = 0 (for the doctests)."""
    import shapely
    from pyproj import CRS

    from ...network.model import Network

    x = np.arange(n) * 1000.0
    fr = np.arange(n - 1)
    geoms = shapely.linestrings(np.stack([np.column_stack([x[:-1], np.zeros(n - 1)]),
                                          np.column_stack([x[1:], np.zeros(n - 1)])], axis=1))
    m = n - 1
    return Network(crs=CRS.from_epsg(3857), node_x=x, node_y=np.zeros(n), node_entry=np.ones(n, bool),
                   edge_from=fr, edge_to=fr + 1, edge_geometry=np.asarray(geoms, dtype=object),
                   edge_length_m=np.full(m, 1000.0), edge_minutes=np.ones(m), edge_latency_ms=np.full(m, np.nan),
                   edge_oneway=np.zeros(m, bool), edge_mode=np.full(m, "road", object),
                   edge_src_layer=np.full(m, "demo", object), edge_src_fid=np.arange(m))
