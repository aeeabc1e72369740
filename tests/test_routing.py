"""Routing core against independent references.

References used here:
* networkx (Hagberg, Schult & Swart 2008, "Exploring network structure,
  dynamics, and function using NetworkX", SciPy 2008): its pure-Python
  Dijkstra (``single_source_dijkstra_path_length``,
  ``multi_source_dijkstra_path_length``) is the oracle for costs; costs
  are compared, not paths, since ties are legitimate.
* A slow, obvious reference for off-network points: each point is inserted
  as a real node by splitting its nearest edge (found by brute force over
  every edge) and joined by an access arc, then networkx is run.  This is
  the textbook way to add a point to a network (common practice), so it
  checks the virtual-node attachment independently.  The reference prices
  each walk itself (distance / speed, written out below), never with the
  library's walk-cost function, and runs at more than one walking speed.
* Hand-computed values on tiny networks (written beside each check).
"""

from __future__ import annotations

import sys
from pathlib import Path

import networkx as nx
import numpy as np
import pytest
import shapely
from hypothesis import given, settings
from hypothesis import strategies as st

sys.path.insert(0, str(Path(__file__).parent))
from helpers.routing_nets import grid, make_network, random_network, to_networkx  # noqa: E402

from geo_reach.analysis.attach import attach_points  # noqa: E402
from geo_reach.analysis import excluded_edges, nearest_hub, od_matrix, one_to_all, shortest_path  # noqa: E402
from geo_reach.analysis.options import RoutingOptions  # noqa: E402
from geo_reach.analysis.travel import TravelModel  # noqa: E402
from geo_reach.errors import InputError, OptionError  # noqa: E402

RTOL = 1e-9
SETTINGS = settings(max_examples=50, deadline=None)


def nx_lengths(g, source):
    out = np.full(g.number_of_nodes(), np.inf)
    for k, v in nx.single_source_dijkstra_path_length(g, source, weight="w").items():
        out[k] = v
    return out


# ---------------------------------------------------------------- one-to-all / many-to-nearest
@SETTINGS
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(2, 40), weight=st.sampled_from(["minutes", "hops", "latency_ms"]))
def test_one_to_all_matches_networkx(seed, n, weight):
    rng = np.random.default_rng(seed)
    net = random_network(rng, n, int(rng.integers(1, 4 * n)), nan_prob=0.1)
    g = to_networkx(net, weight)
    src = np.arange(min(n, 5))
    got = one_to_all(net, src, weight)
    for i, s in enumerate(src):
        np.testing.assert_allclose(got[i], nx_lengths(g, int(s)), rtol=RTOL)
    # reverse: trips *to* the source equal networkx on the reversed graph
    back = one_to_all(net, 0, weight, reverse=True)
    np.testing.assert_allclose(back, nx_lengths(g.reverse(copy=True), 0), rtol=RTOL)


@SETTINGS
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(2, 40), direction=st.sampled_from(["to-hub", "from-hub"]))
def test_nearest_hub_matches_networkx_multi_source(seed, n, direction):
    rng = np.random.default_rng(seed)
    net = random_network(rng, n, int(rng.integers(1, 4 * n)))
    g = to_networkx(net, "minutes")
    hubs = rng.choice(n, size=int(rng.integers(1, min(n, 6) + 1)), replace=True)
    ref_g = g.reverse(copy=True) if direction == "to-hub" else g
    ref = np.full(n, np.inf)
    for k, v in nx.multi_source_dijkstra_path_length(ref_g, set(int(h) for h in hubs), weight="w").items():
        ref[k] = v
    cost, hub = nearest_hub(net, hubs, "minutes", direction)
    np.testing.assert_allclose(cost, ref, rtol=RTOL)
    assert np.all((hub >= 0) == np.isfinite(ref))
    # the hub named is one at that cost (ties legitimate)
    for v in np.nonzero(hub >= 0)[0][:10]:
        h = int(hubs[hub[v]])
        d = nx.dijkstra_path_length(g, v, h, weight="w") if direction == "to-hub" else \
            nx.dijkstra_path_length(g, h, v, weight="w")
        assert d == pytest.approx(cost[v], rel=RTOL, abs=1e-12)


