"""Friction surface: how fast a person on foot crosses each grid cell.

Speeds are in km/h on flat ground, per cell, built from a walking speed, an
optional land-cover class-to-speed table and optional barriers (impassable,
speed 0).  Slope enters per move in :mod:`geo_reach.analysis.accumulate`
through Tobler's hiking function, scaled so flat ground gives the cell's
flat-ground speed:

    speed(slope) = flat_kmh * T(slope) / T(0),   T(s) = 6 exp(-3.5 |s + 0.05|)

``slope`` is rise over run (dimensionless, positive uphill in the direction of
travel).  Slopes steeper than :data:`SLOPE_LIMIT` are clipped to it.

References
----------
.. [1] Tobler, W. (1993). Three presentations on geographical analysis and
   modeling: Non-isotropic geographic modeling speculations on the geometry
   of geography global spatial analysis. NCGIA Technical Report 93-1.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from ..errors import InputError, OptionError

__all__ = [
    "TOBLER_PEAK_KMH",
    "TOBLER_BEST_SLOPE",
    "TOBLER_DECAY",
    "SLOPE_LIMIT",
    "tobler_kmh",
    "slope_factor",
    "walking_kmh",
    "clip_slopes",
    "landcover_kmh",
    "rasterise_barriers",
    "Friction",
    "flat_speed_kmh",
    "count_steep_moves",
]

#: Tobler's peak speed, km/h, reached at slope :data:`TOBLER_BEST_SLOPE` (Tobler 1993).
TOBLER_PEAK_KMH = 6.0
#: The slope of fastest walking: gently downhill (Tobler 1993).
TOBLER_BEST_SLOPE = -0.05
#: Tobler's exponential decay with slope (Tobler 1993).
TOBLER_DECAY = 3.5
#: Steepest slope (rise/run) a move is costed at; steeper moves are clipped to
#: this.  45 degrees: Tobler's function was fitted on ground far gentler than
#: this, so beyond it the formula is an extrapolation (common practice to cap
#: it; the value is our choice).
SLOPE_LIMIT = 1.0


def tobler_kmh(slope):
    """Tobler's hiking speed, km/h, for ``slope`` (rise/run, uphill positive).

    Examples
    --------
    >>> round(float(tobler_kmh(-0.05)), 3)
    6.0
    >>> round(float(tobler_kmh(0.0)), 2)
    5.04
    """
    s = np.asarray(slope, dtype=np.float64)
    return TOBLER_PEAK_KMH * np.exp(-TOBLER_DECAY * np.abs(s + 0.05))


def slope_factor(slope):
    """``T(slope) / T(0)``: the multiplier on flat-ground speed (1 on the flat)."""
    s = np.asarray(slope, dtype=np.float64)
    return np.exp(-TOBLER_DECAY * (np.abs(s - TOBLER_BEST_SLOPE) - abs(TOBLER_BEST_SLOPE)))


def walking_kmh(slope, walk_kmh: float = 5.0):
    """Walking speed on ``slope``, km/h, scaled so flat ground gives ``walk_kmh``."""
    return walk_kmh * slope_factor(slope)


def clip_slopes(slope, limit: float = SLOPE_LIMIT):
    """Clip slopes to ``[-limit, limit]``.

    Returns
    -------
    clipped : ndarray of float64
    n_clipped : int
        How many values were beyond the limit (NaN is neither clipped nor counted).
    """
    s = np.asarray(slope, dtype=np.float64)
    over = np.abs(s) > limit
    return np.clip(s, -limit, limit), int(over.sum())


def landcover_kmh(classes: np.ndarray, speeds: Mapping, nodata_kmh: float | None = None,
                  source: str = "land cover") -> tuple[np.ndarray, int]:
    """Flat-ground speed per cell from a land-cover class raster.

    Parameters
    ----------
    classes : ndarray of int, shape (rows, cols)
        Class per cell; -1 = no data (as :func:`~geo_reach.ingest.rasters.resample_to_grid` gives).
    speeds : mapping of int to float
        Flat-ground walking speed for each class, km/h; 0 = impassable.
    nodata_kmh : float, optional
        Speed for cells with no class.  ``None``: such cells are impassable.
    source : str
        Name of the raster (file) used in messages.

    Returns
    -------
    kmh : ndarray of float64, same shape
    n_nodata : int
        Cells with no class.

    Raises
    ------
    InputError
        A class in the raster is not in ``speeds`` (the message names it), or
        a speed is negative or not a number.
    """
    table = {}
    for k, v in speeds.items():
        try:
            key, val = int(k), float(v)
        except (TypeError, ValueError) as err:
            raise InputError(f"{source}: speed table entry {k!r}: {v!r} is not a class number and a speed "
                             "in km/h") from err
        if not np.isfinite(val) or val < 0:
            raise InputError(f"{source}: speed for class {key} is {v!r}; give km/h >= 0 (0 = impassable)")
        table[key] = val
    cls = np.asarray(classes)
    nodata = cls < 0
    present = np.unique(cls[~nodata])
    missing = [int(c) for c in present if int(c) not in table]
    if missing:
        shown = ", ".join(str(c) for c in missing[:10])
        raise InputError(f"{source}: class {shown} has no speed in the land-cover table; add it "
                         "(km/h on flat ground, 0 = impassable)")
    keys = np.array(sorted(table), dtype=np.int64)
    vals = np.array([table[k] for k in keys], dtype=np.float64)
    out = np.zeros(cls.shape, dtype=np.float64)
    if keys.size:
        pos = np.searchsorted(keys, np.where(nodata, keys[0], cls))
        out = vals[np.minimum(pos, keys.size - 1)]
    out = np.where(nodata, 0.0 if nodata_kmh is None else float(nodata_kmh), out)
    return out, int(nodata.sum())


def rasterise_barriers(grid, geometries) -> np.ndarray:
    """Cells touched by barrier geometries (polygons or lines), as a bool mask.

    Every cell the geometry touches is marked (``all_touched=True``), so a
    barrier one cell wide cannot be crossed by a diagonal move.

    Parameters
    ----------
    grid : geo_reach.ingest.rasters.Grid
    geometries : iterable of shapely geometries, or a GeoDataFrame/GeoSeries
        In the grid's CRS (a GeoDataFrame in another CRS is reprojected).
    """
    from rasterio.features import rasterize

    geoms = _geometries_in(geometries, grid.crs)
    geoms = [g for g in geoms if g is not None and not g.is_empty]
    if not geoms:
        return np.zeros(grid.shape, dtype=bool)
    return rasterize(((g, 1) for g in geoms), out_shape=grid.shape, transform=grid.transform,
                     fill=0, all_touched=True, dtype="uint8").astype(bool)


def _geometries_in(obj, crs):
    if hasattr(obj, "geometry") or hasattr(obj, "to_crs"):
        if getattr(obj, "crs", None) is not None and not obj.crs.equals(crs):
            obj = obj.to_crs(crs)
        geo = obj.geometry if hasattr(obj, "geometry") else obj
        return list(geo.values)
    return list(obj)


@dataclass(frozen=True)
class Friction:
    """Flat-ground speed per cell.

    Attributes
    ----------
    kmh : ndarray of float64, shape ``grid.shape``
        Flat-ground speed, km/h; 0 = impassable.
    impassable_cells : int
    landcover_nodata_cells : int
        Cells without a land-cover class (given ``walk_kmh``).
    """

    kmh: np.ndarray
    impassable_cells: int
    landcover_nodata_cells: int


def flat_speed_kmh(grid, walk_kmh: float = 5.0, landcover=None, landcover_speeds=None, barriers=None,
                   barrier_classes=(), landcover_source: str = "land cover") -> Friction:
    """The flat-ground speed raster: walking speed, land cover, barriers.

    Parameters
    ----------
    grid : Grid
    walk_kmh : float, default 5
        Walking speed on flat open ground, km/h.  Used everywhere when no
        land cover is given, and for land-cover cells with no data.
    landcover : ndarray of int, shape ``grid.shape``, optional
        Class per cell (-1 = no data).
    landcover_speeds : mapping of int to float, optional
        Flat-ground speed per class, km/h (required with ``landcover``).
    barriers : geometries or GeoDataFrame, optional
        Impassable areas (rivers, fences, walls), rasterised with every
        touched cell marked.
    barrier_classes : iterable of int
        Land-cover classes that are impassable whatever the table says.

    Raises
    ------
    OptionError
        ``walk_kmh`` not positive; land cover without a table.
    InputError
        A class missing from the table (see :func:`landcover_kmh`).
    """
    if not (np.isfinite(walk_kmh) and walk_kmh > 0):
        raise OptionError(f"walking speed {walk_kmh!r} km/h must be a positive number; e.g. 5")
    n_nodata = 0
    if landcover is not None:
        if landcover_speeds is None:
            raise OptionError("a land-cover raster needs a class-to-speed table (km/h per class)")
        if landcover.shape != grid.shape:
            raise OptionError(f"land cover has shape {landcover.shape}, grid is {grid.shape}; "
                              "resample it onto the grid first")
        kmh, n_nodata = landcover_kmh(landcover, landcover_speeds, nodata_kmh=walk_kmh, source=landcover_source)
        bc = np.asarray(list(barrier_classes), dtype=np.int64)
        if bc.size:
            kmh = np.where(np.isin(landcover, bc), 0.0, kmh)
    else:
        kmh = np.full(grid.shape, float(walk_kmh))
    if barriers is not None:
        kmh = np.where(rasterise_barriers(grid, barriers), 0.0, kmh)
    return Friction(kmh, int((kmh <= 0).sum()), n_nodata)


def count_steep_moves(elevation: np.ndarray, cell_m: float, limit: float = SLOPE_LIMIT,
                      passable: np.ndarray | None = None, neighbours: int = 16) -> int:
    """Moves (each pair of cells once) whose slope exceeds ``limit``, for the move set used.

    The slope of a move is the elevation difference over the horizontal
    distance between the cell centres (``cell_m`` times 1, sqrt 2 or, for
    the knight moves of the 16-neighbour set, sqrt 5).  Moves with a missing
    elevation at an end are not counted, nor moves the accumulation does not
    make (an impassable end, or a knight move through an impassable cell;
    see :mod:`.accumulate`).

    Parameters
    ----------
    elevation : ndarray of float, shape (rows, cols)
        Metres (NaN = unknown).
    cell_m : float
        Cell side, metres.
    limit : float
        Slope (rise/run) beyond which a move is counted.
    passable : ndarray of bool, shape (rows, cols), optional
    neighbours : {16, 8}
    """
    z = np.asarray(elevation, dtype=np.float64)
    h, w = z.shape
    known = np.isfinite(z)
    ok = known if passable is None else (known & np.asarray(passable, dtype=bool))
    through = np.ones(z.shape, bool) if passable is None else np.asarray(passable, dtype=bool)
    half = [(0, 1), (1, 0), (1, 1), (1, -1)]
    if neighbours == 16:
        half += [(1, 2), (2, 1), (1, -2), (2, -1)]
    elif neighbours != 8:
        raise OptionError(f"neighbours {neighbours!r}: choose 8 or 16", key="neighbours")
    n = 0
    for dr, dc in half:
        r1, c0, c1 = h - dr, max(0, -dc), w - max(0, dc)
        if r1 <= 0 or c1 <= c0:
            continue

        def at(oy, ox, arr):
            return arr[oy:r1 + oy, c0 + ox:c1 + ox]

        both = at(0, 0, ok) & at(dr, dc, ok)
        if abs(dr) + abs(dc) == 3:   # a knight move passes through two more cells
            sr, sc = (dr // 2, 0) if abs(dr) == 2 else (0, dc // 2)
            tr, tc = (dr // 2, dc) if abs(dr) == 2 else (dr, dc // 2)
            both &= at(sr, sc, through) & at(tr, tc, through)
        dist = cell_m * np.hypot(dr, dc)
        with np.errstate(invalid="ignore"):
            n += int((both & (np.abs(at(dr, dc, z) - at(0, 0, z)) > limit * dist)).sum())
    return n
