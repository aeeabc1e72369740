"""Trips between places: one least-cost trip with its geometry, and origin-destination matrices.

Built on the routing engine (:mod:`.routing`); see there for the shared
parameter texts (weight, places, direction) and the "no path" convention
(``inf`` cost).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from typing import NamedTuple

from ..errors import OptionError
from ..network.model import Network
from ..network.weights import Weight, as_weight
from .attach import Attachment, DirectWalks
from .routing import _base, _check_direction, _entry_index, _search, _sources_graph, _tree_lengths, check_nodes

__all__ = ["Route", "ODMatrix", "HubTrips", "shortest_path", "od_matrix", "nearest_hub_trips"]


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
    cost = np.abs(df) * c + a.walk("leave")[la] + b.walk("arrive")[lb]
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


def shortest_path(network: Network, origin, destination, weight: Weight | str = "minutes", *,
                  direct: DirectWalks | None = None) -> Route:
    """The least-cost trip between two places, with its edges and geometry.

    Parameters
    ----------
    network : Network
    origin, destination : int or Attachment
        A node id, or an attachment of exactly one off-network point.
    weight : str, default 'minutes'
    direct : DirectWalks, optional
        The walk straight from the origin (0) to the destination (0), when
        the walk model offers one (see
        :meth:`~geo_reach.analysis.travel.TravelModel.direct`); taken when
        cheaper than any trip over the network.

    Returns
    -------
    Route
        ``cost`` is ``inf`` and ``geometry`` ``None`` when there is no path
        (different components, or a point left out by its attachment).

    Notes
    -----
    One Dijkstra run from the origin.  Several least-cost paths may tie;
    any one of them is returned.  Walks are drawn as straight lines.

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
    along = None   # a trip along the one edge both points join
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
                    best_cost, along = float(dc[k]), (int(la[k]), int(lb[k]))
    else:
        best_cost, end_node = float(dist[d]), d
    o_xy = o.point_xy[0] if isinstance(o, Attachment) else None
    d_xy = d.point_xy[0] if isinstance(d, Attachment) else None
    if direct is not None and len(direct.cost):
        k = int(np.argmin(direct.cost))
        if direct.cost[k] <= best_cost and o_xy is not None and d_xy is not None:
            walk = float(direct.walk_m[k])
            return Route(float(direct.cost[k]), walk, walk, np.zeros(0, np.int64), np.zeros(0, np.int64),
                         _line([o_xy, d_xy]))
    if not np.isfinite(best_cost):
        return Route(np.inf, np.inf, np.nan, np.zeros(0, np.int64), np.zeros(0, np.int64), None)

    if along is not None:
        la, lb = along
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


def od_matrix(network: Network, origins, destinations, weight: Weight | str = "minutes", *,
              batch: int | None = None, direct: DirectWalks | None = None) -> ODMatrix:
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
    direct : DirectWalks, optional
        Walks straight from an origin (``src``) to a destination (``dst``),
        from the walk model; each is taken where it is cheaper than the trip
        over the network (a place to itself: a walk of length 0, cost 0).

    Returns
    -------
    ODMatrix

    Notes
    -----
    One Dijkstra run per origin with predecessors; trip lengths follow the
    least-cost tree (ties between equal-cost trips go to the shorter
    arrival).  Points on the same edge may also travel directly along it.
    Without ``direct`` walks, a trip from a point to itself joins the network
    and walks its access leg out and back.
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
    if direct is not None and len(direct.cost):
        _apply_direct(cost, lmat, direct)
    lmat[~np.isfinite(cost)] = np.inf
    return ODMatrix(cost, lmat)


def _apply_direct(cost, lmat, direct: DirectWalks) -> None:
    """Take each direct walk where it is cheaper (in place; the cheapest walk per pair wins)."""
    src, dst, dc, dl = direct
    better = dc <= cost[src, dst]
    order = np.argsort(-dc[better], kind="stable")
    s, d, c, ln = src[better][order], dst[better][order], dc[better][order], dl[better][order]
    cost[s, d] = c
    lmat[s, d] = ln


