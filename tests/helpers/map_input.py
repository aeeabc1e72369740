"""A small invented study for the map tests (EPSG:32727 near lon -21, lat -31): every layer the map draws.

Not real data.  A 5 x 4 grid network 1 km apart (nodes numbered ``4 i + j``),
hubs at two corners, disjoint reach rings around the first hub, settlements,
two districts, a lake, 26 weak regions (so that some are not numbered at
first), 30 network issues bunched in one place plus two apart, and one
scenario with a network after, a change layer and a proposed line.

:func:`hostile` puts hostile text into every name the page shows: hubs,
settlements, districts, the scenario's name and description, and the title.
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
from pyproj import Transformer

from geo_reach.export.webmap import MapInput, NetworkLayer, ScenarioView

CRS = "EPSG:32727"
_T = Transformer.from_crs("EPSG:4326", CRS, always_xy=True)
X0, Y0 = _T.transform(-21.0, -31.0)

#: Texts that must show literally and never run (issue: data is never code).  No "49" anywhere else.
HOSTILE = ["{{ 7*7 }}", "{% raw %}", "${7*7}", "<script>alert(7)</script>", "</script><b>x", "a \"quoted\" 'name'",
           "back\\slash\\n", "\u05e9\u05dc\u05d5\u05dd \u0645\u0631\u062d\u0628\u0627", "\U0001F3E5 clinic \U0001F30A",
           "line\u2028sep", "<!-- x", "&amp; &lt;"]
#: Every hostile kind in one name (template syntax of Jinja and JavaScript, script tags, quotes, backslashes,
#: right-to-left text, emoji), so hubs, settlements, districts, the scenario and the title each hold them all.
#: Under 60 characters, so no label or tooltip shortens it.
EVERY = "{{7*7}} {%raw%} ${7*7} <script>x</script> \"'\\ \u05e9\u05dc\u05d5\u05dd \U0001F3E5"
THRESHOLDS = (15.0, 30.0, 60.0)


def xy(dx_km, dy_km):
    return X0 + 1000.0 * dx_km, Y0 + 1000.0 * dy_km


def node_cost() -> np.ndarray:
    c = np.array([6.0 * min(i + j, (4 - i) + (3 - j)) + 3.0 for i in range(5) for j in range(4)])
    c[19 - 4] = np.nan     # node (3, 3): no route
    return c


def network(cost=None) -> NetworkLayer:
    rows = []
    for i in range(5):
        for j in range(4):
            for di, dj in ((1, 0), (0, 1)):
                if i + di < 5 and j + dj < 4:
                    rows.append((4 * i + j, 4 * (i + di) + j + dj, xy(i, j), xy(i + di, j + dj), "rail" if j == 0 else "road"))
    edges = gpd.GeoDataFrame({
        "edge_id": np.arange(len(rows), dtype=np.int64),
        "from_node": [r[0] for r in rows], "to_node": [r[1] for r in rows],
        "mode": [r[4] for r in rows], "length_m": np.full(len(rows), 1000.0),
        "name": ["Korrin Road"] * len(rows),
        "src_fid": np.arange(len(rows)), "src_layer": ["roads"] * len(rows),
    }, geometry=[shapely.LineString([r[2], r[3]]) for r in rows], crs=CRS)
    ecost = np.where(edges["mode"] == "rail", 1.5, 2.5)
    return NetworkLayer(edges, node_cost() if cost is None else cost, ecost)


def hubs():
    return gpd.GeoDataFrame({"hub_id": ["H1", "H2", "H3"], "name": ["Tessaly Clinic", "Varnhold Depot", "Oss Port"],
                             "kind": ["clinic", "depot", "port"]},
                            geometry=[shapely.Point(xy(0, 0)), shapely.Point(xy(4, 3)), shapely.Point(xy(2, 0))],
                            crs=CRS)


def rings():
    centre = shapely.Point(xy(0, 0))
    outer = shapely.box(*xy(-6, -6), *xy(10, 9))
    geoms, prev = [], None
    for r_km in (1.5, 3.0, 5.0):
        disc = centre.buffer(r_km * 1000.0, 64)
        geoms.append(disc if prev is None else disc.difference(prev))
        prev = disc
    geoms.append(outer.difference(prev))
    return gpd.GeoDataFrame({"from_minutes": [0.0, 15.0, 30.0, 60.0], "to_minutes": [15.0, 30.0, 60.0, np.nan],
                             "population": [1200.0, 830.0, 310.0, 75.0],
                             "area_km2": [shapely.area(g) / 1e6 for g in geoms]}, geometry=geoms, crs=CRS)


def settlements(shift=0.0):
    pts = [xy(0.5, 0.2), xy(2.2, 1.4), xy(3.6, 2.6), xy(1.1, 2.8), xy(4.6, 0.4), xy(-3.0, -4.0)]
    return gpd.GeoDataFrame({
        "name": ["Ossel", "Brannock", "Tilwick", "Marrow End", "Quell", "Far Hollow"],
        "population": [5200.0, 830.0, 120.0, 2400.0, 35.0, 610.0],
        "minutes": np.array([4.0, 15.0, 31.0, 61.5, np.nan, 88.0]) + shift,
        "hub_name": ["Tessaly Clinic"] * 4 + [None, "Tessaly Clinic"],
        "network_km": [0.4, 2.1, 4.5, 5.3, np.nan, 9.0],
    }, geometry=[shapely.Point(p) for p in pts], crs=CRS)


def districts():
    return gpd.GeoDataFrame({"name": ["Eldund", "Yrund"], "population": [6000.0, 2200.0],
                             "share_beyond": [0.08, 0.62], "mean_minutes": [12.3, 58.0]},
                            geometry=[shapely.box(*xy(-6, -6), *xy(2, 9)), shapely.box(*xy(2, -6), *xy(10, 9))],
                            crs=CRS)


def water():
    return gpd.GeoDataFrame({"name": ["Mere"], "kind": ["lake"]},
                            geometry=[shapely.Point(xy(6.5, 6.0)).buffer(900, 32)], crs=CRS)


def weak():
    rng = np.random.default_rng(3)
    n = 26
    reasons = (["single_link", "beyond_threshold", "no_hub"] * 9)[:n]
    pop = np.concatenate([np.sort(rng.integers(30, 3000, n - 4))[::-1].astype(float), [0.0, 0.0, 0.2, 0.0]])
    geoms = []
    for k in range(n):
        cx, cy = 5.5 + (k % 6) * 0.7, -5.0 + (k // 6) * 0.7
        geoms.append(shapely.box(*xy(cx, cy), *xy(cx + 0.5, cy + 0.5)))
    edge_id = [k if r == "single_link" else None for k, r in enumerate(reasons)]
    return gpd.GeoDataFrame({"rank": np.arange(1, n + 1), "reason": reasons, "population": pop,
                             "area_km2": np.full(n, 0.25), "mean_hub_minutes": np.linspace(70, 130, n),
                             "join_x": np.full(n, 4.8e5), "edge_id": edge_id}, geometry=geoms, crs=CRS)


def diameter():
    return gpd.GeoDataFrame({"cost": [21.0], "length_m": [7000.0], "minutes": [21.0]},
                            geometry=[shapely.LineString([xy(0, 0), xy(4, 0), xy(4, 3)])], crs=CRS)


def issues():
    pts = [xy(1.0 + 0.001 * k, 3.4 + 0.0005 * k) for k in range(30)] + [xy(4.6, 1.0), xy(-2.0, 3.4)]
    return gpd.GeoDataFrame({"kind": ["dangle"] * 30 + ["unjoined_gap", "crossing_kept"],
                             "detail": ["dead end near a line"] * 32, "src_fid": np.arange(32)},
                            geometry=[shapely.Point(p) for p in pts], crs=CRS)


def scenario(name="new bridge", description="A bridge over the Mere"):
    net = network()
    after = node_cost() - 2.0
    after[0] = 3.0
    prop = gpd.GeoDataFrame({"name": ["Mere bridge"]}, geometry=[shapely.LineString([xy(4, 3), xy(6, 5)])], crs=CRS)
    e = net.edges
    change = gpd.GeoDataFrame({"delta": np.linspace(-20, 12, len(e)), "before": np.full(len(e), 30.0),
                               "after": 30.0 + np.linspace(-20, 12, len(e)), "name": ["Korrin Road"] * len(e)},
                              geometry=e.geometry.values, crs=CRS)
    change.loc[3, "delta"] = np.nan
    return ScenarioView(name=name, description=description, network=NetworkLayer(e, after, net.edge_cost),
                        change=change, proposed=prop, rings=rings(), settlements=settlements(shift=-3.0))


def criticality():
    """The grid's links with the people each cuts off when it closes (most cut nobody off: not drawn)."""
    e = network().edges
    cut = np.zeros(len(e))
    cut[[0, 3, 5, 8, 12, 20, 25, 30]] = [5200.0, 830.0, 120.0, 2400.0, 35.0, 610.0, 3000.0, 10.0]
    return e[["edge_id", "name", "geometry"]].assign(people_cut_off=cut, rank=np.arange(1, len(e) + 1),
                                                     person_minutes_added=cut * 3.5)


