"""Incremental updates: a changed network's nearest-hub forest from the baseline's, not from scratch.

Contract
--------
The changed network keeps the base network's ids ("id-stable"): nodes
``0..n0-1`` are the base nodes at the same positions and edges ``0..m0-1``
the base edges, each either unchanged, changed in place (cost, one-way or
ends) or closed (``NaN`` cost on the weight); new nodes and edges are
appended.  :func:`network_change` checks this and finds what changed (or
takes the changed edge ids from the caller, who knows them from the change
layers); :meth:`GraphChange.closing` describes a set of closed links.

:func:`update_forest` takes the baseline's :class:`~.forest.HubForest`
(per-node cost, hub, parent and the edge to it), the baseline's
:class:`~.graph.SearchGraph`, the change and the hub seeds on the changed
network, and returns the changed network's forest.  Costs and hubs are
identical to :func:`~.forest.grow_forest` on the changed network (the
full path, kept as the reference): costs bit for bit, hubs too (equal
costs go to the lowest hub index in both).  Parents may differ between
equally cheap routes.

How
---
1. *Closures and dearer links* (and removed or dearer hub legs - a node
   reached by a hub's leg keeps its value only if the same leg, entering
   the same edge, is still there and no dearer): a node
   whose step towards its hub is gone or dearer, and every node below it
   in the forest, lose their value; each of them is offered the best trip
   across the boundary of that set (links from nodes outside it, and hub
   legs), and a search bounded to the set settles them [1]_.  Nothing
   outside the set can change: its trips are untouched and nothing got
   cheaper.
2. *New or cheaper links and legs* (and new hubs): the end nodes of the new
   arcs and the nodes with new legs are offered their new value, and the
   search spreads the decreases from there only - it stops where nothing
   improves, so it touches only the places that gain [1]_ [2]_.

Both run as one search (the set of step 1 is seeded first; the search is
not bounded when step 2 offers anything).  Work is node settlements plus
arc and seed scans, in the same units as :attr:`HubForest.work`.

The hubs' walk legs come in as :class:`~.graph.Seeds` of the changed network
(attach the hubs to it as the full path does; for closures alone the
baseline's legs minus those entering closed links, see
:meth:`~.graph.Seeds.without_edges`).  Hub indices may change (hubs added or
removed): ``hub_map`` maps each base hub index to its new one (-1 =
removed); it must keep the order of the hubs that stay, so ties between
equally cheap hubs resolve the same way.

References
----------
.. [1] Ramalingam, G. and Reps, T. (1996). An incremental algorithm for a
   generalization of the shortest-path problem. Journal of Algorithms
   21(2), 267-305 (from memory).
.. [2] Dijkstra, E. W. (1959). A note on two problems in connexion with
   graphs. Numerische Mathematik 1, 269-271.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ...errors import OptionError
from . import _kernels as K
from .forest import HubForest
from .graph import SearchGraph, Seeds, csr_by, edge_arcs

__all__ = ["GraphChange", "network_change", "update_forest", "changed_seeds"]


@dataclass(frozen=True, eq=False)
class GraphChange:
    """What a change does to a :class:`~.graph.SearchGraph` (ids stable).

    Attributes
    ----------
    n_nodes, n_edges : int
        Sizes of the changed network (at least the base's).
    removed : ndarray of int64
        Base edges whose base arcs no longer hold (closed or changed).
    add_tail, add_head, add_cost, add_edge : ndarray
        Arcs of new and changed edges, in the search direction.
    """

    n_nodes: int
    n_edges: int
    removed: np.ndarray
    add_tail: np.ndarray
    add_head: np.ndarray
    add_cost: np.ndarray
    add_edge: np.ndarray

    @classmethod
    def closing(cls, graph: SearchGraph, edges) -> "GraphChange":
        """Close ``edges`` (base edge ids) and change nothing else."""
        edges = np.unique(np.asarray(edges, np.int64))
        if len(edges) and (edges.min() < 0 or edges.max() >= graph.n_edges):
            raise OptionError(f"edge id {int(edges[(edges < 0) | (edges >= graph.n_edges)][0])} is not in the "
                              f"network (edge ids run 0..{graph.n_edges - 1})")
        z = np.zeros(0, np.int64)
        return cls(graph.n_nodes, graph.n_edges, edges, z, z, np.zeros(0), z)

    def tables(self, graph: SearchGraph):
        """(closed_base, apush CSR, apull CSR) for the kernels (made once per change and graph)."""
        cache = self.__dict__.setdefault("_tables", {})
        if id(graph) not in cache:
            closed = np.zeros(graph.n_edges, np.bool_)
            closed[self.removed] = True
            apush = csr_by(self.add_tail, self.n_nodes, self.add_head, self.add_cost, self.add_edge)
            apull = csr_by(self.add_head, self.n_nodes, self.add_tail, self.add_cost, self.add_edge)
            cache[id(graph)] = (graph, closed, apush, apull)
        return cache[id(graph)][1:]


def network_change(base, new, weight: str, direction: str = "to-hub", edges=None) -> GraphChange:
    """The change from network ``base`` to the id-stable network ``new`` (see the module contract).

    Parameters
    ----------
    base, new : Network
    weight : str
    direction : {'to-hub', 'from-hub'}
    edges : array_like of int, optional
        The base edges the caller changed; when given, only they (and the
        appended edges) are compared, which saves a pass over every edge.

    Raises
    ------
    OptionError
        ``new`` is not id-stable with ``base`` (fewer nodes or edges, or a
        base node moved).
    """
    from .graph import check_direction

    reverse = check_direction(direction)
    n0, m0 = base.n_nodes, base.n_edges
    if new.n_nodes < n0 or new.n_edges < m0:
        raise OptionError("the changed network must keep every base node and edge id (append new ones, close "
                          "removed edges with a NaN cost)")
    if not (np.array_equal(new.node_x[:n0], base.node_x) and np.array_equal(new.node_y[:n0], base.node_y)):
        raise OptionError("the changed network moves base nodes; node ids must keep their positions")
    cb, cn = base.cost(weight), new.cost(weight)
    if edges is None:
        same_cost = (cb == cn[:m0]) | (np.isnan(cb) & np.isnan(cn[:m0]))
        diff = (~same_cost | (base.edge_from != new.edge_from[:m0]) | (base.edge_to != new.edge_to[:m0])
                | (base.edge_oneway != new.edge_oneway[:m0]))
        changed = np.nonzero(diff)[0]
    else:
        changed = np.unique(np.asarray(edges, np.int64))
        if len(changed) and (changed.min() < 0 or changed.max() >= m0):
            raise OptionError(f"changed edge {int(changed[(changed < 0) | (changed >= m0)][0])} is not a base edge "
                              f"(0..{m0 - 1}); appended edges need not be listed")
    eids = np.concatenate([changed, np.arange(m0, new.n_edges)]).astype(np.int64)
    tail, head, cost, edge = edge_arcs(eids, new.edge_from[eids], new.edge_to[eids],
                                       new.edge_oneway[eids].astype(bool), cn[eids], reverse)
    return GraphChange(new.n_nodes, new.n_edges, changed.astype(np.int64), tail, head, cost, edge)


def changed_seeds(old: Seeds, new: Seeds, hub_map=None) -> np.ndarray:
    """Which seeds of ``new`` are not in ``old`` as they are (same node, hub, edge and cost): bool mask.

    ``hub_map`` renumbers the old hubs (-1 = removed).
    """
    oh = old.hub if hub_map is None else np.asarray(hub_map, np.int64)[old.hub]
    return K.seeds_changed(new.ptr, new.hub, new.edge, new.cost, old.ptr, oh, old.edge, old.cost)


def update_forest(graph: SearchGraph, forest: HubForest, change: GraphChange, seeds: Seeds,
                  hub_map=None, old_seeds: Seeds | None = None) -> HubForest:
    """The forest of the changed network, repaired from the baseline's (see the module notes).

    Parameters
    ----------
    graph : SearchGraph
        The base network's arcs (the ones ``forest`` was grown on).
    forest : HubForest
        The base forest.
    change : GraphChange
        From :func:`network_change` or :meth:`GraphChange.closing`.
    seeds : Seeds
        The hubs' walk legs on the changed network (hub indices in the new
        numbering), over ``change.n_nodes`` nodes.
    hub_map : array_like of int, optional
        New index of each base hub (-1 = removed); the identity if not given.
    old_seeds : Seeds, optional
        The base forest's seeds: when given, only new or changed legs are
        offered (otherwise every leg is, which is correct but reads them all).

    Returns
    -------
    HubForest
        Over ``change.n_nodes`` nodes; ``work`` counts this update only.

    Raises
    ------
    OptionError
        ``hub_map`` reorders the hubs that stay, or the sizes disagree.
    """
    n0, n1 = graph.n_nodes, change.n_nodes
    if forest.n_nodes != n0 or len(seeds.ptr) != n1 + 1:
        raise OptionError("the forest, graph, change and seeds do not describe the same networks")
    lab0 = forest.hub
    if hub_map is not None:
        hub_map = np.asarray(hub_map, np.int64)
        kept = hub_map[hub_map >= 0]
        if np.any(np.diff(kept) <= 0):
            raise OptionError("hub_map must keep the order of the hubs that stay (ties between equally "
                              "cheap hubs go to the lowest index)")
        lab0 = np.where(lab0 >= 0, hub_map[np.maximum(lab0, 0)], -1)
    dist = np.full(n1, np.inf)
    dist[:n0] = forest.cost
    lab = np.full(n1, K.NO_HUB, np.int64)
    lab[:n0] = np.where(lab0 >= 0, lab0, K.NO_HUB)
    par = np.full(n1, -1, np.int64)
    par[:n0] = forest.parent
    via = np.full(n1, -1, np.int64)
    via[:n0] = forest.via

    closed_base, apush, apull = change.tables(graph)
    closed_new = np.zeros(max(change.n_edges, 1), np.bool_)

    # --- roots: steps that are gone or dearer
    roots = []
    if len(change.removed):
        vptr, vnodes = forest.nodes_by_via(graph.n_edges)
        ap_ptr, ap_tail, ap_cost, ap_edge = apull
        for e in change.removed:
            for v in vnodes[vptr[e]:vptr[e + 1]]:
                p = forest.parent[v]
                if p < 0:
                    continue   # a hub leg on e: judged with the seeds below
                j = np.arange(ap_ptr[v], ap_ptr[v + 1])
                ok = (ap_tail[j] == p) & (ap_edge[j] == e) & (dist[p] + ap_cost[j] <= dist[v])
                if not ok.any():
                    roots.append(v)
    sv = forest.seeded
    if len(sv):
        h = lab0[sv]
        # the leg the node came by (same hub, same entered edge) must still be there, no dearer
        there = K.seeds_still_there(sv, h, forest.via[sv], forest.cost[sv], seeds.ptr, seeds.hub, seeds.edge,
                                    seeds.cost) & (h >= 0)
        roots.extend(sv[~there].tolist())
    roots = np.unique(np.asarray(roots, np.int64))
    fresh = seeds.node if old_seeds is None else seeds.node[changed_seeds(old_seeds, seeds, hub_map)]
    offer_nodes = np.unique(np.concatenate([change.add_head, fresh])).astype(np.int64)
    cptr, kids = forest.children
    work, _ = K.update(n1, dist, lab, par, via, n0,
                       graph.push_ptr, graph.push_head, graph.push_cost, graph.push_edge,
                       graph.pull_ptr, graph.pull_tail, graph.pull_cost, graph.pull_edge,
                       *apush, *apull, seeds.ptr, seeds.hub, seeds.cost, seeds.edge,
                       closed_base, closed_new, roots, cptr, kids, offer_nodes)
    return HubForest(dist, np.where(lab >= K.NO_HUB, -1, lab).astype(np.int64), par, via, int(work))
