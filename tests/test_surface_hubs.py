"""Hubs on the travel-time surface: hubs are seeds, and travel along a hub's own edge counts.

The cases of issue 11: a hub 30 m beside the middle of a 10 km road (own cell about 0.4 minutes, not
15.3; 1 km along the road about 1.9, not 13.9) and a hub 2 km off the road (own cell about 0, not 48).
References: the continuous cheapest trip worked out by brute force here (walk straight to the hub, or
straight to any point of the road, ride, walk the hub's leg), and the discretised model rebuilt as an
explicit graph and solved with scipy's csgraph Dijkstra.
"""

import math

import numpy as np
import pytest
import scipy.sparse as sp
from scipy.sparse.csgraph import dijkstra

from geo_reach.analysis.attach import attach_points
from geo_reach.analysis.routing import nearest_hub
from geo_reach.analysis.seeding import HubLegs, entry_points
from geo_reach.analysis.surface import compute_surface, minutes_at_points
from tests.helpers.surface_nets import grid, net_from_edges

WALK = 5.0                         # km/h
P_WALK = 60.0 / (WALK * 1000.0)    # minutes per metre on foot
ROAD_KMH = 60.0
P_ROAD = 60.0 / (ROAD_KMH * 1000.0)
BOUND16 = 1.0 / math.cos(math.atan(0.5) / 2)   # derived in tests/test_accumulate.py


def _road_case(hub_xy, height=30):
    """A 10 km two-way road along y = 1525 m (60 km/h: 10 minutes), 100 m cells from x = -1000."""
    net = net_from_edges([(0.0, 1525.0), (10000.0, 1525.0)], [(0, 1)], minutes=[10.0])
    g = grid(120, height, cell_m=100.0, x0=-1000.0)
    hub_xy = np.asarray(hub_xy, dtype=np.float64).reshape(-1, 2)
    att = attach_points(net, hub_xy, "minutes", walk_kmh=WALK)
    cost, hub = nearest_hub(net, att, "minutes", "to-hub")
    return net, g, hub_xy, np.where(np.isfinite(cost), cost, np.nan), hub


def _true_minutes(g, hub):
    """Cheapest trip from each cell centre to the hub, continuous: straight to the hub, or straight to a
    road point (every 0.5 m), along the road to the hub's join point, and the hub's straight leg."""
    xs, ys = g.cell_centres()
    X, Y = np.meshgrid(xs, ys)
    direct = np.hypot(X - hub[0], Y - hub[1]) * P_WALK
    jx, leg = hub[0], abs(hub[1] - 1525.0)
    rx = np.arange(0.0, 10000.0 + 0.25, 0.5)
    best = np.full(X.shape, np.inf)
    for r in range(X.shape[0]):
        walk = np.hypot(X[r][:, None] - rx[None, :], Y[r][:, None] - 1525.0) * P_WALK
        best[r] = (walk + np.abs(rx - jx)[None, :] * P_ROAD).min(axis=1)
    return np.minimum(direct, best + leg * P_WALK)


def _graph_reference(g, pts):
    """The discretised model as an explicit graph: a source joined to every entry point at its cost,
    each point to the centres of its own cell and the eight around (straight walk), and each cell to its
    16 neighbours (straight move); uniform ground, so every walk is its length times the walking pace."""
    h, w = g.shape
    n = h * w
    rows, cols, vals = [], [], []
    moves = [(dr, dc) for dr in range(-2, 3) for dc in range(-2, 3)
             if (dr, dc) != (0, 0) and math.gcd(abs(dr), abs(dc)) == 1]
    R, C = np.indices(g.shape)
    for dr, dc in moves:
        ok = (R + dr >= 0) & (R + dr < h) & (C + dc >= 0) & (C + dc < w)
        rows.append((R * w + C)[ok])
        cols.append(((R + dr) * w + C + dc)[ok])
        vals.append(np.full(ok.sum(), math.hypot(dr, dc) * g.cell_m * P_WALK))
    src = n + len(pts)
    fin = np.isfinite(pts.minutes)
    rows.append(np.full(fin.sum(), src))
    cols.append(n + np.nonzero(fin)[0])
    vals.append(pts.minutes[fin] + 1e-300)      # keep zero-cost arcs as arcs
    pr, pc = g.index(pts.x, pts.y)
    for i in np.nonzero(fin & (pr >= 0))[0]:
        for a in (-1, 0, 1):
            for b in (-1, 0, 1):
                r, c = pr[i] + a, pc[i] + b
                if 0 <= r < h and 0 <= c < w:
                    cx, cy = g.cell_centres(rows=[r], cols=[c])
                    rows.append(np.array([n + i]))
                    cols.append(np.array([r * w + c]))
                    vals.append(np.array([math.hypot(cx[0] - pts.x[i], cy[0] - pts.y[i]) * P_WALK + 1e-300]))
    m = sp.csr_array((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))), shape=(src + 1, src + 1))
    return dijkstra(m, directed=True, indices=src)[:n].reshape(g.shape)


