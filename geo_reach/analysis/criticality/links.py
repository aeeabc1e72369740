"""Criticality of every link: who is cut off, and how much longer the others travel, if it closes.

For each link examined, with the link closed (its arcs gone, and every walk
leg entering it part-way gone):

``people_cut_off``
    people who reach a hub of some kind today and no hub of that kind with
    the link closed, summed over kinds (``people_cut_off_<kind>`` per kind,
    written when hub kinds are given);
``nodes_cut_off``
    nodes that reach some hub today and no hub at all with the link closed;
``person_<unit>_added``
    for those who still reach their kind of hub: people x added cost,
    summed over kinds (``person_minutes_added`` for minutes;
    ``person_m_added``, ``person_hops_added``, ``person_ms_added`` for the
    other weights);
``cut_edge``
    1 where removing the link splits the network into more connected parts
    (a bridge of the undirected network, all links counted, as
    :attr:`Network.component` counts them);
``rank``
    1 = most critical: by ``people_cut_off``, then the added cost, then the
    lower edge id.

People are the settlements' population, each joined by its walk legs; with
no settlements every node stands in for one person.  The measures follow
the importance of a link as Jenelius, Petersen and Mattsson define it (the
consequence of its closure, for the users it serves) [1]_, and the network
robustness index of Scott et al. (the increase in total travel cost when a
link is lost) [2]_; here the cost is each person's trip to their nearest
hub of each kind, and those cut off are counted apart rather than given an
arbitrary penalty cost.

Algorithm
---------
One search per hub kind builds the forest of cheapest trips to the nearest
hub (:func:`~.forest.grow_forest`).  Closing a link changes costs only for
the nodes whose trip uses it - the subtree below it in that forest (a hub's
leg entering the link part-way counts as the link) - so a link outside the
forest costs nothing.  For each link the subtree is read off the forest's
preorder (a contiguous run), each of its nodes is offered its best trip
across the subtree's boundary, and a Dijkstra search bounded to the
subtree finishes it [3]_ [4]_; then the subtree is restored.  Settlements
are re-priced only where a leg reaches the subtree or enters the closed
link.  The work (node settlements plus arc and seed scans) is the sum of
the subtrees' sizes and degrees, reported as equivalent full searches.
Links are taken in the preorder of the deepest forest (nested subtrees
follow each other, so the memory a repair reads is mostly still in the
cache), split into chunks of about equal work and run through
:mod:`geo_reach.parallel` (in-process or on a dask.distributed cluster),
with the same results either way.

Results are model estimates; local surveys, codes and licensed professional
practice decide.

References
----------
.. [1] Jenelius, E., Petersen, T. and Mattsson, L.-G. (2006). Importance
   and exposure in road network vulnerability analysis. Transportation
   Research Part A 40(7), 537-560.
.. [2] Scott, D. M., Novak, D. C., Aultman-Hall, L. and Guo, F. (2006).
   Network Robustness Index: a new method for identifying critical links
   and evaluating the performance of transportation networks. Journal of
   Transport Geography 14(3), 215-227.
.. [3] Ramalingam, G. and Reps, T. (1996). An incremental algorithm for a
   generalization of the shortest-path problem. Journal of Algorithms
   21(2), 267-305 (from memory).
.. [4] Dijkstra, E. W. (1959). A note on two problems in connexion with
   graphs. Numerische Mathematik 1, 269-271.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ...errors import InputError
from . import _kernels as K
from .forest import grow_forest

__all__ = ["LinkCriticality", "link_criticality", "added_field", "check_links", "read_link_ids", "UnknownLinkError"]

#: The field of people x added cost, per weight (units in the name).
ADDED_FIELD = {"minutes": "person_minutes_added", "length_m": "person_m_added", "hops": "person_hops_added",
               "latency_ms": "person_ms_added"}


class UnknownLinkError(InputError):
    """A link id that is not an edge of the network."""


def added_field(weight: str) -> str:
    """``person_minutes_added`` and its siblings for the other weights."""
    return ADDED_FIELD[weight]


def check_links(network, links, what: str = "link") -> np.ndarray:
    """Validate edge ids (whole numbers 0..n_edges-1); duplicates kept once, in first order.

    Raises
    ------
    UnknownLinkError
        An id is not a whole number or not an edge; the message names it.
    """
    vals = list(links)
    out = []
    for v in vals:
        try:
            f = float(v)
            ok = np.isfinite(f) and f == int(f)
        except (TypeError, ValueError):
            ok = False
        if not ok:
            raise UnknownLinkError(f"{what} id {v!r} is not a whole number; give edge_id values of the edges layer")
        i = int(f)
        if i < 0 or i >= network.n_edges:
            raise UnknownLinkError(f"{what} id {i} is not in the network (edge ids run 0..{network.n_edges - 1}); "
                                   "give edge_id values of the edges layer")
        out.append(i)
    arr = np.asarray(out, np.int64)
    _, first = np.unique(arr, return_index=True)
    return arr[np.sort(first)]


def read_link_ids(path, network) -> np.ndarray:
    """The edge ids in a file: one per line (or separated by commas, semicolons, spaces), or a CSV with an
    ``edge_id`` column; each checked as :func:`check_links` does.

    Raises
    ------
    InputError
        The file holds no ids, or names ``edge_id`` without such a column.
    UnknownLinkError
        An id is not an edge (the message names the file and the id).
    """
    import re
    from pathlib import Path

    from ...errors import where

    path = Path(path)
    raw = path.read_text(errors="replace")
    first = raw.lstrip().splitlines()[0] if raw.strip() else ""
    if "edge_id" in first:
        frame = pd.read_csv(path)
        if "edge_id" not in frame.columns:
            raise InputError(f"{where(path)}the header mentions edge_id but no column is named exactly "
                             "'edge_id'; name the column edge_id")
        tokens = frame["edge_id"].tolist()
    else:
        tokens = [t for t in re.split(r"[\s,;]+", raw) if t]
    if not tokens:
        raise InputError(f"{where(path)}holds no link ids; give edge ids, one per line")
    try:
        return check_links(network, tokens)
    except UnknownLinkError as err:
        raise UnknownLinkError(f"{where(path)}{err}") from err


@dataclass
class LinkCriticality:
    """Result of :func:`link_criticality`.

    Attributes
    ----------
    table : pandas.DataFrame
        One row per link examined, in ``rank`` order: ``edge_id``,
        ``people_cut_off``, ``people_cut_off_<kind>`` (when kinds are
        given), ``nodes_cut_off``, ``person_<unit>_added``, ``cut_edge``,
        ``rank``.
    work : dict
        ``full_searches``: the work of the method (baseline forests and
        repairs) in equivalent full nearest-hub searches;
        ``naive_full_searches``: what closing each link and searching again
        would take (one search per link and kind); ``links``; ``kinds``;
        ``ops``: the raw count (node settlements plus arc and seed scans).
    notes : list of str
    """

    table: pd.DataFrame
    work: dict
    notes: list = field(default_factory=list)

    def frame(self, network):
        """The ``link_criticality`` layer: the table with each link's line (working CRS)."""
        import geopandas as gpd

        return gpd.GeoDataFrame(self.table.copy(), geometry=network.edge_geometry[self.table["edge_id"].to_numpy()],
                                crs=network.crs)

    def top(self, n: int = 20) -> list:
        """The ``n`` most critical links as dicts (rank order)."""
        return self.table.head(n).to_dict(orient="records")