def test_nearest_hub_hand_computed_one_way():
    # chain 0 -> 1 -> 2 (one-way, 1 minute each), hub at node 2.
    net = make_network([(0, 1), (1, 2)], oneway=True)
    cost, hub = nearest_hub(net, [2], "minutes", "to-hub")
    assert cost.tolist() == [2.0, 1.0, 0.0] and hub.tolist() == [0, 0, 0]
    cost, hub = nearest_hub(net, [2], "minutes", "from-hub")  # nothing leaves node 2
    assert cost.tolist() == [np.inf, np.inf, 0.0] and hub.tolist() == [-1, -1, 0]


def test_edges_without_weight_are_left_out_and_counted():
    # 0-1 has minutes, 1-2 is a cable without minutes: node 2 is unreachable on minutes.
    net = make_network([(0, 1), (1, 2)], minutes=[1.0, np.nan], latency_ms=[np.nan, 3.0])
    assert excluded_edges(net, "minutes") == 1
    assert one_to_all(net, 0, "minutes").tolist() == [0.0, 1.0, np.inf]
    assert one_to_all(net, 1, "latency_ms").tolist() == [np.inf, 0.0, 3.0]


def test_bad_node_and_weight_are_refused():
    net = make_network([(0, 1)])
    with pytest.raises(InputError, match="node id 5 is not in the network"):
        one_to_all(net, 5)
    with pytest.raises(OptionError, match="weight 'speed' is not known; choose one of minutes"):
        one_to_all(net, 0, "speed")
    with pytest.raises(OptionError, match="direction 'both' is not known"):
        nearest_hub(net, [0], "minutes", "both")


def test_negative_costs_refused_by_the_model():
    with pytest.raises(InputError, match="negative minutes"):
        make_network([(0, 1)], minutes=[-1.0])


# ---------------------------------------------------------------- one-to-one paths
@SETTINGS
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(2, 30))
def test_shortest_path_cost_and_edges_agree_with_networkx(seed, n):
    rng = np.random.default_rng(seed)
    net = random_network(rng, n, int(rng.integers(1, 4 * n)))
    g = to_networkx(net, "minutes")
    a, b = (int(x) for x in rng.integers(0, n, 2))
    r = shortest_path(net, a, b, "minutes")
    try:
        ref = nx.dijkstra_path_length(g, a, b, weight="w")
    except nx.NetworkXNoPath:
        assert not r.found and r.geometry is None
        return
    assert r.cost == pytest.approx(ref, rel=RTOL, abs=1e-12)
    # oracle: re-sum the edge costs along the returned path, and check it is a walk a -> b
    assert net.edge_minutes[r.edges].sum() == pytest.approx(r.cost, rel=RTOL, abs=1e-12)
    assert r.length_m == pytest.approx(net.edge_length_m[r.edges].sum(), rel=RTOL)
    at = a
    for e in r.edges:
        if net.edge_from[e] == at:
            at = net.edge_to[e]
        else:
            assert not net.edge_oneway[e] and net.edge_to[e] == at, "one-way edge travelled backwards"
            at = net.edge_from[e]
    assert at == b
    if len(r.edges):
        c = shapely.get_coordinates(r.geometry)
        assert np.allclose(c[0], [net.node_x[a], net.node_y[a]]) and np.allclose(c[-1], [net.node_x[b], net.node_y[b]])


def test_shortest_path_respects_one_way():
    # square 0-1-2-3-0, edge 0->1 one-way: 1 -> 0 must go round (3 links).
    net = make_network([(0, 1), (1, 2), (2, 3), (3, 0)], oneway=[True, False, False, False])
    assert shortest_path(net, 0, 1, "hops").cost == 1.0
    r = shortest_path(net, 1, 0, "hops")
    assert r.cost == 3.0 and r.edges.tolist() == [1, 2, 3]


# ---------------------------------------------------------------- off-network points
def own_walk_cost(d_m, weight, walk_kmh):
    """The reference's own price of a straight walk of ``d_m`` metres: time = distance / speed
    (km/h -> metres per minute: kmh * 1000 / 60), length = metres, free weights 0."""
    if weight == "minutes":
        return d_m / (walk_kmh * 1000.0 / 60.0)
    if weight == "length_m":
        return float(d_m)
    return 0.0