def test_hub_beside_the_middle_of_a_long_road():
    hub = (5010.0, 1555.0)                 # 30 m north of the road, 5.01 km along it
    net, g, hxy, cost, node_hub = _road_case(hub)
    res = compute_surface(net, cost, node_hub, g, walk_kmh=WALK, hub_xy=hxy)
    true = _true_minutes(g, hub)
    # the hub's own cell: centre (5050, 1550), 40.3 m from the hub: walked straight, 0.48 minutes
    r, c = g.index(*hub)
    assert res.minutes[r, c] == pytest.approx(math.hypot(40.0, 5.0) * P_WALK, rel=1e-12)
    assert res.minutes[r, c] <= math.sqrt(2) / 2 * g.cell_m * P_WALK
    # 1 km along the road: centre (6050, 1550), 25 m off it: 25 m walk + 1.04 km ride + the 30 m leg
    r1, c1 = g.index(6050.0, 1550.0)
    assert res.minutes[r1, c1] == pytest.approx((25 + 30) * P_WALK + 1040 * P_ROAD, rel=1e-12)
    assert res.minutes[r1, c1] == pytest.approx(true[r1, c1], abs=0.01) and res.minutes[r1, c1] < 2.0
    # every value is the cost of a real path, so never below the continuous cheapest trip ...
    assert (res.minutes >= true - 1e-9).all()
    # ... and above it by at most the grid's walking bound plus the placement of the entry: the trip can
    # always walk the grid to the centre of the cell holding the sample nearest the true entry (at most
    # half the 50 m spacing away, and half a cell diagonal from that centre), then walk to the sample.
    delta, half_diag = 25.0, math.sqrt(2) / 2 * g.cell_m
    walk_m = (true - 0.0) / P_WALK                                    # walk is at most the whole trip
    slack = (BOUND16 - 1) * walk_m * P_WALK + (BOUND16 * (delta + half_diag) + half_diag) * P_WALK + delta * P_ROAD
    assert (res.minutes <= true + slack + 1e-9).all()
    # along the road row the trip is the sample's own straight walk: within a hundredth of a minute
    row = res.minutes[r1, 11:110]
    assert (np.abs(row - true[r1, 11:110]) < 0.01).all()
    # the discretised model, rebuilt as a graph, gives the same numbers
    pts = entry_points(net, cost, 50.0, "to-hub", node_hub=node_hub, hub_xy=hxy,
                       hub_legs=HubLegs.from_attachment(attach_points(net, hxy, "minutes", walk_kmh=WALK)))
    np.testing.assert_allclose(res.minutes, _graph_reference(g, pts), rtol=1e-11, atol=1e-11)
    assert (res.nearest_hub == 1).all()
    assert res.hub_cells > 0 and (res.entry_node[r1, c1] == -1)


def test_hub_far_off_the_road():
    hub = (5010.0, 3525.0)                 # 2 km north of the road
    net, g, hxy, cost, node_hub = _road_case(hub, height=40)
    g = grid(120, 40, cell_m=100.0, x0=-1000.0)
    res = compute_surface(net, cost, node_hub, g, walk_kmh=WALK, hub_xy=hxy)
    r, c = g.index(*hub)
    assert res.minutes[r, c] == pytest.approx(math.hypot(40.0, 25.0) * P_WALK, rel=1e-12)   # not 48
    true = _true_minutes(g, hub)
    assert (res.minutes >= true - 1e-9).all()
    # near the hub the walk straight to it is within the grid's bound of the straight line
    xs, ys = g.cell_centres()
    d = np.hypot(xs[None, :] - hub[0], ys[:, None] - hub[1])
    near = d < 1000
    assert (res.minutes[near] <= BOUND16 * d[near] * P_WALK + math.hypot(40, 25) * P_WALK * 2 + 1e-9).all()
    assert (res.entry_node[near] == -1).all() and (res.nearest_hub[near] == 1).all()
    # without the hub as a seed every cell near it walks to the road and back: about 48 minutes
    old = compute_surface(net, cost, node_hub, g, walk_kmh=WALK)
    assert old.minutes[r, c] > 45


