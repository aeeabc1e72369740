"""The forest of cheapest trips to the nearest hub, for every node (one set of hubs).

:func:`grow_forest` is one multi-source search from the hubs' walk legs
(the same model as :func:`geo_reach.analysis.routing.nearest_hub`); its
:class:`HubForest` records, for each node, the cost, the hub, the next node
on the trip (the *parent* in the search forest) and the edge between them.
The forest is what the criticality and incremental functions repair.

Ties between equally cheap hubs go to the lowest hub index, so the forest
is a function of the inputs alone (the search order never shows); the
parent between equally cheap routes may be either.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np

from . import _kernels as K
from .graph import SearchGraph, Seeds

__all__ = ["HubForest", "grow_forest"]


@dataclass(frozen=True, eq=False)
class HubForest:
    """Every node's cheapest trip to (or from) its nearest hub of one set.

    Attributes
    ----------
    cost : ndarray of float64, shape (n_nodes,)
        In the weight's unit; ``inf`` where no hub is reachable.
    hub : ndarray of int64, shape (n_nodes,)
        The hub's index (-1 where none); equal costs go to the lowest index.
    parent : ndarray of int64, shape (n_nodes,)
        The next node on the trip towards the hub (to-hub) or the previous
        one from it (from-hub); -1 where the node joins the hub by the
        hub's own walk leg, or reaches none.
    via : ndarray of int64, shape (n_nodes,)
        The edge of that step: the link to ``parent``, or the edge the hub's
        leg enters part-way; -1 for a leg onto a node, or none.
    work : int
        Node settlements plus arc and seed scans of the search that made it.
    """

    cost: np.ndarray
    hub: np.ndarray
    parent: np.ndarray
    via: np.ndarray
    work: int = 0

    @property
    def n_nodes(self) -> int:
        return len(self.cost)

    @cached_property
    def preorder(self):
        """(order, tin, size): the subtree of ``v`` is ``order[tin[v]:tin[v] + size[v]]``."""
        return K.preorder(self.parent, self.cost)

    @cached_property
    def children(self):
        """(ptr, kids): each node's children in the forest (CSR)."""
        return K.children(self.parent)

    def nodes_by_via(self, n_edges: int):
        """(ptr, nodes): for each edge, the nodes whose step (link or hub leg) uses it."""
        cache = self.__dict__.setdefault("_via_cache", {})
        if n_edges not in cache:
            ok = np.nonzero(self.via >= 0)[0]
            order = ok[np.argsort(self.via[ok], kind="stable")]
            ptr = np.zeros(n_edges + 1, np.int64)
            np.add.at(ptr, self.via[order] + 1, 1)
            cache[n_edges] = (np.cumsum(ptr), order.astype(np.int64))
        return cache[n_edges]

    @cached_property
    def seeded(self) -> np.ndarray:
        """Nodes reached straight from a hub's walk leg (the roots of the forest)."""
        return np.nonzero((self.parent < 0) & np.isfinite(self.cost))[0]


def _labels_out(lab):
    return np.where(lab >= K.NO_HUB, -1, lab).astype(np.int64)


def grow_forest(graph: SearchGraph, seeds: Seeds, closed=None) -> HubForest:
    """The full search: every node's cheapest trip to its nearest seeded hub.

    Parameters
    ----------
    graph : SearchGraph
    seeds : Seeds
        The hubs' walk legs (labels = hub indices).
    closed : ndarray of bool, shape (n_edges,), optional
        Edges to leave out (their arcs, and hub legs entering them).

    Returns
    -------
    HubForest

    Notes
    -----
    Dijkstra's algorithm [1]_ on pairs ``(cost, hub)`` from all seeds at
    once, O((n + m) log n), compiled.

    References
    ----------
    .. [1] Dijkstra, E. W. (1959). A note on two problems in connexion with
       graphs. Numerische Mathematik 1, 269-271.
    """
    if closed is None:
        closed = np.zeros(graph.n_edges, np.bool_)
    d, lab, par, via, work = K.full_search(graph.n_nodes, graph.push_ptr, graph.push_head, graph.push_cost,
                                           graph.push_edge, seeds.ptr, seeds.hub, seeds.cost, seeds.edge,
                                           np.ascontiguousarray(closed, np.bool_))
    return HubForest(d, _labels_out(lab), par, via, int(work))
