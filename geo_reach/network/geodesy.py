"""The working CRS and geodesic lengths.

Every tolerance of the builder is metres on the ground, so the work happens
in one metric projected CRS: the UTM zone of the data's centre unless one is
given, and a given one must not stretch distances there by more than 1 %.
Lengths are measured on the WGS84 ellipsoid, whatever the CRS.

References
----------
.. [1] Karney, C. F. F. (2013). Algorithms for geodesics. Journal of Geodesy
   87, 43-55 (pyproj.Geod implements it; used for ``length_m``).
.. [2] Snyder, J. P. (1987). Map Projections - A Working Manual. USGS
   Professional Paper 1395 (scale factors h and k of a projection; pyproj's
   ``Proj.get_factors`` reports them).
"""

from __future__ import annotations

from typing import Any

import numpy as np
from pyproj import CRS, Geod, Transformer

from ..errors import CRSError

__all__ = ["working_crs", "geodesic_lengths", "MAX_SCALE_ERROR"]

_GEOD = Geod(ellps="WGS84")

#: Largest scale error of a given working CRS at the data's centre: tolerances are metres on the
#: ground, so a CRS whose metres differ from ground metres by more than this is refused.
MAX_SCALE_ERROR = 0.01


def working_crs(frames: list, crs: Any = None) -> CRS:
    """The metric working CRS: ``crs`` if given, else the UTM zone of the data's centre.

    A given CRS must be projected in metres with a scale error under 1 % at
    the data's centre (Web Mercator, say, stretches metres by 1/cos(latitude)
    and is refused away from the equator), because every tolerance is metres
    on the ground.

    Parameters
    ----------
    frames : list of GeoDataFrame
        The layers (any CRS); their bounds, taken to longitude/latitude, give the centre.
    crs : CRS-like, optional
        The working CRS asked for.

    Returns
    -------
    pyproj.CRS

    Raises
    ------
    CRSError
        ``crs`` is not a projected CRS in metres, or distorts distances too
        much here; or the centre has no UTM zone.
    """
    from pyproj import Proj
    from pyproj.aoi import AreaOfInterest
    from pyproj.database import query_utm_crs_info

    boxes = []
    for f in frames:
        g = f.geometry
        g = g[~(g.isna() | g.is_empty)]
        if len(g):
            tb = g.total_bounds
            tr = Transformer.from_crs(CRS.from_user_input(f.crs), 4326, always_xy=True)
            boxes.append(tr.transform_bounds(*tb, densify_pts=21))
    b = np.array(boxes)
    lon = (b[:, 0].min() + b[:, 2].max()) / 2
    lat = (b[:, 1].min() + b[:, 3].max()) / 2
    if crs is not None:
        out = CRS.from_user_input(crs)
        if not out.is_projected or out.axis_info[0].unit_name not in ("metre", "meter"):
            raise CRSError(f"working CRS (crs) {crs}: it must be projected in metres (a UTM zone, say)")
        f = Proj(out).get_factors(lon, lat)
        k = max(abs(f.meridional_scale - 1), abs(f.parallel_scale - 1))
        if not np.isfinite(k) or k > MAX_SCALE_ERROR:
            raise CRSError(f"working CRS (crs) {crs}: distances in it differ from the ground by {k:.1%} at the "
                           f"data ({lon:.2f}, {lat:.2f}); tolerances are metres on the ground, so leave the "
                           "working CRS unset (the UTM zone is used) or give a local projected CRS")
        return out
    info = query_utm_crs_info(datum_name="WGS 84",
                              area_of_interest=AreaOfInterest(lon, lat, lon, lat))
    info = [i for i in info if i.code.startswith("326") or i.code.startswith("327")] or info
    if not info:
        raise CRSError(f"the data's centre ({lon:.3f}, {lat:.3f}) has no UTM zone (polar?); "
                       "give a metric projected working CRS (crs) for the area")
    return CRS.from_epsg(int(info[0].code))


def geodesic_lengths(xy: np.ndarray, index: np.ndarray, n: int, crs: Any) -> np.ndarray:
    """Geodesic length (m) of ``n`` polylines given as coordinate rows ``xy`` with owner ``index``.

    Coordinates are taken back to longitude/latitude and each consecutive pair
    of the same polyline is measured on the WGS84 ellipsoid (Karney 2013).

    Parameters
    ----------
    xy : ndarray of float64, shape (m, 2)
        Vertices in ``crs``; rows of one polyline are consecutive.
    index : ndarray of int, shape (m,)
        The polyline (0 .. n-1) of each row.
    n : int
        Number of polylines.
    crs : CRS-like
        CRS of ``xy``.

    Returns
    -------
    ndarray of float64, shape (n,)
        Metres on the WGS84 ellipsoid.

    Examples
    --------
    One degree of longitude along the equator is 111 319.491 m on WGS84
    (a / 180 * pi with a = 6 378 137 m):

    >>> round(float(geodesic_lengths(np.array([[0.0, 0.0], [1.0, 0.0]]), np.array([0, 0]), 1, "EPSG:4326")[0]), 3)
    111319.491
    """
    out = np.zeros(n)
    if len(xy) < 2:
        return out
    tr = Transformer.from_crs(crs, 4326, always_xy=True)
    lon, lat = tr.transform(xy[:, 0], xy[:, 1])
    same = index[1:] == index[:-1]
    _, _, d = _GEOD.inv(lon[:-1][same], lat[:-1][same], lon[1:][same], lat[1:][same])
    np.add.at(out, index[:-1][same], d)
    return out
