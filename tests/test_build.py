"""The network builder against outside references.

Sources named beside each check.  Fixtures are tiny hand-drawn layers in a
UTM zone (EPSG:32727), with the expected repairs worked out by hand.
"""

from __future__ import annotations

import os

import geopandas as gpd
import networkx as nx
import numpy as np
import pytest
import shapely
from hypothesis import assume, given, settings, strategies as st
from pyproj import Geod, Transformer

from geo_reach.network.build import BuildOptions, LayerSpec, build_network, check_layers

UTM = "EPSG:32727"
X0, Y0 = 500_000.0, 6_570_000.0
GEOD = Geod(ellps="WGS84")


def shifted(coords):
    return shapely.LineString([(x + X0, y + Y0) for x, y in coords])


def layer(lines, crs=UTM, **fields):
    geoms = [shifted(c) if c is not None else None for c in lines]
    return gpd.GeoDataFrame(fields or {"n": range(len(geoms))}, geometry=geoms, crs=crs)


def geodesic_length(geom, crs):
    """Reference: pyproj.Geod (Karney 2013) on the line taken to lon/lat."""
    tr = Transformer.from_crs(crs, 4326, always_xy=True)
    lon, lat = tr.transform(*shapely.get_coordinates(geom).T)
    return GEOD.line_length(lon, lat)


def kinds(result):
    return result.issues["kind"].value_counts().to_dict()


# ----------------------------------------------------------------------------- topology by hand
def test_hand_worked_faults():
    """Each digitising fault of a hand-drawn layer is repaired and reported once.

    Worked by hand: line 1 crosses line 0 at (50, 0) with no shared vertex;
    line 2 starts 0.5 m after line 0's end (joined); line 3 ends 0.6 m above
    line 2's interior (T-junction, joined); line 4 duplicates line 0; line 6
    stops 0.5 m short of line 0 (T-junction onto its interior, since the
    end is free); line 7 runs 0.7 m past line 0 (overshoot, trimmed); line 8
    starts 3 m from line 2's end (beyond the 1 m tolerance: unjoined gap);
    line 9 has no geometry (dropped).
    """
    g = layer([
        [(0, 0), (100, 0)], [(50, -50), (50, 50)], [(100.5, 0), (200, 0)], [(150, 0.6), (150, 80)],
        [(100, 0), (0, 0)], [(-0.4, 30), (0, 0)], [(20, -20), (20, -0.5)], [(80, -20), (80, 0.7)],
        [(200, 3), (300, 3)], None,
    ])
    r = build_network([LayerSpec(g)])
    k = kinds(r)
    assert k["duplicate_removed"] == 1
    assert "dropped_feature" not in k            # a feature without geometry has no point ...
    assert r.report["issues"]["dropped_feature"] == 1   # ... but the report counts and lists it
    assert r.report["dropped_features"] == [{"src_layer": "layer1", "src_fid": 9, "reason": "no geometry"}]
    assert k["gap_joined"] == 4          # 0.5 end gap, 0.6 T, 0.5 T, 0.7 overshoot
    assert k["unjoined_gap"] == 1
    # one point per spot: the overshoot at (80, 0) is reported as a trimmed overshoot, not also as a crossing
    assert k["crossing_split"] == 1      # (50, 0) only
    assert r.report["issues"]["gap_joined"] == 4
    gaps = r.issues[r.issues.kind == "unjoined_gap"]
    assert gaps.geometry.iloc[0].distance(shapely.Point(X0 + 200, Y0 + 1.5)) < 1e-6
    net = r.network
    # every line end that was joined now shares a node: one component for lines 0-7
    assert r.report["components"] == 2
    # the overshoot stub is gone: no edge ends above y = 0 at x = 80
    ends = shapely.get_coordinates(shapely.boundary(net.edge_geometry))
    assert not np.any((np.abs(ends[:, 0] - (X0 + 80)) < 1e-6) & (ends[:, 1] > Y0 + 1e-6))