def _reference_point_costs(net, points_xy, weight, walk_kmh, max_access_m, pairs, direct=False):
    """Slow reference: split every road edge within ``max_access_m`` of a point at the point's
    projection, and join the point to each cut by a walking leg.

    Distances by brute force over all edges (shapely distance per edge).  Several points
    on one edge split it in order of position.  Each point is two nodes: one only left (the
    origin side) and one only arrived at (the destination side), so no trip passes through a
    point.  With ``direct``, two points within ``max_access_m`` of each other are also joined by
    a straight walk (a point to itself: 0).  Returns the networkx cost for each (i, j) pair.
    """
    c = net.cost(weight)
    g = to_networkx(net, weight)
    # drop the arcs of edges that will be split, re-add them in pieces
    cuts = {}
    pnode = {}
    base = net.n_nodes
    for i, (x, y) in enumerate(points_xy):
        p = shapely.Point(x, y)
        dist = {e: p.distance(net.edge_geometry[e]) for e in range(net.n_edges)
                if net.edge_mode[e] == "road" and not np.isnan(c[e])}
        if not dist or min(dist.values()) > max_access_m:
            continue
        pnode[i] = base + i
        # offered: every edge up to EXTRA_WALK_M farther than the nearest, the nearest edge of the
        # largest component and the edges faster than every nearer one (the attach rule, written out);
        # the search picks the cheapest entry
        from geo_reach.analysis.attach import EXTRA_WALK_M

        near = min(dist.values())
        main = {e: d for e, d in dist.items() if net.component[net.edge_from[e]] == 0}
        near_main = min(main.values()) if main else np.inf
        pace = {e: c[e] / max(net.edge_length_m[e], 1e-9) for e in dist}   # cost per metre of road
        for e, d in dist.items():
            # and every edge faster than every edge that is cheaper to walk to (the documented front)
            faster = all(pace[e] < pace[f] for f, df in dist.items() if df < d and df <= max_access_m)
            offered = d <= near + EXTRA_WALK_M or (e in main and d <= near_main + 1e-6) or faster
            if d <= max_access_m and offered:
                f = net.edge_geometry[e].line_locate_point(p, normalized=True)
                cuts.setdefault(e, []).append((f, i, d))
    h = nx.DiGraph()
    h.add_nodes_from(g.nodes)
    for e in range(net.n_edges):
        if np.isnan(c[e]) or (net.edge_from[e] == net.edge_to[e] and e not in cuts):
            continue
        u, v = int(net.edge_from[e]), int(net.edge_to[e])
        if e not in cuts:
            pieces = [(u, v, c[e])]
        else:
            stops = sorted(cuts[e])
            chain = [(0.0, u)] + [(f, ("cut", e, k)) for k, (f, _, _) in enumerate(stops)] + [(1.0, v)]
            pieces = [(a[1], b[1], (b[0] - a[0]) * c[e]) for a, b in zip(chain[:-1], chain[1:])]
            for k, (f, i, d) in enumerate(stops):
                w = own_walk_cost(d, weight, walk_kmh)
                h.add_edge(("out", pnode[i]), ("cut", e, k), w=w)
                h.add_edge(("cut", e, k), ("in", pnode[i]), w=w)
        for a, b, w in pieces:
            # a zero-length piece joins two cuts at one place: passable both ways even if one-way
            for s, t in ([(a, b)] if net.edge_oneway[e] and w > 0 else [(a, b), (b, a)]):
                if not h.has_edge(s, t) or h[s][t]["w"] > w:
                    h.add_edge(s, t, w=w)
    if direct:
        for i in pnode:
            for j in pnode:
                d = float(np.hypot(*(np.asarray(points_xy[i]) - points_xy[j])))
                if d <= max_access_m:
                    h.add_edge(("out", pnode[i]), ("in", pnode[j]), w=own_walk_cost(d, weight, walk_kmh))
    out = []
    for i, j in pairs:
        if i not in pnode or j not in pnode:
            out.append(np.inf)
            continue
        try:
            out.append(nx.dijkstra_path_length(h, ("out", pnode[i]), ("in", pnode[j]), weight="w"))
        except nx.NetworkXNoPath:
            out.append(np.inf)
    return np.array(out)


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), walk_kmh=st.sampled_from([5.0, 3.2]))
def test_od_between_points_matches_split_edge_reference(seed, walk_kmh):
    rng = np.random.default_rng(seed)
    net = random_network(rng, 12, 25, p_oneway=0.4, zero_prob=0.0)
    pts = rng.uniform(-500, 5500, (6, 2))
    att = attach_points(net, pts, "minutes", max_access_m=2000.0, walk_kmh=walk_kmh)
    od = od_matrix(net, att, att, "minutes")
    pairs = [(i, j) for i in range(6) for j in range(6)]
    ref = _reference_point_costs(net, pts, "minutes", walk_kmh, 2000.0, pairs).reshape(6, 6)
    # self pairs: the reference walks out and back only if it leaves the node; without direct walks
    # ours walks the access legs twice (documented), twice the access walk priced by the reference.
    for i in range(6):
        if att.attached[i]:
            ref[i, i] = 2 * own_walk_cost(att.access_m[i], "minutes", walk_kmh)
    np.testing.assert_allclose(od.cost, ref, rtol=1e-9, atol=1e-9)
    # one-to-one on the same points agrees with the matrix
    for i, j in [(0, 1), (2, 3), (4, 5)]:
        r = shortest_path(net, att.subset([i]), att.subset([j]), "minutes")
        assert r.cost == pytest.approx(od.cost[i, j], rel=1e-9, abs=1e-9)
        if r.found:
            assert r.length_m == pytest.approx(od.length_m[i, j], rel=1e-9)
            assert r.geometry.length == pytest.approx(r.length_m, rel=1e-6)  # straight edges: planar = length_m


