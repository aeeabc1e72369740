"""Geometry for the page: simplified to the map's resolution, in WGS84, quantised and delta-encoded.

A layer's geometry travels as a few flat integer arrays, which keeps a
million-segment network inside the page-size target and lets the page
decode it in one pass:

``xy``
    Every vertex as integer steps of :attr:`Frame.step` degrees from
    (:attr:`Frame.lon0`, :attr:`Frame.lat0`), longitude then latitude, each
    value the difference from the vertex before (the first from 0).
``n``
    Vertices per part (a line, or a polygon ring).
``r`` (polygons)
    Rings per polygon (exterior first).
``f``
    Parts (lines) or polygons per feature (left out for lines when every
    feature is one part).

Lines and rings are first simplified (Douglas-Peucker, in metres) to the
map's resolution; reach rings, which tile the plane, are simplified as a
coverage so that neighbours keep sharing their edges.  Vertices that fall
on the same step as the one before are dropped.  The full geometry stays in
the GeoPackage.

References
----------
.. [1] Douglas, D. H. and Peucker, T. K. (1973). Algorithms for the reduction
   of the number of points required to represent a digitized line or its
   caricature. Cartographica 10(2), 112-122.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass

import numpy as np

from ...errors import CRSError, where

__all__ = ["Frame", "MAP_PIXELS", "metric", "frame_for", "encode", "points_xy", "json_for_script"]

#: The map stays accurate to a pixel when zoomed in until the study area spans this many pixels.
MAP_PIXELS = 8192
_M_PER_DEG = 111_320.0


@dataclass(frozen=True)
class Frame:
    """The page's coordinate frame: resolution (metres) and the quantisation of WGS84 degrees."""

    resolution_m: float
    lon0: float
    lat0: float
    step: float

    def to_json(self) -> dict:
        return {"lon0": self.lon0, "lat0": self.lat0, "step": self.step, "res_m": self.resolution_m}


def metric(name: str, frame):
    """``frame`` in a metric CRS (its own if projected in metres, else its UTM zone)."""
    crs = frame.crs
    if crs is None:
        raise CRSError(f"{where(layer=name)}has no CRS; set it before drawing the map")
    if crs.is_projected and crs.axis_info and all((a.unit_name or "").startswith("metre") for a in crs.axis_info[:2]):
        return frame
    return frame.to_crs(frame.estimate_utm_crs())


def frame_for(bounds_lonlat, extent_m: float) -> Frame:
    """The frame for a study whose WGS84 bounds are ``(west, south, east, north)`` and size ``extent_m``."""
    res = max(float(extent_m), 1.0) / MAP_PIXELS
    # half the resolution, as a round number of degrees (1, 2 or 5 x 10^k)
    raw = res / 2 / _M_PER_DEG
    k = math.floor(math.log10(raw))
    step = max(m * 10.0 ** k for m in (1, 2, 5) if m * 10.0 ** k <= raw)
    step = float(f"{step:.3g}")
    w, s = bounds_lonlat[0], bounds_lonlat[1]
    return Frame(res, math.floor(w / step) * step, math.floor(s / step) * step, step)


def _quantise(frame: Frame, xy: np.ndarray) -> np.ndarray:
    q = np.empty(xy.shape, dtype=np.int64)
    q[:, 0] = np.round((xy[:, 0] - frame.lon0) / frame.step)
    q[:, 1] = np.round((xy[:, 1] - frame.lat0) / frame.step)
    return q


def _dedupe(q: np.ndarray, part: np.ndarray) -> np.ndarray:
    """Keep a vertex unless it repeats the one before in the same part."""
    keep = np.ones(len(q), bool)
    if len(q) > 1:
        keep[1:] = (part[1:] != part[:-1]) | (q[1:] != q[:-1]).any(axis=1)
    return keep


def _delta(q: np.ndarray) -> list:
    """``[dx0, dy0, dx1, dy1, ...]``: each vertex minus the one before (the first minus (0, 0))."""
    if not len(q):
        return []
    return np.diff(q, axis=0, prepend=np.zeros((1, 2), q.dtype)).ravel().tolist()


