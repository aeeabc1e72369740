"""The arrays the criticality kernels search: arcs, hub seeds and people's legs.

A :class:`SearchGraph` holds the network's arcs for one weight in the
*search direction*: for trips to hubs (``to-hub``) every arc is reversed, so
one search from the hubs prices every node's trip to its nearest hub, as
:func:`geo_reach.analysis.routing.nearest_hub` does.  Every edge keeps its
own arcs (parallel links are not merged), so closing one link removes
exactly its arcs.  Self-loops are dropped (they never shorten a trip).

:class:`Seeds` are the hubs' walk legs (from
:func:`~geo_reach.analysis.attach.attach_points`, the same legs every other
view uses), and :class:`Places` the settlements' legs, people and direct
trips along a shared edge (a place and a hub on one edge may travel along
it without passing a node, as :func:`~geo_reach.analysis.routing.od_matrix`
allows).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np

from ...errors import OptionError
from ...network.weights import as_weight
from ..options import DIRECTIONS

__all__ = ["SearchGraph", "Seeds", "Places", "csr_by", "edge_arcs", "check_direction"]

def check_direction(direction: str) -> bool:
    """True when the search runs on reversed arcs (trips *to* hubs)."""
    if direction not in DIRECTIONS:
        raise OptionError(f"direction {direction!r} is not known; choose one of {', '.join(DIRECTIONS)}",
                          key="direction")
    return direction == "to-hub"


def check_weight(weight) -> str:
    """The weight's name (a :class:`~geo_reach.network.weights.Weight` or a name, validated once by it)."""
    return as_weight(weight).name


def csr_by(key, n: int, *cols):
    """Group rows by ``key`` (0..n-1, stable): returns ``ptr`` (n + 1,) and the columns reordered."""
    key = np.asarray(key, dtype=np.int64)
    order = np.argsort(key, kind="stable")
    ptr = np.zeros(n + 1, np.int64)
    if len(key):
        np.add.at(ptr, key + 1, 1)
    ptr = np.cumsum(ptr)
    return (ptr, *(np.ascontiguousarray(np.asarray(c)[order]) for c in cols))


def edge_arcs(edge_ids, frm, to, oneway, cost, reverse: bool):
    """Arcs of the given edges in the search direction: (tail, head, cost, edge).

    Edges with a NaN cost give no arc; a two-way edge gives two; self-loops none.
    """
    edge_ids = np.asarray(edge_ids, np.int64)
    ok = ~np.isnan(cost) & (frm != to)
    e, f, t, c, one = edge_ids[ok], frm[ok], to[ok], cost[ok], oneway[ok]
    two = ~one
    tail = np.concatenate([f, t[two]]).astype(np.int64)
    head = np.concatenate([t, f[two]]).astype(np.int64)
    if reverse:
        tail, head = head, tail
    return tail, head, np.concatenate([c, c[two]]).astype(np.float64), np.concatenate([e, e[two]]).astype(np.int64)


@dataclass(frozen=True, eq=False)
class SearchGraph:
    """A network's arcs for one weight, in the search direction, as two CSR tables.

    Attributes
    ----------
    weight : str
    direction : {'to-hub', 'from-hub'}
    n_nodes, n_edges : int
    push_ptr, push_head, push_cost, push_edge : ndarray
        Arcs leaving each node in the search direction (``push_ptr`` has
        ``n_nodes + 1`` entries); cost in the weight's unit; the edge id.
    pull_ptr, pull_tail, pull_cost, pull_edge : ndarray
        The same arcs grouped by the node they enter.
    """

    weight: str
    direction: str
    n_nodes: int
    n_edges: int
    push_ptr: np.ndarray
    push_head: np.ndarray
    push_cost: np.ndarray
    push_edge: np.ndarray
    pull_ptr: np.ndarray
    pull_tail: np.ndarray
    pull_cost: np.ndarray
    pull_edge: np.ndarray

    @classmethod
    def from_network(cls, network, weight: str = "minutes", direction: str = "to-hub") -> "SearchGraph":
        """Arcs of ``network`` usable on ``weight`` (edges with a NaN cost are left out)."""
        reverse = check_direction(direction)
        cost = network.cost(check_weight(weight))
        tail, head, c, e = edge_arcs(np.arange(network.n_edges), network.edge_from, network.edge_to,
                                     network.edge_oneway.astype(bool), cost, reverse)
        n = network.n_nodes
        # node and edge ids as int32 where they fit: half the memory the searches walk through
        it = np.int32 if max(n, network.n_edges) < 2**31 - 1 else np.int64
        push = csr_by(tail, n, head.astype(it), c, e.astype(it))
        pull = csr_by(head, n, tail.astype(it), c, e.astype(it))
        return cls(weight, direction, n, network.n_edges, *push, *pull)

    @property
    def n_arcs(self) -> int:
        return len(self.push_head)