def test_length_balance_hand_layer():
    """Sum of edge lengths = input - duplicates - dropped - trimmed + joined gaps (to 0.01 %).

    The balance identity of the issue; each term is measured geodesically
    with pyproj.Geod (Karney 2013).
    """
    g = layer([
        [(0, 0), (100, 0)], [(50, -50), (50, 50)], [(100.5, 0), (200, 0)], [(150, 0.6), (150, 80)],
        [(100, 0), (0, 0)], [(80, -20), (80, 0.7)], [(200, 3), (300, 3)],
    ])
    r = build_network([LayerSpec(g)])
    rep = r.report
    expected_input = sum(geodesic_length(x, UTM) for x in g.geometry)
    assert rep["input_length_m"] == pytest.approx(expected_input, abs=1e-3)  # report rounds to mm
    balance = (rep["input_length_m"] - rep["removed_duplicate_length_m"] - rep["dropped_length_m"]
               - rep["trimmed_length_m"] + rep["joined_gap_length_m"])
    assert rep["network_length_m"] == pytest.approx(balance, rel=1e-4)
    assert r.network.edge_length_m.sum() == pytest.approx(rep["network_length_m"], abs=1e-3)


def test_level_field_keeps_bridge_crossing():
    """A bridge (level 1) over a road (level 0) stays unjoined; its ends still join the road network."""
    g = layer([[(0, 0), (100, 0)], [(50, -50), (50, 50)], [(50, 50), (50, 80)]], level=[0, 1, 0])
    r = build_network([LayerSpec(g, level_field="level")])
    assert kinds(r).get("crossing_kept") == 1
    assert "crossing_split" not in kinds(r)
    assert r.report["components"] == 2           # road 0 apart from the bridge + its approach
    same = build_network([LayerSpec(g)])        # without the level field the crossing is split
    assert same.report["components"] == 1


def test_modes_never_join_except_at_stations(tmp_path):
    """Rail crossing a road makes no junction; a station joins them through transfer links."""
    road = layer([[(0, 0), (200, 0)]])
    rail = layer([[(100, -100), (100, 100)]])
    r = build_network([LayerSpec(road), LayerSpec(rail, mode="rail")])
    assert r.report["components"] == 2
    stations = gpd.GeoDataFrame({"name": ["Stop"]}, geometry=[shapely.Point(X0 + 103, Y0 + 60)], crs=UTM)
    r = build_network([LayerSpec(road), LayerSpec(rail, mode="rail", access_points=stations, boarding_minutes=5)])
    net = r.network
    assert r.report["components"] == 1
    tr = np.nonzero(net.edge_mode == "transfer")[0]
    assert len(tr) == 2
    # boarding (road -> rail) pays the penalty, alighting does not
    mins = sorted(net.edge_minutes[tr])
    assert mins[1] - mins[0] == pytest.approx(5.0)
    rail_nodes = np.unique(np.concatenate([net.edge_from[net.edge_mode == "rail"], net.edge_to[net.edge_mode == "rail"]]))
    # only the station is an entry among rail nodes
    assert net.node_entry[rail_nodes].sum() == 1


def test_cable_has_latency_not_minutes():
    """Fibre latency about 4.9 us per km (ITU-T G.652 group index ~1.468; common practice, value from memory)."""
    cab = layer([[(0, 0), (0, 10_000)]])
    r = build_network([LayerSpec(cab, mode="cable")])
    net = r.network
    assert np.isnan(net.edge_minutes).all()
    assert net.edge_latency_ms.sum() == pytest.approx(net.edge_length_m.sum() / 1000 * 0.0049, rel=0.01)


def test_oneway_reverse_flips_geometry():
    g = layer([[(0, 0), (100, 0)], [(100, 0), (200, 0)]], oneway=["-1", "yes"])
    r = build_network([LayerSpec(g, oneway_field="oneway")])
    net = r.network
    assert net.edge_oneway.all()
    # the reversed line runs from x=100 to x=0
    e0 = np.nonzero(net.edge_src_fid == 0)[0][0]
    xs = shapely.get_coordinates(net.edge_geometry[e0])[:, 0]
    assert xs[0] > xs[-1]
    assert net.node_x[net.edge_from[e0]] == pytest.approx(X0 + 100)