@pytest.mark.parametrize("oneway", [False, True])
@pytest.mark.parametrize("direction", ["to-hub", "from-hub"])
def test_samples_along_the_hubs_edge(direction, oneway):
    # Edge 0 -> 1, 1000 m, 10 minutes; a hub joins it at 0.3 with a 0.5-minute leg.  Node costs are the
    # routing's: through the join point (the edge is the whole network).
    net = net_from_edges([(0, 0), (1000, 0)], [(0, 1)], minutes=[10.0], oneway=[oneway])
    legs = HubLegs(np.array([0]), np.array([0]), np.array([0.3]), np.array([0.5]))
    if direction == "to-hub":
        node_cost = np.array([3.5, np.inf if oneway else 7.5])   # node 1 cannot go back on a one-way edge
    else:
        node_cost = np.array([np.inf if oneway else 3.5, 7.5])
    p = entry_points(net, node_cost, 100.0, direction, node_hub=np.array([0, 0]), hub_legs=legs)
    f = p.x / 1000.0
    ahead = f <= 0.3 + 1e-12 if direction == "to-hub" else f >= 0.3 - 1e-12
    want = 10 * np.abs(0.3 - f) + 0.5
    if oneway:
        want = np.where(ahead, want, np.nan)
    np.testing.assert_allclose(p.minutes, want, atol=1e-12)
    assert (p.hub[np.isfinite(want)] == 0).all()
    inner = (f > 1e-9) & (f < 1 - 1e-9) & np.isfinite(want)
    assert (p.via_node[inner] == -1).all()
    if not oneway:
        # at the edge's ends the trip through the join point costs the same as the node's own: the node is kept
        assert p.via_node[0] == 0 and p.via_node[-1] == 1
    # without the legs, samples are costed through the end nodes only (the old model)
    q = entry_points(net, node_cost, 100.0, direction)
    assert (np.nan_to_num(q.minutes, nan=np.inf) >= np.nan_to_num(p.minutes, nan=np.inf) - 1e-12).all()
    if not oneway:
        assert np.nanmax(q.minutes - p.minutes) > 1.0


def test_hub_legs_priced_as_the_routing_prices_them():
    # A sample at an end of the hub's edge is costed through the join point exactly as the routing's
    # virtual arc from that node to the hub (Attachment.arcs), at two walking speeds.
    net = net_from_edges([(0, 0), (1000, 0)], [(0, 1)], minutes=[10.0])
    for walk in (3.0, 5.0):
        att = attach_points(net, [[420.0, 35.0]], "minutes", walk_kmh=walk)
        legs = HubLegs.from_attachment(att)
        assert legs.minutes[0] == pytest.approx(35.0 * 60 / (walk * 1000), rel=1e-12)   # 35 m at `walk`
        point, node, arc_cost, _ = att.arcs(net, "arrive")
        p = entry_points(net, np.array([np.inf, np.inf]), 1000.0, "to-hub", hub_legs=legs)
        for n_, k in zip(node, arc_cost):
            end = 0 if n_ == 0 else -1
            assert p.minutes[end] == pytest.approx(k, rel=1e-12)


