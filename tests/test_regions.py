"""Weak regions: bridges against networkx, cut-off sides against brute force, a hand-made layout."""

import networkx as nx
import numpy as np
import pytest
import shapely
from hypothesis import given, settings, strategies as st

from geo_reach.analysis.regions import bridge_sides, bridges, weak_regions
from geo_reach.analysis.surface import compute_surface
from geo_reach.errors import OptionError
from tests.helpers.surface_nets import grid, net_from_edges


def _random_multigraph(rng, n, m):
    u = rng.integers(0, n, m)
    v = rng.integers(0, n, m)
    return u, v


def _nx_bridges(n, u, v):
    g = nx.MultiGraph()
    g.add_nodes_from(range(n))
    for a, b in zip(u, v):
        g.add_edge(int(a), int(b))
    return {frozenset(e) for e in nx.bridges(g)}


@settings(max_examples=60, deadline=None)
@given(st.integers(1, 30), st.integers(0, 45), st.integers(0, 2**31))
def test_bridges_match_networkx(n, m, seed):
    # networkx.bridges (chain decomposition, Schmidt 2013) is the reference.
    rng = np.random.default_rng(seed)
    u, v = _random_multigraph(rng, n, m)
    ours = bridges(n, u, v)
    got = {frozenset((int(a), int(b))) for a, b, f in zip(u, v, ours) if f}
    assert got == _nx_bridges(n, u, v)
    # a bridge's node pair occurs once (a parallel edge would make it no bridge)
    pairs = [frozenset((int(a), int(b))) for a, b in zip(u, v)]
    assert all(pairs.count(p) == 1 for p, f in zip(pairs, ours) if f)


def test_bridges_on_a_long_path_no_recursion_limit():
    n = 200_000
    u = np.arange(n - 1)
    assert bridges(n, u, u + 1).all()


def _brute_force_sides(n, u, v, hubs):
    """For every bridge, the side holding no hub; each node's largest such side (networkx)."""
    g = nx.MultiGraph()
    g.add_nodes_from(range(n))
    for k, (a, b) in enumerate(zip(u, v)):
        g.add_edge(int(a), int(b), key=k)
    best = {}
    for a, b in nx.bridges(g):
        h = g.copy()
        k = next(iter(g[a][b]))
        h.remove_edge(a, b, key=k)
        for side in (nx.node_connected_component(h, a), nx.node_connected_component(h, b)):
            other = nx.node_connected_component(h, b if a in side else a)
            if not (side & hubs) and (other & hubs):
                for x in side:
                    if len(side) > len(best.get(x, ())):
                        best[x] = frozenset(side)
    return best


@settings(max_examples=40, deadline=None)
@given(st.integers(2, 25), st.integers(1, 35), st.integers(0, 2**31))
def test_bridge_sides_match_brute_force(n, m, seed):
    rng = np.random.default_rng(seed)
    u, v = _random_multigraph(rng, n, m)
    hubs = set(rng.choice(n, size=rng.integers(1, 3), replace=False).tolist())
    xy = rng.uniform(0, 1000, (n, 2))
    net = net_from_edges(xy, np.column_stack([u, v]))
    sides = bridge_sides(net, sorted(hubs))
    expect = _brute_force_sides(n, u, v, hubs)
    assert {x for x in range(n) if sides.group[x] >= 0} == set(expect)
    for x, side in expect.items():
        assert {y for y in range(n) if sides.group[y] == sides.group[x]} == set(side)
    for k, e in enumerate(sides.bridge_edge):
        members = sides.group == k
        a, b = net.edge_from[e], net.edge_to[e]
        assert members[a] != members[b]                    # the bridge joins the side to the rest
        assert not members[sides.hub_side_node[k]]


def _layout():
    # A square loop 0-1-2-3 with the hub at node 0; a spur 1 -> 4 -> 5 hanging on bridges (1,4) and (4,5);
    # a separate road 6-7 with no hub (at x = 1820 so no cell centre lies on its one-cell buffer edge).
    # 100 m cells, 20 x 10.
    xy = [(150, 550), (750, 550), (750, 250), (150, 250), (1350, 550), (1350, 850), (1820, 150), (1820, 850)]
    edges = [(0, 1), (1, 2), (2, 3), (3, 0), (1, 4), (4, 5), (6, 7)]
    net = net_from_edges(xy, edges)
    length = np.array([g.length for g in net.edge_geometry])
    net = net_from_edges(xy, edges, minutes=length / 200.0)  # 12 km/h on the road
    g = nx.Graph()
    for (a, b), w in zip(edges, length / 200.0):
        g.add_edge(a, b, w=w)
    d = nx.single_source_dijkstra_path_length(g, 0, weight="w")
    cost = np.array([d.get(i, np.inf) for i in range(len(xy))])
    return net, cost


