"""Regression: adding a road must never make a far settlement's trip dearer.

Found on the demo study with ``weight = "length_m"``: a new road within 5 km of a settlement that
lay farther than ``max_access_m`` from every road shrank its reach back to 5 km, and the leg it
used before (a long walk to a road near the hub) was no longer offered, so the trip got 8 km longer.

Invented case (hand-computed): a hub 50 m south of a 1 km road R1 (x = -500 .. 500, y = 0); a
village at (0, 7000), 7 km from R1.  Without the new road the village walks 7,000 m to R1 at
(0, 0), then 50 m on foot to the hub: 7,050 m, or 7,050 m / (5 km/h) = 84.6 minutes.  The scenario
adds R2, a slow track 1 km from the village that goes the long way round (east 20 km, south 6 km,
west to R1's east end), 200 minutes in all: the village's trip over R2 costs 1,000 m + 45,500 m +
550 m on length_m and 12 + 200 + ... minutes, far dearer than the old walk; the old walk is still
there, so the cheapest trip must stay 7,050 m / 84.6 minutes.

Property (Cormen, Leiserson, Rivest and Stein (2009), Introduction to Algorithms, 3rd ed., ch. 24,
from memory): a shortest-path weight is a minimum over paths; adding a road only adds paths, so the
minimum cannot grow.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).parent))
from helpers.surface_nets import net_from_edges  # noqa: E402

from geo_reach.analysis.options import RoutingOptions  # noqa: E402
from geo_reach.analysis.travel import TravelModel  # noqa: E402

HUB = np.array([[0.0, -50.0]])
VILLAGE = np.array([[0.0, 7000.0]])
NODES = [(-500.0, 0.0), (500.0, 0.0)]
R2_NODES = [(0.0, 6000.0), (20000.0, 6000.0), (20000.0, 0.0)]


def roads(with_r2: bool):
    xy = list(NODES) + (R2_NODES if with_r2 else [])
    edges = [(0, 1)]
    minutes = [1.0]
    if with_r2:
        edges += [(2, 3), (3, 4), (4, 1)]
        minutes += [80.0, 40.0, 80.0]   # 200 minutes along R2 to R1's east end
    return net_from_edges(xy, edges, minutes=minutes)


def village_cost(weight, with_r2):
    model = TravelModel(RoutingOptions(weight=weight, walk_kmh=5.0))
    net = roads(with_r2)
    places = model.attach(net, VILLAGE, roles=("leave",), always_join=True)
    return model.hub_trips(net, places, HUB, exact=True)[None].cost[0]


@pytest.mark.parametrize("weight, expected", [("length_m", 7050.0), ("minutes", 7050.0 * 60.0 / 5000.0)])
def test_a_road_near_a_far_village_never_makes_its_trip_dearer(weight, expected):
    before = village_cost(weight, with_r2=False)
    after = village_cost(weight, with_r2=True)
    assert before == pytest.approx(expected, rel=1e-9)   # the hand-computed walk to R1 and on to the hub
    assert after <= before + 1e-9, (weight, before, after)
    assert after == pytest.approx(expected, rel=1e-9)    # R2 is the long way round: the old walk still wins


def test_the_long_way_round_is_taken_when_it_is_cheaper():
    """The same village with R2 fast (10 minutes in all): minutes fall to 12 + 10 + 1 * 0.5 + 0.6."""
    model = TravelModel(RoutingOptions(weight="minutes", walk_kmh=5.0))
    xy = list(NODES) + R2_NODES
    net = net_from_edges(xy, [(0, 1), (2, 3), (3, 4), (4, 1)], minutes=[1.0, 4.0, 2.0, 4.0])
    places = model.attach(net, VILLAGE, roles=("leave",), always_join=True)
    cost = model.hub_trips(net, places, HUB, exact=True)[None].cost[0]
    # 1 km walk (12 min), R2 (10 min), R1 from its east end to x = 0 (0.5 min), 50 m walk (0.6 min)
    assert cost == pytest.approx(12.0 + 10.0 + 0.5 + 0.6, rel=1e-9)


def test_route_and_od_price_the_settlements_trip_with_the_same_exact_rule():
    """One trip, one number: a village at (0, 4900), 2,000 m from a track (x = -2000) that leads to the hub
    the long way round, and 4,900 m from the hub's road R1; the hub stands 150 m south of R1, 5,050 m from
    the village (beyond max_access_m: no direct walk).  Both entries lie within max_access_m, but the road
    is 2,900 m of walking beyond the track, so on length_m (a metre walked costs a metre ridden, no road
    is "faster") the pruned entries drop it and the trip rides the track: 2,000 m of walk, 7,900 + 1,500
    m round, 2,850 m up the link x = -500 to y = -150 and 500 m on foot east to the hub: 14,750 m.  The exact rule walks to the road: 4,900 m + 150 m = 5,050 m, for the
    settlement, route and od alike.  On minutes the road is kept as the faster one: 5,050 m at 5 km/h."""
    xy = [(-500.0, 0.0), (500.0, 0.0), (-2000.0, 4900.0), (-2000.0, -3000.0), (-500.0, -3000.0)]
    hub = np.array([[0.0, -150.0]])
    net = net_from_edges(xy, [(0, 1), (2, 3), (3, 4), (4, 0)], minutes=[1.0, 20.0, 20.0, 20.0])
    village = np.array([[0.0, 4900.0]])
    for weight in ("length_m", "minutes"):
        model = TravelModel(RoutingOptions(weight=weight, walk_kmh=5.0))
        places = model.attach(net, village, roles=("leave",), always_join=True)
        hub_cost = model.hub_trips(net, places, hub, exact=True)[None].cost[0]
        want = float(model.weight.walk_cost(4900.0 + 150.0, 5.0))
        assert hub_cost == pytest.approx(want, rel=1e-9)
        o = model.attach(net, village, roles=("leave",))
        h = model.attach(net, hub, roles=("arrive",))
        assert model.route(net, o, h, exact=True).cost == pytest.approx(hub_cost, rel=1e-9)
        assert model.od(net, o, h, exact=True).cost[0, 0] == pytest.approx(hub_cost, rel=1e-9)
        pruned = model.route(net, o, h).cost
        if weight == "length_m":   # the case does exercise the pruning: without exact, the long way round
            assert pruned == pytest.approx(14750.0, rel=1e-9)
            assert model.hub_trips(net, places, hub)[None].cost[0] == pytest.approx(14750.0, rel=1e-9)
        else:
            assert pruned == pytest.approx(hub_cost, rel=1e-9)