#: Argument order of :func:`_kernels.link_chunk` after ``links`` (keys of :func:`kernel_arrays`).
_ARGS = ("n", "m", "push_ptr", "push_head", "push_cost", "push_edge", "pull_ptr", "pull_tail", "pull_cost",
         "pull_edge", "seed_ptr", "seed_hub", "seed_cost", "seed_edge", "d0", "l0", "order", "tin", "size", "lo", "hi",
         "via_ptr", "via_nodes", "people", "reached", "leg_ptr", "leg_node", "leg_cost", "leg_edge",
         "node_p_ptr", "node_p", "edge_p_ptr", "edge_p", "dir_ptr", "dir_cost", "dir_edge", "p_cost0", "p_people")


def kernel_arrays(trips) -> dict:
    """Everything :func:`_kernels.link_chunk` reads, as a dict of arrays (what is scattered to workers)."""
    g = trips.graph
    net = trips.network
    n, m = g.n_nodes, net.n_edges
    nk = len(trips.kinds)
    offs = np.cumsum([0] + [len(s.hub) for s in trips.seeds])
    seed_ptr = np.stack([s.ptr + offs[k] for k, s in enumerate(trips.seeds)])
    cat = (lambda a, dt: np.ascontiguousarray(np.concatenate(a) if a else np.zeros(0), dt))
    it = np.int32 if n < 2**31 - 1 else np.int64     # half the memory the repairs walk through
    order = np.full((nk, n), -1, it)
    tin = np.empty((nk, n), it)
    size = np.empty((nk, n), it)
    lo = np.empty((nk, n), it)
    hi = np.empty((nk, n), it)
    via_ptr = np.empty((nk, m + 1), np.int64)
    via_nodes = np.full((nk, n), -1, it)
    for k, f in enumerate(trips.forests):
        o, t, s = f.preorder
        order[k, :len(o)] = o
        tin[k] = t
        size[k] = s
        lo[k], hi[k] = K.in_span(t, f.cost, g.pull_ptr, g.pull_tail)
        vp, vn = f.nodes_by_via(m)
        via_ptr[k] = vp
        via_nodes[k, :len(vn)] = vn
    d0 = np.stack([f.cost for f in trips.forests])
    l0 = np.stack([np.where(f.hub < 0, K.NO_HUB, f.hub) for f in trips.forests]).astype(np.int64)
    pl = trips.places
    has = trips.has_places
    return {
        "n": n, "m": m,
        "push_ptr": g.push_ptr, "push_head": g.push_head, "push_cost": g.push_cost, "push_edge": g.push_edge,
        "pull_ptr": g.pull_ptr, "pull_tail": g.pull_tail, "pull_cost": g.pull_cost, "pull_edge": g.pull_edge,
        "seed_ptr": np.ascontiguousarray(seed_ptr, np.int64),
        "seed_hub": cat([s.hub for s in trips.seeds], np.int64),
        "seed_cost": cat([s.cost for s in trips.seeds], np.float64),
        "seed_edge": cat([s.edge for s in trips.seeds], np.int64),
        "d0": np.ascontiguousarray(d0), "l0": l0, "order": order, "tin": tin, "size": size, "lo": lo, "hi": hi,
        "via_ptr": via_ptr, "via_nodes": via_nodes,
        "people": np.zeros(n) if has else np.ascontiguousarray(trips.people, np.float64),
        "reached": np.isfinite(d0).sum(axis=0).astype(np.int64),
        "leg_ptr": pl.leg_ptr, "leg_node": pl.leg_node, "leg_cost": pl.leg_cost, "leg_edge": pl.leg_edge,
        "node_p_ptr": pl.node_ptr, "node_p": pl.node_place, "edge_p_ptr": pl.edge_ptr, "edge_p": pl.edge_place,
        "dir_ptr": np.ascontiguousarray(pl.dir_ptr, np.int64), "dir_cost": pl.dir_cost, "dir_edge": pl.dir_edge,
        "p_cost0": np.ascontiguousarray(trips.place_cost if has else np.zeros((nk, 0))),
        "p_people": np.ascontiguousarray(trips.people if has else np.zeros(0), np.float64),
    }