@dataclass(frozen=True, eq=False)
class Seeds:
    """Hub walk legs onto the network, grouped by the node they reach.

    Attributes
    ----------
    ptr : ndarray of int64, shape (n_nodes + 1,)
    hub : ndarray of int64
        Hub index of each seed (the label every node it serves carries).
    cost : ndarray of float64
        Walk plus the share of the entered edge, in the weight's unit.
    edge : ndarray of int64
        The edge the leg enters part-way (-1 for a leg onto a node).
    """

    ptr: np.ndarray
    hub: np.ndarray
    cost: np.ndarray
    edge: np.ndarray

    @classmethod
    def from_attachment(cls, network, att, direction: str, hubs=None, hub_index=None) -> "Seeds":
        """Seeds of the attached points ``hubs`` (all if None), labelled ``hub_index[point]``.

        To-hub trips arrive at the hub (the leg runs network -> hub); from-hub
        trips leave it.
        """
        role = "arrive" if check_direction(direction) else "leave"
        point, node, cost, leg = att.arcs(network, role)
        if hubs is not None:
            keep = np.isin(point, np.asarray(hubs, np.int64))
            point, node, cost, leg = point[keep], node[keep], cost[keep], leg[keep]
        label = point if hub_index is None else np.asarray(hub_index, np.int64)[point]
        return cls.from_arrays(network.n_nodes, node, label, cost, att.leg_edge[leg])

    @classmethod
    def from_arrays(cls, n_nodes: int, node, hub, cost, edge) -> "Seeds":
        ptr, h, c, e = csr_by(np.asarray(node, np.int64), n_nodes, np.asarray(hub, np.int64),
                              np.asarray(cost, np.float64), np.asarray(edge, np.int64))
        return cls(ptr, h, c, e)

    @cached_property
    def node(self) -> np.ndarray:
        """The node each seed reaches."""
        return np.repeat(np.arange(len(self.ptr) - 1), np.diff(self.ptr))

    def without_edges(self, closed) -> "Seeds":
        """The seeds whose leg does not enter a closed edge (``closed``: bool per edge)."""
        closed = np.asarray(closed, bool)
        gone = (self.edge >= 0) & closed[np.maximum(self.edge, 0)]
        if not gone.any():
            return self
        keep = ~gone
        return Seeds.from_arrays(len(self.ptr) - 1, self.node[keep], self.hub[keep], self.cost[keep],
                                 self.edge[keep])


