"""Network seeds and the hybrid travel-time surface, checked by hand-worked arithmetic."""

import math

import numpy as np
import pytest
import shapely
from pyproj import CRS

from geo_reach.analysis.accumulate_reference import accumulate_reference
from geo_reach.analysis.friction import count_steep_moves
from geo_reach.analysis.seeding import (cable_access_nodes, cable_connection_m, entry_points, sample_lines,
                                        seed_cells, seed_raster)
from geo_reach.analysis.surface import compute_surface
from geo_reach.errors import CRSError, InputError, OptionError
from tests.helpers.surface_nets import grid, net_from_edges

SQRT2 = math.sqrt(2.0)


def test_sample_lines_against_shapely():
    rng = np.random.default_rng(5)
    lines = [shapely.LineString(rng.uniform(0, 1000, (k, 2))) for k in (2, 5, 3, 9)]
    lines.append(shapely.LineString([(5, 5), (5, 5)]))  # zero length
    line, frac, x, y = sample_lines(np.array(lines, dtype=object), 37.0)
    ref = shapely.line_interpolate_point(np.array(lines, dtype=object)[line], frac, normalized=True)
    np.testing.assert_allclose(x, shapely.get_x(ref), atol=1e-7)
    np.testing.assert_allclose(y, shapely.get_y(ref), atol=1e-7)
    for i, g in enumerate(lines):
        f = frac[line == i]
        assert f[0] == 0.0 and f[-1] == 1.0
        assert (np.diff(f) * g.length <= 37.0 + 1e-9).all()


def test_entry_cost_formula_two_way_and_one_way():
    # Edge 0 -> 1 of 10 minutes; to-hub costs: node 0 = 5, node 1 = 20.
    net = net_from_edges([(0, 0), (1000, 0)], [(0, 1)], minutes=[10.0])
    p = entry_points(net, np.array([5.0, 20.0]), 100.0, "to-hub")
    f = p.x / 1000.0
    # two-way: min(20 + (1-f) 10, 5 + f 10) = 5 + 10 f (<= 15 < 20), through node 0
    np.testing.assert_allclose(p.minutes, 5 + 10 * f)
    assert (p.via_node == 0).all() and len(p) == 11
    one = net_from_edges([(0, 0), (1000, 0)], [(0, 1)], minutes=[10.0], oneway=[True])
    p = entry_points(one, np.array([5.0, 20.0]), 100.0, "to-hub")
    # one-way 0 -> 1: only carrying on to node 1: 20 + (1-f) 10
    np.testing.assert_allclose(p.minutes, 20 + 10 * (1 - p.x / 1000.0))
    assert (p.via_node == 1).all()
    # from-hub on the one-way edge: only arriving from node 0: cost[0] + f 10
    p = entry_points(one, np.array([5.0, 20.0]), 100.0, "from-hub")
    np.testing.assert_allclose(p.minutes, 5 + 10 * p.x / 1000.0)
    # unreachable nodes (inf from routing, or NaN) give no cost
    p = entry_points(net, np.array([np.inf, np.nan]), 100.0, "to-hub")
    assert np.isnan(p.minutes).all() and (p.via_node == -1).all()


def _mixed_network():
    #  0 --road-- 1 --rail-- 2 (station) --rail-- 3 (junction, no entry) --cable-- 4 (access)
    #  1 --transfer-- 5
    xy = [(0, 0), (1000, 0), (1000, 1000), (2000, 1000), (3000, 1000), (1000, -500)]
    edges = [(0, 1), (1, 2), (2, 3), (3, 4), (1, 5)]
    mode = ["road", "rail", "rail", "cable", "transfer"]
    minutes = [10.0, 3.0, 3.0, np.nan, 1.0]
    entry = [True, True, True, False, True, True]
    return net_from_edges(xy, edges, minutes=minutes, mode=mode, entry=entry)


def test_entry_points_modes():
    net = _mixed_network()
    p = entry_points(net, np.zeros(6), 250.0)
    assert set(p.edge[p.edge >= 0]) == {0}                      # only the road edge is sampled
    stations = p.via_node[p.edge == -1]
    assert sorted(stations.tolist()) == [1, 2]                  # entry nodes on rail; 3 is no entry
    on_cable = (p.x > 2000 + 1e-9)
    assert not on_cable.any()                                   # never along a cable
    assert cable_access_nodes(net).tolist() == [4]
    # given the hub behind each node, a station's point names it
    q = entry_points(net, np.zeros(6), 250.0, node_hub=np.array([3, 1, 2, 0, -1, 0]))
    st = q.edge == -1
    assert dict(zip(q.via_node[st].tolist(), q.hub[st].tolist())) == {1: 1, 2: 2}
    assert (q.hub[~st] >= 0).all()


