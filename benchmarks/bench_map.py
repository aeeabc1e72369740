"""Benchmark: the HTML map's size and Chromium's time to first render, at province scale and at 1 M segments.

Targets (issue 12): ``map.html`` under 15 MB and under 5 s to first render
for a 1 M-segment study.  Two generated studies (invented, seeded), each run
through the whole pipeline (``run_study``), so the map holds what a planner
gets: reach rings, settlements, districts, water, weak regions, hubs, issues.

* ``province``: 30,000 winding road lines on a jittered 2 km lattice over
  about 250 km square, 60 hubs, 3,000 settlements, 25 districts, two lakes.
* ``million``: the 1,006,633-segment street grid of ``gen_roads.py`` (seed 1,
  about 41 km square), 100 hubs, 1,000 settlements, 4 districts.

Time to first render = ``performance.now()`` (from navigation start) when the
page's script has built today's view and two animation frames have passed
(the canvas layers draw on the first), read from ``geoReachMap.readyMs``.
Each load is a fresh headless Chromium (``/usr/bin/chromium``) with every
network request blocked; medians of several loads.

Reference measured in the same run: the same network drawn the plain Leaflet
way (its own ``L.geoJSON`` of the same simplified lines, one canvas polyline
per link, no other layer), as the cost of the usual approach.

Usage::

    python benchmarks/bench_map.py --runs 5            # both cases
    python benchmarks/bench_map.py --cases province --runs 3
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import statistics
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))
sys.path.insert(0, str(HERE))

CRS = "EPSG:32727"
CHROMIUM = "/usr/bin/chromium"
ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--no-first-run", "--disable-background-networking"]


# ---------------------------------------------------------------- generated studies (invented)
def _winding(a, b, rng, n=12, wobble=0.06):
    t = np.linspace(0, 1, n)
    d = b - a
    normal = np.array([-d[1], d[0]]) / max(np.hypot(*d), 1e-9)
    off = np.sin(np.pi * t) * rng.normal(0, wobble * np.hypot(*d)) + rng.normal(0, 15, n) * (t > 0) * (t < 1)
    return a + t[:, None] * d + off[:, None] * normal


def province(folder: Path, seed: int = 12):
    import geopandas as gpd
    import shapely

    rng = np.random.default_rng(seed)
    x0, y0, side, step = 300_000.0, 6_300_000.0, 248_000.0, 2_000.0
    n = int(side / step)
    gx, gy = np.meshgrid(np.arange(n), np.arange(n))
    jx = x0 + gx * step + rng.normal(0, 250, gx.shape)
    jy = y0 + gy * step + rng.normal(0, 250, gy.shape)
    lines, cls = [], []
    for (di, dj) in ((1, 0), (0, 1)):
        for i in range(n - di):
            for j in range(n - dj):
                if rng.random() < 0.03:
                    continue
                a = np.array([jx[j, i], jy[j, i]])
                b = np.array([jx[j + dj, i + di], jy[j + dj, i + di]])
                lines.append(shapely.LineString(_winding(a, b, rng)))
                cls.append("main" if (i % 10 == 0 or j % 10 == 0) else ("feeder" if rng.random() < 0.6 else "track"))
    lines, cls = lines[:30_000], cls[:30_000]
    roads = gpd.GeoDataFrame({"class": cls}, geometry=lines, crs=CRS)
    roads.to_file(folder / "roads.gpkg", layer="roads")
    _points_and_areas(folder, rng, (x0, y0, x0 + side, y0 + side), n_hubs=60, n_sett=3_000, n_dist=5,
                      lakes=[(x0 + 0.3 * side, y0 + 0.6 * side, 6_000), (x0 + 0.7 * side, y0 + 0.25 * side, 9_000)])
    return _study(folder, cell_m=250.0, margin_m=3_000.0), int((roads.geometry.count_coordinates() - 1).sum())


def million(folder: Path, seed: int = 1):
    import geopandas as gpd

    from gen_roads import road_layer

    roads = road_layer(1_000_000, seed)
    roads.to_file(folder / "roads.gpkg", layer="roads")
    b = roads.total_bounds
    rng = np.random.default_rng(seed)
    _points_and_areas(folder, rng, tuple(b), n_hubs=100, n_sett=1_000, n_dist=2,
                      lakes=[(b[0] + 0.4 * (b[2] - b[0]), b[1] + 0.5 * (b[3] - b[1]), 1_500)])
    segs = int((roads.geometry.count_coordinates() - 1).sum())
    return _study(folder, cell_m=100.0, margin_m=500.0), segs


def _points_and_areas(folder, rng, bounds, n_hubs, n_sett, n_dist, lakes):
    import geopandas as gpd
    import shapely

    x0, y0, x1, y1 = bounds
    hx = rng.uniform(x0, x1, n_hubs)
    hy = rng.uniform(y0, y1, n_hubs)
    kinds = rng.choice(["clinic", "market", "school"], n_hubs, p=[0.6, 0.2, 0.2])
    gpd.GeoDataFrame({"hub_id": [f"H{i:03d}" for i in range(n_hubs)], "kind": kinds,
                      "name": [f"Hub {i}" for i in range(n_hubs)]},
                     geometry=shapely.points(hx, hy), crs=CRS).to_file(folder / "hubs.gpkg", layer="hubs")
    sx = rng.uniform(x0, x1, n_sett)
    sy = rng.uniform(y0, y1, n_sett)
    pop = np.round(rng.lognormal(5.5, 1.0, n_sett)).astype(int)
    gpd.GeoDataFrame({"settlement_id": np.arange(n_sett), "name": [f"Place {i}" for i in range(n_sett)],
                      "population": pop}, geometry=shapely.points(sx, sy), crs=CRS).to_file(
        folder / "settlements.gpkg", layer="settlements")
    xs = np.linspace(x0, x1, n_dist + 1)
    ys = np.linspace(y0, y1, n_dist + 1)
    boxes = [shapely.box(xs[i], ys[j], xs[i + 1], ys[j + 1]) for i in range(n_dist) for j in range(n_dist)]
    gpd.GeoDataFrame({"district_id": [f"D{k}" for k in range(len(boxes))],
                      "name": [f"District {k}" for k in range(len(boxes))]}, geometry=boxes, crs=CRS).to_file(
        folder / "districts.gpkg", layer="districts")
    gpd.GeoDataFrame({"kind": ["lake"] * len(lakes), "name": [f"Lake {k}" for k in range(len(lakes))]},
                     geometry=[shapely.Point(x, y).buffer(r, 32) for x, y, r in lakes], crs=CRS).to_file(
        folder / "water.gpkg", layer="water")


def _study(folder: Path, cell_m: float, margin_m: float) -> Path:
    text = f"""title = "Generated benchmark study"
