"""Criticality of every link against brute force: close each link, price everything again from scratch.

The reference (``tests/helpers/crit_ref.py``) is networkx (Hagberg, Schult and Swart (2008),
Exploring network structure, dynamics, and function using NetworkX, Proc. SciPy 2008) on a graph
built here from the network's arrays, with each walk leg priced in the test (walk at the given
speed plus the share of the entered edge) rather than by the library.  The measures are those of
the issue, after Jenelius, Petersen and Mattsson (2006), Importance and exposure in road network
vulnerability analysis, Transportation Research Part A 40(7) (importance of a link = the
consequence of its closure for its users), and Scott, Novak, Aultman-Hall and Guo (2006), Network
Robustness Index, Journal of Transport Geography 14(3) (the increase in total travel cost when a
link is lost).  Cut edges are checked by removing each edge from a networkx MultiGraph and
counting connected parts.
"""

from __future__ import annotations

import os
import sys
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

sys.path.insert(0, str(Path(__file__).parent))
from helpers import crit_ref as R  # noqa: E402
from helpers.routing_nets import make_network  # noqa: E402

from geo_reach.analysis.attach import attach_points  # noqa: E402
from geo_reach.analysis.criticality import HubTrips, added_field, check_links, link_criticality  # noqa: E402
from geo_reach.analysis.criticality import UnknownLinkError  # noqa: E402
from geo_reach.analysis.routing import nearest_hub  # noqa: E402

PROPS = settings(max_examples=80, deadline=None)


# ============================================================================ random inputs
@st.composite
def cases(draw, weights=("minutes", "length_m", "hops"), max_nodes=9, integer_costs=False):
    """A random network (one-way and parallel links, free links, ties), hubs of 1-3 kinds, maybe settlements."""
    n = draw(st.integers(2, max_nodes))
    cells = draw(st.lists(st.tuples(st.integers(0, 12), st.integers(0, 12)), min_size=n, max_size=n, unique=True))
    xy = np.array([(x * 100.0 + 3.1 * i, y * 100.0 + 1.7 * i) for i, (x, y) in enumerate(cells)])
    pair = st.tuples(st.integers(0, n - 1), st.integers(0, n - 1)).filter(lambda e: e[0] != e[1])
    edges = draw(st.lists(pair, min_size=1, max_size=3 * n))
    if draw(st.booleans()):          # a parallel link (same ends) drawn on purpose
        edges.append(edges[0] if draw(st.booleans()) else edges[0][::-1])
    m = len(edges)
    choices = [1.0, 2.0, 3.0] if integer_costs else [0.0, 0.5, 1.0, 1.5, 2.0, 3.7]
    minutes = np.array(draw(st.lists(st.sampled_from(choices), min_size=m, max_size=m)))
    oneway = np.array(draw(st.lists(st.booleans(), min_size=m, max_size=m)))
    net = make_network(edges, xy, n_nodes=n, minutes=minutes, oneway=oneway)
    H = draw(st.integers(1, 5))
    at_node = draw(st.lists(st.integers(0, n - 1), min_size=H, max_size=H))
    hub_xy = []
    for i in range(H):
        if integer_costs or draw(st.booleans()):
            hub_xy.append(xy[at_node[i]])
        else:
            hub_xy.append((draw(st.floats(0, 1300)), draw(st.floats(0, 1300))))
    n_kinds = draw(st.integers(1, 3))
    kinds = draw(st.lists(st.sampled_from(["clinic", "market", "port"][:n_kinds]), min_size=H, max_size=H))
    P = 0 if integer_costs else draw(st.integers(0, 5))
    place_xy = np.array([(draw(st.floats(0, 1300)), draw(st.floats(0, 1300))) for _ in range(P)]).reshape(-1, 2)
    people = np.array(draw(st.lists(st.integers(0, 60), min_size=P, max_size=P)), float)
    return dict(net=net, hub_xy=np.array(hub_xy, float), kinds=np.array(kinds, object) if n_kinds > 1 else None,
                place_xy=place_xy if P else None, people=people if P else None,
                weight=draw(st.sampled_from(weights)), direction=draw(st.sampled_from(["to-hub", "from-hub"])),
                max_access_m=draw(st.sampled_from([5000.0, 120.0])))