# ====================================================================== places to their nearest hub
class HubTrips(NamedTuple):
    """Each place's trip to (or from) its nearest hub (from :func:`nearest_hub_trips`).

    Attributes
    ----------
    cost : ndarray of float64, shape (n_places,)
        In the weight's unit; ``inf`` where no hub is reachable.
    hub : ndarray of int64, shape (n_places,)
        Index of that hub in the given hubs; -1 where none.
    network_m : ndarray of float64, shape (n_places,)
        Metres of the trip on the network, partial edges at both ends
        included (0 for a walk straight to the hub); NaN where none.
    """

    cost: np.ndarray
    hub: np.ndarray
    network_m: np.ndarray


def nearest_hub_trips(network: Network, places: Attachment, hubs: Attachment, weight: Weight | str = "minutes",
                      direction: str = "to-hub", *, direct: DirectWalks | None = None) -> HubTrips:
    """Every place's cheapest trip to its nearest hub (or from it), for off-network places and hubs.

    Parameters
    ----------
    network : Network
    places, hubs : Attachment
        Both attached for ``weight`` (places leaving and hubs arrived at for
        ``to-hub``; the other way round for ``from-hub``).
    weight : Weight or str
    direction : {'to-hub', 'from-hub'}
    direct : DirectWalks, optional
        Walks straight between a place and a hub, in the trip's direction:
        ``src`` the place and ``dst`` the hub for ``to-hub``, ``src`` the hub
        and ``dst`` the place for ``from-hub``.

    Returns
    -------
    HubTrips

    Notes
    -----
    One multi-source search from all hubs (as :func:`~.routing.nearest_hub`),
    then each place takes the cheapest of: its legs onto the network plus
    the node's cost, a trip along the edge it shares with a hub, and a
    direct walk.  The same trip costs the same as :func:`shortest_path`
    between the place and that hub.  Ties go to the lower hub index.
    """
    weight = as_weight(weight)
    reverse = _check_direction(direction)
    for att, what in ((places, "places"), (hubs, "hubs")):
        if att.weight != weight:
            raise OptionError(f"{what} attached for weight '{att.weight}', not '{weight}'; attach them again")
    n_p = places.n_points
    hub_role, place_role = ("arrive", "leave") if reverse else ("leave", "arrive")
    g, rows = _sources_graph(network, hubs, weight, reverse, hub_role)
    dist, pred, origin = _search(g, np.unique(rows), min_only=True, predecessors=True)
    n = network.n_nodes
    node_cost = dist[:n]
    node_hub = np.where(origin[:n] >= n, origin[:n] - n, -1)
    node_len = _tree_lengths(g, network, pred[None, :], hubs, walk=False)[0][:n]
    # candidates: (place, hub, cost, network metres)
    arc = places.arc_detail(network, place_role)
    e = places.leg_edge[arc.leg]
    part = np.where(e >= 0, arc.share * network.edge_length_m[np.maximum(e, 0)], 0.0)
    cand = [(arc.point, node_hub[arc.node], arc.cost + node_cost[arc.node], part + node_len[arc.node])]
    a, b = (places, hubs) if reverse else (hubs, places)
    pa, pb, dc, la, lb = _same_edge(network, a, b)
    if len(dc):
        ln = np.abs(b.leg_fraction[lb] - a.leg_fraction[la]) * network.edge_length_m[a.leg_edge[la]]
        cand.append((pa, pb, dc, ln) if reverse else (pb, pa, dc, ln))
    if direct is not None and len(direct.cost):
        pl, hb = (direct.src, direct.dst) if reverse else (direct.dst, direct.src)
        cand.append((pl, hb, direct.cost, np.zeros(len(pl))))
    pt, hb, c, ln = (np.concatenate([x[i] for x in cand]) for i in range(4))
    ok = np.isfinite(c) & (hb >= 0)
    pt, hb, c, ln = pt[ok], hb[ok], c[ok], ln[ok]
    order = np.lexsort((ln, hb, c, pt))
    first = np.ones(len(order), bool)
    first[1:] = pt[order][1:] != pt[order][:-1]
    take = order[first]
    cost = np.full(n_p, np.inf)
    hub = np.full(n_p, -1, np.int64)
    net_m = np.full(n_p, np.nan)
    cost[pt[take]] = c[take]
    hub[pt[take]] = hb[take]
    net_m[pt[take]] = ln[take]
    return HubTrips(cost, hub, net_m)


