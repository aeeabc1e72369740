"""Hazard closures: which links a hazard closes, and who is affected in place or isolated.

References: the links a polygon touches are checked with shapely's ``intersects`` edge by edge;
the raster hazard against boxes of the cells above the threshold built here with shapely from the
raster's own transform; closures of many links against the networkx brute force of
``tests/helpers/crit_ref.py`` (Hagberg, Schult and Swart (2008), NetworkX, Proc. SciPy 2008).
"""

from __future__ import annotations

import dataclasses
import sys
from pathlib import Path

import numpy as np
import pytest
import rasterio
import shapely
from hypothesis import given, settings
from hypothesis import strategies as st
from rasterio.transform import Affine

sys.path.insert(0, str(Path(__file__).parent))
from helpers import crit_ref as R  # noqa: E402
from helpers.routing_nets import make_network  # noqa: E402
from test_criticality import cases, prepare  # noqa: E402

from geo_reach.analysis.criticality import (HazardLinks, HubTrips, grade_separated, hazard_impact,  # noqa: E402
                                            hazard_links, link_criticality, raster_hazard)
from geo_reach.errors import InputError  # noqa: E402


def chain(levels=None):
    """Nodes 0..5 along x, 1 km apart, 1 minute per link (edges 0..4: i -> i+1)."""
    xy = np.array([(i * 1000.0, 0.0) for i in range(6)])
    net = make_network([(i, i + 1) for i in range(5)], xy, minutes=1.0)
    if levels is not None:
        net = dataclasses.replace(net, extra={"level": np.asarray(levels, float)})
    return net, xy


def test_links_touched_by_polygons_and_bridges_kept_open():
    net, _ = chain(levels=[0, 0, 1, 0, 0])
    flood = [shapely.box(1500, -100, 3500, 100)]          # touches links 1, 2 and 3
    hl = hazard_links(net, flood)
    assert hl.touched.tolist() == [1, 2, 3] and hl.closed.tolist() == [1, 3] and hl.kept_open.tolist() == [2]
    hl = hazard_links(net, flood, closes_bridges=True)
    assert hl.closed.tolist() == [1, 2, 3] and hl.kept_open.tolist() == []
    # touching the boundary counts: a box whose edge runs along x = 5000 touches link 4 at node 5
    assert hazard_links(net, [shapely.box(5000, -10, 5100, 10)]).touched.tolist() == [4]
    assert grade_separated(chain()[0]).tolist() == [False] * 5


@settings(max_examples=40, deadline=None)
@given(cases(), st.lists(st.tuples(st.floats(0, 1300), st.floats(0, 1300), st.floats(1, 400)), min_size=1,
                         max_size=3))
def test_links_touched_equal_shapely_edge_by_edge(c, discs):
    net = c["net"]
    polys = [shapely.Point(x, y).buffer(r) for x, y, r in discs]
    got = hazard_links(net, polys).touched.tolist()
    ref = [e for e in range(net.n_edges) if any(net.edge_geometry[e].intersects(p) for p in polys)]
    assert got == ref


def test_raster_hazard_is_the_union_of_cells_above_the_threshold(tmp_path):
    rng = np.random.default_rng(2)
    depth = rng.uniform(0, 1, (8, 10))
    depth[0, 0] = np.nan
    tr = Affine(100.0, 0.0, -500.0, 0.0, -100.0, 400.0)   # 100 m cells, top-left corner (-500, 400)
    path = tmp_path / "flood.tif"
    with rasterio.open(path, "w", driver="GTiff", width=10, height=8, count=1, dtype="float64",
                       crs="EPSG:3857", transform=tr, nodata=np.nan) as ds:
        ds.write(depth, 1)
    polys = raster_hazard(path, 0.6, "EPSG:3857")
    r, c = np.nonzero(depth > 0.6)
    boxes = [shapely.box(tr.c + j * 100, tr.f - (i + 1) * 100, tr.c + (j + 1) * 100, tr.f - i * 100)
             for i, j in zip(r, c)]
    ref = shapely.union_all(boxes)
    got = shapely.union_all(polys)
    assert shapely.symmetric_difference(got, ref).area == pytest.approx(0.0, abs=1e-6)
    net, _ = chain()
    assert hazard_links(net, polys).touched.tolist() == [e for e in range(5) if net.edge_geometry[e].intersects(ref)]
    assert len(raster_hazard(path, 5.0, "EPSG:3857")) == 0
    with pytest.raises(InputError, match="not a number"):
        raster_hazard(path, float("nan"), "EPSG:3857")


