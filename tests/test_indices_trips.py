"""The settlement-to-hub cost function of the indices and siting models, against independent references.

References used here:
* ``geo_reach.analysis.routing.od_matrix`` (the costs ``geo-reach od`` prints),
  itself tested against networkx in ``tests/test_routing.py``: the bounded
  sparse costs must be the same trips (one trip, one number, issue 11).
* networkx's Dijkstra (Hagberg, Schult & Swart 2008, "Exploring network
  structure, dynamics, and function using NetworkX", SciPy 2008) on a graph
  with the access legs written in by hand, for a one-way case worked by hand.
* Hand-computed values on a one-way loop (written beside the checks).
"""

from __future__ import annotations

import sys
from pathlib import Path

import networkx as nx
import numpy as np
import pytest
import scipy.sparse as sp
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.sparse.csgraph import dijkstra

sys.path.insert(0, str(Path(__file__).parent))
from helpers.routing_nets import make_network, random_network  # noqa: E402

from geo_reach.analysis.attach import attach_points  # noqa: E402
from geo_reach.analysis.indices import trips  # noqa: E402
from geo_reach.analysis.indices.trips import trip_costs  # noqa: E402
from geo_reach.analysis.trips import od_matrix  # noqa: E402
from geo_reach.errors import OptionError  # noqa: E402

SETTINGS = settings(max_examples=40, deadline=None)


def od_reference(net, s_xy, h_xy, weight, direction="to-hub", **kw):
    """Full origin-destination costs from the routing module (settlement x hub)."""
    sa = attach_points(net, s_xy, weight, **kw)
    ha = attach_points(net, h_xy, weight, **kw)
    if direction == "to-hub":
        return od_matrix(net, sa, ha, weight).cost
    return od_matrix(net, ha, sa, weight).cost.T


def between_costs(ref, q=0.5):
    """A bound halfway between two distinct costs (a bound equal to a cost would test float rounding)."""
    fin = np.unique(ref[np.isfinite(ref)])
    if len(fin) < 2:
        return 10.0 if not len(fin) else float(fin[0]) + 1.0
    k = min(int(q * (len(fin) - 1)), len(fin) - 2)
    return float(fin[k] + fin[k + 1]) / 2.0


def check_against(ref, got, within):
    """Pairs == every od cost <= within; nearest == row minimum of od."""
    want = np.where(ref <= within, ref, np.inf)
    np.testing.assert_allclose(got.dense(), want, rtol=1e-9, atol=1e-12)
    assert np.array_equal(np.isfinite(got.dense()), np.isfinite(want))
    np.testing.assert_allclose(got.nearest_cost, ref.min(axis=1) if ref.shape[1] else np.inf, rtol=1e-9)
    has = np.isfinite(got.nearest_cost)
    # the nearest hub is one whose cost is the least
    np.testing.assert_allclose(ref[np.nonzero(has)[0], got.nearest_hub[has]], got.nearest_cost[has], rtol=1e-9)
    assert np.all(got.nearest_hub[~has] == -1)


@SETTINGS
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(2, 30), ns=st.integers(1, 12), nh=st.integers(1, 12),
       weight=st.sampled_from(["minutes", "length_m"]), direction=st.sampled_from(["to-hub", "from-hub"]))
def test_costs_equal_od_matrix(seed, n, ns, nh, weight, direction):
    """Random multigraphs with one-way, zero-cost and missing-cost links; both search sides are used
    (fewer settlements than hubs, or more)."""
    rng = np.random.default_rng(seed)
    net = random_network(rng, n, int(rng.integers(1, 3 * n)), nan_prob=0.1)
    s_xy = rng.uniform(-500, 5500, (ns, 2))
    h_xy = rng.uniform(-500, 5500, (nh, 2))
    kw = dict(max_access_m=float(rng.choice([800.0, 5000.0])), walk_kmh=float(rng.choice([3.0, 5.0])))
    ref = od_reference(net, s_xy, h_xy, weight, direction, **kw)
    within = between_costs(ref)
    got = trip_costs(net, s_xy, h_xy, within=within, weight=weight, direction=direction, **kw)
    check_against(ref, got, within)
    # unbounded: every finite od cost is a pair
    full = trip_costs(net, s_xy, h_xy, weight=weight, direction=direction, **kw)
    check_against(ref, full, np.inf)