def link_task(chunk, shared: dict):
    """One chunk of links through the compiled kernel (the unit of work sent to workers)."""
    return K.link_chunk(np.ascontiguousarray(chunk, np.int64), *(shared[a] for a in _ARGS))


def _estimate(trips, shared) -> np.ndarray:
    """Expected work per edge: the subtree sizes below it, per kind, plus its places."""
    m = shared["m"]
    est = np.ones(m)
    for k, f in enumerate(trips.forests):
        ok = f.via >= 0
        est += np.bincount(f.via[ok], weights=shared["size"][k][ok], minlength=m)[:m]
    est += np.diff(shared["edge_p_ptr"]) if len(shared["p_people"]) else 0.0
    return est


def _locality_order(trips, shared, links) -> np.ndarray:
    """An order of ``links`` in which consecutive closures repair overlapping subtrees (cache-friendly).

    Links are sorted by the preorder position, in the deepest forest (the kind with the most repair
    work), of the node whose step they carry; nested subtrees along one path then follow each other.
    Links that carry no step of that forest come last, by id.  Results do not depend on the order.
    """
    nk = len(trips.forests)
    if not nk or not len(links):
        return np.arange(len(links))
    m = shared["m"]
    work = []
    for k, f in enumerate(trips.forests):
        ok = f.via >= 0
        work.append(float(shared["size"][k][ok].sum()))
    k = int(np.argmax(work))
    f = trips.forests[k]
    key = np.full(m, np.iinfo(np.int64).max, np.int64)
    ok = f.via >= 0
    key[f.via[ok]] = shared["tin"][k][ok]
    return np.lexsort((links, key[links]))


