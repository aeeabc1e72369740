"""The travel model: one walk rule for every off-network leg, checked against closed forms and references.

References used here (each written out in the test, never calling the library's walk pricing):
* Straight walking: time = distance / speed (km/h -> m/min: kmh * 1000 / 60); common practice.
* Tobler, W. (1993). Three presentations on geographical analysis and modeling. NCGIA Technical
  Report 93-1: W = 6 exp(-3.5 |S + 0.05|) km/h; the model scales it so flat ground walks at
  the given speed (speed = walk_kmh * W(S) / W(0)).
* The grid walk against scipy.sparse.csgraph on the same friction grid (tests/helpers/walk_reference.py).
* The 8-neighbour grid metric's largest overstatement of a straight line, derived from the move
  geometry: a walk of dx >= dy >= 0 cells costs dx - dy + sqrt(2) dy, and the ratio to
  sqrt(dx^2 + dy^2) is largest at dy/dx = sqrt(2) - 1, where it is sqrt(4 - 2 sqrt(2)) = 1.0824
  (a 16-neighbour set only lowers it).
* Hand-computed values on tiny networks, written beside each check.
"""

from __future__ import annotations

import math
import sys
from pathlib import Path

import geopandas as gpd
import numpy as np
import pytest
import shapely
from hypothesis import given, settings
from hypothesis import strategies as st
from pyproj import CRS

sys.path.insert(0, str(Path(__file__).parent))
from helpers.routing_nets import make_network  # noqa: E402
from helpers.walk_reference import grid_lengths, kernel_moves, tobler_kmh, walk_length  # noqa: E402

from geo_reach.analysis.attach import DirectWalks  # noqa: E402
from geo_reach.analysis.options import RoutingOptions  # noqa: E402
from geo_reach.analysis.travel import TravelModel  # noqa: E402
from geo_reach.errors import OptionError  # noqa: E402
from geo_reach.ingest.rasters import Grid  # noqa: E402

UTM = CRS.from_epsg(32633)
BOUND_8 = math.sqrt(4.0 - 2.0 * math.sqrt(2.0))   # derived in the module notes: 1.0824


def minutes(metres, kmh):
    """The test's own price of a walk on flat open ground: metres / (km/h in metres per minute)."""
    return metres / (kmh * 1000.0 / 60.0)


def net_utm(edges, xy, **kw):
    net = make_network(edges, xy, **kw)
    object.__setattr__(net, "crs", UTM)
    return net


def grid_6km():
    return Grid.from_bounds((0, 0, 6000, 6000), 100, 0, crs=UTM)


# ---------------------------------------------------------------- closed-form legs at two speeds
@pytest.mark.parametrize("kmh", [5.0, 3.0])
def test_straight_leg_closed_form_at_two_walking_speeds(kmh):
    """A road 0 -> 1 along y = 0, 10 km in 10 minutes; a place at (3000, 400) walks 400 m to it.

    At 5 km/h: 400 m = 4.8 min, at 3 km/h: 8.0 min (the test's own arithmetic); node 0 is 3 km
    (3 min) along the road from the entry.  Every view prices the same trip."""
    net = net_utm([(0, 1)], [[0, 0], [10000, 0]], minutes=[10.0])
    model = TravelModel(RoutingOptions(weight="minutes", walk_kmh=kmh))
    walk = minutes(400.0, kmh)
    assert walk == pytest.approx({5.0: 4.8, 3.0: 8.0}[kmh])
    cost, hub = model.nearest_hub(net, [[3000.0, 400.0]])                     # access: node costs
    assert cost[0] == pytest.approx(walk + 3.0) and cost[1] == pytest.approx(walk + 7.0)
    r = model.route(net, [3000.0, 400.0], [0.0, 0.0])                         # route to node 0's place
    assert r.cost == pytest.approx(walk + 3.0) and r.access_m == pytest.approx(400.0)
    od = model.od(net, [[3000.0, 400.0]], [[0.0, 0.0], [10000.0, 0.0]])
    assert od.cost[0].tolist() == pytest.approx([walk + 3.0, walk + 7.0])
    t = model.hub_trips(net, [[3000.0, 400.0]], [[0.0, 0.0]])[None]           # settlements
    assert t.cost[0] == pytest.approx(walk + 3.0) and t.network_m[0] == pytest.approx(3000.0)