def test_attach_hand_computed_one_way_split():
    # One-way edge 0 -> 1 from (0,0) to (1000,0), 10 minutes, 1000 m.  Point at (300, 40):
    # enters at 30 % of the edge, walk 40 m = 0.48 min at 5 km/h.
    net = make_network([(0, 1)], [[0, 0], [1000, 0]], minutes=[10.0], oneway=[True])
    att = attach_points(net, [[300, 40]], "minutes")
    assert att.leg_fraction.tolist() == pytest.approx([0.3])
    assert att.access_m.tolist() == pytest.approx([40.0])
    walk = 40 / (5000 / 60)
    # from-hub: hub -> node 1 is 0.48 + 7 min; node 0 unreachable (one-way)
    cost, hub = nearest_hub(net, att, "minutes", "from-hub")
    assert cost.tolist() == pytest.approx([np.inf, walk + 7.0])
    # to-hub: node 0 -> hub is 3 + 0.48 min; node 1 cannot reach it
    cost, hub = nearest_hub(net, att, "minutes", "to-hub")
    assert cost.tolist() == pytest.approx([3.0 + walk, np.inf])
    assert hub.tolist() == [0, -1]
    # length_m: walk counts its length; hops: the partial edge counts its fraction, walk 0
    att_l = attach_points(net, [[300, 40]], "length_m")
    assert nearest_hub(net, att_l, "length_m", "to-hub").cost[0] == pytest.approx(340.0)
    att_h = attach_points(net, [[300, 40]], "hops")
    assert nearest_hub(net, att_h, "hops", "to-hub").cost[0] == pytest.approx(0.3)


def test_cheapest_entry_not_nearest():
    """Hand-worked: a hub 20 m from a 6 km/h track and 200 m from a 60 km/h road, a node 3 km along.

    Via the track: 20 m walk (0.24 min at 5 km/h) + 3 km at 6 km/h (30 min) = 30.24 min.
    Via the road:  200 m walk (2.4 min) + 3 km at 60 km/h (3 min) = 5.4 min, the cheapest entry."""
    xy = [[0, 0], [3000, 0], [0, 220], [3000, 220]]
    net = make_network([(0, 1), (2, 3)], xy, minutes=np.array([30.0, 3.0]))
    att = attach_points(net, [[0, 20]], "minutes", max_access_m=5000, walk_kmh=5.0)
    cost, _ = nearest_hub(net, att, "minutes", "to-hub")
    assert cost[3] == pytest.approx(200 / 5000 * 60 + 3.0)
    # node 1 (the track's far end) is only on the track: 0.24 + 30 = 30.24 min
    assert cost[1] == pytest.approx(20 / 5000 * 60 + 30.0)