def prepare(c, **kw):
    return HubTrips.prepare(c["net"], c["hub_xy"], None, c["kinds"], weight=c["weight"], direction=c["direction"],
                            place_xy=c["place_xy"], people=c["people"], max_access_m=c["max_access_m"], **kw)


# ============================================================================ the forest
@PROPS
@given(cases())
def test_forest_costs_equal_networkx(c):
    t = prepare(c)
    nodes, places = R.costs(t.network, t.weight, t.direction, t.hub_att, t.hub_kind, len(t.kinds), t.place_att)
    for k, f in enumerate(t.forests):
        assert np.array_equal(np.isfinite(f.cost), np.isfinite(nodes[k]))
        fin = np.isfinite(nodes[k])
        np.testing.assert_allclose(f.cost[fin], nodes[k][fin], rtol=1e-12, atol=1e-12)
    if t.has_places:
        assert np.array_equal(np.isfinite(t.place_cost), np.isfinite(places))
        fin = np.isfinite(places)
        np.testing.assert_allclose(t.place_cost[fin], places[fin], rtol=1e-12, atol=1e-12)


@PROPS
@given(cases(weights=("minutes",), integer_costs=True))
def test_ties_between_hubs_go_to_the_lowest_hub_index(c):
    """Hubs at nodes and whole-minute links: sums are exact, so ties are real ties."""
    t = prepare(c)
    H = len(c["hub_xy"])
    per_hub, _ = R.costs(t.network, "minutes", t.direction, t.hub_att, np.arange(H), H)
    for k, f in enumerate(t.forests):
        members = np.nonzero(t.hub_kind == k)[0]
        best = per_hub[members].min(axis=0)
        for v in range(t.network.n_nodes):
            if not np.isfinite(best[v]):
                assert f.hub[v] == -1
                continue
            tied = members[per_hub[members, v] == best[v]]
            assert f.hub[v] == tied.min(), (v, f.hub[v], tied)


def test_forest_agrees_with_the_routing_module_on_off_network_hubs():
    """The same trips as geo_reach.analysis.routing.nearest_hub (scipy's Dijkstra) on a random network."""
    sys.path.insert(0, str(Path(__file__).parent))
    from helpers.routing_nets import random_network

    rng = np.random.default_rng(11)
    for _ in range(5):
        net = random_network(rng, 60, 150)
        hub_xy = rng.uniform(0, 5000, (6, 2))
        for direction in ("to-hub", "from-hub"):
            t = HubTrips.prepare(net, hub_xy, direction=direction)
            cost, _ = nearest_hub(net, attach_points(net, hub_xy, "minutes"), "minutes", direction)
            np.testing.assert_allclose(t.forests[0].cost, cost, rtol=1e-12)


# ============================================================================ every link
@PROPS
@given(cases())
def test_link_criticality_equals_brute_force(c):
    t = prepare(c)
    got = link_criticality(t, chunks=3).table
    ref = R.link_table(t, range(t.network.n_edges), added_field(t.weight))
    R.assert_tables_equal(got, ref)


@settings(max_examples=25, deadline=None)
@given(cases())
def test_slow_full_method_gives_the_same_table(c):
    t = prepare(c)
    a = link_criticality(t).table
    b = link_criticality(t, method="full").table
    R.assert_tables_equal(a, b.drop(columns="rank"))