def test_cable_connection_distance():
    net = _mixed_network()
    g = grid(12, 9, cell_m=500.0, x0=-1000, y1=3000)
    d = cable_connection_m(net, g, chunk_rows=4)
    x, y = g.cell_centres()
    np.testing.assert_allclose(d, np.hypot(x[None, :] - 3000, y[:, None] - 1000), rtol=1e-12)
    road_only = net_from_edges([(0, 0), (1, 1)], [(0, 1)])
    with pytest.raises(InputError, match="no cable access node"):
        cable_connection_m(road_only, g)


def test_seed_raster_keeps_cheapest():
    net = net_from_edges([(10, 50), (90, 50)], [(0, 1)], minutes=[8.0])
    g = grid(1, 1)
    s = seed_raster(entry_points(net, np.array([3.0, 1.0]), 10.0), g)
    assert s.minutes[0, 0] == 1.0 and s.via_node[0, 0] == 1


def test_hand_worked_one_hub():
    # Grid 10 x 3 of 100 m cells; a two-way road along the middle row's centre line from node 0 (50, 150)
    # to node 1 (950, 150), 4.5 minutes long; the hub is node 0 (cost 0; node 1 costs 4.5). Walking
    # 6 km/h on the flat = 1 minute per 100 m (per cell side).
    # Samples every 50 m at x = 50, 100, ..., 950 cost min(4.5 + (1-f) 4.5, 0 + f 4.5) = (x - 50) / 200,
    # i.e. (u - 0.5) / 2 at u = x / 100 cell sides; each seeds its own cell and the eight around it with
    # the straight walk added.
    # Middle row, cell c (centre u = c + 0.5): the sample at the centre costs c / 2; a sample t cells
    # nearer the hub saves t / 2 and walks t: no better.  So c / 2 exactly.
    # Outer rows (centre one cell off the road): a sample t cells back costs c/2 - t/2 + sqrt(t^2 + 1),
    # least over t in {0, 0.5, 1, 1.5} at t = 0.5: c/2 + sqrt(1.25) - 0.25 (c >= 1; c = 0 has no sample
    # behind it: t = 0 gives 1).  Moves from the middle row cost more (straight over: +1; diagonal from
    # c - 1: +0.914; knight from c - 2: +1.236).
    g = grid(10, 3)
    net = net_from_edges([(50, 150), (950, 150)], [(0, 1)], minutes=[4.5])
    res = compute_surface(net, np.array([0.0, 4.5]), np.array([0, 0]), g, walk_kmh=6.0)
    c = np.arange(10)
    mid = 0.5 * c
    outer = np.where(c == 0, 1.0, 0.5 * c + math.sqrt(1.25) - 0.25)
    np.testing.assert_allclose(res.minutes[1], mid, atol=1e-12)
    np.testing.assert_allclose(res.minutes[0], outer, atol=1e-12)
    np.testing.assert_allclose(res.minutes[2], outer, atol=1e-12)
    assert (res.nearest_hub == 1).all() and (res.entry_node[:, :9] == 0).all()
    # the sample at node 1 ties: carry on to node 1 (4.5 + 0) or go back to node 0 (0 + 4.5)
    assert res.entry_node[1, 9] in (0, 1)
    assert res.seed_cells == 30 and res.clipped_slopes == 0 and res.neighbours == 16
    # 8 neighbours: the same here (every value comes straight from a seed walk)
    res8 = compute_surface(net, np.array([0.0, 4.5]), np.array([0, 0]), g, walk_kmh=6.0, neighbours=8)
    np.testing.assert_allclose(res8.minutes, res.minutes, atol=1e-12)


def test_hand_worked_two_hubs():
    # Same road, hubs at both ends (node 0 = hub 1, node 1 = hub 2, both cost 0). A sample at x costs
    # min((x - 50)/200 via node 0, (950 - x)/200 via node 1). Middle row, cell c: the sample at its
    # centre: min(c / 2, (9 - c) / 2): cells 0..4 reach hub 1 (cell 4: 2 < 2.5), cells 5..9 hub 2.
    g = grid(10, 3)
    net = net_from_edges([(50, 150), (950, 150)], [(0, 1)], minutes=[4.5])
    res = compute_surface(net, np.array([0.0, 0.0]), np.array([0, 1]), g, walk_kmh=6.0)
    assert res.nearest_hub[1].tolist() == [1] * 5 + [2] * 5
    c = np.arange(10)
    np.testing.assert_allclose(res.minutes[1], np.minimum(0.5 * c, 4.5 - 0.5 * c), atol=1e-12)
    assert res.entry_node[1].tolist() == [0] * 5 + [1] * 5