def test_in_place_and_isolated_people_are_kept_apart():
    """Chain 0-1-2-3-4-5 (1 minute links), a clinic at node 0 and a market at node 5, walk legs within 60 m.

    Villages 50 m north of nodes 1, 2, 4 with 100, 200, 400 people.  The flood covers link 1-2 and the
    village by node 2 (but not node 1's or node 4's village):
    * links closed: 1 (1-2);
    * in place: village 2 (200);
    * the clinic is lost by villages 2 and 4 (600 people), the market by village 1 (100);
    * isolated (outside the flood, losing some hub): villages 1 and 4 (500); in place and cut off: 200.
    """
    net, xy = chain()
    vxy = xy[[1, 2, 4]] + [0.0, 50.0]
    t = HubTrips.prepare(net, xy[[0, 5]], np.array(["c", "m"], object), np.array(["clinic", "market"], object),
                         place_xy=vxy, people=[100.0, 200.0, 400.0], max_access_m=60.0)
    flood = [shapely.box(1400, -20, 1600, 20), shapely.Point(2000, 50).buffer(10)]
    hl = hazard_links(net, flood)
    assert hl.closed.tolist() == [1]
    pts = shapely.points(vxy)
    inside = np.array([any(p.intersects(f) for f in flood) for p in pts])
    imp = hazard_impact(t, hl, inside, zone=np.array(["west", "west", "east"], object))
    s = imp.summary
    assert s["people_in_place"] == 200 and s["people_isolated"] == 500 and s["people_in_place_cut_off"] == 200
    assert s["by_kind"]["clinic"]["people_isolated"] == 400 and s["by_kind"]["clinic"]["people_in_place_cut_off"] == 200
    assert s["by_kind"]["market"]["people_isolated"] == 100
    d = imp.districts.set_index("zone")
    assert d.loc["west", "people_in_place"] == 200 and d.loc["west", "people_isolated"] == 100
    assert d.loc["east", "people_isolated"] == 400 and d.loc["east", "people_isolated_clinic"] == 400
    p = imp.places
    assert p["isolated"].tolist() == [1, 0, 1] and p["cut_off_in_place"].tolist() == [0, 1, 0]
    assert p["cut_off_clinic"].tolist() == [0, 1, 1] and p["cut_off_market"].tolist() == [1, 0, 0]
    # village 1 walks 50 m (0.6 min) to node 1, then 1 minute to the clinic at node 0
    assert p["clinic_minutes_before"][0] == pytest.approx(1.6) and p["clinic_minutes_after"][0] == pytest.approx(1.6)


@settings(max_examples=60, deadline=None)
@given(cases(), st.data())
def test_closing_many_links_equals_brute_force(c, data):
    t = prepare(c)
    m = t.network.n_edges
    closed = sorted(set(data.draw(st.lists(st.integers(0, m - 1), max_size=m))))
    res = t.close(closed)
    nodes, places = R.costs(t.network, t.weight, t.direction, t.hub_att, t.hub_kind, len(t.kinds), t.place_att,
                            closed=set(closed))
    ref = places if t.has_places else nodes
    assert np.array_equal(np.isfinite(res.place_cost), np.isfinite(ref))
    fin = np.isfinite(ref)
    np.testing.assert_allclose(res.place_cost[fin], ref[fin], rtol=1e-12, atol=1e-12)
    fin = np.isfinite(nodes)
    got = np.stack([f.cost for f in res.forests])
    assert np.array_equal(np.isfinite(got), fin)
    np.testing.assert_allclose(got[fin], nodes[fin], rtol=1e-12, atol=1e-12)


@settings(max_examples=40, deadline=None)
@given(cases())
def test_a_hazard_closing_one_link_agrees_with_the_link_table(c):
    t = prepare(c)
    tab = link_criticality(t).table.set_index("edge_id")
    for e in range(t.network.n_edges):
        z = np.zeros(0, np.int64)
        imp = hazard_impact(t, HazardLinks(np.array([e]), np.array([e]), z), np.zeros(len(t.people), bool))
        lost = sum(k["people_isolated"] + k["people_in_place_cut_off"] for k in imp.summary["by_kind"].values())
        assert lost == pytest.approx(tab.loc[e, "people_cut_off"])
        af = [col for col in tab.columns if col.startswith("person_")][0]
        assert imp.summary[af] == pytest.approx(tab.loc[e, af], rel=1e-9, abs=1e-9)