def test_hand_worked_example():
    """A clinic at node 0; links 0-1 and 1-2 of 1 minute, a loop 1-3-2 of 2 + 2 minutes, a spur 2-4 of 1,
    and a spur 0-5 of 1 minute on the other side of the clinic (so the clinic keeps an entry when 0-1
    closes).  Walk legs only within 50 m: the clinic enters links 0-1 and 0-5 at node 0.

    Today: node costs 0, 1, 2, 3, 3, 1 (node 3 via 1).  Each node is one person.
    * close 0-1: nodes 1-4 lose the clinic: 4 cut off, a cut edge;
    * close 2-4: node 4 cut off, a cut edge; close 0-5: node 5 cut off, a cut edge;
    * close 1-2: node 2 goes round by 3 (1 + 2 + 2 = 5, +3), node 4 follows (6, +3): 6 person-minutes;
    * close 1-3: node 3 comes by 2 instead (2 + 2 = 4, +1): 1 person-minute;
    * close 3-2: no cheapest trip uses it: nothing.
    """
    xy = np.array([(0.0, 0.0), (1000.0, 0.0), (2000.0, 0.0), (1500.0, 800.0), (3000.0, 0.0), (-1000.0, 0.0)])
    edges = [(0, 1), (1, 2), (1, 3), (3, 2), (2, 4), (0, 5)]
    net = make_network(edges, xy, minutes=[1.0, 1.0, 2.0, 2.0, 1.0, 1.0])
    t = HubTrips.prepare(net, xy[[0]], hub_kinds=["clinic"], max_access_m=50.0)
    np.testing.assert_allclose(t.forests[0].cost, [0, 1, 2, 3, 3, 1])
    tab = link_criticality(t).table.set_index("edge_id")
    assert tab.loc[0, "people_cut_off"] == 4 and tab.loc[0, "nodes_cut_off"] == 4 and tab.loc[0, "cut_edge"] == 1
    assert tab.loc[4, "people_cut_off"] == 1 and tab.loc[4, "cut_edge"] == 1
    assert tab.loc[5, "people_cut_off"] == 1 and tab.loc[5, "cut_edge"] == 1
    assert tab.loc[1, "people_cut_off"] == 0 and tab.loc[1, "person_minutes_added"] == pytest.approx(6.0)
    assert tab.loc[2, "person_minutes_added"] == pytest.approx(1.0) and tab.loc[2, "cut_edge"] == 0
    assert tab.loc[3, "person_minutes_added"] == 0.0 and tab.loc[3, "people_cut_off"] == 0
    # rank: people cut off first, then person-minutes, then the lower edge id
    assert tab["rank"].sort_values().index.tolist() == [0, 4, 5, 1, 2, 3]
    assert list(link_criticality(t).table.columns) == ["edge_id", "people_cut_off", "people_cut_off_clinic",
                                                       "nodes_cut_off", "person_minutes_added", "cut_edge", "rank"]


def test_a_hub_leg_entering_the_closed_link_mid_way_is_gone():
    """A hub 30 m beside the middle of the only link 0-1 (2 minutes): both ends reach it along the link.

    Closing that link removes the hub's only entry: both nodes lose it (no other link enters there).
    Node 2 hangs off node 1 by a 1-minute link.  Walk 30 m at 5 km/h = 0.36 min.
    """
    xy = np.array([(0.0, 0.0), (1000.0, 0.0), (2000.0, 0.0)])
    net = make_network([(0, 1), (1, 2)], xy, minutes=[2.0, 1.0])
    t = HubTrips.prepare(net, [(500.0, 30.0)], max_access_m=100.0)
    np.testing.assert_allclose(t.forests[0].cost, [1.36, 1.36, 2.36])
    tab = link_criticality(t).table.set_index("edge_id")
    assert tab.loc[0, "people_cut_off"] == 3 and tab.loc[0, "nodes_cut_off"] == 3
    assert tab.loc[1, "people_cut_off"] == 1


def test_person_field_names_carry_the_unit():
    assert [added_field(w) for w in ("minutes", "length_m", "hops", "latency_ms")] == [
        "person_minutes_added", "person_m_added", "person_hops_added", "person_ms_added"]