[[lines]]
path = "roads.gpkg"
layer = "roads"
mode = "road"
class_field = "class"
[lines.class_speeds]
main = 60
feeder = 40
track = 15
[hubs]
path = "hubs.gpkg"
id_field = "hub_id"
kind_field = "kind"
name_field = "name"
[routing]
weight = "minutes"
max_access_m = 5000
[metrics]
samples = 20
profile_sources = 5
[surface]
cell_m = {cell_m}
margin_m = {margin_m}
barriers = "water.gpkg"
barriers_layer = "water"
bands = [30, 60, 120]
[settlements]
path = "settlements.gpkg"
layer = "settlements"
id_field = "settlement_id"
name_field = "name"
population_field = "population"
[zones]
path = "districts.gpkg"
layer = "districts"
id_field = "district_id"
name_field = "name"
[outputs]
map = true
profile_png = false
"""
    path = folder / "study.toml"
    path.write_text(text)
    return path


# ---------------------------------------------------------------- measurements
def run(study_path: Path, out: Path) -> float:
    from geo_reach.pipeline import run_study
    from geo_reach.study import load_study

    t = time.perf_counter()
    run_study(load_study(study_path), out, overwrite=True, progress=False)
    return time.perf_counter() - t


def load_ms(path: Path, runs: int) -> list[float]:
    from playwright.sync_api import sync_playwright

    out = []
    with sync_playwright() as pw:
        for _ in range(runs):
            br = pw.chromium.launch(executable_path=CHROMIUM, args=ARGS)
            pg = br.new_page(viewport={"width": 1280, "height": 800})
            errors = []
            pg.on("pageerror", lambda e: errors.append(str(e)))
            pg.route("**/*", lambda r: r.continue_() if r.request.url.startswith(("file:", "data:")) else r.abort())
            pg.goto(path.as_uri(), timeout=120_000)
            pg.wait_for_function("() => window.geoReachMap && window.geoReachMap.readyMs", timeout=120_000)
            if errors:
                raise RuntimeError(f"page errors: {errors[:3]}")
            out.append(pg.evaluate("() => window.geoReachMap.readyMs"))
            br.close()
    return out


def reference_page(map_path: Path, out: Path) -> Path:
    """The same simplified network as plain GeoJSON drawn with L.geoJSON (one canvas polyline per link)."""
    import re

    page = map_path.read_text("utf-8")
    data = json.loads(re.search(r'<script type="application/json" id="gr-data">(.*?)</script>', page, re.S).group(1))
    net = next(lay for lay in data["layers"] if lay["group"] == "network" and lay["view"] == "today")
    g, f = net["geom"], data["frame"]
    q = np.cumsum(np.asarray(g["xy"], np.int64).reshape(-1, 2), axis=0)
    lon = np.round(f["lon0"] + q[:, 0] * f["step"], 6)
    lat = np.round(f["lat0"] + q[:, 1] * f["step"], 6)
    feats, k = [], 0
    for n in g["n"]:
        feats.append({"type": "Feature", "properties": {},
                      "geometry": {"type": "LineString",
                                   "coordinates": np.column_stack([lon[k:k + n], lat[k:k + n]]).tolist()}})
        k += n
    leaflet_css = re.search(r"<style>\n(.*?)\n</style>", page, re.S).group(0)
    leaflet_js = re.search(r"<script>\n(/\* @preserve\n \* Leaflet.*?)\n</script>", page, re.S).group(0)
    html = ("<!DOCTYPE html><html><head><meta charset='utf-8'>" + leaflet_css +
            "<style>html,body,#m{height:100%;margin:0}</style></head><body><div id='m'></div>"
            "<script type='application/json' id='d'>" + json.dumps({"type": "FeatureCollection", "features": feats})
            .replace("<", "\\u003c") + "</script>" + leaflet_js +
            "<script>var d=JSON.parse(document.getElementById('d').textContent);"
            "var map=L.map('m',{preferCanvas:true});var l=L.geoJSON(d,{style:{color:'#6e558e',weight:2.5}})"
            ".addTo(map);map.fitBounds(l.getBounds());window.geoReachMap={};requestAnimationFrame(function(){"
            "requestAnimationFrame(function(){window.geoReachMap.readyMs=performance.now();});});</script>"
            "</body></html>")
    out.write_text(html, encoding="utf-8")
    return out


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--runs", type=int, default=5)
    ap.add_argument("--cases", nargs="+", default=["province", "million"])
    ap.add_argument("--keep", default=None, help="keep the generated studies and outputs in this folder")
    a = ap.parse_args()
    base = Path(a.keep) if a.keep else Path(tempfile.mkdtemp(prefix="bench_map_"))
    results = {}
    for case in a.cases:
        folder = base / case
        folder.mkdir(parents=True, exist_ok=True)
        t = time.perf_counter()
        if case == "province":
            study, segs = province(folder)
        else:
            study, segs = million(folder)
        gen_s = time.perf_counter() - t
        out = folder / "out"
        run_s = run(study, out)
        mp = out / "map.html"
        size = mp.stat().st_size
        ours = load_ms(mp, a.runs)
        ref = load_ms(reference_page(mp, folder / "reference.html"), a.runs)
        data = json.loads(__import__("re").search(r'id="gr-data">(.*?)</script>', mp.read_text("utf-8"), __import__("re").S).group(1))
        net = next(lay for lay in data["layers"] if lay["group"] == "network" and lay["view"] == "today")
        results[case] = {
            "segments": segs, "links_drawn": len(net["geom"].get("f", net["geom"]["n"])),
            "vertices_drawn": len(net["geom"]["xy"]) // 2, "resolution_m": data["frame"]["res_m"],
            "generate_s": round(gen_s, 1), "run_study_s": round(run_s, 1), "map_mb": round(size / 1e6, 2),
            "first_render_ms": [round(x) for x in ours], "median_first_render_ms": round(statistics.median(ours)),
            "reference_ms": [round(x) for x in ref], "median_reference_ms": round(statistics.median(ref)),
            "ratio_to_reference": round(statistics.median(ours) / statistics.median(ref), 2),
        }
        print(case, json.dumps(results[case]), flush=True)
    print(json.dumps({"machine": f"{platform.machine()}, {os.cpu_count()} cores, Python {platform.python_version()}",
                      "date": time.strftime("%Y-%m-%d"), "load_average": os.getloadavg()[0], "results": results},
                     indent=2))


if __name__ == "__main__":
    main()
