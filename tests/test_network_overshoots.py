"""Overshoot trimming and dead-end reports (geo_reach.network.overshoots), at their boundaries.

Distances are worked by hand on layers in a UTM zone; every boundary value is exactly representable
(offsets from X0, Y0 of 1.0, 10.0 and powers of two), so "exactly at the tolerance" is exact.
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pytest
import shapely

from geo_reach.network.build import BuildOptions, LayerSpec, build_network

UTM = "EPSG:32727"
X0, Y0 = 500_000.0, 6_570_000.0
K0 = 0.9996     # UTM scale on the central meridian (X0): ground length = grid length / K0


def build(lines, **opts):
    g = gpd.GeoDataFrame({"n": range(len(lines))},
                         geometry=[shapely.LineString([(x + X0, y + Y0) for x, y in c]) for c in lines], crs=UTM)
    return build_network([LayerSpec(g)], BuildOptions(**opts))


def kinds(r):
    return r.issues["kind"].value_counts().to_dict()


@pytest.mark.parametrize("at_start", [False, True])
@pytest.mark.parametrize("past, trimmed", [(1.0, True), (0.5, True), (1.0 + 2 ** -20, False)])
def test_overshoot_trimmed_up_to_the_tolerance(past, trimmed, at_start):
    """A line crossing another at a vertex of its own and running ``past`` metres beyond it (at its end,
    or drawn the other way, at its start): cut back to the crossing at up to 1 m (inclusive), reported
    as a trimmed overshoot with its length."""
    line = [(50, -40), (50, 0), (50, past)]
    r = build([[(0, 0), (100, 0)], line[::-1] if at_start else line])
    det = r.issues[r.issues.kind.isin(["gap_joined", "dangle"])].detail.tolist()
    if trimmed:
        assert det == [f"overshoot of {past:.2f} m past a junction trimmed"]
        assert r.report["trimmed_length_m"] == pytest.approx(past / K0, abs=1e-3)
        assert r.report["joined_gap_length_m"] == 0
        assert r.network.n_nodes == 4 and r.network.n_edges == 3
    else:   # beyond the tolerance: kept, a short stub off a junction
        assert len(det) == 1 and det[0].startswith("dead end of 1.00 m off a junction")
        assert r.report["trimmed_length_m"] == 0 and r.network.n_edges == 4


def test_oblique_overshoot_is_cut_back_along_its_own_line():
    """At 45 degrees, an end 0.5 m past the crossing (along itself) is cut back to the crossing point."""
    a = 2 ** -0.5 * 0.5
    r = build([[(0, 0), (100, 0)], [(10, -40), (50 + a, a)]])
    assert r.issues[r.issues.kind == "gap_joined"].detail.tolist() == ["overshoot of 0.50 m past a junction trimmed"]
    assert np.any((np.abs(r.network.node_x - X0 - 50) < 1e-6) & (np.abs(r.network.node_y - Y0) < 1e-6))


def test_the_nearest_node_to_each_end_is_the_one_trimmed_to():
    """Lines crossed several times, overshooting at both ends: each end is cut back to the node nearest
    it, and only the overshoots go (trimmed length = their sum)."""
    lines = [[(0, 0), (300, 0)], [(0, 100), (300, 100)], [(0, 50), (300, 50)]]
    over = []
    for k, x in enumerate((40, 120, 200, 260)):
        a, b = 0.25 + 0.125 * k, 0.5 + 0.125 * k
        lines.append([(x, -a), (x, 100 + b)])
        over += [a, b]
    r = build(lines)
    assert r.report["trimmed_length_m"] == pytest.approx(sum(over) / K0, abs=1e-3)
    assert r.report["gap_joined"] == 8 and r.network.n_nodes == 6 + 12
    assert "dangle" not in kinds(r)


def test_only_free_ends_are_trimmed():
    """An end that overshoots where another line ends within the tolerance is joined, not trimmed."""
    r = build([[(0, 0), (100, 0)], [(100, 0), (200, 0)], [(100, 50), (100, -0.6)]])
    assert r.report["trimmed_length_m"] == 0 and r.network.n_nodes == 4
    assert "pulled back" in r.issues[r.issues.kind == "gap_joined"].detail.iloc[0]


def test_trim_never_takes_more_than_half_a_line():
    """A 1.6 m line crossing another 0.8 m from its end: trimming would take half of it - not trimmed."""
    r = build([[(0, 0), (100, 0)], [(50, -0.8), (50, 0.8)]], snap_m=1.0)
    assert r.report["trimmed_length_m"] == 0


@pytest.mark.parametrize("far, reported", [(10.0, True), (9.5, True), (10.0 + 2 ** -18, False), (3.0, True)])
def test_unjoined_gap_reported_up_to_ten_tolerances(far, reported):
    """A dead end ``far`` metres from another line (1 m tolerance): reported up to 10 m, inclusive."""
    r = build([[(0, 0), (100, 0)], [(50, 80), (50, far)]])
    assert (kinds(r).get("unjoined_gap", 0) == 1) is reported
    if reported:
        pt = r.issues[r.issues.kind == "unjoined_gap"].geometry.iloc[0]
        assert pt.distance(shapely.Point(X0 + 50, Y0 + far / 2)) < 1e-6      # the gap's midpoint
        assert f"gap of {far:.2f} m" in r.issues[r.issues.kind == "unjoined_gap"].detail.iloc[0]


def test_facing_dead_ends_are_one_gap():
    r = build([[(0, 0), (100, 0)], [(103, 0), (200, 0)]])
    assert kinds(r) == {"unjoined_gap": 1}


def test_dangle_boundary():
    """A dead-end stub off a junction is a dangle when shorter than dangle_m (strictly)."""
    lines = [[(0, 0), (100, 0)], [(100, 0), (200, 0)], [(100, 0), (100, 8)]]
    stub = build(lines, dangle_m=1e9).network
    length = float(stub.edge_length_m[stub.edge_src_fid == 2][0])
    assert length == pytest.approx(8 / K0, rel=1e-6)
    assert kinds(build(lines, dangle_m=length)).get("dangle", 0) == 0
    assert kinds(build(lines, dangle_m=float(np.nextafter(length, np.inf)))).get("dangle", 0) == 1
    # a dead end off a plain bend (degree 2) is no dangle
    assert kinds(build([[(0, 0), (100, 0)], [(100, 0), (100, 5)]], dangle_m=100)).get("dangle", 0) == 0