@pytest.mark.parametrize("kmh", [5.0, 3.6])
def test_grid_leg_closed_form_at_two_walking_speeds(kmh):
    """On a flat friction grid (100 m cells) a place at the centre (1050, 1050) walks straight south
    along a column of cells to a road along y = 350: 700 m exactly (7 moves between centres, the
    entry at a centre), so 8.4 min at 5 km/h and 11.67 min at 3.6 km/h."""
    g = grid_6km()
    net = net_utm([(0, 1)], [[50, 350], [5950, 350]], minutes=[59.0])      # 5.9 km at 6 km/h: 1 min per 100 m
    model = TravelModel.build(RoutingOptions(weight="minutes", walk_kmh=kmh), g, terrain=np.zeros(g.shape))
    assert model.on_grid
    walk = minutes(700.0, kmh)
    cost, _ = model.nearest_hub(net, [[1050.0, 1050.0]])
    assert cost[0] == pytest.approx(walk + 10.0, rel=1e-9)                  # 1000 m of road to node 0
    assert model.walk([[1050.0, 1050.0]], [[1050.0, 350.0]])[0][0] == pytest.approx(walk, rel=1e-12)
    # the walked length is the length of the walk, not the cost
    att = model.attach(net, [[1050.0, 1050.0]])
    best = int(np.argmin(att.leg_leave_cost))
    assert att.leg_walk_m[best] == pytest.approx(700.0)


@pytest.mark.parametrize("g_rise", [0.1, 0.25])
def test_tobler_leg_closed_form_both_ways(g_rise):
    """A plane rising northwards by ``g_rise`` (rise over run); a place at (1050, 1050) and the road point
    (1050, 350) 700 m due south.  Walking down (place -> road) every move has slope -g_rise, walking up
    +g_rise; Tobler's speed scaled to 5 km/h on the flat gives the closed form."""
    g = grid_6km()
    _, y = g.cell_centres()
    terrain = np.repeat((g_rise * y)[:, None], g.width, axis=1)
    model = TravelModel.build(RoutingOptions(weight="minutes", walk_kmh=5.0), g, terrain=terrain)
    down_kmh = 5.0 * tobler_kmh(-g_rise) / tobler_kmh(0.0)
    up_kmh = 5.0 * tobler_kmh(g_rise) / tobler_kmh(0.0)
    p, t = np.array([[1050.0, 1050.0]]), np.array([[1050.0, 350.0]])
    assert model.walk(p, t)[0][0] == pytest.approx(minutes(700.0, down_kmh), rel=1e-9)
    assert model.walk(t, p)[0][0] == pytest.approx(minutes(700.0, up_kmh), rel=1e-9)
    # an attached place prices each role the right way round
    net = net_utm([(0, 1)], [[50, 350], [5950, 350]], minutes=[59.0])
    att = model.attach(net, p)
    k = int(np.argmin(att.leg_leave_cost))
    assert att.leg_leave_cost[k] == pytest.approx(minutes(700.0, down_kmh), rel=1e-9)
    assert att.leg_arrive_cost[k] == pytest.approx(minutes(700.0, up_kmh), rel=1e-9)
    # flat ground walks at the given speed: Tobler's factor is 1 at slope 0
    flat = TravelModel.build(RoutingOptions(weight="minutes", walk_kmh=5.0), g, terrain=np.zeros(g.shape))
    assert flat.walk(p, t)[0][0] == pytest.approx(minutes(700.0, 5.0), rel=1e-12)


