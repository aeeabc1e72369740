"""Edge assembly (geo_reach.network.assembly): cutting lines into edges, merging nodes, duplicates, costs.

References: the Hausdorff distance of a kinked copy worked by hand (Huttenlocher et al. 1993 define it;
GEOS computes it over the vertices); travel time = length / speed (common practice); lengths with
pyproj.Geod (Karney 2013).  The length balance (input - duplicates - dropped - trimmed + joined =
network) is the builder's own identity, each term measured independently.
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pytest
import shapely
from pyproj import Geod, Transformer

from geo_reach.network.build import BuildOptions, LayerSpec, build_network

UTM = "EPSG:32727"
X0, Y0 = 500_000.0, 6_570_000.0
GEOD = Geod(ellps="WGS84")
TO_LONLAT = Transformer.from_crs(UTM, 4326, always_xy=True)


def layer(lines, **fields):
    return gpd.GeoDataFrame(fields or {"n": range(len(lines))},
                            geometry=[shapely.LineString([(x + X0, y + Y0) for x, y in c]) for c in lines], crs=UTM)


def ground(coords):
    c = np.asarray(coords, float)
    return float(GEOD.line_length(*TO_LONLAT.transform(c[:, 0] + X0, c[:, 1] + Y0)))


def balance(rep):
    return (rep["input_length_m"] - rep["removed_duplicate_length_m"] - rep["dropped_length_m"]
            - rep["trimmed_length_m"] + rep["joined_gap_length_m"])


@pytest.mark.parametrize("kink, removed", [(0.3, True), (1.0, True), (1.0 + 2 ** -20, False), (1.5, False)])
def test_near_duplicate_kinked_copy(kink, removed):
    """Issue 11, test that bites 3: a line drawn twice, the copy kinked ``kink`` m at its middle.  Within
    the 1 m tolerance (Hausdorff distance = the kink, inclusive) it is kept once, reported, and the
    length balance holds; beyond it both stay."""
    straight = [(0, 0), (100, 0)]
    kinked = [(0, 0), (50, kink), (100, 0)]
    r = build_network([LayerSpec(layer([straight, kinked]))])
    rep = r.report
    assert rep["duplicate_removed"] == (1 if removed else 0)
    want = ground(straight) + (0 if removed else ground(kinked))
    assert rep["network_length_m"] == pytest.approx(want, abs=1e-3)
    assert r.network.n_edges == (1 if removed else 2)
    if removed:
        assert rep["removed_duplicate_length_m"] == pytest.approx(ground(kinked), abs=1e-3)
        d = r.issues[r.issues.kind == "duplicate_removed"]
        assert d.src_fid.tolist() == [1] and "feature 0" in d.detail.iloc[0]
    assert rep["network_length_m"] == pytest.approx(balance(rep), abs=2e-3)


def test_every_duplicate_in_a_group_is_found():
    """Four copies of one stretch (kinked differently, one reversed): three removed, one kept."""
    lines = [[(0, 0), (100, 0)], [(0, 0), (30, 0.2), (100, 0)], [(100, 0), (60, -0.4), (0, 0)],
             [(0, 0), (50, 0.9), (100, 0)]]
    r = build_network([LayerSpec(layer(lines))])
    assert r.report["duplicate_removed"] == 3 and r.network.n_edges == 1
    assert r.report["network_length_m"] == pytest.approx(balance(r.report), abs=2e-3)


def test_one_way_copies_in_opposite_directions_are_not_duplicates():
    """A dual carriageway drawn as two one-way lines (opposite directions) keeps both; the same direction
    twice is a duplicate."""
    both = build_network([LayerSpec(layer([[(0, 0), (100, 0)], [(100, 0), (50, 0.5), (0, 0)]], ow=["yes", "yes"]),
                                    oneway_field="ow")])
    assert both.network.n_edges == 2 and both.report["duplicate_removed"] == 0
    same = build_network([LayerSpec(layer([[(0, 0), (100, 0)], [(0, 0), (50, 0.5), (100, 0)]], ow=["yes", "yes"]),
                                    oneway_field="ow")])
    assert same.network.n_edges == 1 and same.report["duplicate_removed"] == 1


@pytest.mark.parametrize("gap, merged", [(0.0009, True), (0.0011, False)])
def test_nodes_within_a_millimetre_merge_without_snapping(gap, merged):
    """With no snapping at all, line ends closer than 1 mm (numeric noise) are one node."""
    r = build_network([LayerSpec(layer([[(0, 0), (100, 0)], [(100 + gap, 0), (200, 0)]]))], BuildOptions(snap_m=0))
    assert r.network.n_nodes == (3 if merged else 4)
    assert "gap_joined" not in set(r.issues.kind)       # noise is joined silently


def test_self_loop_kept_and_reported_zero_length_dropped():
    r = build_network([LayerSpec(layer([[(0, 0), (100, 0), (100, 100), (0, 0)], [(0, 0), (-50, 0)]]))])
    assert r.report["self_loop"] == 1 and r.network.n_edges == 2
    loop = r.network.edge_from == r.network.edge_to
    assert loop.sum() == 1
    assert r.network.edge_length_m[loop][0] == pytest.approx(ground([(0, 0), (100, 0), (100, 100), (0, 0)]), abs=1e-3)


def test_edges_keep_every_vertex_and_are_cut_at_nodes():
    """A polyline crossed in its middle becomes two edges holding all its vertices (and the crossing)."""
    line = [(0, 0), (20, 5), (40, -5), (60, 5), (80, -5), (100, 0)]
    r = build_network([LayerSpec(layer([line, [(50, -50), (50, 50)]]))])
    net = r.network
    pieces = net.edge_geometry[net.edge_src_fid == 0]
    assert len(pieces) == 2
    allc = np.vstack([shapely.get_coordinates(g) for g in pieces]) - [X0, Y0]
    for v in line:
        assert np.min(np.hypot(*(allc - v).T)) < 1e-9
    assert sum(float(x) for x in net.edge_length_m[net.edge_src_fid == 0]) == pytest.approx(ground(line), abs=1e-6)


def test_costs_from_length_and_speed():
    """minutes = length_m / 1000 / speed_kmh * 60 (common practice); cable: latency, no minutes."""
    r = build_network([LayerSpec(layer([[(0, 0), (1000, 0)]], speed=[36])), ],)
    r = build_network([LayerSpec(layer([[(0, 0), (1000, 0)]], speed=[36]), speed_field="speed")])
    net = r.network
    assert net.edge_minutes[0] == pytest.approx(net.edge_length_m[0] / 1000 / 36 * 60)
    assert net.edge_length_m[0] == pytest.approx(ground([(0, 0), (1000, 0)]), abs=1e-6)
    assert net.extra["speed_kmh"][0] == 36