def link_criticality(trips, links=None, *, executor=None, chunks: int = 64, method: str = "repair",
                     progress=None) -> LinkCriticality:
    """Close each link in turn and measure the loss (see the module notes).

    Parameters
    ----------
    trips : HubTrips
        The baseline (hubs, people, forests).
    links : array_like of int, optional
        Edge ids to examine (default: every edge).
    executor : geo_reach.parallel.Executor, optional
        Where the chunks run (default: in-process).
    chunks : int, default 64
        Number of chunks of about equal work (the same in-process and on a
        cluster, so the results are the same to the last bit).
    method : {'repair', 'full'}, default 'repair'
        ``full`` closes each link and grows every forest again from scratch
        (the slow reference).
    progress : callable, optional
        ``progress(done, total)`` after each chunk.

    Returns
    -------
    LinkCriticality

    Raises
    ------
    UnknownLinkError
        A link id is not an edge of the network.
    """
    from ...parallel import InProcess, balanced_chunks
    from ..regions import bridges

    net = trips.network
    links = np.arange(net.n_edges, dtype=np.int64) if links is None else check_links(net, links)
    nk = len(trips.kinds)
    L = len(links)
    unit = max(1.0, float(np.mean([f.work for f in trips.forests]))) if nk else 1.0
    base_ops = int(sum(f.work for f in trips.forests))
    if method == "full":
        cut, added, nodes_cut, ops = _full_method(trips, links)
    elif method == "repair":
        shared = kernel_arrays(trips)
        est = _estimate(trips, shared)
        order = _locality_order(trips, shared, links)
        parts = balanced_chunks(links[order], est[links[order]], chunks) if L else []
        ex = executor if executor is not None else InProcess()
        res = ex.map(link_task, parts, shared, progress=progress)
        if res:
            back = np.empty(L, np.int64)
            back[order] = np.arange(L)
            cut = np.concatenate([r[0] for r in res])[back]
            added = np.concatenate([r[1] for r in res])[back]
            nodes_cut = np.concatenate([r[2] for r in res])[back]
            ops = int(sum(int(r[3]) for r in res))
        else:
            cut, added, nodes_cut, ops = np.zeros((0, nk)), np.zeros((0, nk)), np.zeros(0, np.int64), 0
    else:
        raise ValueError(f"unknown method {method!r}")
    is_bridge = bridges(net.n_nodes, net.edge_from, net.edge_to)
    table = {"edge_id": links, "people_cut_off": cut.sum(axis=1) if nk else np.zeros(L)}
    if trips.has_kinds:
        for k, name in enumerate(trips.kinds):
            table[f"people_cut_off_{name}"] = cut[:, k]
    table["nodes_cut_off"] = nodes_cut.astype(np.int64)
    af = added_field(trips.weight)
    table[af] = added.sum(axis=1) if nk else np.zeros(L)
    table["cut_edge"] = is_bridge[links].astype(np.int32)
    df = pd.DataFrame(table)
    order = np.lexsort((df["edge_id"].to_numpy(), -df[af].to_numpy(), -df["people_cut_off"].to_numpy()))
    df = df.iloc[order].reset_index(drop=True)
    df["rank"] = np.arange(1, L + 1, dtype=np.int64)
    work = {"full_searches": (base_ops + ops) / unit, "naive_full_searches": L * nk, "links": L, "kinds": nk,
            "ops": base_ops + ops, "ops_per_full_search": unit}
    notes = []
    unreached = int(np.sum(~np.isfinite(trips.place_cost).any(axis=0))) if trips.place_cost.size else 0
    if unreached:
        notes.append(f"{unreached} of {trips.place_cost.shape[1]} {'settlements' if trips.has_places else 'nodes'} "
                     "reach no hub today; closing a link cannot cut them off")
    return LinkCriticality(df, work, notes)


def _full_method(trips, links):
    """The slow reference: for each link, grow every forest again with the link closed."""
    net = trips.network
    nk = len(trips.kinds)
    L = len(links)
    cut = np.zeros((L, nk))
    added = np.zeros((L, nk))
    nodes_cut = np.zeros(L, np.int64)
    ops = 0
    base_nodes = np.stack([f.cost for f in trips.forests])
    reached_any = np.isfinite(base_nodes).any(axis=0)
    for i, e in enumerate(links):
        closed = np.zeros(net.n_edges, np.bool_)
        closed[e] = True
        forests = []
        for s in trips.seeds:
            f = grow_forest(trips.graph, s, closed)
            forests.append(f)
            ops += f.work
        after = trips._place_costs(forests, closed)
        before = trips.place_cost
        for k in range(nk):
            was = np.isfinite(before[k])
            lost = was & ~np.isfinite(after[k])
            cut[i, k] = trips.people[lost].sum()
            kept = was & ~lost
            added[i, k] = (trips.people[kept] * (after[k][kept] - before[k][kept])).sum()
        now_nodes = np.stack([f.cost for f in forests])
        nodes_cut[i] = int((reached_any & ~np.isfinite(now_nodes).any(axis=0)).sum())
    return cut, added, nodes_cut, ops