def test_network_length_counts_the_edge_the_place_sits_on():
    """Hand-worked: a village 50 m off the middle of a 10 km edge A-B, then 7 km on B-C to a hub 10 m off C.
    The network part of its trip is 5 km + 7 km = 12 km (the partial edge it sits on included),
    not the 7 km from the node where it joins."""
    xy = [[0, 0], [10000, 0], [17000, 0]]
    net = net_utm([(0, 1), (1, 2)], xy, minutes=[10.0, 7.0])
    model = TravelModel(RoutingOptions(weight="minutes"))
    t = model.hub_trips(net, [[5000.0, 50.0]], [[17000.0, 10.0]])[None]
    assert t.network_m[0] == pytest.approx(12000.0)
    assert t.cost[0] == pytest.approx(minutes(50, 5) + 5.0 + 7.0 + minutes(10, 5))
    r = model.route(net, [5000.0, 50.0], [17000.0, 10.0])
    assert r.length_m - r.access_m == pytest.approx(12000.0) and r.cost == pytest.approx(t.cost[0])


def test_a_place_to_itself_costs_nothing_and_near_places_walk_straight():
    """route P -> P is 0 on every weight; two places 300 m apart, 2 km from a road, walk straight
    (3.6 min at 5 km/h) rather than 2 x 2 km to the road and back."""
    net = net_utm([(0, 1)], [[0, 0], [10000, 0]], minutes=[10.0])
    for w in ("minutes", "length_m", "hops"):
        model = TravelModel(RoutingOptions(weight=w))
        assert model.route(net, [500.0, 2000.0], [500.0, 2000.0]).cost == 0.0
    model = TravelModel(RoutingOptions(weight="minutes"))
    r = model.route(net, [500.0, 2000.0], [800.0, 2000.0])
    assert r.cost == pytest.approx(minutes(300, 5)) and len(r.edges) == 0 and r.length_m == pytest.approx(300)
    # on hops the walk is free: only a place to itself walks; others ride (0.03 links along the edge)
    hops = TravelModel(RoutingOptions(weight="hops"))
    assert hops.route(net, [500.0, 2000.0], [800.0, 2000.0]).cost == pytest.approx(0.03)
    d = hops.direct([[500.0, 2000.0], [800.0, 2000.0]], [[800.0, 2000.0]])
    assert d.src.tolist() == [1] and d.cost.tolist() == [0.0]


# ---------------------------------------------------------------- the friction grid
@settings(max_examples=25, deadline=None)
@given(seed=st.integers(0, 2**32 - 1))
def test_flat_grid_walk_lies_between_the_straight_line_and_the_grid_bound(seed):
    """Every walk is a chain of straight pieces, so never shorter than the straight line; the
    grid part overstates it by at most BOUND_8, and the start and end pieces add at most about
    three cells (half a diagonal each end, and a diagonal between the end cells' centres)."""
    rng = np.random.default_rng(seed)
    g = grid_6km()
    model = TravelModel.build(RoutingOptions(weight="minutes", walk_kmh=4.0), g, terrain=np.zeros(g.shape))
    a = rng.uniform(300, 5700, (20, 2))
    b = np.clip(a + rng.uniform(-3000, 3000, (20, 2)), 1, 5999)
    d = np.hypot(*(b - a).T)
    got, walked = model.walk(a, b)
    straight = minutes(d, 4.0)
    ok = d <= 5000
    assert np.all(np.isinf(got[~ok]))
    assert np.all(got[ok] >= straight[ok] * (1 - 1e-12))
    assert np.all(got[ok] <= BOUND_8 * straight[ok] + minutes(3 * 100 * math.sqrt(2), 4.0))
    # on uniform ground the walked length is the cost at the walking pace, and both ways cost the same
    assert walked[ok] == pytest.approx(got[ok] * 4.0 * 1000 / 60, rel=1e-9)
    back, _ = model.walk(b, a)
    assert back[ok] == pytest.approx(got[ok], rel=1e-9)


def _river_case():
    """A 100 m grid over 4 x 3 km; a river 260 m wide (x 2020..2280) that cells 20..22 touch."""
    g = Grid.from_bounds((0, 0, 4000, 3000), 100, 0, crs=UTM)
    river = shapely.box(2020, -100, 2280, 3100)
    return g, river