def test_unknown_link_ids_are_refused_by_name():
    net = make_network([(0, 1), (1, 2)], np.array([(0.0, 0.0), (1.0, 0.0), (2.0, 0.0)]))
    assert check_links(net, ["1", 0, 1.0]).tolist() == [1, 0]
    with pytest.raises(UnknownLinkError, match="link id 7 is not in the network"):
        check_links(net, [0, 7])
    with pytest.raises(UnknownLinkError, match="'x1'"):
        check_links(net, ["x1"])


# ============================================================================ the closure model
@settings(max_examples=40, deadline=None)
@given(cases(weights=("minutes", "length_m")))
def test_fixed_legs_equal_attaching_again_when_every_entry_is_offered(c):
    """With every entry within reach offered (``extra_walk_m=inf``), keeping the baseline's legs less
    those on the closed link is the same as attaching the hubs again to the network without it:
    checked against the routing module's own full path (attach_points + nearest_hub)."""
    t = prepare(c, extra_walk_m=np.inf)
    net = t.network
    for e in range(net.n_edges):
        after = t.close([e])
        closed = make_network(np.column_stack([net.edge_from, net.edge_to]), np.column_stack([net.node_x, net.node_y]),
                              n_nodes=net.n_nodes, minutes=np.where(np.arange(net.n_edges) == e, np.nan, net.edge_minutes),
                              length_m=np.where(np.arange(net.n_edges) == e, np.nan, net.edge_length_m),
                              oneway=net.edge_oneway, geometry=net.edge_geometry)
        for k in range(len(t.kinds)):
            members = np.nonzero(t.hub_kind == k)[0]
            att = attach_points(closed, t.hub_xy[members], t.weight, max_access_m=c["max_access_m"],
                                extra_walk_m=np.inf)
            cost, _ = nearest_hub(closed, att, t.weight, t.direction)
            np.testing.assert_allclose(after.forests[k].cost, cost, rtol=1e-12)


# ============================================================================ real and demo networks
def _demo_trips():
    from geo_reach.pipeline import build_or_read, layer_specs, read_hubs, read_settlements
    from geo_reach.study import load_study

    study = load_study(Path(__file__).resolve().parents[1] / "data_samples" / "study.toml")
    net = build_or_read(study, layer_specs(study)).network
    hubs = read_hubs(study, study.hubs, net.crs)
    st_ = read_settlements(study, net.crs)
    import shapely

    return net, hubs, shapely.get_coordinates(st_.geometry.values), st_["population"].to_numpy(float)


def test_demo_network_every_link_equals_brute_force():
    """The invented demo region (road, rail with stations, cable without minutes, one-way links, a
    bridge on another level), its 7 hubs of 3 kinds and 75 settlements, every link."""
    net, hubs, sxy, pop = _demo_trips()
    t = HubTrips.prepare(net, hubs.xy, hubs.ids, hubs.kinds, place_xy=sxy, people=pop)
    got = link_criticality(t).table
    ref = R.link_table(t, range(net.n_edges), "person_minutes_added")
    R.assert_tables_equal(got, ref, rtol=1e-9, atol=1e-6)
    assert (got["people_cut_off"] > 0).any() and (got["person_minutes_added"] > 0).any()
    # nodes standing in for people, trips from the hubs
    t2 = HubTrips.prepare(net, hubs.xy, hubs.ids, hubs.kinds, direction="from-hub")
    R.assert_tables_equal(link_criticality(t2).table, R.link_table(t2, range(net.n_edges), "person_minutes_added"))


def _geodanet(name):
    import libpysal

    return os.path.join(os.path.dirname(libpysal.examples.__file__), "geodanet", f"{name}.shp")


