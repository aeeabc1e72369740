"""End joining and snapping (geo_reach.network.joining) against outside references.

References used here: shapely's ``snap`` and ``node`` (GEOS) for the junction just past a through line;
networkx for comparing graphs; hand-worked distances at the tolerance boundaries (plain Euclid).
Fixtures are tiny layers in a UTM zone (EPSG:32727) with coordinates offset from (X0, Y0); every
offset used at a boundary is exactly representable, so "exactly 1.0 m" is exactly 1.0 m in floats.
"""

from __future__ import annotations

import geopandas as gpd
import networkx as nx
import numpy as np
import pytest
import shapely
from hypothesis import given, settings, strategies as st
from pyproj import Geod, Transformer

from geo_reach.network.build import BuildOptions, LayerSpec, build_network

UTM = "EPSG:32727"
X0, Y0 = 500_000.0, 6_570_000.0
GEOD = Geod(ellps="WGS84")
TO_LONLAT = Transformer.from_crs(UTM, 4326, always_xy=True)


def lines_layer(lines):
    return gpd.GeoDataFrame({"n": range(len(lines))},
                            geometry=[shapely.LineString([(x + X0, y + Y0) for x, y in c]) for c in lines], crs=UTM)


def build(lines, snap_m=1.0):
    return build_network([LayerSpec(lines_layer(lines))], BuildOptions(snap_m=snap_m))


def kinds(r):
    return r.issues["kind"].value_counts().to_dict()


def ground_length(coords):
    """Geodesic length of a line given relative to (X0, Y0) in UTM: pyproj.Geod (Karney 2013) on the
    line taken to longitude/latitude."""
    c = np.asarray(coords, float)
    lon, lat = TO_LONLAT.transform(c[:, 0] + X0, c[:, 1] + Y0)
    return float(GEOD.line_length(lon, lat))


def graph_of(net):
    """networkx multigraph of a built network: nodes as (x, y) relative to the origin, edges with lengths."""
    g = nx.MultiGraph()
    for a, b, ln in zip(net.edge_from, net.edge_to, net.edge_length_m):
        g.add_edge((net.node_x[a] - X0, net.node_y[a] - Y0), (net.node_x[b] - X0, net.node_y[b] - Y0), length=ln)
    return g


def same_graph(ours: nx.MultiGraph, ref: nx.MultiGraph, tol: float, length_tol: float | None = None):
    """The two graphs have the same node pairs once every node is matched to the one reference node
    within ``tol`` of it, and each edge's length agrees within ``length_tol`` (default ``tol``)."""
    length_tol = tol if length_tol is None else length_tol
    rn = np.array(list(ref.nodes))
    match = {}
    for n in ours.nodes:
        d = np.hypot(*(rn - np.array(n)).T)
        assert (d <= tol).sum() == 1, (n, np.sort(d)[:3])
        match[n] = tuple(rn[int(np.argmin(d))])
    assert len(set(match.values())) == len(match) == ref.number_of_nodes()
    got = sorted((tuple(sorted((match[a], match[b]))), d["length"]) for a, b, d in ours.edges(data=True))
    want = sorted((tuple(sorted((a, b))), d["length"]) for a, b, d in ref.edges(data=True))
    assert [k for k, _ in got] == [k for k, _ in want]
    for (a, lg), (_, lw) in zip(got, want):
        assert lg == pytest.approx(lw, abs=length_tol), (a, lg, lw)


