"""Incremental updates of the nearest-hub forests against the full path and against networkx.

A scenario (links added, upgraded, made dearer, closed or turned one-way; nodes added; hubs added
and removed) is applied to an id-stable copy of a random network.  The updated forests must equal
the full recomputation on the changed network (``HubTrips.update(..., full=True)``, which grows every
forest from scratch) bit for bit in cost and hub, and the networkx reference
(``tests/helpers/crit_ref.py``; Hagberg, Schult and Swart (2008), Exploring network structure,
dynamics, and function using NetworkX, Proc. SciPy 2008) to 1e-12.  Why a repair can be exact:
Ramalingam and Reps (1996), An incremental algorithm for a generalization of the shortest-path
problem, Journal of Algorithms 21(2) (from memory) - only nodes whose shortest-path step is gone or
dearer, and those below them, can get dearer; decreases spread from the changed arcs' heads.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

sys.path.insert(0, str(Path(__file__).parent))
from helpers import crit_ref as R  # noqa: E402
from helpers.routing_nets import grid, make_network  # noqa: E402

from geo_reach.analysis.criticality import (GraphChange, HubTrips, SearchGraph, Seeds, grow_forest,  # noqa: E402
                                            network_change, update_forest)
from geo_reach.errors import OptionError  # noqa: E402

PROPS = settings(max_examples=120, deadline=None)
COSTS = [0.0, 0.5, 1.0, 1.5, 2.0, 3.7]


def _net(xy, edges, minutes, oneway):
    return make_network(np.asarray(edges, np.int64).reshape(-1, 2), np.asarray(xy, float), n_nodes=len(xy),
                        minutes=np.asarray(minutes, float), oneway=np.asarray(oneway, bool))


@st.composite
def scenarios(draw):
    n = draw(st.integers(2, 9))
    cells = draw(st.lists(st.tuples(st.integers(0, 12), st.integers(0, 12)), min_size=n + 3, max_size=n + 3,
                          unique=True))
    xy = np.array([(x * 100.0 + 3.1 * i, y * 100.0 + 1.7 * i) for i, (x, y) in enumerate(cells)])
    pair = st.tuples(st.integers(0, n - 1), st.integers(0, n - 1)).filter(lambda e: e[0] != e[1])
    edges = draw(st.lists(pair, min_size=1, max_size=3 * n))
    m = len(edges)
    minutes = np.array(draw(st.lists(st.sampled_from(COSTS), min_size=m, max_size=m)))
    oneway = np.array(draw(st.lists(st.booleans(), min_size=m, max_size=m)))
    base = _net(xy[:n], edges, minutes, oneway)
    # --- the change: per base edge keep / close / new cost / flip one-way; then new nodes and edges
    what = draw(st.lists(st.sampled_from(["keep", "keep", "close", "cheaper", "dearer", "flip"]),
                         min_size=m, max_size=m))
    m2, o2 = minutes.copy(), oneway.copy()
    for e, w in enumerate(what):
        if w == "close":
            m2[e] = np.nan
        elif w == "cheaper":
            m2[e] = m2[e] * draw(st.sampled_from([0.0, 0.25, 0.5]))
        elif w == "dearer":
            m2[e] = m2[e] + draw(st.sampled_from([0.5, 2.0]))
        elif w == "flip":
            o2[e] = not o2[e]
    k_new = draw(st.integers(0, 3))
    n2 = n + k_new
    pair2 = st.tuples(st.integers(0, n2 - 1), st.integers(0, n2 - 1)).filter(lambda e: e[0] != e[1])
    added = draw(st.lists(pair2, min_size=k_new, max_size=k_new + 3))
    for i in range(k_new):                 # every new node on at least one new link
        added[i] = (n + i, added[i][1] if added[i][1] != n + i else 0)
    a = len(added)
    new = _net(xy[:n2], list(edges) + added, np.concatenate([m2, draw(st.lists(st.sampled_from(COSTS[1:]),
                                                                                min_size=a, max_size=a))]),
               np.concatenate([o2, draw(st.lists(st.booleans(), min_size=a, max_size=a))]))
    # --- hubs: some at nodes, some off the network; some removed, some added
    H = draw(st.integers(1, 5))
    hub_xy = np.array([xy[draw(st.integers(0, n - 1))] if draw(st.booleans()) else
                       (draw(st.floats(0, 1300)), draw(st.floats(0, 1300))) for _ in range(H)])
    kinds = np.array(draw(st.lists(st.sampled_from(["clinic", "market"]), min_size=H, max_size=H)), object)
    keep = np.array(draw(st.lists(st.booleans(), min_size=H, max_size=H)))
    h_new = draw(st.integers(0, 2))
    new_xy = np.vstack([hub_xy[keep], np.array([(draw(st.floats(0, 1300)), draw(st.floats(0, 1300)))
                                                 for _ in range(h_new)]).reshape(-1, 2)])
    new_ids = np.concatenate([np.arange(H)[keep], 100 + np.arange(h_new)]).astype(object)
    new_kinds = np.concatenate([kinds[keep], np.array(draw(st.lists(st.sampled_from(["clinic", "market"]),
                                                                       min_size=h_new, max_size=h_new)), object)])
    P = draw(st.integers(0, 4))
    place_xy = np.array([(draw(st.floats(0, 1300)), draw(st.floats(0, 1300))) for _ in range(P)]).reshape(-1, 2)
    return dict(base=base, new=new, hub_xy=hub_xy, kinds=kinds, new_xy=new_xy, new_ids=new_ids,
                new_kinds=new_kinds, place_xy=place_xy if P else None,
                direction=draw(st.sampled_from(["to-hub", "from-hub"])),
                explicit=draw(st.booleans()), changed=np.nonzero(np.array(what) != "keep")[0])


def _check_tree(trips):
    """Every node's step is real: cost = parent's cost + the link's cost, or a hub leg's cost."""
    net = trips.network
    cost = net.cost(trips.weight)
    to_hub = trips.direction == "to-hub"
    for k, f in enumerate(trips.forests):
        s = trips.seeds[k]
        sn = s.node
        for v in range(net.n_nodes):
            if not np.isfinite(f.cost[v]):
                assert f.hub[v] == -1 and f.parent[v] == -1
                continue
            p, e = f.parent[v], f.via[v]
            if p >= 0:
                a, b = (v, p) if to_hub else (p, v)     # the trip runs a -> b over edge e
                fwd = net.edge_from[e] == a and net.edge_to[e] == b
                back = net.edge_from[e] == b and net.edge_to[e] == a and not net.edge_oneway[e]
                assert fwd or back, (v, p, e)
                assert f.cost[v] == f.cost[p] + cost[e] and f.hub[v] == f.hub[p]
            else:
                hit = (sn == v) & (s.hub == f.hub[v]) & (s.cost == f.cost[v]) & (s.edge == e)
                assert hit.any(), v


@PROPS
@given(scenarios())
def test_update_equals_full_recomputation_and_networkx(sc):
    base = HubTrips.prepare(sc["base"], sc["hub_xy"], np.arange(len(sc["hub_xy"])).astype(object), sc["kinds"],
                            direction=sc["direction"], place_xy=sc["place_xy"])
    kw = dict(hub_xy=sc["new_xy"], hub_ids=sc["new_ids"], hub_kinds=sc["new_kinds"])
    inc = base.update(sc["new"], edges=sc["changed"] if sc["explicit"] else None, **kw)
    ref = base.update(sc["new"], full=True, **kw)
    assert inc.kinds == ref.kinds
    for a, b in zip(inc.forests, ref.forests):
        assert np.array_equal(a.cost, b.cost)
        assert np.array_equal(a.hub, b.hub)
    assert np.array_equal(inc.place_cost, ref.place_cost)
    _check_tree(inc)
    nodes, places = R.costs(inc.network, "minutes", inc.direction, inc.hub_att, inc.hub_kind, len(inc.kinds),
                            inc.place_att)
    for k, f in enumerate(inc.forests):
        assert np.array_equal(np.isfinite(f.cost), np.isfinite(nodes[k]))
        fin = np.isfinite(f.cost)
        np.testing.assert_allclose(f.cost[fin], nodes[k][fin], rtol=1e-12, atol=1e-12)
    if inc.has_places:
        fin = np.isfinite(places)
        assert np.array_equal(np.isfinite(inc.place_cost), fin)
        np.testing.assert_allclose(inc.place_cost[fin], places[fin], rtol=1e-12, atol=1e-12)


@settings(max_examples=60, deadline=None)
@given(scenarios())
def test_closures_repair_only_the_subtrees_and_equal_a_fresh_search(sc):
    """``close`` keeps the baseline's legs less those on the closed links: the same as a full search
    with those links left out (``grow_forest(..., closed)`` with the same legs)."""
    t = HubTrips.prepare(sc["base"], sc["hub_xy"], None, sc["kinds"], direction=sc["direction"])
    closed = sc["changed"][sc["changed"] < t.network.n_edges]
    res = t.close(closed)
    mask = np.zeros(t.network.n_edges, bool)
    mask[closed] = True
    for k, s in enumerate(t.seeds):
        full = grow_forest(t.graph, s, mask)
        assert np.array_equal(res.forests[k].cost, full.cost)
        assert np.array_equal(res.forests[k].hub, full.hub)
    nodes, _ = R.costs(t.network, "minutes", t.direction, t.hub_att, t.hub_kind, len(t.kinds), closed=set(closed))
    fin = np.isfinite(nodes)
    assert np.array_equal(np.isfinite(np.stack([f.cost for f in res.forests])), fin)


def test_a_change_nothing_uses_costs_almost_nothing():
    """On a 60 x 60 grid: a dearer link that no cheapest trip crosses, or a new link dearer than the
    way already there, touches a handful of nodes; the full search settles all 3,600."""
    net = grid(60, 60, spacing=100.0)
    rng = np.random.default_rng(4)
    t = HubTrips.prepare(net, rng.uniform(0, 5900, (4, 2)))
    f = t.forests[0]
    used = np.zeros(net.n_edges, bool)
    used[f.via[f.via >= 0]] = True
    idle = int(np.nonzero(~used)[0][0])
    m = net.edge_minutes.copy()
    m[idle] += 5.0
    dearer = make_network(np.column_stack([net.edge_from, net.edge_to]), np.column_stack([net.node_x, net.node_y]),
                          minutes=m)
    up = t.update(dearer, edges=[idle])
    assert np.array_equal(up.forests[0].cost, f.cost)
    assert up.update_work["hub"] < f.work / 100
    # a new diagonal link across one block, 10 minutes (the two sides are 2 minutes apart already)
    edges = np.vstack([np.column_stack([net.edge_from, net.edge_to]), [[0, 61]]])
    longer = make_network(edges, np.column_stack([net.node_x, net.node_y]),
                          minutes=np.concatenate([net.edge_minutes, [10.0]]))
    up = t.update(longer)
    assert np.array_equal(up.forests[0].cost, f.cost)
    assert up.update_work["hub"] < f.work / 100


def test_network_change_contract():
    xy = np.array([(0.0, 0.0), (100.0, 0.0), (200.0, 0.0)])
    base = _net(xy, [(0, 1), (1, 2)], [1.0, 1.0], [False, False])
    g = SearchGraph.from_network(base)
    moved = _net(xy + [[0.0, 1.0], [0.0, 0.0], [0.0, 0.0]], [(0, 1), (1, 2)], [1.0, 1.0], [False, False])
    with pytest.raises(OptionError, match="moves base nodes"):
        network_change(base, moved, "minutes")
    fewer = _net(xy, [(0, 1)], [1.0], [False])
    with pytest.raises(OptionError, match="keep every base node and edge"):
        network_change(base, fewer, "minutes")
    with pytest.raises(OptionError, match="edge id 5 is not in the network"):
        GraphChange.closing(g, [5])
    ch = network_change(base, _net(xy, [(0, 1), (1, 2)], [1.0, np.nan], [False, False]), "minutes")
    assert ch.removed.tolist() == [1] and len(ch.add_head) == 0
    ch = network_change(base, _net(xy, [(0, 1), (1, 2), (0, 2)], [1.0, 1.0, 0.5], [False, False, True]), "minutes")
    assert ch.removed.tolist() == [] and ch.add_edge.tolist() == [2]
    assert (ch.add_tail.tolist(), ch.add_head.tolist()) == ([2], [0])      # to-hub: arcs reversed


def test_hub_map_must_keep_the_order_of_the_hubs_that_stay():
    xy = np.array([(0.0, 0.0), (100.0, 0.0), (200.0, 0.0)])
    base = _net(xy, [(0, 1), (1, 2)], [1.0, 1.0], [False, False])
    g = SearchGraph.from_network(base)
    s = Seeds.from_arrays(3, [0, 2], [0, 1], [0.0, 0.0], [-1, -1])
    f = grow_forest(g, s)
    with pytest.raises(OptionError, match="keep the order"):
        update_forest(g, f, GraphChange.closing(g, []), Seeds.from_arrays(3, [0, 2], [1, 0], [0.0, 0.0], [-1, -1]),
                      hub_map=[1, 0])
    # through HubTrips a reordering falls back to the full search: node 1, one minute from both hubs,
    # goes to the lower index, which is now hub "b" (index 0), where it went to "a" before
    t = HubTrips.prepare(base, xy[[0, 2]], np.array(["a", "b"], object))
    assert t.forests[0].hub.tolist() == [0, 0, 1]
    swapped = t.update(base, hub_xy=xy[[2, 0]], hub_ids=np.array(["b", "a"], object))
    assert swapped.forests[0].hub.tolist() == [1, 0, 0] and swapped.forests[0].cost.tolist() == [0, 1, 0]


def test_views_for_the_scenario_runner_match_hub_access():
    """``kind_costs`` and ``nearest_any`` give what the access step gives (geo_reach.analysis.access,
    scipy's Dijkstra): per kind and for all hubs together."""
    from helpers.routing_nets import random_network

    from geo_reach.analysis.access import hub_access

    rng = np.random.default_rng(7)
    net = random_network(rng, 80, 200)
    xy = rng.uniform(0, 5000, (7, 2))
    ids = np.arange(7).astype(object)
    kinds = np.array(["clinic", "market", "clinic", "port", "market", "clinic", "port"], object)
    t = HubTrips.prepare(net, xy, ids, kinds)
    acc = hub_access(net, xy, ids, kinds)
    for kind, (cost, hub) in t.kind_costs().items():
        ref_cost, ref_hub = acc.kind_costs[kind]
        np.testing.assert_allclose(cost, ref_cost, rtol=1e-12, equal_nan=True)
        fin = np.isfinite(ref_cost)
        assert np.array_equal(hub < 0, ~fin)
        # the hub named reaches the node at that cost (ties may name another equally cheap hub)
        assert np.array_equal(kinds[hub[fin]], np.full(fin.sum(), kind, object))
    cost, hub = t.nearest_any()
    np.testing.assert_allclose(np.where(np.isfinite(cost), cost, np.nan), acc.node_cost, rtol=1e-12, equal_nan=True)