def test_bad_speeds_get_the_documented_default_per_feature():
    g = layer([[(0, 0), (100, 0)], [(100, 0), (200, 0)], [(200, 0), (300, 0)], [(300, 0), (400, 0)]],
              speed=[60, "fast", 0, -5])
    r = build_network([LayerSpec(g, speed_field="speed", speed_kmh=30)])
    net = r.network
    assert kinds(r)["speed_defaulted"] == 3
    per = {int(f): m for f, m in zip(net.edge_src_fid, net.edge_minutes)}
    assert per[0] == pytest.approx(net.edge_length_m[net.edge_src_fid == 0][0] / 1000 / 60 * 60)
    assert per[1] == pytest.approx(net.edge_length_m[net.edge_src_fid == 1][0] / 1000 / 30 * 60)


# ----------------------------------------------------------------------------- geodesic lengths
def test_length_m_is_geodesic_whatever_the_crs():
    """length_m equals pyproj.Geod's length of the same line, in UTM, Web Mercator and US survey feet.

    Reference: pyproj.Geod, an implementation of Karney (2013), "Algorithms
    for geodesics", J. Geodesy 87:43-55.
    """
    lonlat = shapely.LineString([(-21.0, -31.0), (-20.99, -31.0), (-20.98, -30.99)])
    geod_len = GEOD.geometry_length(lonlat)
    for crs in ("EPSG:4326", "EPSG:32727", "EPSG:3857", "EPSG:2223"):  # 2223: Arizona Central, US survey ft
        g = gpd.GeoDataFrame(geometry=[lonlat], crs=4326).to_crs(crs)
        r = build_network([LayerSpec(g)], BuildOptions(crs="EPSG:32727"))
        assert r.network.edge_length_m.sum() == pytest.approx(geod_len, rel=1e-9), crs


def test_published_geodesic_value():
    """Karney's worked example (GeographicLib documentation, from memory): Wellington
    (-41.32, 174.81) to Salamanca (40.96, -5.50) is 19 959 679.267 m on WGS84.
    A two-point line has exactly that length_m (the working CRS only carries it)."""
    from geo_reach.network.build import geodesic_lengths

    xy = np.array([[174.81, -41.32], [-5.50, 40.96]])
    got = geodesic_lengths(xy, np.array([0, 0]), 1, "EPSG:4326")[0]
    assert got == pytest.approx(19_959_679.267, abs=0.002)


# ----------------------------------------------------------------------------- noding vs shapely
def _edge_key_set(geoms, nd=3):
    out = []
    for g in geoms:
        c = np.round(shapely.get_coordinates(g), nd)
        a, b = tuple(c[0]), tuple(c[-1])
        out.append((min(a, b), max(a, b), round(float(shapely.length(g)), 2)))
    return sorted(out)


@settings(max_examples=40, deadline=None)
@given(st.lists(st.tuples(*[st.floats(0, 1000, allow_nan=False)] * 4), min_size=2, max_size=12),
       st.integers(0, 2**31 - 1))