def encode(geoms_metric, crs, kind: str, frame: Frame, coverage: bool = False) -> dict:
    """Encode lines or polygons (shapely arrays in the metric ``crs``) for the page.

    Parameters
    ----------
    geoms_metric : array of shapely geometries
    crs : pyproj CRS of the geometries (metres)
    kind : {"line", "polygon"}
    frame : Frame
    coverage : bool
        The polygons tile the plane without overlaps (simplified together).

    Returns
    -------
    dict
        ``{"xy": [...], "n": [...], "f": [...]}`` plus ``"r"`` for polygons.
    """
    import shapely
    from pyproj import Transformer

    g = np.asarray(geoms_metric, dtype=object)
    tol = frame.resolution_m
    ok = ~(shapely.is_missing(g) | shapely.is_empty(g)) if len(g) else np.zeros(0, bool)
    g = np.where(ok, g, None)
    if kind == "polygon":
        if coverage and ok.any():
            s = g.copy()
            s[ok] = shapely.coverage_simplify(g[ok], tol, simplify_boundary=True)
            g = s
        else:
            g = shapely.simplify(g, tol, preserve_topology=True)
    else:
        g = shapely.simplify(g, tol, preserve_topology=False)
    tr = Transformer.from_crs(crs, 4326, always_xy=True)
    if kind == "line":
        parts, feat = shapely.get_parts(g, return_index=True)
        xy, pidx = shapely.get_coordinates(parts, return_index=True)
        lon, lat = tr.transform(xy[:, 0], xy[:, 1]) if len(xy) else (xy[:, 0], xy[:, 1])
        q = _quantise(frame, np.column_stack([lon, lat]))
        keep = _dedupe(q, pidx)
        q, pidx = q[keep], pidx[keep]
        n = np.bincount(pidx, minlength=len(parts))
        good = n >= 2                      # a line shorter than one step is not drawn
        q = q[good[pidx]]
        n = n[good]
        f = np.bincount(feat[good], minlength=len(g))
        out = {"xy": _delta(q), "n": n.tolist()}
        if not (f == 1).all():            # left out when every feature is one part
            out["f"] = f.tolist()
        return out
    polys, feat = shapely.get_parts(g, return_index=True)
    rings, ridx = shapely.get_rings(polys, return_index=True)
    xy, cidx = shapely.get_coordinates(rings, return_index=True)
    lon, lat = tr.transform(xy[:, 0], xy[:, 1]) if len(xy) else (xy[:, 0], xy[:, 1])
    q = _quantise(frame, np.column_stack([lon, lat]))
    keep = _dedupe(q, cidx)
    q, cidx = q[keep], cidx[keep]
    n = np.bincount(cidx, minlength=len(rings))
    ring_ok = n >= 4                       # a closed ring needs 3 distinct vertices and the closing one
    first = np.ones(len(rings), bool)
    first[1:] = ridx[1:] != ridx[:-1]
    poly_ok = np.zeros(len(polys), bool)
    poly_ok[ridx[first & ring_ok]] = True  # a polygon whose exterior vanished goes with its holes
    ring_ok &= poly_ok[ridx] if len(ridx) else ring_ok
    q = q[ring_ok[cidx]]
    r = np.bincount(ridx[ring_ok], minlength=len(polys))[poly_ok]
    f = np.bincount(feat[poly_ok], minlength=len(g))
    return {"xy": _delta(q), "n": n[ring_ok].tolist(), "r": r.tolist(), "f": f.tolist()}


def points_xy(geoms_metric, crs, frame: Frame) -> dict:
    """Points (their representative point for other geometries): ``{"xy": [...]}`` delta-encoded."""
    import shapely
    from pyproj import Transformer

    g = np.asarray(geoms_metric, dtype=object)
    pts = shapely.get_coordinates(shapely.point_on_surface(g)) if len(g) else np.zeros((0, 2))
    tr = Transformer.from_crs(crs, 4326, always_xy=True)
    lon, lat = tr.transform(pts[:, 0], pts[:, 1]) if len(pts) else (pts[:, 0], pts[:, 1])
    return {"xy": _delta(_quantise(frame, np.column_stack([lon, lat])))}


def json_for_script(obj) -> str:
    """JSON text that cannot end the ``<script>`` element holding it, nor any other.

    ``<``, ``>`` and ``&`` become ``\\u003c``, ``\\u003e`` and ``\\u0026``
    (so no ``</script>``, ``<!--`` or ``<script`` can appear), and the line
    separators U+2028 and U+2029 become escapes.  ``JSON.parse`` reads the
    text back unchanged.

    Examples
    --------
    >>> json_for_script({"name": "</script><b>&"})
    '{"name":"\\\\u003c/script\\\\u003e\\\\u003cb\\\\u003e\\\\u0026"}'
    """
    text = json.dumps(obj, ensure_ascii=False, separators=(",", ":"), allow_nan=False)
    return (text.replace("<", "\\u003c").replace(">", "\\u003e").replace("&", "\\u0026")
            .replace("\u2028", "\\u2028").replace("\u2029", "\\u2029"))