def test_attach_modes_and_distance_limit():
    # road 0-1 at y=0; rail 2-3 at y=500 (node 2 a station, node 3 not); transfer 1-2.
    xy = [[0, 0], [1000, 0], [0, 500], [1000, 500]]
    net = make_network([(0, 1), (2, 3), (1, 2)], xy, mode=np.array(["road", "rail", "transfer"], object),
                       entry=np.array([True, True, True, False]))
    att = attach_points(net, [[900, 480], [10, 490], [500, 260], [500, 20000]], "minutes", max_access_m=5000)
    # point 0 is nearest the rail line but may not enter it between stations: its entries are
    # the road at 480 m and station node 2 at hypot(900, 20); the nearest (access_m) is the road.
    legs0 = np.nonzero(att.leg_point == 0)[0]
    assert sorted(zip(att.leg_edge[legs0].tolist(), att.leg_node[legs0].tolist())) == [(-1, 2), (0, -1)]
    assert sorted(att.leg_walk_m[legs0]) == pytest.approx([480.0, np.hypot(900, 20)])
    assert att.access_m[0] == pytest.approx(480.0)
    # point 1 is hypot(10, 10) m from station node 2 (and 490 m from the road): its nearest entry is the node
    legs1 = np.nonzero(att.leg_point == 1)[0]
    assert 2 in att.leg_node[legs1].tolist() and att.access_m[1] == pytest.approx(np.hypot(10, 10))
    # point 2 lies 240 m from the transfer edge, 260 m from the road: transfers are never entered
    legs2 = np.nonzero(att.leg_point == 2)[0]
    assert 2 not in att.leg_edge[legs2].tolist() and 0 in att.leg_edge[legs2].tolist()
    assert att.access_m[2] == pytest.approx(260.0)
    # point 3 is beyond max_access_m: reported with its real distance (to station node 2 at (0, 500)),
    # not attached
    assert att.attached.tolist() == [True, True, True, False]
    assert att.access_m[3] == pytest.approx(np.hypot(500, 19500))
    assert np.isinf(one_to_all(net, att, "minutes")[3]).all()
    # without the station, the real distance to the road is reported
    road_only = make_network([(0, 1)], [[0, 0], [1000, 0]])
    far = attach_points(road_only, [[500, 20000]], "minutes", max_access_m=5000)
    assert not far.attached[0] and far.access_m[0] == pytest.approx(20000.0)


def test_attach_options_refused():
    net = make_network([(0, 1)])
    with pytest.raises(OptionError, match="max_access_m"):
        attach_points(net, [[0, 0]], max_access_m=-1)
    with pytest.raises(OptionError, match="walk_kmh"):
        attach_points(net, [[0, 0]], walk_kmh=0)
    att = attach_points(net, [[0, 0]], "minutes")
    with pytest.raises(OptionError, match="attached for weight 'minutes'"):
        nearest_hub(net, att, "hops")


def test_od_nodes_match_one_to_all_and_lengths_follow_least_cost_path():
    net = grid(6, 7, spacing=100.0, minutes=np.random.default_rng(3).uniform(0.5, 2.0, 71))
    o, d = [0, 5, 17], [41, 3, 20, 0]
    od = od_matrix(net, o, d, "minutes")
    full = one_to_all(net, o, "minutes")
    np.testing.assert_allclose(od.cost, full[:, d], rtol=RTOL)
    for i, a in enumerate(o):
        for j, b in enumerate(d):
            r = shortest_path(net, a, b, "minutes")
            assert od.length_m[i, j] == pytest.approx(r.length_m, rel=RTOL)


def test_route_geometry_on_grid_hand_computed():
    # 3 x 4 grid, 100 m spacing.  From (50, 20) [edge 0-1, 20 m off] to (260, 180) [edge 10-11, 20 m off]:
    # 20 walk + 50 to node 1 + 300 on the grid + 60 along edge 10-11 + 20 walk = 450 m.
    # (max_access_m 25 m keeps only those two edges: on length_m a longer walk to another edge
    # would otherwise be a legitimate, cheaper entry.)
    net = grid(3, 4, spacing=100.0)
    att = attach_points(net, [[50, 20], [260, 180]], "length_m", max_access_m=25.0)
    r = shortest_path(net, att.subset([0]), att.subset([1]), "length_m")
    assert r.cost == pytest.approx(450.0) and r.length_m == pytest.approx(450.0) and r.access_m == pytest.approx(40.0)
    assert r.geometry.length == pytest.approx(450.0)
    c = shapely.get_coordinates(r.geometry)
    assert c[0].tolist() == [50, 20] and c[-1].tolist() == [260, 180]