def test_noding_matches_shapely_node(raw, seed):
    """With no snapping, our edges are the segments of GEOS noding (``shapely.node``)
    of the same lines, up to 1 mm: the same pieces with the same lengths."""
    rng = np.random.default_rng(seed)
    lines = []
    for x0, y0, x1, y1 in raw:
        if np.hypot(x1 - x0, y1 - y0) < 1.0:
            continue
        mid = ((x0 + x1) / 2 + rng.normal(0, 30), (y0 + y1) / 2 + rng.normal(0, 30))
        lines.append(shifted([(x0, y0), mid, (x1, y1)]))
    assume(len(lines) >= 2)
    # Below 1 mm we join on purpose (numeric noise; the builder's documented rule) where
    # exact GEOS noding keeps a hair-thin gap: leave such near-touches out of this comparison.
    ends = shapely.points(np.concatenate([shapely.get_coordinates(shapely.boundary(g)) for g in lines]))
    for i, g in enumerate(lines):
        d = shapely.distance(ends, g)
        assume(not np.any((d > 0) & (d < 2e-3)))
    g = gpd.GeoDataFrame(geometry=lines, crs=UTM)
    r = build_network([LayerSpec(g)], BuildOptions(snap_m=0.0, dangle_m=0.0))
    ref = shapely.get_parts(shapely.node(shapely.MultiLineString(lines)))
    # shapely.node splits at every vertex of the noded result? No: it keeps vertices,
    # splitting only at intersections; compare piece end pairs and lengths.
    ours = _edge_key_set(r.network.edge_geometry)
    theirs = _edge_key_set(ref)
    assert len(ours) == len(theirs)
    for a, b in zip(ours, theirs):
        assert np.allclose(a[0], b[0], atol=2e-3) and np.allclose(a[1], b[1], atol=2e-3)
        assert a[2] == pytest.approx(b[2], abs=0.02)


# ----------------------------------------------------------------------------- real digitised data
def _libpysal_streets():
    import libpysal

    return os.path.join(os.path.dirname(libpysal.examples.__file__), "geodanet", "streets.shp")


def test_real_street_layer_against_shapely_and_networkx():
    """libpysal's GeoDaNet street layer (real digitised streets, US survey feet).

    Independent reference built here: reproject, snap line ends within 1 m
    of each other with shapely, node with GEOS (``unary_union``), then count
    nodes, edges and components with networkx.
    """
    path = _libpysal_streets()
    r = build_network([LayerSpec(path)])
    src = gpd.read_file(path).to_crs(r.network.crs)
    lines = list(src.geometry)
    # reference snapping: cluster line ends within 1 m (single linkage) to their first member
    ends = np.array([c for g in lines for c in (g.coords[0], g.coords[-1])])
    from scipy.spatial import cKDTree
    pairs = cKDTree(ends).query_pairs(1.0, output_type="ndarray")
    G = nx.Graph(); G.add_nodes_from(range(len(ends))); G.add_edges_from(map(tuple, pairs))
    target = ends.copy()
    for comp in nx.connected_components(G):
        comp = sorted(comp); target[comp] = ends[comp[0]]
    snapped = []
    for i, g in enumerate(lines):
        c = np.array(g.coords); c[0] = target[2 * i]; c[-1] = target[2 * i + 1]
        snapped.append(shapely.LineString(c))
    noded = shapely.get_parts(shapely.unary_union(snapped))
    H = nx.MultiGraph()
    for g in noded:
        a = tuple(np.round(g.coords[0], 3)); b = tuple(np.round(g.coords[-1], 3))
        H.add_edge(a, b)
    net = r.network
    assert net.n_edges == H.number_of_edges()
    assert net.n_nodes == H.number_of_nodes()
    assert r.report["components"] == nx.number_connected_components(H)
    assert net.edge_length_m.sum() == pytest.approx(sum(geodesic_length(g, net.crs) for g in noded), rel=1e-4)


# ----------------------------------------------------------------------------- check = build's issues
def test_check_reports_the_same_spots_as_build():
    g = layer([[(0, 0), (100, 0)], [(50, -50), (50, 50)], [(100.5, 0), (200, 0)]])
    a = build_network([LayerSpec(g)])
    b = check_layers([LayerSpec(g)])
    assert b.network is None
    assert kinds(a) == kinds(b)