# ------------------------------------------------------------------ a junction just past a through line
@pytest.mark.parametrize("past", [0.0015, 0.002, -0.0015, 0.3, -0.7])
def test_junction_just_past_a_through_line_joins_it(past):
    """Two line ends meet ``past`` metres beyond (or short of) a through line; each end lies within the
    tolerance of the line's interior and each line crosses it just short of its end.  Before the fix,
    the two ends were joined to each other but not to the through line, and nothing was reported.

    Reference built here with GEOS: ``shapely.snap`` the through line to the two line ends (which
    inserts the junction as a vertex of the through line, within the 1 m tolerance), then
    ``shapely.node`` the three lines and count with networkx.
    """
    through = shapely.LineString([(0, 0), (200, 0)])
    a = shapely.LineString([(50, -50), (100, past)])
    b = shapely.LineString([(150, -50), (100, past)])
    snapped = shapely.snap(through, shapely.MultiPoint([(100, past)]), 1.0)
    noded = shapely.get_parts(shapely.node(shapely.MultiLineString([a, b, snapped])))
    ref = nx.MultiGraph()
    for g in noded:
        c = shapely.get_coordinates(g)
        ref.add_edge(tuple(c[0]), tuple(c[-1]), length=float(shapely.length(g)))
    assert nx.number_connected_components(ref) == 1 and ref.number_of_edges() == 4

    r = build([[(0, 0), (200, 0)], [(50, -50), (100, past)], [(150, -50), (100, past)]])
    assert r.report["components"] == 1
    same_graph(graph_of(r.network), ref, tol=1.0)
    joined = r.issues[r.issues.kind == "gap_joined"]
    assert len(joined) == 1 and "junction of 2 line ends" in joined.detail.iloc[0]   # reported, once
    assert shapely.Point(X0 + 100, Y0).distance(joined.geometry.iloc[0]) < 1e-6     # onto the through line
    assert "crossing_split" not in kinds(r)


def test_junction_of_ends_near_another_line_stays_apart_beyond_the_tolerance():
    """The same junction 1.5 m past the through line (1 m tolerance) is not joined to it, and is reported."""
    r = build([[(0, 0), (200, 0)], [(50, -50), (100, 1.5)], [(150, -50), (100, 1.5)]])
    assert r.report["components"] == 1          # the two lines cross the through line: split there
    # ... but the junction itself is not moved onto the line: 2 short stubs beyond the crossings remain
    assert kinds(r).get("crossing_split") == 2


# ------------------------------------------------------------------ tolerance boundaries
@pytest.mark.parametrize("gap, joined", [(1.0, True), (1.0 + 2 ** -20, False), (1.5, False), (0.5, True)])
def test_t_junction_at_the_tolerance(gap, joined):
    """A dead end ``gap`` metres from a line's interior, tolerance 1 m: joined exactly at 1.0 m
    (the rule is "within the tolerance", inclusive), left open and reported just past it."""
    r = build([[(0, 0), (200, 0)], [(100, 80), (100, gap)]])
    k = kinds(r)
    assert (r.report["components"] == 1) is joined
    if joined:
        assert k.get("gap_joined") == 1 and "unjoined_gap" not in k
        assert r.network.n_nodes == 4
        assert r.report["joined_gap_length_m"] == pytest.approx(gap, abs=1e-3)
    else:
        assert k.get("unjoined_gap") == 1 and "gap_joined" not in k
        assert r.report["joined_gap_length_m"] == 0


@pytest.mark.parametrize("gap, joined", [(1.0, True), (1.0 + 2 ** -20, False), (1.5, False), (1.99, False)])
def test_end_to_end_gap_at_the_tolerance(gap, joined):
    """Two line ends ``gap`` metres apart along one axis, tolerance 1 m: joined at exactly 1.0 m,
    an ``unjoined_gap`` beyond it - including between one and two tolerances, which a search
    radius of twice the tolerance would join."""
    r = build([[(0, 0), (100, 0)], [(100 + gap, 0), (200, 0)]])
    k = kinds(r)
    assert (r.report["components"] == 1) is joined
    if joined:
        assert k == {"gap_joined": 1}
        assert r.network.n_nodes == 3
        # ground length = grid length / k0, with the UTM scale k0 = 0.9996 on the central meridian (X0)
        assert r.report["network_length_m"] == pytest.approx(200.0 / 0.9996, rel=2e-5)
    else:
        assert k == {"unjoined_gap": 1}
        gap_pt = r.issues.geometry.iloc[0]
        assert gap_pt.distance(shapely.Point(X0 + 100 + gap / 2, Y0)) < 1e-6