@settings(max_examples=15, deadline=None)
@given(seed=st.integers(0, 2**32 - 1))
def test_grid_walk_matches_csgraph_reference_with_a_river(seed):
    """Places at cell centres, targets anywhere: the model's walk equals the reference's walk
    (scipy csgraph over the passable cells, then the documented straight end piece), at the
    walking pace; a target across the river is reached only round it (here: never)."""
    rng = np.random.default_rng(seed)
    g, river = _river_case()
    model = TravelModel.build(RoutingOptions(weight="minutes", walk_kmh=5.0), g,
                              barriers=gpd.GeoDataFrame(geometry=[river], crs=UTM))
    moves = kernel_moves()
    from helpers.walk_reference import barrier_cells

    x0, y1 = g.bounds[0], g.bounds[3]
    passable = ~barrier_cells(g.shape, x0, y1, 100.0, river)
    for _ in range(3):
        r, c = int(rng.integers(0, g.height)), int(rng.integers(0, g.width))
        if not passable[r, c]:
            continue
        p = (x0 + (c + 0.5) * 100, y1 - (r + 0.5) * 100)
        lengths = grid_lengths(passable, 100.0, (r, c), moves)
        ts = rng.uniform([0, 0], [4000, 3000], (8, 2))
        ts[0] = (2010.0, p[1] + 3)                        # just west of the river
        ts[1] = (2290.0, p[1] - 7)                        # just east of it
        got, _ = model.walk(np.repeat([p], len(ts), axis=0), ts)
        for t, v in zip(ts, got):
            ref = walk_length(p, t, lengths, x0, y1, 100.0, river)
            ref = minutes(ref, 5.0) if math.hypot(t[0] - p[0], t[1] - p[1]) <= 5000 else math.inf
            assert v == pytest.approx(ref, rel=1e-9), (p, t)
            if (t[0] < 2020 < p[0]) or (p[0] < 2020 and t[0] > 2280):
                assert math.isinf(v)                      # the river runs the whole grid: never crossed


def test_a_river_inside_one_cell_is_not_walked_across():
    """A 10 m wide river between a place and a road 40 m away, both in neighbouring cells: the
    straight 40 m is refused, and the river runs the whole grid, so the place cannot join."""
    g = Grid.from_bounds((0, 0, 2000, 2000), 100, 0, crs=UTM)
    river = gpd.GeoDataFrame(geometry=[shapely.box(1015, -50, 1025, 2050)], crs=UTM)
    net = net_utm([(0, 1)], [[1040, 0], [1040, 2000]], minutes=[20.0])
    model = TravelModel.build(RoutingOptions(weight="minutes"), g, barriers=river)
    att = model.attach(net, [[1000.0, 1000.0]])
    assert not att.attached[0] and att.blocked[0] and att.access_m[0] == pytest.approx(40.0)
    # the same place without the river walks the 40 m straight (both in one block of nine cells)
    free = TravelModel.build(RoutingOptions(weight="minutes"), g, terrain=np.zeros(g.shape))
    att = free.attach(net, [[1000.0, 1000.0]])
    assert att.leg_leave_cost.min() == pytest.approx(minutes(40, 5))


def test_a_place_in_a_cell_the_river_touches_still_walks_out_and_a_hub_on_a_bridge_reaches_it():
    """A village 30 m west of the river bank (its cell touched by the river) walks west to a road
    300 m away; a hub standing on the bridge (inside the river polygon) joins the bridge road."""
    g = Grid.from_bounds((0, 0, 2000, 2000), 100, 0, crs=UTM)
    river = gpd.GeoDataFrame(geometry=[shapely.box(1120, -50, 1180, 2050)], crs=UTM)
    xy = [[800, 0], [800, 2000], [800, 1500], [1500, 1500]]
    net = net_utm([(0, 1), (2, 3)], xy, minutes=[20.0, 7.0])   # a N-S road and a bridge road to the east
    model = TravelModel.build(RoutingOptions(weight="minutes"), g, barriers=river)
    att = model.attach(net, [[1090.0, 1000.0]])
    assert att.attached[0] and np.isfinite(att.leg_leave_cost).all()
    best = att.leg_leave_cost.min()
    assert minutes(290, 5) <= best <= minutes(290, 5) * BOUND_8 + minutes(150, 5)
    hub = model.attach(net, [[1150.0, 1500.0]])
    k = int(np.argmin(hub.leg_arrive_cost))
    assert hub.leg_edge[k] == 1 and hub.leg_arrive_cost[k] == pytest.approx(0.0, abs=1e-12)