def test_length_balance_on_real_streets_and_a_faulty_layer():
    """The balance of the issue, on libpysal's real street layer (few faults) and on a layer with
    many overshoots (pulled back onto junctions where other lines end, or trimmed where they cross)
    and gaps: sum of edge lengths = input - duplicates - dropped - trimmed + joined (signed), 0.01 %."""
    rng = np.random.default_rng(4)
    lines = []
    for i in range(12):
        for j in range(12):
            x, y = i * 100.0, j * 100.0
            ox, oy = rng.choice([-0.7, -0.3, 0.0, 0.4, 0.8], 2)
            lines.append([(x, y), (x + 100 + ox, y)])
            lines.append([(x, y), (x, y + 100 + oy)])
    for g in ([LayerSpec(_libpysal_streets())], [LayerSpec(layer(lines))]):
        rep = build_network(g).report
        balance = (rep["input_length_m"] - rep["removed_duplicate_length_m"] - rep["dropped_length_m"]
                   - rep["trimmed_length_m"] + rep["joined_gap_length_m"])
        assert rep["network_length_m"] == pytest.approx(balance, rel=1e-4)


def test_repair_points_of_a_wgs84_layer_land_in_the_working_crs(tmp_path):
    """Regression: points for dropped non-lines and split multi-parts were taken before reprojection
    and landed near the UTM false origin."""
    lonlat = gpd.GeoDataFrame(geometry=[
        shapely.MultiLineString([[(-21.0, -31.0), (-20.99, -31.0)], [(-20.99, -31.0), (-20.99, -30.99)]]),
        shapely.box(-21.0, -31.0, -20.999, -30.999),
        shapely.LineString([(-21.0, -31.0), (-21.0, -30.99)]),
    ], crs=4326)
    path = tmp_path / "mixed.geojson"
    lonlat.to_file(path)
    r = build_network([LayerSpec(str(path))])
    assert set(r.issues["kind"]) >= {"dropped_feature", "geometry_repaired"}
    here = lonlat.to_crs(r.network.crs).union_all().envelope.buffer(100)
    assert r.issues.geometry.within(here).all()
    assert r.report["dropped_feature"] == r.report["issues"]["dropped_feature"] == 1


def test_joined_ends_say_whether_they_were_gaps_or_overshoots():
    """Hand-drawn: two lines end at (100, 0); a third comes from the north and stops 0.6 m short
    (a gap) in one layer, or runs 0.6 m past the junction along its own direction (an overshoot)
    in another.  Both are joined (within the 1 m tolerance) and reported once, in words that say which."""
    base = [[(0, 0), (100, 0)], [(100, 0), (200, 0)]]
    gap = build_network([LayerSpec(layer(base + [[(100, 100), (100, 0.6)]]))])
    over = build_network([LayerSpec(layer(base + [[(100, 100), (100, -0.6)]]))])
    for r, word in ((gap, "gap of 0.60 m"), (over, "overshoot of 0.60 m")):
        d = r.issues[r.issues.kind == "gap_joined"].detail.tolist()
        assert len(d) == 1 and d[0].startswith(word), d
        assert r.report["components"] == 1 and r.network.n_nodes == 4


@settings(max_examples=60, deadline=None)
@given(st.integers(0, 2**31 - 1), st.integers(1, 60), st.integers(0, 40), st.booleans())
def test_box_pairs_match_brute_force(seed, n, m, same):
    """The grid-hash candidate finder against the obvious O(n m) test of every pair of boxes
    (touching counts as overlapping); each pair exactly once."""
    from geo_reach.network.build import box_pairs

    rng = np.random.default_rng(seed)

    def boxes(k):
        lo = rng.uniform(-50, 50, (k, 2)).round(1)
        size = rng.choice([0.0, 0.5, 3.0, 40.0], (k, 2))
        return np.column_stack([lo, lo + size])

    a = boxes(n)
    b = None if same else boxes(m)
    i, j = box_pairs(a, b)
    other = a if same else b
    want = {(p, q) for p in range(len(a)) for q in range(len(other))
            if (not same or p < q) and a[p, 0] <= other[q, 2] and other[q, 0] <= a[p, 2]
            and a[p, 1] <= other[q, 3] and other[q, 1] <= a[p, 3]}
    got = list(zip(i.tolist(), j.tolist()))
    assert len(got) == len(set(got))
    assert set(got) == want