def test_collinear_overshoot_at_a_junction_leaves_no_extra_node():
    """A row drawn as two pieces overlapping by 0.7 m where a third line ends: the overshooting end is
    pulled back, and the overlap's ends (within the tolerance of the joined ends) make no nodes."""
    r = build([[(0, 0), (100.7, 0)], [(100, 0), (200, 0)], [(100, 0), (100, 100)]])
    assert r.network.n_nodes == 4 and r.network.n_edges == 3
    assert r.issues[r.issues.kind == "gap_joined"].detail.tolist() == [
        "overshoot of 0.70 m past a junction of 3 line ends pulled back"]
    assert r.report["duplicate_removed"] == 0 and r.report["crossing_split"] == 0


def test_dead_end_snapped_across_a_shallow_crossing_makes_one_junction():
    """A line crossing another at a shallow angle (sin = 1/3) and ending 1.5 m past the crossing, 0.5 m
    from the line: too far along itself to be trimmed, near enough to be snapped.  Once its end is on the
    line, the crossing it made is gone: one junction, at the snapped end."""
    c, s = (8 / 9) ** 0.5, 1 / 3
    r = build([[(0, 0), (200, 0)], [(100 - 60 * c, -60 * s), (100 + 1.5 * c, 1.5 * s)]])
    net = r.network
    assert net.n_nodes == 4 and net.n_edges == 3 and r.report["duplicate_removed"] == 0
    deg3 = np.nonzero(net.degree == 3)[0]
    assert len(deg3) == 1 and net.node_x[deg3[0]] - X0 == pytest.approx(100 + 1.5 * c, abs=1e-6)
    assert "crossing_split" not in kinds(r)


def test_ends_of_different_modes_never_join():
    """A road ending 0.5 m from a rail line's end: neither moves, nothing is joined or reported as joined."""
    road = lines_layer([[(0, 0), (100, 0)]])
    rail = lines_layer([[(100.5, 0), (200, 0)]])
    r = build_network([LayerSpec(road), LayerSpec(rail, mode="rail")])
    assert r.report["components"] == 2 and "gap_joined" not in kinds(r)
    assert r.report["joined_gap_length_m"] == 0
    assert sorted(r.network.node_x - X0) == pytest.approx([0, 100, 100.5, 200])


def test_tolerance_scales_with_snap_m():
    """The same 1.5 m gap joins at a 2 m tolerance and not at 1 m."""
    lines = [[(0, 0), (100, 0)], [(101.5, 0), (200, 0)]]
    assert build(lines, snap_m=2.0).report["components"] == 1
    assert build(lines, snap_m=1.0).report["components"] == 2
    assert build(lines, snap_m=0.0).report["components"] == 2


def test_dead_end_prefers_an_existing_vertex_within_the_tolerance():
    """A dead end 0.8 m from a line whose vertex lies 0.9 m away joins at that vertex (no new vertex)."""
    r = build([[(0, 0), (100.4, 0), (200, 0)], [(100, 80), (100, 0.8)]])
    net = r.network
    assert net.n_nodes == 4 and net.n_edges == 3
    assert np.any((np.abs(net.node_x - X0 - 100.4) < 1e-6) & (np.abs(net.node_y - Y0) < 1e-6))


def test_cluster_moves_to_the_most_shared_place():
    """Three ends meet at (100, 0); a fourth stops 0.6 m short: all four meet at (100, 0)."""
    r = build([[(0, 0), (100, 0)], [(100, 0), (200, 0)], [(100, 0), (100, -100)], [(100, 100), (100, 0.6)]])
    net = r.network
    deg4 = np.nonzero(net.degree == 4)[0]
    assert len(deg4) == 1
    assert (net.node_x[deg4[0]], net.node_y[deg4[0]]) == (X0 + 100, Y0)
    assert r.report["joined_gap_length_m"] == pytest.approx(0.6, abs=1e-3)