def test_length_weight_walks_the_shortest_passable_walk():
    """On length_m a walk costs its metres, round the river: place (1950, 1450) to a road point east
    of a river that stops at y = 2000: the reference walks round its end."""
    g = Grid.from_bounds((0, 0, 4000, 3000), 100, 0, crs=UTM)
    river = shapely.box(2020, -100, 2280, 2000)
    model = TravelModel.build(RoutingOptions(weight="length_m", max_access_m=5000), g,
                              barriers=gpd.GeoDataFrame(geometry=[river], crs=UTM))
    from helpers.walk_reference import barrier_cells

    x0, y1 = g.bounds[0], g.bounds[3]
    passable = ~barrier_cells(g.shape, x0, y1, 100.0, river)
    lengths = grid_lengths(passable, 100.0, (15, 19), kernel_moves())   # (1950, 1450)
    ref = walk_length((1950.0, 1450.0), (2450.0, 1450.0), lengths, x0, y1, 100.0, river)
    got, walked = model.walk([[1950.0, 1450.0]], [[2450.0, 1450.0]])
    assert got[0] == pytest.approx(ref, rel=1e-12) and walked[0] == pytest.approx(ref, rel=1e-12)
    assert got[0] > 2 * 550   # round the river's end at y = 2000, not the 500 m across


def test_settlements_far_from_the_network_join_all_the_same_when_asked():
    """always_join: a place 6 km from the only road (beyond max_access_m 5000) joins its nearest entry."""
    net = net_utm([(0, 1)], [[0, 0], [10000, 0]], minutes=[10.0])
    model = TravelModel(RoutingOptions(weight="minutes", max_access_m=5000))
    assert not model.attach(net, [[5000.0, 6000.0]]).attached[0]
    att = model.attach(net, [[5000.0, 6000.0]], always_join=True)
    assert att.attached[0] and att.access_m[0] == pytest.approx(6000.0)
    k = int(np.argmin(att.leg_leave_cost))
    assert att.leg_leave_cost[k] == pytest.approx(minutes(6000, 5))


def test_options_are_checked_once_and_a_grid_needs_its_speed():
    g = grid_6km()
    with pytest.raises(OptionError, match="friction inputs need a grid"):
        TravelModel.build(RoutingOptions(), None, terrain=np.zeros(g.shape))
    from geo_reach.analysis.walkgrid import GridWalk, WalkGrid

    wg = WalkGrid.build(g, 5.0, terrain=np.zeros(g.shape))
    with pytest.raises(OptionError, match="made for walking at 5 km/h"):
        GridWalk(wg, RoutingOptions().weight, 4.0, 5000.0)
    net = net_utm([(0, 1)], [[0, 0], [10000, 0]], minutes=[10.0])
    att = TravelModel(RoutingOptions()).attach(net, [[0.0, 10.0]], roles=("leave",))
    with pytest.raises(OptionError, match="without pricing the 'arrive' walk"):
        att.arcs(net, "arrive")


def test_direct_walks_subset_renumbers():
    d = DirectWalks(np.array([0, 1, 2]), np.array([2, 0, 1]), np.array([1.0, 2.0, 3.0]), np.array([10.0, 20, 30]))
    s = d.subset(dst=[1, 2])
    assert s.src.tolist() == [0, 2] and s.dst.tolist() == [1, 0] and s.cost.tolist() == [1.0, 3.0]
    s = d.subset(src=[2], dst=[1])
    assert s.src.tolist() == [0] and s.dst.tolist() == [0] and s.walk_m.tolist() == [30.0]