def test_surface_with_terrain_and_barrier_matches_reference():
    # The whole surface against its slow pieces: entry points -> exact seeds -> the pure-Python accumulation.
    rng = np.random.default_rng(11)
    g = grid(14, 12, cell_m=50.0)
    xy = rng.uniform(0, 600, (6, 2))
    net = net_from_edges(xy, [(0, 1), (1, 2), (2, 3), (4, 5)], minutes=[3.0, 2.0, 4.0, 1.0])
    node_cost = np.array([0.0, 3.0, 5.0, 9.0, np.inf, np.inf])
    z = rng.normal(0, 40, g.shape).cumsum(axis=0)
    wall = shapely.box(0, 290, 400, 310)
    for neighbours in (8, 16):
        res = compute_surface(net, node_cost, np.array([0, 0, 0, 0, -1, -1]), g, walk_kmh=4.0, terrain=z,
                              barriers=[wall], direction="from-hub", neighbours=neighbours)
        pts = entry_points(net, node_cost, 25.0, "from-hub")
        seeds = seed_cells(pts, g, res.flat_kmh, elevation=z, direction="from-hub")
        ref = accumulate_reference(res.flat_kmh, seeds.minutes, 50.0, elevation=z, direction="from-hub",
                                   neighbours=neighbours)
        np.testing.assert_allclose(res.minutes, ref.minutes, rtol=1e-12)
        assert res.impassable_cells > 0 and res.clipped_slopes > 0
        assert res.clipped_slopes == count_steep_moves(z, 50.0, passable=res.flat_kmh > 0, neighbours=neighbours)
        assert ((res.nearest_hub == 1) == np.isfinite(res.minutes)).all()


def test_surface_refusals():
    g = grid(3, 3)
    net = net_from_edges([(50, 150), (250, 150)], [(0, 1)])
    with pytest.raises(OptionError, match="direction"):
        compute_surface(net, np.zeros(2), np.zeros(2, int), g, direction="sideways")
    with pytest.raises(OptionError, match="node_hub"):
        compute_surface(net, np.zeros(2), np.zeros(3, int), g)
    with pytest.raises(OptionError, match="terrain raster has shape"):
        compute_surface(net, np.zeros(2), np.zeros(2, int), g, terrain=np.zeros((2, 2)))
    with pytest.raises(OptionError, match="neighbours"):
        compute_surface(net, np.zeros(2), np.zeros(2, int), g, neighbours=4)
    with pytest.raises(OptionError, match="half the cell size"):
        compute_surface(net, np.zeros(2), np.zeros(2, int), g, spacing_m=60.0)
    with pytest.raises(OptionError, match="hub_xy"):
        compute_surface(net, np.zeros(2), np.zeros(2, int), g, hub_xy=np.zeros((3, 3)))
    with pytest.raises(OptionError, match="names hub 1"):
        compute_surface(net, np.zeros(2), np.array([0, 1]), g, hub_xy=np.zeros((1, 2)))
    from geo_reach.ingest.rasters import Grid
    other = Grid(g.transform, 3, 3, CRS.from_epsg(32632), 100.0)
    with pytest.raises(CRSError, match="differs"):
        compute_surface(net, np.zeros(2), np.zeros(2, int), other)


def test_sample_count_depends_on_the_line_alone():
    """Regression: samples came from a running total over all lines, so the same 700 m line got 15
    or 16 samples depending on the lines listed before it (rounding of the running total).
    The seeded search below hit such a case at trial 1519 with the old code."""
    import shapely

    from geo_reach.analysis.seeding import sample_lines

    rng = np.random.default_rng(1)
    for _ in range(1600):
        x0 = float(rng.uniform(0, 5e5))
        y0 = float(rng.uniform(6e6, 7e6))
        target = shapely.LineString([(x0, y0), (x0 + 700, y0)])
        counts = set()
        for before in range(0, 8):
            others = [shapely.LineString([(x0, y0 + 10 * i), (x0 + float(rng.uniform(10, 900)), y0 + 10 * i)])
                      for i in range(before)]
            line, frac, x, y = sample_lines(np.array(others + [target], dtype=object), 50.0)
            counts.add(int((line == before).sum()))
        assert counts == {15}   # 700 / 50 = 14 gaps, 15 points