@SETTINGS
@given(seed=st.integers(0, 2**32 - 1))
def test_pruning_changes_no_cost(seed):
    """The dropped access arcs are never on a least-cost trip: pruned and unpruned graphs agree."""
    rng = np.random.default_rng(seed)
    net = random_network(rng, 25, 60, nan_prob=0.05)
    s_xy = rng.uniform(0, 5000, (15, 2))
    h_xy = rng.uniform(0, 5000, (6, 2))
    got = trip_costs(net, s_xy, h_xy, within=15.0)
    keep = trips._prune
    try:
        trips._prune = lambda side, adj: side
        plain = trip_costs(net, s_xy, h_xy, within=15.0)
    finally:
        trips._prune = keep
    np.testing.assert_array_equal(got.settlement, plain.settlement)
    np.testing.assert_array_equal(got.hub, plain.hub)
    np.testing.assert_allclose(got.cost, plain.cost, rtol=1e-12)
    np.testing.assert_allclose(got.nearest_cost, plain.nearest_cost, rtol=1e-12)


def test_pruning_drops_far_entries_on_a_grid():
    """On a 100 m street grid a point is offered every edge within 1 km beyond its nearest; walking at
    5 km/h against 30 km/h streets, only the near entries can be on a least-cost trip."""
    from helpers.routing_nets import grid

    net = grid(25, 25, spacing=100.0, minutes=0.2)      # 100 m in 0.2 min = 30 km/h
    side = trips._side(net, [[1234.0, 1187.0]], None, "minutes", "leave", 5000.0, 5.0)
    pruned = trips._prune(side, net.csr("minutes"))
    assert len(side.point) > 200
    assert len(pruned.point) <= 8
    # the kept arcs reach every node as cheaply as all the arcs did (one search each)
    n = net.n_nodes

    def costs(s):
        g = trips._csr(n + 1, net.csr("minutes").matrix, n + s.point, s.node, s.cost)
        return dijkstra(g, indices=[n])[0][:n]

    np.testing.assert_allclose(costs(pruned), costs(side), rtol=1e-12)


def test_scipy_dijkstra_takes_the_cheapest_of_parallel_arcs():
    """The graph keeps parallel arcs; scipy's Dijkstra must relax each (cheapest wins) and keep
    explicit zeros as arcs.  Pinned here so a change in scipy shows."""
    g = sp.csr_array((np.array([5.0, 2.0, 7.0, 0.0]), np.array([1, 1, 2, 2], np.int32),
                      np.array([0, 3, 4, 4], np.int32)), shape=(3, 3))
    # row 0: 0->1 at 5 and at 2, 0->2 at 7; row 1: 1->2 at 0 (explicit zero)
    np.testing.assert_array_equal(dijkstra(g, indices=[0])[0], [0.0, 2.0, 2.0])
    np.testing.assert_array_equal(dijkstra(g, indices=[0], limit=2.0)[0], [0.0, 2.0, 2.0])


def test_one_way_loop_by_hand_and_networkx():
    """A one-way square loop 0->1->2->3->0 of 1 km, 1-minute links (clockwise seen from above:
    (0,0) -> (1000,0) -> (1000,1000) -> (0,1000)).  Settlement S 50 m below the middle of link 0->1,
    hub H 50 m right of the middle of link 1->2.

    to-hub (S -> H): walk 50 m (0.6 min at 5 km/h) + half of 0->1 (0.5) + half of 1->2 (0.5) + walk
    50 m (0.6) = 2.2 min.
    from-hub (H -> S): walk 0.6 + rest of 1->2 (0.5) + 2->3 (1) + 3->0 (1) + half of 0->1 (0.5)
    + walk 0.6 = 4.2 min.  The two directions differ, as the one-way links say.
    """
    xy = np.array([[0, 0], [1000, 0], [1000, 1000], [0, 1000]], float)
    net = make_network([(0, 1), (1, 2), (2, 3), (3, 0)], xy, minutes=1.0, oneway=True)
    s, h = [[500.0, -50.0]], [[1050.0, 500.0]]
    kw = dict(max_access_m=100.0)   # only the nearest link is within reach of each point
    to = trip_costs(net, s, h, within=10.0, **kw)
    fro = trip_costs(net, s, h, within=10.0, direction="from-hub", **kw)
    assert to.cost.tolist() == pytest.approx([2.2])
    assert fro.cost.tolist() == pytest.approx([4.2])
    # networkx with the points written in as nodes: S joins mid-link 0->1, H mid-link 1->2
    g = nx.DiGraph()
    g.add_weighted_edges_from([(0, "s_mid", 0.5), ("s_mid", 1, 0.5), (1, "h_mid", 0.5), ("h_mid", 2, 0.5),
                               (2, 3, 1.0), (3, 0, 1.0), ("S", "s_mid", 0.6), ("s_mid", "S", 0.6),
                               ("H", "h_mid", 0.6), ("h_mid", "H", 0.6)])
    assert to.cost[0] == pytest.approx(nx.dijkstra_path_length(g, "S", "H"))
    assert fro.cost[0] == pytest.approx(nx.dijkstra_path_length(g, "H", "S"))
    # a bound between the two keeps the pair one way only
    assert trip_costs(net, s, h, within=3.0, **kw).n_pairs == 1
    assert trip_costs(net, s, h, within=3.0, direction="from-hub", **kw).n_pairs == 0