def test_hubs_of_another_kind_are_not_seeds_and_given_legs_agree():
    net, g, _, _, _ = _road_case((5010.0, 1555.0))
    hxy = np.array([[5010.0, 1555.0], [2000.0, 2500.0]])
    att = attach_points(net, hxy, "minutes", walk_kmh=WALK)
    cost, node_hub = nearest_hub(net, att, "minutes", "to-hub")
    both = compute_surface(net, cost, node_hub, g, walk_kmh=WALK, hub_xy=hxy)
    given = compute_surface(net, cost, node_hub, g, walk_kmh=WALK, hub_xy=hxy, hub_legs=att)
    np.testing.assert_array_equal(both.minutes, given.minutes)
    r, c = g.index(2000.0, 2500.0)
    assert both.minutes[r, c] < 1.0 and both.nearest_hub[r, c] == 2
    # hub 1 masked out (another kind), numbering kept: hub 2 is still hub 2, and nothing leads to hub 1,
    # whether the legs are attached here or given as the routing's attachment of both hubs
    only2 = np.where(np.arange(2)[:, None] == 1, hxy, np.nan)
    a2 = attach_points(net, hxy[1:], "minutes", walk_kmh=WALK)
    c2, h2 = nearest_hub(net, a2, "minutes", "to-hub")
    h2 = np.where(h2 >= 0, h2 + 1, -1)
    for legs in (None, att):
        two = compute_surface(net, c2, h2, g, walk_kmh=WALK, hub_xy=only2, hub_legs=legs)
        assert (two.nearest_hub[np.isfinite(two.minutes)] == 2).all()
        assert two.minutes[r, c] < 1.0
        r1, c1 = g.index(5010.0, 1555.0)
        assert two.minutes[r1, c1] > 5.0
        # the same surface as for hub 2 alone, numbered 0 (its legs and seeds carried over)
        alone = compute_surface(net, c2, h2 - 1 * (h2 >= 0), g, walk_kmh=WALK, hub_xy=hxy[1:])
        np.testing.assert_array_equal(two.minutes, alone.minutes)
    # hub 2 masked out (another kind): its cell walks to the road instead
    only1 = np.where(np.arange(2)[:, None] == 0, hxy, np.nan)
    a1 = attach_points(net, hxy[:1], "minutes", walk_kmh=WALK)
    c1, h1 = nearest_hub(net, a1, "minutes", "to-hub")
    one = compute_surface(net, c1, h1, g, walk_kmh=WALK, hub_xy=only1)
    assert one.minutes[r, c] > 5.0 and one.nearest_hub[r, c] == 1
    assert (one.nearest_hub[np.isfinite(one.minutes)] == 1).all()


def test_hub_legs_at_the_surfaces_walking_speed():
    # At 3 km/h the default legs are attached at 3 km/h (as the routing attaches them): the 30 m leg costs
    # 0.6 minutes, and the samples along the hub's edge carry it.
    hub = (5010.0, 1555.0)
    net = net_from_edges([(0.0, 1525.0), (10000.0, 1525.0)], [(0, 1)], minutes=[10.0])
    g = grid(120, 30, cell_m=100.0, x0=-1000.0)
    att = attach_points(net, [hub], "minutes", walk_kmh=3.0)
    cost, node_hub = nearest_hub(net, att, "minutes", "to-hub")
    res = compute_surface(net, cost, node_hub, g, walk_kmh=3.0, hub_xy=[hub])
    given = compute_surface(net, cost, node_hub, g, walk_kmh=3.0, hub_xy=[hub], hub_legs=att)
    np.testing.assert_array_equal(res.minutes, given.minutes)
    r1, c1 = g.index(6050.0, 1550.0)
    assert res.minutes[r1, c1] == pytest.approx((25 + 30) * 60 / 3000 + 1040 * P_ROAD, rel=1e-12)


def test_minutes_at_exact_points_beside_the_road():
    # Points up to 140 m either side of the road, and the hub itself, read at their own positions: the walk
    # straight to where it meets the road (or to the hub), then the ride and the hub's leg.  Against the
    # continuous cheapest trip (road points every 0.5 m, so the reference may be up to 0.25 m of walking
    # too dear): never below it, and above it by at most what entering square to the road costs against
    # entering at the best angle (sin a = walking speed / road speed = 1/12; at 140 m: 0.0059 minutes).
    hub = (5010.0, 1555.0)
    net, g, hxy, cost, node_hub = _road_case(hub)
    res = compute_surface(net, cost, node_hub, g, walk_kmh=WALK, hub_xy=hxy)
    rng = np.random.default_rng(1)
    x = np.append(rng.uniform(200, 9800, 150), hub[0])
    y = np.append(1525 + rng.uniform(-140, 140, 150), hub[1])
    m, h, node = minutes_at_points(res, x, y)
    rx = np.arange(0.0, 10000.0 + 0.25, 0.5)
    true = np.array([min(math.hypot(px - hub[0], py - hub[1]) * P_WALK,
                         (np.hypot(px - rx, py - 1525.0) * P_WALK + np.abs(rx - hub[0]) * P_ROAD).min() + 30 * P_WALK)
                     for px, py in zip(x, y)])
    square = 140 * P_WALK * (1 - math.sqrt(1 - (P_ROAD / P_WALK) ** 2))
    assert (m >= true - 0.25 * P_WALK - 1e-12).all()
    assert (m <= true + square + 1e-9).all()
    assert m[-1] == 0.0 and h[-1] == 1 and node[-1] == -1
    assert (h == 1).all()
    # the cell values (for the cell centres) differ from the points' own by up to several tenths of a minute
    cells = res.minutes[g.index(x, y)]
    assert np.abs(cells - m).max() > 0.3