@dataclass(frozen=True, eq=False)
class Places:
    """Where people live (settlements), as the kernels see them.

    Attributes
    ----------
    people : ndarray of float64, shape (n_places,)
    leg_ptr, leg_node, leg_cost, leg_edge : ndarray
        Each place's walk legs (CSR over places): the network node, the walk
        plus the share of the entered edge, and that edge (-1: a node leg).
    node_ptr, node_place : ndarray
        Places with a leg at each node (CSR over nodes).
    edge_ptr, edge_place : ndarray
        Places with a leg on, or a direct trip along, each edge (CSR over edges).
    dir_ptr : ndarray of int64, shape (n_kinds, n_places + 1)
        Direct trips along a shared edge to a hub of each kind (rows = kinds).
    dir_cost, dir_edge : ndarray
    """

    people: np.ndarray
    leg_ptr: np.ndarray
    leg_node: np.ndarray
    leg_cost: np.ndarray
    leg_edge: np.ndarray
    node_ptr: np.ndarray
    node_place: np.ndarray
    edge_ptr: np.ndarray
    edge_place: np.ndarray
    dir_ptr: np.ndarray
    dir_cost: np.ndarray
    dir_edge: np.ndarray

    @property
    def n_places(self) -> int:
        return len(self.people)

    @classmethod
    def empty(cls, n_nodes: int, n_edges: int, n_kinds: int) -> "Places":
        z = np.zeros(0, np.int64)
        f = np.zeros(0)
        return cls(f, np.zeros(1, np.int64), z, f, z, np.zeros(n_nodes + 1, np.int64), z,
                   np.zeros(n_edges + 1, np.int64), z, np.zeros((n_kinds, 1), np.int64), f, z)

    @classmethod
    def from_attachment(cls, network, att, people, direction: str, hub_att, hub_kind, n_kinds: int,
                        walks=None) -> "Places":
        """Legs of the attached places ``att`` and their direct trips to the hubs of ``hub_att``.

        ``hub_kind[h]`` is the kind (0..n_kinds-1) of hub point ``h``.
        ``walks`` = (place, hub, cost) arrays: walks straight between a place
        and a hub off the network (from the travel model); no closure
        touches them (their edge is -1).
        """
        to_hub = check_direction(direction)
        role = "leave" if to_hub else "arrive"
        point, node, cost, leg = att.arcs(network, role)
        P = att.n_points
        n, m = network.n_nodes, network.n_edges
        ledge = att.leg_edge[leg]
        leg_ptr, leg_node, leg_cost, leg_edge = csr_by(point, P, node, cost, ledge)
        node_ptr, node_place = csr_by(node, n, point)
        # direct trips along one edge, place <-> hub, in the trip's direction
        dp, dh, dc, de = direct_trips(network, att, hub_att, to_hub)
        if walks is not None and len(walks[0]):
            wp, wh, wc = (np.asarray(a) for a in walks)
            dp = np.concatenate([dp, wp.astype(np.int64)])
            dh = np.concatenate([dh, wh.astype(np.int64)])
            dc = np.concatenate([dc, wc.astype(np.float64)])
            de = np.concatenate([de, np.full(len(wp), -1, np.int64)])
        kind = np.asarray(hub_kind, np.int64)[dh] if len(dh) else np.zeros(0, np.int64)
        # rows per kind: sort by (kind, place)
        order = np.lexsort((dp, kind))
        dp, dc, de, kind = dp[order], dc[order], de[order], kind[order]
        dir_ptr = np.zeros((n_kinds, P + 1), np.int64)
        for k in range(n_kinds):
            sel = kind == k
            start = int(np.searchsorted(kind, k, side="left"))
            counts = np.bincount(dp[sel], minlength=P)
            dir_ptr[k] = start + np.concatenate([[0], np.cumsum(counts)])
        on_edge = ledge >= 0
        ep = np.concatenate([point[on_edge], dp[de >= 0]])
        ee = np.concatenate([ledge[on_edge], de[de >= 0]])
        edge_ptr, edge_place = csr_by(ee, m, ep)
        return cls(np.asarray(people, np.float64), leg_ptr, leg_node, leg_cost, leg_edge, node_ptr, node_place,
                   edge_ptr, edge_place, dir_ptr, np.ascontiguousarray(dc, np.float64),
                   np.ascontiguousarray(de, np.int64))


def direct_trips(network, places, hubs, to_hub: bool):
    """Trips between a place and a hub along the one edge both legs enter, without passing a node.

    Returns (place, hub, cost, edge) arrays: the trip runs place -> hub
    (``to_hub``) or hub -> place, and a one-way edge allows it only forward
    (from its ``from_node`` towards its ``to_node``).  Cost = both walks +
    the share of the edge between the two entry points.
    """
    import pandas as pd

    pa = np.nonzero(places.leg_edge >= 0)[0]
    hb = np.nonzero(hubs.leg_edge >= 0)[0]
    z = np.zeros(0, np.int64)
    if not len(pa) or not len(hb):
        return z, z, np.zeros(0), z
    mrg = pd.DataFrame({"edge": places.leg_edge[pa], "lp": pa}).merge(
        pd.DataFrame({"edge": hubs.leg_edge[hb], "lh": hb}), on="edge")
    lp, lh = mrg["lp"].to_numpy(np.int64), mrg["lh"].to_numpy(np.int64)
    e = places.leg_edge[lp]
    c = network.cost(places.weight)[e]
    fp, fh = places.leg_fraction[lp], hubs.leg_fraction[lh]
    forward = (fh - fp) if to_hub else (fp - fh)
    ok = (forward >= 0) | ~network.edge_oneway[e]
    # each leg as the travel model priced it: the place walks out and the hub's leg is walked in (to-hub),
    # or the other way round (from-hub)
    if to_hub:
        walks = places.leg_leave_cost[lp] + hubs.leg_arrive_cost[lh]
    else:
        walks = hubs.leg_leave_cost[lh] + places.leg_arrive_cost[lp]
    cost = np.abs(fh - fp) * c + walks
    return (places.leg_point[lp][ok].astype(np.int64), hubs.leg_point[lh][ok].astype(np.int64),
            cost[ok].astype(np.float64), e[ok].astype(np.int64))