def test_od_mixed_nodes_and_points_agree_with_shortest_path():
    rng = np.random.default_rng(5)
    net = random_network(rng, 15, 40, zero_prob=0.0)
    att = attach_points(net, rng.uniform(0, 5000, (3, 2)), "minutes")
    nodes = [0, 4, 9]
    a = od_matrix(net, nodes, att, "minutes")
    b = od_matrix(net, att, nodes, "minutes")
    for i, v in enumerate(nodes):
        for j in range(3):
            r1 = shortest_path(net, v, att.subset([j]), "minutes")
            r2 = shortest_path(net, att.subset([j]), v, "minutes")
            assert a.cost[i, j] == pytest.approx(r1.cost, rel=RTOL) and b.cost[j, i] == pytest.approx(r2.cost, rel=RTOL)
            if r1.found:
                assert a.length_m[i, j] == pytest.approx(r1.length_m, rel=RTOL)


def test_adding_a_road_near_a_hub_never_makes_trips_dearer():
    """Regression: with only the nearest entry kept, a new road passing closer to a hub took over
    its connection and node 0's cost rose from 0.12 to 4.02 min.  Shortest-path costs can only
    fall when arcs are added (path-relaxation property; Cormen et al. 2009, ch. 24, from memory)."""
    before = make_network([(0, 1)], [[0, 0], [1000, 0]], minutes=np.array([1.0]))
    after = make_network([(0, 1), (1, 2)], [[0, 0], [1000, 0], [0, 12]], minutes=np.array([1.0, 1.0]))
    hub = [[0, 10]]
    c0, _ = nearest_hub(before, attach_points(before, hub, "minutes"), "minutes", "to-hub")
    c1, _ = nearest_hub(after, attach_points(after, hub, "minutes"), "minutes", "to-hub")
    assert c0[0] == pytest.approx(10 / 5000 * 60)
    assert np.all(c1[:2] <= c0 + 1e-12)


@settings(max_examples=25, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), direction=st.sampled_from(["to-hub", "from-hub"]))
def test_route_lengths_to_the_nearest_hub_match_traced_paths(seed, direction):
    """Reference: networkx's least-cost path cost to the hub the search chose, and the length of
    the one-to-one route to it (random real-valued costs: no ties between routes)."""
    from geo_reach.analysis.routing import nearest_hub_route_m

    rng = np.random.default_rng(seed)
    net = random_network(rng, 14, 30, p_oneway=0.3, zero_prob=0.0)
    hubs = [0, 7]
    cost, hub = nearest_hub(net, hubs, "minutes", direction)
    got = nearest_hub_route_m(net, hubs, "minutes", direction)
    g = to_networkx(net, "minutes")
    for v in range(net.n_nodes):
        if hub[v] < 0:
            assert np.isnan(got[v])
            continue
        h = hubs[hub[v]]
        a, b = (v, h) if direction == "to-hub" else (h, v)
        path = nx.dijkstra_path(g, a, b, weight="w")
        assert nx.path_weight(g, path, "w") == pytest.approx(cost[v], rel=1e-9, abs=1e-9)
        r = shortest_path(net, a, b, "minutes")
        assert r.cost == pytest.approx(cost[v], rel=1e-9, abs=1e-9)
        assert got[v] == pytest.approx(r.length_m, rel=1e-6, abs=1e-6)


def test_a_hub_beside_a_cut_off_track_still_reaches_the_main_network():
    """Hand-worked: main road 0-1-2 (1 min per 1 km link), a cut-off 100 m track 3-4 beside the hub.
    The hub at (2000, 1500) is 30 m from the track and 1,500 m from the main road (at node 2):
    beyond the 1 km of extra walking offered, yet the nearest entry onto the largest component is
    always offered.  Node 0: 1500 m on foot at 5 km/h = 18 min, plus two 1-minute links = 20 min."""
    xy = [[0, 0], [1000, 0], [2000, 0], [2000, 1530], [2100, 1530]]
    net = make_network([(0, 1), (1, 2), (3, 4)], xy, minutes=np.array([1.0, 1.0, 1.0]))
    att = attach_points(net, [[2000, 1500]], "minutes", max_access_m=5000, walk_kmh=5.0)
    cost, _ = nearest_hub(net, att, "minutes", "to-hub")
    assert cost[0] == pytest.approx(1500 / 5000 * 60 + 2.0)


