"""Noding (geo_reach.network.noding) against GEOS through shapely.

References: ``shapely.intersection`` / ``shapely.node`` (GEOS) for where segments meet; the level rule
and the one-point-per-spot reporting worked by hand on tiny layers.
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pytest
import shapely
from hypothesis import assume, given, settings, strategies as st

from geo_reach.network.build import BuildOptions, LayerSpec, build_network
from geo_reach.network.noding import segment_events

UTM = "EPSG:32727"
X0, Y0 = 500_000.0, 6_570_000.0


def lines_layer(lines, **fields):
    geoms = [shapely.LineString([(x + X0, y + Y0) for x, y in c]) for c in lines]
    return gpd.GeoDataFrame(fields or {"n": range(len(geoms))}, geometry=geoms, crs=UTM)


@settings(max_examples=60, deadline=None)
@given(st.lists(st.tuples(*[st.integers(0, 400)] * 4), min_size=2, max_size=25))
def test_segment_meetings_match_geos(raw):
    """Every pair of segments that GEOS says meets at one point gives an event there on both segments,
    at that point; pairs GEOS says do not meet give none.  Coordinates on a 0.25 m lattice, so ends
    touching interiors and shared end points occur; pairs within 2 mm of touching are left out (below
    1 mm the builder joins on purpose), and so are parallel pairs (collinear ones are tested below)."""
    seg = np.array([r for r in raw if (r[0], r[1]) != (r[2], r[3])], float) / 4
    assume(len(seg) >= 2)
    geoms = shapely.linestrings(seg.reshape(-1, 2, 2))
    n = len(seg)
    ones = np.ones(n, bool)
    ev = segment_events(seg[:, 0], seg[:, 1], seg[:, 2], seg[:, 3], np.arange(n), np.zeros(n, int),
                        np.zeros(n), ones, ones)
    got = {}
    for s, p, x, y in zip(ev.seg, ev.partner, ev.x, ev.y):
        got.setdefault((int(s), int(p)), []).append((x, y))
    checked = 0
    for i in range(n):
        for j in range(n):
            inter = shapely.intersection(geoms[i], geoms[j])
            d = float(shapely.distance(geoms[i], geoms[j]))
            ri, rj = seg[i, 2:] - seg[i, :2], seg[j, 2:] - seg[j, :2]
            parallel = ri[0] * rj[1] - ri[1] * rj[0] == 0
            if i == j or 0 < d < 2e-3 or parallel:
                continue
            checked += 1
            if inter.is_empty:
                assert (i, j) not in got
            else:
                assert (i, j) in got, (i, j, inter)
                assert np.allclose(got[(i, j)][0], shapely.get_coordinates(inter)[0], atol=1e-6)
    assume(checked > 0)


def test_level_rule():
    """Different levels: an interior crossing is kept; a line end on the other line joins it."""
    r = build_network([LayerSpec(lines_layer([[(0, 0), (100, 0)], [(50, -50), (50, 50)]], level=[0, 1]),
                                 level_field="level")])
    assert r.report["components"] == 2 and r.report["crossing_kept"] == 1
    kept = r.issues[r.issues.kind == "crossing_kept"].iloc[0]
    assert kept.geometry.distance(shapely.Point(X0 + 50, Y0)) < 1e-9 and "level 0" in kept.detail
    # a bridge whose end lies on the road's interior: joined (it ends there)
    r = build_network([LayerSpec(lines_layer([[(0, 0), (100, 0)], [(50, 0), (50, 50)]], level=[0, 1]),
                                 level_field="level")])
    assert r.report["components"] == 1 and r.report["crossing_kept"] == 0
    # with no snapping at all (so only noding can join them), whichever of the two is drawn first
    for order in (1, -1):
        g = lines_layer([[(0, 0), (100, 0)], [(50, 0), (50, 50)]][::order], level=[0, 1][::order])
        r = build_network([LayerSpec(g, level_field="level")], BuildOptions(snap_m=0))
        assert r.report["components"] == 1 and r.network.n_nodes == 4
    # the same levels cross: split
    r = build_network([LayerSpec(lines_layer([[(0, 0), (100, 0)], [(50, -50), (50, 50)]], level=[1, 1]),
                                 level_field="level")])
    assert r.report["components"] == 1 and r.report["crossing_split"] == 1


def test_collinear_overlap_is_noded_like_geos():
    """Two lines sharing a stretch: nodes at both ends of the overlap; the shared stretch kept once.
    Reference: the distinct pieces of ``shapely.node`` (which keeps the shared piece twice)."""
    lines = [[(0, 0), (100, 0)], [(50, 0), (150, 0)]]
    r = build_network([LayerSpec(lines_layer(lines))])
    ref = shapely.get_parts(shapely.node(shapely.MultiLineString([shapely.LineString(c) for c in lines])))
    ref_keys = {tuple(sorted(map(tuple, shapely.get_coordinates(g)[[0, -1]].round(6).tolist()))) for g in ref}
    ours = {tuple(sorted(map(tuple, (shapely.get_coordinates(g)[[0, -1]] - [X0, Y0]).round(6).tolist())))
            for g in r.network.edge_geometry}
    assert ours == ref_keys and r.network.n_edges == 3
    assert r.report["duplicate_removed"] == 1


def test_modes_never_meet_in_noding():
    road = lines_layer([[(0, 0), (100, 0)]])
    rail = lines_layer([[(50, -50), (50, 50)]])
    r = build_network([LayerSpec(road), LayerSpec(rail, mode="rail")])
    assert r.report["components"] == 2 and r.report["crossing_split"] == 0


def test_crossing_reported_once_per_place_with_the_lines_cut():
    """Three lines through one point with no shared vertex: one crossing_split, 3 lines cut."""
    r = build_network([LayerSpec(lines_layer([[(-50, 0), (50, 0)], [(0, -50), (0, 50)], [(-40, -40), (40, 40)]]))])
    cs = r.issues[r.issues.kind == "crossing_split"]
    assert len(cs) == 1 and "(3 line(s) cut)" in cs.detail.iloc[0]
    assert r.network.n_nodes == 7 and r.network.n_edges == 6


def test_collinear_lines_meeting_end_to_end_are_not_split_further():
    """A straight road drawn as two features: they meet at their shared end only; the second is not
    cut at its next vertex.  Reference: ``shapely.node`` gives the same two pieces."""
    lines = [[(0, 0), (100, 0)], [(100, 0), (200, 0), (250, 50)]]
    r = build_network([LayerSpec(lines_layer(lines))])
    ref = shapely.get_parts(shapely.node(shapely.MultiLineString([shapely.LineString(c) for c in lines])))
    assert len(ref) == r.network.n_edges == 2 and r.network.n_nodes == 3


@pytest.mark.parametrize("order", [1, -1])
@pytest.mark.parametrize("short, meets", [(0.0005, True), (0.0015, False)])
def test_line_end_within_a_millimetre_of_a_line_meets_it(short, meets, order):
    """With no snapping, an end stopping ``short`` of a (diagonal) line meets it within 1 mm of numeric
    noise, and not beyond (whichever line is drawn first)."""
    g = lines_layer([[(0, -10), (100, 10)], [(50, 50), (50, short)]][::order])
    r = build_network([LayerSpec(g)], BuildOptions(snap_m=0))
    assert (r.report["components"] == 1) == meets


def test_lines_crossing_at_a_shallow_angle_are_split():
    """Two lines crossing at 1/2000 rad: split where GEOS says they cross."""
    a, b = [(0, 0), (1000, 0)], [(0, -0.25), (1000, 0.25)]
    r = build_network([LayerSpec(lines_layer([a, b]))], BuildOptions(snap_m=0))
    x = shapely.intersection(shapely.LineString(a), shapely.LineString(b))
    assert r.report["crossing_split"] == 1 and r.report["components"] == 1
    pt = r.issues[r.issues.kind == "crossing_split"].geometry.iloc[0]
    assert pt.distance(shapely.Point(x.x + X0, x.y + Y0)) < 1e-6
