"""Small synthetic result layers for the export tests (invented places, EPSG:32727 near lon -21, lat -31).

Not real data: a few lines, points and polygons shaped like the layers the
analysis writes (``edges`` with ``hub_minutes``, ``hubs``, ``reach_bands``,
``weak_regions``, ``diameter``, ``issues``, a change layer with
``delta_minutes``).
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
from pyproj import Transformer

CRS = "EPSG:32727"
EVIL = "<script>alert(1)</script>"
LONG = "A very long remark about the ford " + "that floods every wet season " * 12 + "END"

_T = Transformer.from_crs("EPSG:4326", CRS, always_xy=True)
X0, Y0 = _T.transform(-21.0, -31.0)


def _xy(dx_km, dy_km):
    return X0 + 1000.0 * dx_km, Y0 + 1000.0 * dy_km


def sample_layers() -> dict:
    """Return ``{name: GeoDataFrame}`` of the main result layers (a 4 x 3 km grid network)."""
    # a 5 x 4 grid of nodes, 1 km apart; hub at (0, 0) and (4, 3)
    nodes = {(i, j): _xy(i, j) for i in range(5) for j in range(4)}
    lines, hub_min, minutes, mode = [], [], [], []
    for (i, j), p in nodes.items():
        for di, dj in ((1, 0), (0, 1)):
            q = nodes.get((i + di, j + dj))
            if q is None:
                continue
            lines.append(shapely.LineString([p, q]))
            d0 = min(i + j, (4 - i) + (3 - j))
            hub_min.append(6.0 * d0 + 3.0)
            minutes.append(1.5 if dj == 0 else 2.5)
            mode.append("rail" if j == 0 else "road")
    hub_min[3] = np.nan  # one link with no route to any hub
    n = len(lines)
    edges = gpd.GeoDataFrame({
        "edge_id": np.arange(n, dtype=np.int64),
        "mode": mode,
        "length_m": np.full(n, 1000.0),
        "minutes": minutes,
        "hub_minutes": hub_min,
        "name": ["Korrin Road"] * (n - 1) + [EVIL],
    }, geometry=lines, crs=CRS)

    hubs = gpd.GeoDataFrame({
        "hub_id": [1, 2, 3],
        "name": ["Tessaly Clinic", EVIL, "Varnhold Depot \u00e9\u00e8\u00fc"],
        "kind": ["clinic", "clinic", "depot"],
        "remark": ["", LONG, "river crossing <b>bold?</b> & more"],
    }, geometry=[shapely.Point(nodes[(0, 0)]), shapely.Point(nodes[(4, 3)]), shapely.Point(nodes[(2, 0)])], crs=CRS)

    centre = shapely.Point(nodes[(0, 0)])
    rings, prev = [], None
    for r_km in (1.5, 3.0, 5.0):
        disc = centre.buffer(r_km * 1000.0, 32)
        rings.append(disc if prev is None else disc.difference(prev))
        prev = disc
    bands = gpd.GeoDataFrame({
        "within_minutes": [15, 30, 60],
        "area_km2": [shapely.area(g) / 1e6 for g in rings],
        "population": [1200, 830, 310],
    }, geometry=rings, crs=CRS)

    weak = gpd.GeoDataFrame({
        "rank": [1, 2],
        "reason": ["no all-season road", "far from clinic"],
        "population": [540, 95],
        "area_km2": [2.0, 1.0],
        "hub_minutes": [75.0, 48.0],
        "name": [EVIL, "Ossel Flats"],
    }, geometry=[shapely.box(*_xy(2.2, 1.2), *_xy(3.8, 2.5)),
                 shapely.box(*_xy(0.3, 2.2), *_xy(1.2, 3.2))], crs=CRS)

    diameter = gpd.GeoDataFrame({
        "minutes": [21.0], "length_m": [7000.0], "from_node": [0], "to_node": [19],
    }, geometry=[shapely.LineString([nodes[(0, 0)], nodes[(4, 0)], nodes[(4, 3)]])], crs=CRS)

    issues = gpd.GeoDataFrame({
        "issue": ["dangling end", "near miss"],
        "detail": [LONG, EVIL],
    }, geometry=[shapely.Point(_xy(4.6, 1.0)), shapely.Point(_xy(2.0, 3.4))], crs=CRS)

    return {"edges": edges, "hubs": hubs, "reach_bands": bands, "weak_regions": weak,
            "diameter": diameter, "issues": issues}


def sample_comparison(edges: gpd.GeoDataFrame):
    """Before/after copies of ``edges`` and a change layer with ``delta_minutes`` (after - before)."""
    before = edges.copy()
    after = edges.copy()
    delta = np.zeros(len(edges))
    delta[: len(delta) // 3] = -np.linspace(1.0, 20.0, len(delta) // 3)   # faster
    delta[-4:] = [0.3, 2.0, 6.0, 12.0]                                    # slower
    after["hub_minutes"] = before["hub_minutes"] + delta
    change = edges[["edge_id", "mode", "geometry"]].copy()
    change["delta_minutes"] = delta
    return before, after, change


def summary_table() -> pd.DataFrame:
    """A small attribute (non-spatial) table."""
    return pd.DataFrame({"key": ["edges", "hubs"], "count": [31, 3], "note": ["", "\u00e9t\u00e9"]})