@settings(max_examples=30, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), walk_kmh=st.sampled_from([5.0, 2.5]),
       weight=st.sampled_from(["minutes", "length_m"]))
def test_travel_model_trips_match_split_edge_reference_with_direct_walks(seed, walk_kmh, weight):
    """The travel model's od, route and nearest-hub trips between points against the split-edge reference
    with straight walks between points (a place to itself: 0), priced by the reference itself."""
    rng = np.random.default_rng(seed)
    net = random_network(rng, 10, 20, p_oneway=0.3, zero_prob=0.0)
    pts = rng.uniform(-300, 5300, (5, 2))
    pts[4] = pts[3] + rng.uniform(-400, 400, 2)   # two places near each other: walking may win
    model = TravelModel(RoutingOptions(weight=weight, walk_kmh=walk_kmh, max_access_m=1500.0))
    od = model.od(net, pts, pts)
    pairs = [(i, j) for i in range(5) for j in range(5)]
    ref = _reference_point_costs(net, pts, weight, walk_kmh, 1500.0, pairs, direct=True).reshape(5, 5)
    np.testing.assert_allclose(od.cost, ref, rtol=1e-9, atol=1e-9)
    att = model.attach(net, pts)
    for i in range(5):
        assert od.cost[i, i] == (0.0 if att.attached[i] else np.inf)   # a place to itself costs nothing
    for i, j in [(0, 1), (3, 4), (4, 3), (2, 2)]:
        r = model.route(net, pts[i], pts[j])
        assert r.cost == pytest.approx(ref[i, j], rel=1e-9, abs=1e-9)
    # each place's nearest "hub" among the others: the minimum of its od row (to-hub), of its od column
    # (from-hub: the trip from the hub), with the hub that gives it
    trips = model.hub_trips(net, pts[:3], pts[3:])[None]
    np.testing.assert_allclose(trips.cost, ref[:3, 3:].min(axis=1), rtol=1e-9, atol=1e-9)
    back = model.for_direction("from-hub").hub_trips(net, pts[:3], pts[3:])[None]
    np.testing.assert_allclose(back.cost, ref[3:, :3].min(axis=0), rtol=1e-9, atol=1e-9)
    for i in range(3):
        if np.isfinite(back.cost[i]):
            assert ref[3 + back.hub[i], i] == pytest.approx(back.cost[i], rel=1e-9, abs=1e-9)
        if np.isfinite(trips.cost[i]):
            assert ref[i, 3 + trips.hub[i]] == pytest.approx(trips.cost[i], rel=1e-9, abs=1e-9)


@pytest.mark.parametrize("weight", ["minutes", "length_m", "hops"])
def test_attaching_in_chunks_changes_nothing(weight, monkeypatch):
    """Points are attached a chunk at a time (bounded memory); the legs are those of one call over all points."""
    import geo_reach.analysis.attach as A

    net = grid(8, 8)
    rng = np.random.default_rng(5)
    lo, hi = np.array([net.node_x.min(), net.node_y.min()]), np.array([net.node_x.max(), net.node_y.max()])
    xy = lo - 300 + rng.random((23, 2)) * (hi - lo + 600)
    reach = np.where(rng.random(23) < 0.3, 400.0, np.nan)
    whole = attach_points(net, xy, weight, max_access_m=250, always_join=True,
                          reach_m=reach if weight != "hops" else None)
    monkeypatch.setattr(A, "ATTACH_CHUNK", 4)
    parts = attach_points(net, xy, weight, max_access_m=250, always_join=True,
                          reach_m=reach if weight != "hops" else None)
    assert len(whole.leg_point) > 23
    for f in ("access_m", "leg_point", "leg_edge", "leg_node", "leg_fraction", "leg_walk_m", "leg_leave_cost",
              "leg_arrive_cost", "blocked", "point_xy"):
        np.testing.assert_array_equal(getattr(parts, f), getattr(whole, f), err_msg=f)