def test_real_streets_every_link_equals_brute_force():
    """libpysal's GeoDaNet layers (real digitised streets, schools, and other real points used as
    places of one person each, every fourth of them): the schools are hubs of two kinds (alternating), every link.
    Entries are offered up to 100 m beyond the nearest (the default 1 km would offer every street of
    this 1.6 km town to every point, which only slows the reference down)."""
    import geopandas as gpd
    import shapely

    from geo_reach.network.build import LayerSpec, build_network

    net = build_network([LayerSpec(_geodanet("streets"))]).network
    schools = gpd.read_file(_geodanet("schools")).to_crs(net.crs)
    places = gpd.read_file(_geodanet("crimes")).to_crs(net.crs)
    hxy = shapely.get_coordinates(schools.geometry.values)
    kinds = np.where(np.arange(len(hxy)) % 2 == 0, "north", "south").astype(object)
    pxy = shapely.get_coordinates(places.geometry.values)[::4]   # 72 of the 287 points
    for weight in ("minutes", "length_m"):
        t = HubTrips.prepare(net, hxy, None, kinds, weight=weight, place_xy=pxy, extra_walk_m=100.0)
        got = link_criticality(t).table
        R.assert_tables_equal(got, R.link_table(t, range(net.n_edges), added_field(weight)), atol=1e-6)
    t = HubTrips.prepare(net, hxy, None, kinds, extra_walk_m=100.0)       # nodes as people
    got = link_criticality(t).table
    R.assert_tables_equal(got, R.link_table(t, range(net.n_edges), "person_minutes_added"), atol=1e-6)
    assert got["cut_edge"].sum() > 0 and got["person_minutes_added"].max() > 0


def test_work_is_far_below_one_search_per_link():
    """On a 40 x 40 grid with 10 hubs the repairs are worth a few dozen full searches, not 3,000."""
    sys.path.insert(0, str(Path(__file__).parent))
    from helpers.routing_nets import grid

    net = grid(40, 40, spacing=100.0)
    rng = np.random.default_rng(3)
    t = HubTrips.prepare(net, rng.uniform(0, 3900, (10, 2)))
    res = link_criticality(t)
    assert res.work["naive_full_searches"] == net.n_edges
    assert 1.0 < res.work["full_searches"] < 0.05 * net.n_edges


# ---------------------------------------------------------------- one trip, one number
@pytest.mark.parametrize("with_river", [False, True])
def test_baseline_place_costs_are_the_travel_models(with_river):
    """With no link closed, a settlement's cost in the criticality engine is the cost the travel model
    (every other view's) gives the same trip: straight walks, and walks round a river barrier on the
    friction grid, including a settlement next to a hub that walks straight to it."""
    import geopandas as gpd
    import shapely
    from pyproj import CRS

    from geo_reach.analysis.options import RoutingOptions
    from geo_reach.analysis.travel import TravelModel
    from geo_reach.ingest.rasters import Grid

    utm = CRS.from_epsg(32633)
    net = make_network([(0, 1), (1, 2), (2, 3), (3, 0)], [[0, 0], [4000, 0], [4000, 3000], [0, 3000]],
                       minutes=[4.0, 3.0, 4.0, 3.0])
    object.__setattr__(net, "crs", utm)
    opts = RoutingOptions(weight="minutes", walk_kmh=4.0, max_access_m=2500)
    model = TravelModel(opts)
    if with_river:
        g = Grid.from_bounds((-1000, -1000, 5000, 4000), 50, 0, crs=utm)
        river = gpd.GeoDataFrame(geometry=[shapely.box(1900, 200, 2100, 2800)], crs=utm)
        model = TravelModel.build(opts, g, barriers=river)
    hubs = np.array([[500.0, 300.0], [3500.0, 2700.0]])
    places = np.array([[600.0, 350.0], [2600.0, 1500.0], [1500.0, 1500.0], [3900.0, 1600.0]])
    trips = HubTrips.prepare(net, hubs, ["a", "b"], None, weight="minutes", place_xy=places,
                             people=np.ones(4), travel=model)
    want = model.hub_trips(net, places, hubs)[None].cost
    np.testing.assert_allclose(trips.place_cost[0], want, rtol=1e-9)
    if not with_river:   # straight walking: the first settlement walks 111.8 m straight to hub a
        assert trips.place_cost[0][0] == pytest.approx(np.hypot(100, 50) / (4000 / 60))