def test_weak_regions_layout():
    net, cost = _layout()
    gr = grid(20, 10)
    pop = np.arange(200, dtype=float).reshape(10, 20) % 7
    surf = compute_surface(net, cost, np.where(np.isfinite(cost), 0, -1), gr, walk_kmh=5.0)
    reg = weak_regions(surf.minutes, surf.entry_node, gr, net, cost, [0], threshold_minutes=8.0, population=pop)
    assert list(reg["rank"]) == list(range(1, len(reg) + 1))
    assert (np.diff(reg.population.to_numpy()) <= 1e-9).all()           # ranked by population
    assert set(reg.reason) == {"beyond_threshold", "single_link", "no_hub"}

    one = reg[reg.reason == "single_link"]
    assert len(one) == 1                                                 # nested bridges fold into one
    row = one.iloc[0]
    assert row.edge_id == 4                                              # edge (1, 4): nearest the hub
    assert (row.join_x, row.join_y) == (750, 550) and row.join_minutes == pytest.approx(cost[1])
    side = np.isin(surf.entry_node, [4, 5])
    assert side.any() and row.population == pytest.approx(pop[side].sum())
    assert row.area_km2 == pytest.approx(side.sum() * 0.01)

    far = reg[reg.reason == "beyond_threshold"]
    mask = ~(surf.minutes <= 8.0)
    assert far.area_km2.sum() == pytest.approx(mask.sum() * 0.01)
    assert far.population.sum() == pytest.approx(pop[mask].sum())
    assert shapely.union_all(far.geometry.values).area == pytest.approx(mask.sum() * 1e4)

    nohub = reg[reg.reason == "no_hub"].iloc[0]
    assert np.isnan(nohub.join_minutes) and nohub.join_x == 1820
    # The edge 6-7 (700 m) buffered by one cell (100 m): 2 * 100 * 700 + pi * 100^2 = 171 416 m2 for true
    # round ends; the polygon's segmented arcs lose a little of that.
    assert nohub.area_km2 == pytest.approx(0.171416, rel=5e-3)
    assert nohub.geometry.contains(shapely.LineString([(1820, 150), (1820, 850)]))
    buffered = nohub.geometry
    x, y = gr.cell_centres()
    inside = shapely.contains_xy(buffered, x[None, :], y[:, None])
    assert nohub.population == pytest.approx(pop[inside].sum())


def test_weak_regions_ranked_by_people_then_minutes():
    net, cost = _layout()
    gr = grid(20, 10)
    surf = compute_surface(net, cost, np.where(np.isfinite(cost), 0, -1), gr, walk_kmh=5.0)
    for pop in (np.arange(200, dtype=float).reshape(10, 20) % 7, np.zeros((10, 20)), np.ones((10, 20))):
        reg = weak_regions(surf.minutes, surf.entry_node, gr, net, cost, [0], threshold_minutes=8.0, population=pop)
        key = list(zip(-reg.population.to_numpy(), -np.nan_to_num(reg.mean_hub_minutes.to_numpy(), nan=np.inf),
                       -reg.area_km2.to_numpy()))
        assert key == sorted(key)                       # people, then longer trips (none = longest), then area
        assert list(reg["rank"]) == list(range(1, len(reg) + 1))
    # nobody lives anywhere: the order is by minutes alone, the region no hub reaches first
    none = weak_regions(surf.minutes, surf.entry_node, gr, net, cost, [0], threshold_minutes=8.0,
                        population=np.zeros((10, 20)))
    m = none.mean_hub_minutes.to_numpy()
    assert np.isnan(m[: np.isnan(m).sum()]).all()
    fin = m[np.isfinite(m)]
    assert (np.diff(fin) <= 1e-9).all()


def test_weak_regions_refusals():
    net, cost = _layout()
    gr = grid(20, 10)
    m = np.zeros(gr.shape)
    with pytest.raises(OptionError, match="threshold"):
        weak_regions(m, np.zeros(gr.shape, int), gr, net, cost, [0], threshold_minutes=0)
    with pytest.raises(OptionError, match="hub node ids"):
        weak_regions(m, np.zeros(gr.shape, int), gr, net, cost, [99], threshold_minutes=5)


def test_bridges_and_sides_on_real_streets():
    # libpysal's GeoDaNet street layer (real digitised streets, shipped with the package). Nodes are the
    # noded line ends (coordinates rounded to 0.1 ft); references: networkx.bridges and the brute-force sides.
    import os

    import geopandas as gpd
    import libpysal

    path = os.path.join(os.path.dirname(libpysal.examples.__file__), "geodanet", "streets.shp")
    # noded by GEOS (union of all lines splits them where they cross), so dead ends become bridges
    lines = shapely.get_parts(shapely.union_all(gpd.read_file(path).geometry.values))
    ends = np.array([[g.coords[0], g.coords[-1]] for g in lines]).round(1)
    keys, inv = np.unique(ends.reshape(-1, 2), axis=0, return_inverse=True)
    uv = inv.reshape(-1, 2)
    n = len(keys)
    ours = bridges(n, uv[:, 0], uv[:, 1])
    got = {frozenset(map(int, e)) for e, f in zip(uv, ours) if f}
    assert got == _nx_bridges(n, uv[:, 0], uv[:, 1]) and len(got) > 0
    net = net_from_edges(keys, uv)
    hubs = {0, n // 2}
    sides = bridge_sides(net, sorted(hubs))
    expect = _brute_force_sides(n, uv[:, 0], uv[:, 1], hubs)
    assert {x for x in range(n) if sides.group[x] >= 0} == set(expect) and len(expect) > 0