def test_a_fast_road_beyond_the_extra_walk_is_still_offered():
    """Hand-worked: a place 20 m from a 6 km/h track and 1,500 m from a 60 km/h road (beyond the 1 km
    of extra walking), node 3 km along each.  Via the track: 20 m (0.24 min at 5 km/h) + 30 min =
    30.24 min; via the road: 1,500 m (18 min) + 3 min = 21 min, the cheaper trip."""
    xy = [[0, 0], [3000, 0], [0, 1520], [3000, 1520]]
    net = net_utm([(0, 1), (2, 3)], xy, minutes=np.array([30.0, 3.0]))
    model = TravelModel(RoutingOptions(weight="minutes", walk_kmh=5.0))
    cost, _ = model.nearest_hub(net, [[0.0, 20.0]])
    assert cost[3] == pytest.approx(minutes(1500, 5) + 3.0)
    assert cost[1] == pytest.approx(minutes(20, 5) + 30.0)
    # a slower road farther away adds nothing: its leg is not offered
    xy2 = xy + [[0, 2520], [3000, 2520]]
    net2 = net_utm([(0, 1), (2, 3), (4, 5)], xy2, minutes=np.array([30.0, 3.0, 20.0]))
    att = model.attach(net2, [[0.0, 20.0]])
    assert sorted(att.leg_edge.tolist()) == [0, 1]


def test_a_settlement_reaches_the_largest_component_however_far():
    """A place at (4000, 6000), 300 m from a cut-off track (nodes 2-3) and 6,000 m due north of node 1 of
    the main road 0-4-1 (beyond max_access_m 5000), the hub 10 m off node 0.  As a settlement it still
    walks to the main road: 6,000 m (72 min at 5 km/h), 4 min along it, 10 m to the hub (0.12 min)."""
    xy = [[0, 0], [4000, 0], [3800, 6300], [4300, 6300], [2000, 0]]
    net = net_utm([(0, 4), (4, 1), (2, 3)], xy, minutes=np.array([2.0, 2.0, 1.0]))   # main road 0-4-1: 3 nodes
    model = TravelModel(RoutingOptions(weight="minutes", max_access_m=5000.0))
    place, hub = [[4000.0, 6000.0]], [[0.0, 10.0]]
    t = model.hub_trips(net, place, hub)[None]
    assert np.isinf(t.cost[0]) and t.hub[0] == -1          # without: the cut-off track leads nowhere
    t = model.hub_trips(net, model.attach(net, place, always_join=True), hub)[None]
    assert t.cost[0] == pytest.approx(minutes(6000, 5) + 4.0 + minutes(10, 5))
    assert t.network_m[0] == pytest.approx(4000.0)


def test_the_largest_component_is_offered_even_when_slower():
    """Hand-worked: a hub 30 m from a fast 100 m cut-off track (6 s) and 1,500 m from the slow main road
    0-1-2 (10 min per km).  Neither within the extra walk nor faster than the track, the main road is
    still offered (the nearest entry onto the largest component): node 0 is 1,500 m on foot (18 min)
    plus two 10-minute links = 38 min from the hub; without it no node of the main road reaches it."""
    xy = [[0, 0], [1000, 0], [2000, 0], [2000, 1530], [2100, 1530]]
    net = net_utm([(0, 1), (1, 2), (3, 4)], xy, minutes=np.array([10.0, 10.0, 0.1]))
    cost, _ = TravelModel(RoutingOptions(weight="minutes")).nearest_hub(net, [[2000.0, 1500.0]])
    assert cost[0] == pytest.approx(minutes(1500, 5) + 20.0)


def test_a_settlement_beyond_reach_joins_its_nearest_road_even_off_the_largest_component():
    """A village 6 km north of a side road 3-4 that carries the hub (a component of its own), 9 km from
    the main road 0-1-2: as a settlement it walks the 6 km to the side road (72 min at 5 km/h) and on
    to the hub at node 4 (1 min); the main road leads to no hub."""
    xy = [[0, 0], [1000, 0], [2000, 0], [0, 3000], [1000, 3000]]
    net = net_utm([(0, 1), (1, 2), (3, 4)], xy, minutes=np.array([1.0, 1.0, 1.0]))
    model = TravelModel(RoutingOptions(weight="minutes", max_access_m=5000.0))
    t = model.hub_trips(net, model.attach(net, [[0.0, 9000.0]], always_join=True), [[1000.0, 3000.0]])[None]
    assert t.cost[0] == pytest.approx(minutes(6000, 5) + 1.0) and t.network_m[0] == pytest.approx(1000.0)


