"""The one network type every analysis works on.

A :class:`Network` is a pair of tables held as numpy arrays: nodes (x, y in
the working CRS, ``entry`` flag) and edges (from node, to node, geometry,
``length_m``, ``minutes``, ``latency_ms``, ``oneway``, ``mode``, source layer
and feature id, plus any extra columns).  It is immutable once made; the
CSR adjacency per cost is built once and cached (:meth:`Network.csr`).

Conventions (the one validation choke point, as scipy.sparse.csgraph has):

* Node ids are the row numbers ``0 .. n_nodes-1``.  Edge ids are the row
  numbers ``0 .. n_edges-1``.
* An edge's geometry runs from ``from_node`` to ``to_node``.  A one-way edge
  (``oneway == 1``) may only be travelled in that direction.
* A cost of ``NaN`` means "this edge has no value for that weight" (a cable
  has no minutes): the edge is left out of routing on that weight.  A cost
  of zero is a real, free arc (scipy >= 1.11 keeps explicit zeros in CSR
  input as edges).  Negative costs are refused.
* Parallel arcs between the same ordered node pair are reduced to the
  cheapest; :meth:`Network.csr` also returns which edge each CSR entry came
  from, so paths map back to edge ids.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np
import pandas as pd
import scipy.sparse as sp
from pyproj import CRS

from ..errors import InputError
from .weights import Weight, as_weight

__all__ = ["Network", "Adjacency", "EDGE_FIELDS", "NODE_FIELDS", "JOINABLE", "OLD_NODE_FIELDS"]

#: Fields of the ``edges`` layer, in order (extra columns follow).
EDGE_FIELDS = ("edge_id", "from_node", "to_node", "mode", "length_m", "minutes",
               "latency_ms", "oneway", "src_layer", "src_fid")
#: The nodes layer's flag: 1 where a trip from off the network may join it at the node (the glossary's name).
JOINABLE = "joinable"
#: Fields of the ``nodes`` layer, in order.
NODE_FIELDS = ("node_id", "degree", "component", JOINABLE)
#: Node fields written under another name by earlier versions -> today's name (read compatibly, and
#: reported by :func:`geo_reach.network.io.read_network`).
OLD_NODE_FIELDS = {"entry": JOINABLE}


@dataclass(frozen=True)
class Adjacency:
    """A directed CSR adjacency for one weight.

    Attributes
    ----------
    matrix : scipy.sparse.csr_array, shape (n_nodes, n_nodes)
        ``matrix[i, j]`` is the cheapest arc cost from node i to node j.
    edge_of_entry : ndarray of int64, shape (nnz,)
        The edge id behind each stored entry of ``matrix`` (aligned with
        ``matrix.data``).
    excluded_edges : int
        Edges left out because they have no value for the weight.
    """

    matrix: sp.csr_array
    edge_of_entry: np.ndarray
    excluded_edges: int

    def edge_between(self, tail: np.ndarray, head: np.ndarray) -> np.ndarray:
        """Edge ids of the cheapest arcs ``tail[k] -> head[k]`` (-1 where none)."""
        m = self.matrix
        tail = np.asarray(tail, dtype=np.int64)
        head = np.asarray(head, dtype=np.int64)
        out = np.full(tail.shape, -1, dtype=np.int64)
        for k, (i, j) in enumerate(zip(tail, head)):
            lo, hi = m.indptr[i], m.indptr[i + 1]
            hit = np.nonzero(m.indices[lo:hi] == j)[0]
            if hit.size:
                out[k] = self.edge_of_entry[lo + hit[0]]
        return out


def _joinable(nodes) -> np.ndarray:
    """The nodes' joinable flag (under an earlier version's name if need be); all joinable when absent."""
    for name in (JOINABLE, *(old for old, new in OLD_NODE_FIELDS.items() if new == JOINABLE)):
        if name in nodes.columns:
            return nodes[name].to_numpy() == 1
    return np.ones(len(nodes), bool)


@dataclass(frozen=True, eq=False)
class Network:
    """A routable network in one metric working CRS.

    Parameters
    ----------
    crs : pyproj.CRS
        The working CRS (metric) of ``node_x``, ``node_y`` and the geometries.
    node_x, node_y : ndarray of float64, shape (n_nodes,)
        Node coordinates in the working CRS, metres.
    node_entry : ndarray of bool, shape (n_nodes,)
        Whether a trip from off the network may join it at this node (road
        nodes, rail stations, cable access nodes); the nodes layer's
        ``joinable`` field.
    edge_from, edge_to : ndarray of int64, shape (n_edges,)
    edge_geometry : ndarray of shapely LineString, shape (n_edges,)
        Oriented from ``edge_from`` to ``edge_to``; every source vertex kept.
    edge_length_m : ndarray of float64
        Geodesic length on the ellipsoid, metres.
    edge_minutes, edge_latency_ms : ndarray of float64
        Travel time and signal latency; ``NaN`` where the mode has none.
    edge_oneway : ndarray of bool
    edge_mode : ndarray of str (object)
        ``road``, ``rail``, ``cable`` or ``transfer``.
    edge_src_layer : ndarray of str (object)
    edge_src_fid : ndarray of int64
        The source feature id as the source format numbers it (-1 for links
        the builder made, such as transfers).
    extra : dict of str to ndarray
        Further per-edge columns (``level``, ``all_season``, ``class`` ...).
    edge_closed : ndarray of bool, optional
        Edges closed to traffic (a scenario's closures): kept with their
        geometry and length, but no cost on any weight (:meth:`cost` gives
        ``NaN``; ``minutes`` and ``latency_ms`` are ``NaN``).  ``None`` when
        nothing is closed.
    """

    crs: CRS
    node_x: np.ndarray
    node_y: np.ndarray
    node_entry: np.ndarray
    edge_from: np.ndarray
    edge_to: np.ndarray
    edge_geometry: np.ndarray
    edge_length_m: np.ndarray
    edge_minutes: np.ndarray
    edge_latency_ms: np.ndarray
    edge_oneway: np.ndarray
    edge_mode: np.ndarray
    edge_src_layer: np.ndarray
    edge_src_fid: np.ndarray
    extra: dict = field(default_factory=dict)
    edge_closed: np.ndarray | None = None

    def __post_init__(self):
        n, m = len(self.node_x), len(self.edge_from)
        for name in ("node_y", "node_entry"):
            if len(getattr(self, name)) != n:
                raise ValueError(f"{name} has {len(getattr(self, name))} rows, expected {n}")
        for name in ("edge_to", "edge_geometry", "edge_length_m", "edge_minutes", "edge_latency_ms",
                     "edge_oneway", "edge_mode", "edge_src_layer", "edge_src_fid"):
            if len(getattr(self, name)) != m:
                raise ValueError(f"{name} has {len(getattr(self, name))} rows, expected {m}")
        if self.edge_closed is not None and len(self.edge_closed) != m:
            raise ValueError(f"edge_closed has {len(self.edge_closed)} rows, expected {m}")
        if m and (self.edge_from.min() < 0 or self.edge_to.min() < 0
                  or self.edge_from.max() >= n or self.edge_to.max() >= n):
            raise ValueError("edge endpoints refer to nodes that do not exist")
        for name in ("edge_length_m", "edge_minutes", "edge_latency_ms"):
            a = getattr(self, name)
            if np.any(a < 0):
                bad = int(np.nonzero(a < 0)[0][0])
                raise InputError(f"edge {bad}: negative {name[5:]} ({a[bad]}); costs must be zero or more")

    # ------------------------------------------------------------------ sizes
    @property
    def n_nodes(self) -> int:
        return len(self.node_x)

    @property
    def n_edges(self) -> int:
        return len(self.edge_from)

    # ------------------------------------------------------------------ costs
    def edge_column(self, name: str) -> np.ndarray:
        """The per-edge cost column ``name`` (``minutes``, ``length_m`` or ``latency_ms``)."""
        return {"minutes": self.edge_minutes, "length_m": self.edge_length_m,
                "latency_ms": self.edge_latency_ms}[name]

    def cost(self, weight: Weight | str) -> np.ndarray:
        """Per-edge cost for ``weight`` (``NaN`` = not routable on it)."""
        return as_weight(weight).edge_cost(self)

    def arcs(self, weight: Weight | str, reverse: bool = False):
        """Directed arcs usable on ``weight``.

        Returns
        -------
        tail, head : ndarray of int64
        cost : ndarray of float64
        edge : ndarray of int64
            The edge each arc travels.
        With ``reverse=True`` every arc is flipped (for trips *to* a set of
        targets, solved as a search from the targets on the reversed graph).
        """
        c = self.cost(weight)
        ok = ~np.isnan(c)
        eid = np.nonzero(ok)[0]
        two = eid[~self.edge_oneway[eid]]
        tail = np.concatenate([self.edge_from[eid], self.edge_to[two]])
        head = np.concatenate([self.edge_to[eid], self.edge_from[two]])
        cost = np.concatenate([c[eid], c[two]])
        edge = np.concatenate([eid, two])
        if reverse:
            tail, head = head, tail
        return tail.astype(np.int64), head.astype(np.int64), cost.astype(np.float64), edge.astype(np.int64)

    def csr(self, weight: Weight | str = "minutes", reverse: bool = False) -> Adjacency:
        """The CSR adjacency for ``weight`` (cached; cheapest of parallel arcs)."""
        weight = as_weight(weight)
        key = (weight.name, bool(reverse))
        cache = self._csr_cache
        if key not in cache:
            tail, head, cost, edge = self.arcs(weight, reverse)
            n = self.n_nodes
            # Sort by (tail, head, cost) so the first of each (tail, head) run is the cheapest.
            order = np.lexsort((cost, head, tail))
            tail, head, cost, edge = tail[order], head[order], cost[order], edge[order]
            keep = np.ones(len(tail), dtype=bool)
            if len(tail) > 1:
                keep[1:] = (tail[1:] != tail[:-1]) | (head[1:] != head[:-1])
            tail, head, cost, edge = tail[keep], head[keep], cost[keep], edge[keep]
            indptr = np.zeros(n + 1, dtype=np.int64)
            np.add.at(indptr, tail + 1, 1)
            indptr = np.cumsum(indptr)
            mat = sp.csr_array((cost, head.astype(np.int32 if n < 2**31 else np.int64), indptr), shape=(n, n))
            excluded = int(np.isnan(self.cost(weight)).sum())
            cache[key] = Adjacency(mat, edge, excluded)
        return cache[key]

    @cached_property
    def _csr_cache(self) -> dict:
        return {}

    # ------------------------------------------------------------ structure
    @cached_property
    def degree(self) -> np.ndarray:
        """Number of edge ends at each node (a self-loop counts twice)."""
        return (np.bincount(self.edge_from, minlength=self.n_nodes)
                + np.bincount(self.edge_to, minlength=self.n_nodes)).astype(np.int64)

    @cached_property
    def component(self) -> np.ndarray:
        """Weakly connected component of each node: 0 = the largest, then by size.

        One-way direction is ignored, and so are missing costs: any edge joins
        its two nodes.  Ties in size are broken by the smallest node id.
        """
        from scipy.sparse.csgraph import connected_components

        n = self.n_nodes
        g = sp.csr_array((np.ones(self.n_edges), (self.edge_from, self.edge_to)), shape=(n, n))
        _, labels = connected_components(g, directed=True, connection="weak")
        sizes = np.bincount(labels)
        first = np.full(len(sizes), n, dtype=np.int64)
        np.minimum.at(first, labels, np.arange(n))
        rank = np.lexsort((first, -sizes))
        relabel = np.empty_like(rank)
        relabel[rank] = np.arange(len(rank))
        return relabel[labels].astype(np.int64)

    @property
    def n_components(self) -> int:
        return int(self.component.max()) + 1 if self.n_nodes else 0

    # ------------------------------------------------------------ tables
    def edges_frame(self):
        """The ``edges`` layer as a GeoDataFrame (fields :data:`EDGE_FIELDS` then extras)."""
        import geopandas as gpd

        data = {
            "edge_id": np.arange(self.n_edges, dtype=np.int64),
            "from_node": self.edge_from.astype(np.int64),
            "to_node": self.edge_to.astype(np.int64),
            "mode": self.edge_mode.astype(object),
            "length_m": self.edge_length_m,
            "minutes": self.edge_minutes,
            "latency_ms": self.edge_latency_ms,
            "oneway": self.edge_oneway.astype(np.int32),
            "src_layer": self.edge_src_layer.astype(object),
            "src_fid": self.edge_src_fid.astype(np.int64),
        }
        for k, v in self.extra.items():
            data[k] = v
        if self.edge_closed is not None:
            data["closed"] = self.edge_closed.astype(np.int32)
        return gpd.GeoDataFrame(pd.DataFrame(data), geometry=self.edge_geometry, crs=self.crs)

    def nodes_frame(self):
        """The ``nodes`` layer as a GeoDataFrame (fields :data:`NODE_FIELDS`)."""
        import geopandas as gpd
        import shapely

        data = pd.DataFrame({
            "node_id": np.arange(self.n_nodes, dtype=np.int64),
            "degree": self.degree,
            "component": self.component,
            JOINABLE: self.node_entry.astype(np.int32),
        })
        return gpd.GeoDataFrame(data, geometry=shapely.points(self.node_x, self.node_y), crs=self.crs)

    @classmethod
    def from_frames(cls, edges, nodes) -> "Network":
        """Make a network from ``edges`` and ``nodes`` GeoDataFrames (as written by the builder).

        Node ids may be any unique integers; they are mapped to row numbers in
        ``node_id`` order.  Missing optional fields get their defaults.
        """
        import shapely

        if "node_id" not in nodes.columns:
            raise InputError("layer 'nodes': field 'node_id' is missing; rebuild the network with geo-reach build")
        for f in ("from_node", "to_node"):
            if f not in edges.columns:
                raise InputError(f"layer 'edges': field '{f}' is missing; rebuild the network with geo-reach build")
        nodes = nodes.sort_values("node_id", kind="stable")
        ids = nodes["node_id"].to_numpy(np.int64)
        if len(np.unique(ids)) != len(ids):
            raise InputError("layer 'nodes': node_id values are not unique; rebuild the network")
        pos = np.searchsorted(ids, edges["from_node"].to_numpy(np.int64)), np.searchsorted(ids, edges["to_node"].to_numpy(np.int64))
        for p, f in zip(pos, ("from_node", "to_node")):
            vals = edges[f].to_numpy(np.int64)
            bad = (p >= len(ids)) | (ids[np.minimum(p, len(ids) - 1)] != vals)
            if bad.any():
                raise InputError(f"layer 'edges': {f} {vals[bad][0]} is not a node; rebuild the network")
        if not np.array_equal(ids, np.arange(len(ids))):
            raise InputError("layer 'nodes': node_id must run 0..n-1; rebuild the network with geo-reach build")

        def col(name, default, dtype=float):
            if name in edges.columns:
                return edges[name].to_numpy(dtype=dtype, na_value=np.nan) if dtype is float else edges[name].to_numpy()
            return np.full(len(edges), default, dtype=dtype if dtype is not float else np.float64)

        geom = np.asarray(edges.geometry.values, dtype=object)
        length = col("length_m", np.nan)
        xy = shapely.get_coordinates(nodes.geometry.values)
        known = set(EDGE_FIELDS) | {edges.geometry.name, "closed"}
        extra = {c: edges[c].to_numpy() for c in edges.columns if c not in known}
        mode = edges["mode"].astype(str).to_numpy(object) if "mode" in edges else np.full(len(edges), "road", object)
        return cls(
            crs=CRS.from_user_input(edges.crs) if edges.crs is not None else None,
            node_x=xy[:, 0].copy(), node_y=xy[:, 1].copy(),
            node_entry=_joinable(nodes),
            edge_from=pos[0].astype(np.int64), edge_to=pos[1].astype(np.int64),
            edge_geometry=geom,
            edge_length_m=length,
            edge_minutes=col("minutes", np.nan), edge_latency_ms=col("latency_ms", np.nan),
            edge_oneway=(edges["oneway"].fillna(0).to_numpy() == 1) if "oneway" in edges else np.zeros(len(edges), bool),
            edge_mode=mode,
            edge_src_layer=edges["src_layer"].astype(str).to_numpy(object) if "src_layer" in edges else np.full(len(edges), "", object),
            edge_src_fid=edges["src_fid"].fillna(-1).to_numpy(np.int64) if "src_fid" in edges else np.full(len(edges), -1, np.int64),
            extra=extra,
            edge_closed=(edges["closed"].fillna(0).to_numpy() == 1) if "closed" in edges else None,
        )
