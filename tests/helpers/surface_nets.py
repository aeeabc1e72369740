"""Small networks and grids for the surface, band and region tests (built from arrays, no builder)."""

from __future__ import annotations

import numpy as np
import shapely
from pyproj import CRS

from geo_reach.ingest.rasters import Grid
from geo_reach.network.model import Network

#: A metric working CRS for test fixtures (UTM zone 33N).
CRS_UTM = CRS.from_epsg(32633)


def net_from_edges(xy, edges, minutes=None, mode=None, oneway=None, entry=None, geometry=None) -> Network:
    """A Network from node coordinates (metres) and an edge list; straight geometries by default."""
    xy = np.asarray(xy, dtype=np.float64).reshape(-1, 2)
    e = np.asarray(edges, dtype=np.int64).reshape(-1, 2)
    m, n = len(e), len(xy)
    if geometry is None:
        geometry = shapely.linestrings(np.stack([xy[e[:, 0]], xy[e[:, 1]]], axis=1)) if m else np.zeros(0, object)
    length = np.array([g.length for g in geometry], dtype=np.float64)
    full = lambda v, d, t: np.full(m, d, dtype=t) if v is None else np.asarray(v, dtype=t)  # noqa: E731
    return Network(
        crs=CRS_UTM, node_x=xy[:, 0].copy(), node_y=xy[:, 1].copy(),
        node_entry=np.ones(n, bool) if entry is None else np.asarray(entry, bool),
        edge_from=e[:, 0].copy(), edge_to=e[:, 1].copy(), edge_geometry=np.asarray(geometry, dtype=object),
        edge_length_m=length, edge_minutes=full(minutes, 1.0, np.float64),
        edge_latency_ms=np.full(m, np.nan), edge_oneway=full(oneway, False, bool),
        edge_mode=full(mode, "road", object), edge_src_layer=np.full(m, "test", object),
        edge_src_fid=np.arange(m, dtype=np.int64),
    )


def grid(width, height, cell_m=100.0, x0=0.0, y1=None) -> Grid:
    """A grid with its upper-left corner at (x0, y1) (default y1 = height * cell_m)."""
    from affine import Affine

    y1 = height * cell_m if y1 is None else y1
    return Grid(Affine(cell_m, 0, x0, 0, -cell_m, y1), width, height, CRS_UTM, float(cell_m))
