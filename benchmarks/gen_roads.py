"""Generate a road-like line layer for benchmarks: a jittered street grid cut
into short polylines, with local unsplit crossings and small gaps.

    python benchmarks/gen_roads.py N_SEGMENTS OUT.gpkg [--seed S]
"""

from __future__ import annotations

import argparse

import numpy as np


def road_layer(n_segments: int, seed: int = 0, crs: str = "EPSG:32727"):
    """A GeoDataFrame of about ``n_segments`` straight segments in polylines of 4 vertices.

    Streets run along a jittered grid with 100 m blocks; each block side is one
    polyline of 3 segments.  2 % of the polylines overshoot their end junction
    by 0.2-0.8 m (a crossing with no shared vertex), 2 % stop short of it by
    0.3-3 m (a gap), and 1 % of blocks get a diagonal lane crossing the block
    with no vertex at the crossings.
    """
    import geopandas as gpd
    import shapely

    rng = np.random.default_rng(seed)
    n_lines = max(1, n_segments // 3)
    side = int(np.ceil(np.sqrt(n_lines / 2))) + 1
    gx, gy = np.meshgrid(np.arange(side), np.arange(side))
    jx = gx * 100.0 + rng.normal(0, 8, gx.shape) + 500_000
    jy = gy * 100.0 + rng.normal(0, 8, gy.shape) + 6_500_000
    # horizontal and vertical block sides
    a = np.concatenate([np.column_stack([gx[:, :-1].ravel(), gy[:, :-1].ravel()]),
                        np.column_stack([gx[:-1, :].ravel(), gy[:-1, :].ravel()])])
    b = np.concatenate([np.column_stack([gx[:, 1:].ravel(), gy[:, 1:].ravel()]),
                        np.column_stack([gx[1:, :].ravel(), gy[1:, :].ravel()])])
    a, b = a[:n_lines], b[:n_lines]
    pa = np.column_stack([jx[a[:, 1], a[:, 0]], jy[a[:, 1], a[:, 0]]])
    pb = np.column_stack([jx[b[:, 1], b[:, 0]], jy[b[:, 1], b[:, 0]]])
    d = pb - pa
    normal = np.column_stack([-d[:, 1], d[:, 0]]) / np.hypot(*d.T)[:, None]
    t = np.array([0.0, 1 / 3, 2 / 3, 1.0])
    pts = pa[:, None, :] + t[None, :, None] * d[:, None, :]
    pts[:, 1:3, :] += normal[:, None, :] * rng.normal(0, 3, (len(pa), 2))[:, :, None]
    u = rng.random(len(pa))
    unit = d / np.hypot(*d.T)[:, None]
    over = u < 0.02
    pts[over, 3, :] += unit[over] * rng.uniform(0.2, 0.8, over.sum())[:, None]
    gap = (u >= 0.02) & (u < 0.04)
    pts[gap, 3, :] -= unit[gap] * rng.uniform(0.3, 3.0, gap.sum())[:, None]
    geoms = list(shapely.linestrings(pts))
    diag = rng.random(len(pa)) < 0.01
    for i in np.nonzero(diag)[0]:
        p = pa[i] + normal[i] * 30 - unit[i] * 10
        q = pa[i] + normal[i] * -30 + d[i] + unit[i] * 10
        geoms.append(shapely.LineString([p, (p + q) / 2 + rng.normal(0, 2, 2), q]))
    cls = rng.choice(["main", "feeder", "track"], len(geoms), p=[0.2, 0.5, 0.3])
    return gpd.GeoDataFrame({"class": cls}, geometry=geoms, crs=crs)


if __name__ == "__main__":
    ap = argparse.ArgumentParser()
    ap.add_argument("n_segments", type=int)
    ap.add_argument("out")
    ap.add_argument("--seed", type=int, default=0)
    a = ap.parse_args()
    gdf = road_layer(a.n_segments, a.seed)
    gdf.to_file(a.out, layer="roads", driver="GPKG" if a.out.endswith(".gpkg") else None)
    print(f"{len(gdf)} lines, {int((gdf.geometry.count_coordinates() - 1).sum())} segments -> {a.out}")