def indices():
    """Two measures' indices for the settlements (one settlement reaches no hub: 0)."""
    s = settlements()
    rows = []
    for m, vals in (("2sfca", [0.0004, 0.0011, 0.0002, 0.0, 0.0009, 0.0006]), ("gravity", [1.2, 0.4, 0.9, 0.0, 2.2, 0.1])):
        rows.append(s[["name", "geometry"]].assign(measure=m, kind="clinic", index=vals, hubs_within=[2, 3, 1, 0, 2, 1],
                                                   nearest_minutes=s["minutes"].to_numpy()))
    return gpd.GeoDataFrame(pd.concat(rows, ignore_index=True), crs=CRS)


def full(title="Invented test study", **kw) -> MapInput:
    args = dict(title=title, thresholds=THRESHOLDS, network=network(), hubs=hubs(), rings=rings(),
                settlements=settlements(), districts=districts(), water=water(), weak=weak(), diameter=diameter(),
                issues=issues(), scenarios=(scenario(),), criticality=criticality(), indices=indices())
    args.update(kw)
    return MapInput(**args)


def hostile() -> tuple[MapInput, dict]:
    """The full study with hostile names everywhere; returns the input and ``{place: [texts]}``."""
    h = hubs()
    h["name"] = [HOSTILE[0], HOSTILE[2], EVERY]
    h["kind"] = [HOSTILE[3], "clinic", HOSTILE[4]]
    s = settlements()
    s["name"] = HOSTILE[5:10] + [EVERY]
    s["hub_name"] = [HOSTILE[0]] * 6
    d = districts()
    d["name"] = [HOSTILE[11], EVERY]
    title = "{{ 7*7 }} <script>alert(7)</script> \U0001F30A \u05e9\u05dc\u05d5\u05dd " + EVERY
    sc = scenario(name="${7*7} </script>{{ 7*7 }} " + EVERY,
                  description="{% raw %} <img src=x onerror=alert(7)> \\ \" " + EVERY)
    m = full(title=title, hubs=h, settlements=s, districts=d, scenarios=(sc,))
    places = {"hubs": list(h["name"]), "hub kinds": list(h["kind"]), "settlements": list(s["name"]),
              "districts": list(d["name"]), "scenario": [sc.name, sc.description], "title": [title]}
    return m, places


def col(lay, key):
    """A column of a map page's layer as a list (the page packs repeated and missing values; see webmap.build)."""
    g = lay["geom"]
    n = len(g["f"]) if "f" in g else (len(g["n"]) if "n" in g else len(g["xy"]) // 2)
    c = lay["cols"].get(key)
    if c is None:
        return [None] * n
    if isinstance(c, list):
        return c
    if "k" in c:
        return [None if i < 0 else c["k"][i] for i in c["i"]]
    return [c["v"]] * n