def test_closed_line_alone_is_not_a_junction():
    """The two ends of one closed line within the tolerance of each other, and nothing else near: a loop
    whose ends meet (to 1 mm) is kept as a self loop, and a ring left 0.5 m open is not closed by snapping
    its own two ends together."""
    r = build([[(0, 0), (100, 0), (100, 100), (0, 0.5)]])
    assert r.network.n_nodes == 2 and "gap_joined" not in kinds(r)


# ------------------------------------------------------------------ property: perturbed clean networks
def _is_clean(lines, tol):
    """No two lines cross or touch except where one ends; every line end is on another line or
    farther than three tolerances from it; and away from the points they share (5 m around them)
    no two lines come within three tolerances of each other (else moving an end could make a real
    crossing)."""
    geoms = [shapely.LineString(c) for c in lines]
    for i, gi in enumerate(geoms):
        ends = shapely.points([lines[i][0], lines[i][-1]])
        for j, gj in enumerate(geoms):
            if i == j:
                continue
            d = shapely.distance(ends, gj)
            if np.any((d > 1e-6) & (d <= 3 * tol)):
                return False
            if j > i:
                ends_ij = np.array([lines[i][0], lines[i][-1], lines[j][0], lines[j][-1]])
                for p in shapely.get_coordinates(shapely.intersection(gi, gj)):
                    if np.min(np.hypot(*(ends_ij - p).T)) > 1e-6:
                        return False
                shared = [p for p in shapely.points(ends_ij)
                          if shapely.distance(p, gi) < 1e-6 and shapely.distance(p, gj) < 1e-6]
                zone = shapely.union_all([shapely.buffer(p, 5.0) for p in shared]) if shared else None
                ai = gi if zone is None else shapely.difference(gi, zone)
                aj = gj if zone is None else shapely.difference(gj, zone)
                if not (ai.is_empty or aj.is_empty) and shapely.distance(ai, aj) <= 3 * tol:
                    return False
    return True


def _clean_network(rng, tol):
    """A clean network and its graph, worked out from its construction (not by the builder).

    Rows are straight through lines (or split into pieces at the junctions); columns join junctions
    of neighbouring rows; spurs hang off some junctions, 44 degrees or more from the row (below about
    45 degrees, an end just across a line and trimmed back along its own course moves the junction
    along that line by more than half the tolerance: the documented trim rule, not a fault).
    Junctions on a through line lie on it (to float precision).  Returns the lines, which of their ends meet a through line's interior
    (with that line's unit direction), and the reference graph.
    """
    nx_, ny_ = rng.integers(3, 6), rng.integers(2, 5)
    xs = np.sort(np.arange(nx_) * 60.0 + rng.uniform(-10, 10, nx_))
    rows = [(j * 60.0 + rng.uniform(-8, 8), rng.uniform(-0.1, 0.1)) for j in range(ny_)]   # y0, slope

    def junction(i, j):
        y0, s = rows[j]
        return (float(xs[i]), y0 + s * float(xs[i]))

    lines, crosses, ref = [], [], nx.MultiGraph()
    used = {}   # row -> set of junction columns something ends at
    cols = [(i, j) for i in range(nx_) for j in range(ny_ - 1) if rng.random() < 0.8]
    spurs = [(i, j) for i in range(nx_) for j in range(ny_) if rng.random() < 0.25]
    for i, j in cols:
        a, b = junction(i, j), junction(i, j + 1)
        mid = ((a[0] + b[0]) / 2 + rng.uniform(-10, 10), (a[1] + b[1]) / 2)
        lines.append([a, mid, b] if rng.random() < 0.5 else [a, b])
        used.setdefault(j, set()).add(i)
        used.setdefault(j + 1, set()).add(i)
    for i, j in spurs:
        a = junction(i, j)
        ang = rng.uniform(0.2, 0.7) * rng.choice([-1, 1])     # 44 degrees or more from the row
        b = (a[0] + 20 * np.sin(ang), a[1] + rng.choice([-1, 1]) * 20 * np.cos(ang))
        lines.append([a, b])
        used.setdefault(j, set()).add(i)
    for j in range(ny_):
        if rng.random() < 0.5:      # one through line: junctions in between lie on its interior
            a, b = junction(0, j), junction(nx_ - 1, j)
            d = np.subtract(b, a) / np.hypot(*np.subtract(b, a))
            idx = len(lines)
            lines.append([a, b])
            crosses.append((idx, j, d))
            stops = sorted({0, nx_ - 1} | used.get(j, set()))
            for p, q in zip(stops[:-1], stops[1:]):
                ref.add_edge(junction(p, j), junction(q, j), length=ground_length([junction(p, j), junction(q, j)]))
        else:
            for p in range(nx_ - 1):
                if rng.random() < 0.85:
                    a, b = junction(p, j), junction(p + 1, j)
                    lines.append([a, b])
                    ref.add_edge(a, b, length=ground_length([a, b]))
    for c in lines[: len(cols) + len(spurs)]:
        ref.add_edge(tuple(c[0]), tuple(c[-1]), length=ground_length(c))
    if not _is_clean(lines, tol):
        return _clean_network(rng, tol)
    return lines, crosses, ref