def test_hub_nodes_equal_od_to_nodes():
    rng = np.random.default_rng(3)
    net = random_network(rng, 30, 70)
    s_xy = rng.uniform(0, 5000, (9, 2))
    nodes = np.array([0, 5, 7, 29])
    ref = od_matrix(net, attach_points(net, s_xy, "minutes"), nodes, "minutes").cost
    got = trip_costs(net, s_xy, hub_nodes=nodes, within=12.0)
    check_against(ref, got, 12.0)


def test_same_edge_direct_trip_respects_one_way():
    """Settlement and hub on one 1 km one-way link (0 -> 1), 10 m off it, at 200 m and 700 m.
    Forward: walk 10 m (0.12 min) + 0.5 of the link (0.5 min) + walk 10 m (0.12) = 0.74 min.
    Backward (hub at 200 m, settlement at 700 m): not along the link; with nothing else, no trip."""
    xy = np.array([[0, 0], [1000, 0]], float)
    net = make_network([(0, 1)], xy, minutes=1.0, oneway=True)
    t = trip_costs(net, [[200.0, 10.0]], [[700.0, 10.0]], within=5.0)
    assert t.cost.tolist() == pytest.approx([0.74])
    back = trip_costs(net, [[700.0, 10.0]], [[200.0, 10.0]], within=5.0)
    assert back.n_pairs == 0 and np.isinf(back.nearest_cost[0]) and back.nearest_hub[0] == -1


def test_unattached_points_have_no_trips():
    xy = np.array([[0, 0], [1000, 0]], float)
    net = make_network([(0, 1)], xy, minutes=1.0)
    t = trip_costs(net, [[500.0, 10.0], [500.0, 9000.0]], [[100.0, 0.0]], within=60.0, max_access_m=5000.0)
    assert t.settlement_attached.tolist() == [True, False]
    assert t.settlement.tolist() == [0]
    assert np.isinf(t.nearest_cost[1])
    assert t.settlement_access_m[1] == pytest.approx(9000.0)


def test_refusals():
    xy = np.array([[0, 0], [1000, 0]], float)
    net = make_network([(0, 1)], xy)
    with pytest.raises(OptionError, match="within"):
        trip_costs(net, [[0, 0]], [[1, 1]], within=0.0)
    with pytest.raises(OptionError, match="direction"):
        trip_costs(net, [[0, 0]], [[1, 1]], within=1.0, direction="both")
    with pytest.raises(OptionError, match="either"):
        trip_costs(net, [[0, 0]], within=1.0)


@pytest.mark.parametrize("seed", range(6))
@pytest.mark.parametrize("direction", ["to-hub", "from-hub"])
def test_chunked_attachment_equals_od_matrix(seed, direction, monkeypatch):
    """The larger side is attached a few points at a time (4 here): the same costs as od_matrix."""
    monkeypatch.setattr(trips, "_CHUNK", 4)
    rng = np.random.default_rng(seed)
    net = random_network(rng, 25, 70, nan_prob=0.05)
    for ns, nh in ((13, 3), (3, 11)):
        s_xy = rng.uniform(0, 5000, (ns, 2))
        h_xy = rng.uniform(0, 5000, (nh, 2))
        ref = od_reference(net, s_xy, h_xy, "minutes", direction)
        within = between_costs(ref, 0.7)
        check_against(ref, trip_costs(net, s_xy, h_xy, within=within, direction=direction), within)