def test_a_settlement_beyond_reach_joins_its_nearest_road_when_the_largest_part_is_rail():
    """The largest component is a railway (5 nodes, no station within reach) and the hub's side road
    3 km away is its own part: a village 6 km from that road still walks there (72 min) and rides 1 min."""
    xy = [[0, 0], [1000, 3000], [20000, 0], [21000, 0], [22000, 0], [23000, 0], [24000, 0]]
    mode = np.array(["road", "rail", "rail", "rail", "rail"], object)
    net = net_utm([(1, 0), (2, 3), (3, 4), (4, 5), (5, 6)], xy, minutes=np.ones(5), mode=mode,
                  entry=np.array([True, True, False, False, False, False, False]))
    model = TravelModel(RoutingOptions(weight="minutes", max_access_m=5000.0))
    place = [[1000.0, 9000.0]]
    assert not model.attach(net, place).attached[0]
    t = model.hub_trips(net, model.attach(net, place, always_join=True), [[0.0, 0.0]])[None]
    assert t.cost[0] == pytest.approx(minutes(6000, 5) + 1.0)


def test_land_cover_pieces_are_walked_half_at_each_cells_pace():
    """Hand-worked, the kernel's move rule for straight pieces: a place at the centre of a 2 km/h cell
    (0.03 min/m) and a target at the centre of the 6 km/h cell east of it (0.01 min/m): 100 m at the
    mean pace, 2 min.  A target 30 m past that centre: 2 min + 30 m at 0.01 = 2.3 min (straight from
    the place would be 130 m x 0.02 = 2.6 min)."""
    g = Grid.from_bounds((0, 0, 1000, 1000), 100, 0, crs=UTM)
    lc = np.full(g.shape, 2, np.int64)
    lc[:, 5:] = 6                                   # columns from x = 500 m: class 6
    model = TravelModel.build(RoutingOptions(weight="minutes", walk_kmh=5.0), g, landcover=lc,
                              landcover_speeds={2: 2.0, 6: 6.0})
    cost, _ = model.walk([[450.0, 550.0], [450.0, 550.0]], [[550.0, 550.0], [580.0, 550.0]])
    assert cost.tolist() == pytest.approx([100 * (0.03 + 0.01) / 2, 2.0 + 30 * 0.01], rel=1e-12)
    # off the centres: (480, 550) to (520, 550) is a straight 40 m piece across the cells' boundary,
    # half at each pace: 0.8 min, both ways
    cost, _ = model.walk([[480.0, 550.0], [520.0, 550.0]], [[520.0, 550.0], [480.0, 550.0]])
    assert cost.tolist() == pytest.approx([40 * 0.02, 40 * 0.02], rel=1e-12)


def test_free_weights_walk_for_nothing_on_the_grid_but_only_where_passable():
    """hops on a friction grid: a place at the cell centre (450, 1350) walks 350 m due south for 0 links
    and rides its share of the 1 km edge (0.45 of a link to node 0); a barrier all round still leaves
    the place out."""
    g = Grid.from_bounds((0, 0, 2000, 2000), 100, 0, crs=UTM)
    net = net_utm([(0, 1)], [[0, 1000], [1000, 1000]], minutes=[10.0])
    model = TravelModel.build(RoutingOptions(weight="hops"), g, terrain=np.zeros(g.shape))
    cost, _ = model.nearest_hub(net, [[450.0, 1350.0]])
    assert cost.tolist() == pytest.approx([0.45, 0.55])
    ring = shapely.box(350, 1250, 550, 1450).difference(shapely.box(410, 1310, 490, 1390))
    walled = TravelModel.build(RoutingOptions(weight="hops"), g, barriers=gpd.GeoDataFrame(geometry=[ring], crs=UTM))
    att = walled.attach(net, [[450.0, 1350.0]])
    assert att.blocked[0] and not att.attached[0]


