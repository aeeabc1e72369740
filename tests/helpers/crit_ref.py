"""Brute-force references for the criticality and incremental tests: networkx, from scratch.

Everything is priced here on its own: the network's arcs (one-way links,
parallel links reduced to the cheapest, missing costs left out), each walk
leg (walk at the given speed plus the share of the entered edge, written out
below rather than taken from the library), the straight walk between a place
and a hub within the access distance, and the direct trips of two
points on one edge.  Per hub kind one networkx Dijkstra runs from a sink
joined to the kind's hubs by free arcs (common practice: several sources
are one super-source; Cormen, Leiserson, Rivest and Stein (2009),
Introduction to Algorithms, 3rd ed., ch. 24, from memory), on the reversed
graph for trips *to* hubs.

networkx: Hagberg, A., Schult, D. and Swart, P. (2008). Exploring network
structure, dynamics, and function using NetworkX. Proc. SciPy 2008.
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import pandas as pd


def walk(metres, weight, kmh):
    """Off-network leg cost: minutes at ``kmh``, metres for length_m, nothing for hops/latency."""
    if weight == "minutes":
        return metres / (kmh * 1000.0 / 60.0)
    if weight == "length_m":
        return metres
    return 0.0


def edge_cost(net, weight):
    if weight == "hops":
        return np.ones(net.n_edges)
    return {"minutes": net.edge_minutes, "length_m": net.edge_length_m, "latency_ms": net.edge_latency_ms}[weight]


def leg_arcs(net, att, role, weight):
    """(point, node, cost, edge) per usable arc of each leg; ``leave``: point -> node, ``arrive``: node -> point.

    ``edge`` is the edge the leg enters part-way (-1 for a leg onto a node)."""
    c = edge_cost(net, weight)
    out = []
    for i in range(len(att.leg_point)):
        p, e = int(att.leg_point[i]), int(att.leg_edge[i])
        w = walk(float(att.leg_walk_m[i]), weight, att.walk_kmh)
        if e < 0:
            out.append((p, int(att.leg_node[i]), w, -1))
            continue
        f, one = float(att.leg_fraction[i]), bool(net.edge_oneway[e])
        a, b = int(net.edge_from[e]), int(net.edge_to[e])
        if role == "leave":      # along the edge to its to-node always; back to the from-node if two-way
            out.append((p, b, w + (1.0 - f) * c[e], e))
            if not one or f == 0.0:
                out.append((p, a, w + f * c[e], e))
        else:                    # arriving: from the from-node always; from the to-node if two-way
            out.append((p, a, w + f * c[e], e))
            if not one or f == 1.0:
                out.append((p, b, w + (1.0 - f) * c[e], e))
    return out


def direct(net, src, dst, weight):
    """Trips src point -> dst point along an edge both enter (no node passed): (s, d, cost, edge)."""
    c = edge_cost(net, weight)
    out = []
    for i in range(len(src.leg_point)):
        e = int(src.leg_edge[i])
        if e < 0:
            continue
        for j in np.nonzero(dst.leg_edge == e)[0]:
            df = float(dst.leg_fraction[j] - src.leg_fraction[i])
            if df < 0 and net.edge_oneway[e]:
                continue
            out.append((int(src.leg_point[i]), int(dst.leg_point[j]),
                        abs(df) * c[e] + walk(float(src.leg_walk_m[i]), weight, src.walk_kmh)
                        + walk(float(dst.leg_walk_m[j]), weight, dst.walk_kmh), e))
    return out


def _add(g, u, v, w):
    if u == v:
        return
    if not g.has_edge(u, v) or g[u][v]["w"] > w:
        g.add_edge(u, v, w=float(w))


def network_graph(net, weight, closed=frozenset()):
    c = edge_cost(net, weight)
    g = nx.DiGraph()
    g.add_nodes_from(range(net.n_nodes))
    for e in range(net.n_edges):
        if e in closed or np.isnan(c[e]):
            continue
        a, b = int(net.edge_from[e]), int(net.edge_to[e])
        _add(g, a, b, c[e])
        if not net.edge_oneway[e]:
            _add(g, b, a, c[e])
    return g


def point_arcs(net, weight, direction, hub_att, place_att=None):
    """Every hub and place arc, priced once: (hub arcs, place arcs, direct trips), each with its edge."""
    to_hub = direction == "to-hub"
    hub_role, place_role = ("arrive", "leave") if to_hub else ("leave", "arrive")
    harcs = leg_arcs(net, hub_att, hub_role, weight)
    if place_att is None:
        return harcs, [], []
    parcs = leg_arcs(net, place_att, place_role, weight)
    pdir = direct(net, place_att, hub_att, weight) if to_hub else direct(net, hub_att, place_att, weight)
    # a place and a hub within the largest access distance may walk straight to each other, off the
    # network (no link closure touches such a walk: edge -1); where walking is free (hops, latency) only a
    # place standing on the hub does
    reach = place_att.max_access_m if weight in ("minutes", "length_m") else 0.0
    for i, (px, py) in enumerate(place_att.point_xy):
        for j, (hx, hy) in enumerate(hub_att.point_xy):
            d = float(np.hypot(hx - px, hy - py))
            if d <= reach + 1e-9:
                pdir.append((i, j, walk(d, weight, place_att.walk_kmh), -1) if to_hub
                            else (j, i, walk(d, weight, place_att.walk_kmh), -1))
    return harcs, parcs, pdir


def costs(net, weight, direction, hub_att, hub_kind, n_kinds, place_att=None, closed=frozenset(), arcs=None):
    """Per kind: cost of every node and every place (inf = no hub of that kind), links in ``closed`` shut.

    ``hub_kind[i]``: the kind (0..n_kinds-1) of hub point ``i``.  Legs and direct trips entering a
    closed link are gone.  ``arcs``: :func:`point_arcs` when already priced.
    """
    closed = frozenset(int(e) for e in closed)
    to_hub = direction == "to-hub"
    base = network_graph(net, weight, closed)
    harcs, parcs, pdir = arcs if arcs is not None else point_arcs(net, weight, direction, hub_att, place_att)
    P = place_att.n_points if place_att is not None else 0
    node_cost = np.full((n_kinds, net.n_nodes), np.inf)
    place_cost = np.full((n_kinds, P), np.inf)
    for p, node, w, e in parcs:
        if e not in closed:
            _add(base, ("p", p), node, w) if to_hub else _add(base, node, ("p", p), w)
    for k in range(n_kinds):
        g = base.copy()
        for p, node, w, e in harcs:
            if hub_kind[p] != k or e in closed:
                continue
            if to_hub:
                _add(g, node, ("h", p), w)
                _add(g, ("h", p), "T", 0.0)
            else:
                _add(g, ("h", p), node, w)
                _add(g, "T", ("h", p), 0.0)
        for a, b, w, e in pdir:
            if e in closed:
                continue
            if to_hub and hub_kind[b] == k:
                _add(g, ("p", a), ("h", b), w)
                _add(g, ("h", b), "T", 0.0)
            elif not to_hub and hub_kind[a] == k:
                _add(g, ("h", a), ("p", b), w)
                _add(g, "T", ("h", a), 0.0)
        if "T" not in g:
            continue
        dist = nx.single_source_dijkstra_path_length(g.reverse(copy=False) if to_hub else g, "T", weight="w")
        for v, d in dist.items():
            if isinstance(v, (int, np.integer)):
                node_cost[k, v] = d
            elif v[0] == "p":
                place_cost[k, v[1]] = d
    return node_cost, place_cost


def link_table(trips, links, added_name):
    """The criticality fields for ``links``, by brute force (each link closed, everything from scratch)."""
    net = trips.network
    K = len(trips.kinds)
    args = (net, trips.weight, trips.direction, trips.hub_att, trips.hub_kind, K, trips.place_att)
    arcs = point_arcs(net, trips.weight, trips.direction, trips.hub_att, trips.place_att)
    n0, p0 = costs(*args, arcs=arcs)
    before = p0 if trips.place_att is not None else n0
    people = trips.people
    mg = nx.MultiGraph()
    mg.add_nodes_from(range(net.n_nodes))
    for e in range(net.n_edges):
        mg.add_edge(int(net.edge_from[e]), int(net.edge_to[e]), key=e)
    parts = nx.number_connected_components(mg)
    rows = []
    for e in links:
        n1, p1 = costs(*args, closed={int(e)}, arcs=arcs)
        after = p1 if trips.place_att is not None else n1
        was = np.isfinite(before)
        lost = was & ~np.isfinite(after)
        kept = was & ~lost
        row = {"edge_id": int(e)}
        per = [float(people[lost[k]].sum()) for k in range(K)]
        row["people_cut_off"] = float(sum(per))
        if trips.has_kinds:
            for k, name in enumerate(trips.kinds):
                row[f"people_cut_off_{name}"] = per[k]
        row["nodes_cut_off"] = int((np.isfinite(n0).any(axis=0) & ~np.isfinite(n1).any(axis=0)).sum())
        row[added_name] = float(sum((people[kept[k]] * (after[k][kept[k]] - before[k][kept[k]])).sum()
                                    for k in range(K)))
        h = mg.copy()
        u, v = int(net.edge_from[e]), int(net.edge_to[e])
        h.remove_edge(u, v, key=int(e))
        row["cut_edge"] = int(nx.number_connected_components(h) > parts)
        rows.append(row)
    return pd.DataFrame(rows)


def assert_tables_equal(got, ref, rtol=1e-9, atol=1e-9):
    """Compare a library table with the reference, row by edge_id, every reference field."""
    g = got.set_index("edge_id").sort_index()
    r = ref.set_index("edge_id").sort_index()
    assert list(g.index) == list(r.index)
    for col in r.columns:
        a, b = g[col].to_numpy(float), r[col].to_numpy(float)
        bad = ~np.isclose(a, b, rtol=rtol, atol=atol)
        assert not bad.any(), (col, list(g.index[bad][:5]), a[bad][:5], b[bad][:5])