@pytest.mark.parametrize("seed", range(8))
def test_nearest_among_a_subset_of_hubs(seed):
    """The nearest hub sought among some hubs only (the siting model's existing hubs): the row minimum of
    od_matrix over those columns, whatever the pairs to the other hubs."""
    rng = np.random.default_rng(seed)
    net = random_network(rng, 25, 70, nan_prob=0.05)
    s_xy = rng.uniform(0, 5000, (9, 2))
    h_xy = rng.uniform(0, 5000, (7, 2))
    among = rng.choice(7, int(rng.integers(0, 4)), replace=False)
    ref = od_reference(net, s_xy, h_xy, "minutes")
    within = between_costs(ref, 0.5)
    got = trip_costs(net, s_xy, h_xy, within=within, nearest_among=among)
    want = ref[:, among].min(axis=1) if len(among) else np.full(9, np.inf)
    np.testing.assert_allclose(got.nearest_cost, want, rtol=1e-9)
    has = np.isfinite(want)
    assert np.isin(got.nearest_hub[has], among).all() and (got.nearest_hub[~has] == -1).all()
    np.testing.assert_allclose(ref[np.nonzero(has)[0], got.nearest_hub[has]], want[has], rtol=1e-9)
    np.testing.assert_allclose(got.dense(), np.where(ref <= within, ref, np.inf), rtol=1e-9)


class _Chunked:
    """An in-process executor that says it has three workers, so trip_costs splits its searches into chunks."""

    n_workers = 3
    chunks = 0

    def map(self, func, chunks, shared=None, progress=None):
        self.chunks = len(chunks)
        return [func(c, shared) for c in chunks]


@SETTINGS
@given(seed=st.integers(0, 2**32 - 1), ns=st.integers(1, 15), nh=st.integers(1, 15),
       direction=st.sampled_from(["to-hub", "from-hub"]))
def test_searches_in_chunks_give_the_same_pairs_bit_for_bit(seed, ns, nh, direction):
    """The sources split over an executor (as on a cluster): the same pairs, in the same order, same costs."""
    rng = np.random.default_rng(seed)
    net = random_network(rng, 20, 50, nan_prob=0.05)
    s_xy = rng.uniform(0, 5000, (ns, 2))
    h_xy = rng.uniform(0, 5000, (nh, 2))
    plain = trip_costs(net, s_xy, h_xy, within=20.0, direction=direction)
    ex = _Chunked()
    split = trip_costs(net, s_xy, h_xy, within=20.0, direction=direction, executor=ex)
    assert ex.chunks == (min(ns, nh, 12) if min(ns, nh) >= 2 else 0)
    for f in ("settlement", "hub", "cost", "nearest_cost", "nearest_hub"):
        np.testing.assert_array_equal(getattr(plain, f), getattr(split, f), err_msg=f)


@SETTINGS
@given(seed=st.integers(0, 2**32 - 1), direction=st.sampled_from(["to-hub", "from-hub"]))
def test_with_the_travel_model_costs_equal_its_od_matrix(seed, direction):
    """One trip, one number: given the run's TravelModel, the pairs and the nearest hub are the model's own
    od costs - walk legs onto the network and the straight walk between a settlement and a hub within
    reach (the reference: TravelModel.od, checked against networkx in tests/test_travel.py)."""
    from geo_reach.analysis.options import RoutingOptions
    from geo_reach.analysis.travel import TravelModel

    rng = np.random.default_rng(seed)
    net = random_network(rng, 20, 45, nan_prob=0.05)
    s_xy = rng.uniform(-300, 5300, (9, 2))
    h_xy = np.vstack([rng.uniform(-300, 5300, (4, 2)), s_xy[:2] + rng.uniform(-300, 300, (2, 2))])
    model = TravelModel(RoutingOptions(weight="minutes", direction=direction, max_access_m=1500.0, walk_kmh=4.0))
    if direction == "to-hub":
        ref = model.od(net, s_xy, h_xy).cost
    else:
        ref = model.od(net, h_xy, s_xy).cost.T
    within = between_costs(ref)
    got = trip_costs(net, s_xy, h_xy, within=within, direction=direction, travel=model)
    check_against(ref, got, within)
    check_against(ref, trip_costs(net, s_xy, h_xy, direction=direction, travel=model), np.inf)
