"""The working CRS and geodesic lengths (geo_reach.network.geodesy).

References: the UTM zone numbering (zone = floor((lon + 180) / 6) + 1; EPSG 326zz north, 327zz south;
common practice, the UTM definition); Web Mercator's scale factor 1 / cos(latitude) (Snyder 1987,
Map Projections - A Working Manual, USGS PP 1395); pyproj.Geod (Karney 2013) for lengths.
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pytest
import shapely
from pyproj import Geod

from geo_reach.errors import CRSError
from geo_reach.network.geodesy import MAX_SCALE_ERROR, geodesic_lengths, working_crs


def frame(lon, lat):
    return gpd.GeoDataFrame(geometry=[shapely.LineString([(lon - 0.01, lat), (lon + 0.01, lat)])], crs=4326)


@pytest.mark.parametrize("lon, lat", [(-20.9, -31.0), (10.3, 45.2), (145.1, -37.8), (-0.5, 0.5), (179.0, 10.0)])
def test_utm_zone_of_the_centre(lon, lat):
    zone = int(np.floor((lon + 180) / 6)) + 1
    want = (32600 if lat >= 0 else 32700) + zone
    assert working_crs([frame(lon, lat)]).to_epsg() == want


def test_given_crs_checked_for_scale():
    """Web Mercator stretches ground metres by 1 / cos(lat): 1.1 % at 8.5 degrees is refused, 0.4 % at
    5 degrees accepted (the limit is 1 %); a geographic CRS is refused outright."""
    assert 1 / np.cos(np.radians(8.5)) - 1 > MAX_SCALE_ERROR > 1 / np.cos(np.radians(5.0)) - 1
    assert working_crs([frame(10, 5.0)], "EPSG:3857").to_epsg() == 3857
    with pytest.raises(CRSError) as e:
        working_crs([frame(10, 8.5)], "EPSG:3857")
    assert "(crs)" in str(e.value) and "--" not in str(e.value)
    with pytest.raises(CRSError, match="projected in metres"):
        working_crs([frame(10, 5.0)], "EPSG:4326")


def test_geodesic_lengths_per_polyline_match_geod():
    """Several polylines in one call, measured on WGS84: each equals pyproj.Geod's length of it alone."""
    rng = np.random.default_rng(1)
    lines = [np.column_stack([rng.uniform(-1, 1, k), rng.uniform(40, 41, k)]) for k in (2, 5, 3)]
    xy = np.vstack(lines)
    owner = np.repeat(np.arange(3), [len(c) for c in lines])
    got = geodesic_lengths(xy, owner, 3, "EPSG:4326")
    geod = Geod(ellps="WGS84")
    for g, c in zip(got, lines):
        assert g == pytest.approx(geod.line_length(c[:, 0], c[:, 1]), rel=1e-12)