def test_walks_beyond_reach_are_refused_and_a_far_settlement_widens_its_own_window():
    """A walk longer than max_access_m costs inf (straight and on the grid); a settlement 6 km from the
    only road still walks there on the grid: 60 cells due south, 72 min at 5 km/h."""
    straight = TravelModel(RoutingOptions(weight="minutes", max_access_m=1000.0))
    assert straight.walk([[0.0, 0.0], [0.0, 0.0]], [[0.0, 900.0], [0.0, 1100.0]])[0].tolist() == \
        pytest.approx([minutes(900, 5), np.inf])
    g = Grid.from_bounds((0, 0, 3000, 8000), 100, 0, crs=UTM)
    net = net_utm([(0, 1)], [[50, 1050], [2950, 1050]], minutes=[29.0])
    model = TravelModel.build(RoutingOptions(weight="minutes", max_access_m=5000.0), g, terrain=np.zeros(g.shape))
    assert np.isinf(model.walk([[1050.0, 7050.0]], [[1050.0, 1050.0]])[0][0])
    att = model.attach(net, [[1050.0, 7050.0]], always_join=True)
    assert att.attached[0] and att.leg_leave_cost.min() == pytest.approx(minutes(6000, 5), rel=1e-12)


def test_hub_trips_per_group_name_hubs_of_the_whole_list():
    """Groups of hubs (kinds): each group's nearest hub is given as an index into all hubs."""
    net = net_utm([(0, 1)], [[0, 0], [10000, 0]], minutes=[10.0])
    model = TravelModel(RoutingOptions(weight="minutes"))
    hubs = [[9000.0, 10.0], [1000.0, 10.0], [5000.0, 10.0]]
    out = model.hub_trips(net, [[0.0, 10.0]], hubs, {"a": [0, 2], "b": [1]})
    assert out[None].hub.tolist() == [1] and out["a"].hub.tolist() == [2] and out["b"].hub.tolist() == [1]
    assert out["a"].cost[0] == pytest.approx(2 * minutes(10, 5) + 5.0)


def test_hub_access_prices_hub_walks_with_its_options():
    """hub_access without a model walks at the options' speed: a hub 400 m off a 10-minute road at
    its middle, 3 km/h: node 0 is 8 min (400 m) + 5 min away."""
    from geo_reach.analysis.access import hub_access

    net = net_utm([(0, 1)], [[0, 0], [10000, 0]], minutes=[10.0])
    acc = hub_access(net, np.array([[5000.0, 400.0]]), [1], options=RoutingOptions(walk_kmh=3.0))
    assert acc.node_cost.tolist() == pytest.approx([minutes(400, 3) + 5.0] * 2)


def test_the_study_model_takes_land_cover_with_its_speed_table_and_hubs_join_at_their_cheapest_walk():
    """The pipeline's model from a study's [surface] land cover: a 2 km/h class doubles a 5 km/h walk;
    and the node a hub joins (for weak regions) is the end of its cheapest leg."""
    from geo_reach.pipeline.inputs import Hubs
    from geo_reach.pipeline.steps import _hub_nodes, travel_model
    from geo_reach.study import study_from_dict

    g = Grid.from_bounds((0, 0, 2000, 2000), 100, 0, crs=UTM)
    raw = {"network": {"prebuilt": "n.gpkg"}, "routing": {"walk_kmh": 5.0},
           "surface": {"cell_m": 100.0, "landcover": "lc.tif", "landcover_speeds": {"1": 2.0}}}
    study = study_from_dict(raw, Path("."), check_files=False)
    model = travel_model(study, {"grid": g, "landcover": np.ones(g.shape, np.int64)})
    assert model.on_grid
    assert model.walk([[1050.0, 1050.0]], [[1050.0, 350.0]])[0][0] == pytest.approx(minutes(700, 2.0), rel=1e-12)
    # a hub 10 m from edge 1-2 near node 1 and 300 m from edge 0-3: it joins at edge 1-2
    net = net_utm([(0, 3), (1, 2)], [[0, 0], [1000, 310], [1900, 310], [1900, 0]], minutes=[1.0, 1.0])
    hubs = Hubs(np.array([[1000.0, 300.0]]), np.array([1]), None, None)
    assert _hub_nodes(net, hubs, TravelModel(RoutingOptions())).tolist() == [1]