def _perturb(rng, lines, crosses, tol):
    """Move every line end by less than half the tolerance, any direction; some by a few millimetres
    along the line (overshoots and near-misses) or just across the through line they meet."""
    out = []
    through = {i: d for i, _, d in crosses}
    for k, c in enumerate(lines):
        c = [list(p) for p in c]
        for end, nxt in ((0, 1), (-1, -2)):
            kind = rng.random()
            if kind < 0.6 or k in through:
                r, th = rng.uniform(0, 0.49 * tol), rng.uniform(0, 2 * np.pi)
                off = (r * np.cos(th), r * np.sin(th))
            elif kind < 0.8:    # millimetre overshoot (+) or near-miss (-) along the line
                d = np.subtract(c[end], c[nxt])
                off = tuple(d / np.hypot(*d) * rng.choice([-1, 1]) * rng.uniform(0.001, 0.003))
            else:               # just across whatever it meets, perpendicular to its own line
                d = np.subtract(c[end], c[nxt])
                n = np.array([-d[1], d[0]]) / np.hypot(*d)
                off = tuple(n * rng.choice([-1, 1]) * rng.uniform(0.0005, 0.003))
            c[end] = [c[end][0] + off[0], c[end][1] + off[1]]
        out.append([tuple(p) for p in c])
    return out


@settings(max_examples=40, deadline=None)
@given(st.integers(0, 2**31 - 1), st.sampled_from([0.5, 1.0, 2.0]))
def test_perturbed_clean_network_is_repaired_to_the_clean_one(seed, tol):
    """Issue 11, "Topology": a generated clean network with every line end moved by less than half the
    tolerance (any direction, including just across the line it meets) plus millimetre overshoots and
    near-misses builds to the clean network: the same node pairs, each edge's length within the
    tolerance.  The reference graph comes from the generator's construction, not from the builder."""
    rng = np.random.default_rng(seed)
    lines, crosses, ref = _clean_network(rng, tol)
    messy = _perturb(rng, lines, crosses, tol)
    r = build(messy, snap_m=tol)
    ours = graph_of(r.network)
    # each line end moved < tol / 2, and a through line's interior with its ends: a node lies within tol
    same_graph(ours, ref, tol=tol, length_tol=tol)
    assert nx.number_connected_components(ours) == nx.number_connected_components(ref)
    # and the clean layer itself builds to the same graph, with nothing joined
    clean = build(lines, snap_m=tol)
    same_graph(graph_of(clean.network), ref, tol=1e-3)
