"""Walks between exact points and the grid: seeding a surface at exact positions and reading it at them.

:func:`seed_points` puts cost at exact positions (road samples, hubs)
instead of cell centres; :func:`minutes_at_points` reads a surface at exact
positions with the same walks.  The walk rule (pieces at their cells' paces,
Tobler on the rise) is the one :mod:`.accumulate` documents; positions are in
cell units (see there).

References
----------
.. [1] Tobler, W. (1993). Three presentations on geographical analysis and
   modeling. NCGIA Technical Report 93-1.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numba
import numpy as np

from ..errors import OptionError
from .accumulate import READ_REACH, _TOUCH, _check_common, _check_elevation, _pace
from .friction import SLOPE_LIMIT, TOBLER_BEST_SLOPE, TOBLER_DECAY

__all__ = ["PointSeeds", "seed_points", "minutes_at_points"]


@dataclass(frozen=True)
class PointSeeds:
    """Result of :func:`seed_points`: exact points put on the grid.

    Attributes
    ----------
    minutes : ndarray of float64, shape (rows, cols)
        Cheapest point cost plus walk to the cell centre, minutes; inf = no seed.
    point : ndarray of int64, shape (rows, cols)
        Index of that point (the first among equals); -1 = none.
    """

    minutes: np.ndarray
    point: np.ndarray



# ------------------------------------------------------------- exact points
@numba.njit(cache=True, nogil=True)
def _segment_pace(pace, nrows, ncols, x0, y0, x1, y1):
    """Sum over the cells a straight segment crosses of (length inside, cell sides) * pace.

    ``x`` is the column coordinate, ``y`` the row coordinate, in cell sides.
    Returns inf when the segment crosses an impassable cell or leaves the
    grid along any length (pieces shorter than ``_TOUCH`` are corner touches).
    """
    dx = x1 - x0
    dy = y1 - y0
    length = math.sqrt(dx * dx + dy * dy)
    if length == 0.0:
        return 0.0
    # next grid line along each axis, as a parameter t in (0, 1]
    if dx > 0:
        lx = math.floor(x0) + 1.0
    elif dx < 0:
        lx = math.ceil(x0) - 1.0
    else:
        lx = 0.0
    if dy > 0:
        ly = math.floor(y0) + 1.0
    elif dy < 0:
        ly = math.ceil(y0) - 1.0
    else:
        ly = 0.0
    sx = 1.0 if dx > 0 else -1.0
    sy = 1.0 if dy > 0 else -1.0
    total = 0.0
    t0 = 0.0
    while True:
        tx = (lx - x0) / dx if dx != 0 else 2.0
        ty = (ly - y0) / dy if dy != 0 else 2.0
        t1 = min(tx, ty, 1.0)
        piece = (t1 - t0) * length
        if piece > _TOUCH:
            tm = 0.5 * (t0 + t1)
            c = int(math.floor(x0 + tm * dx))
            r = int(math.floor(y0 + tm * dy))
            if r < 0 or r >= nrows or c < 0 or c >= ncols:
                return np.inf
            p = pace[r * ncols + c]
            if not (p < np.inf):
                return np.inf
            total += piece * p
        if t1 >= 1.0:
            break
        if tx <= t1:
            lx += sx
        if ty <= t1:
            ly += sy
        t0 = t1
    return total


@numba.njit(cache=True, nogil=True)
def _point_z(elev, use_elev, nrows, ncols, x, y):
    """Elevation at a point (cell units): bilinear between the four centres around it, else its own cell's."""
    if not use_elev:
        return np.nan
    zp = np.nan
    cl = int(math.floor(x - 0.5))
    rl = int(math.floor(y - 0.5))
    if cl >= 0 and rl >= 0 and cl + 1 < ncols and rl + 1 < nrows:
        z00 = elev[rl * ncols + cl]
        z01 = elev[rl * ncols + cl + 1]
        z10 = elev[(rl + 1) * ncols + cl]
        z11 = elev[(rl + 1) * ncols + cl + 1]
        fx = x - (cl + 0.5)
        fy = y - (rl + 0.5)
        zp = (z00 * (1 - fx) + z01 * fx) * (1 - fy) + (z10 * (1 - fx) + z11 * fx) * fy
    if not (zp == zp):
        zp = elev[int(math.floor(y)) * ncols + int(math.floor(x))]
    return zp


@numba.njit(cache=True, nogil=True)
def _walk_between(pace, nrows, ncols, cell_m, x0, y0, z0, x1, y1, z1, slope_limit, best_slope, decay):
    """Minutes of the straight walk travelled from (x0, y0) to (x1, y1) (cell units), inf if blocked.

    Each piece at its cell's pace, divided by Tobler's slope factor for the
    rise ``z1 - z0`` over the walk's length (flat when either is unknown).
    """
    flat = _segment_pace(pace, nrows, ncols, x0, y0, x1, y1)
    if not (flat < np.inf):
        return np.inf
    minutes = flat * cell_m
    d = math.sqrt((x1 - x0) ** 2 + (y1 - y0) ** 2) * cell_m
    if d > 0.0 and z0 == z0 and z1 == z1:
        s = (z1 - z0) / d
        if s > slope_limit:
            s = slope_limit
        elif s < -slope_limit:
            s = -slope_limit
        minutes *= math.exp(decay * (abs(s - best_slope) - abs(best_slope)))
    return minutes


@numba.njit(cache=True, nogil=True)
def _near_walks(pace, elev, use_elev, nrows, ncols, cell_m, x, y, to_point, slope_limit, best_slope, decay,
                cells, walk, reach):
    """The cells a point at (x, y) (cell units) joins and the walk to each, minutes.

    Fills ``cells`` (``(2 reach + 1)^2`` slots, -1 = unused) and ``walk``:
    the point's own cell and the cells up to ``reach`` rows and columns away
    (1: the eight neighbours).  ``to_point``: the walk is travelled from the
    cell centre to the point (else the other way).
    """
    for k in range(cells.shape[0]):
        cells[k] = -1
        walk[k] = np.inf
    if not (x >= 0.0 and x < ncols and y >= 0.0 and y < nrows):
        return
    c0 = int(math.floor(x))
    r0 = int(math.floor(y))
    own = r0 * ncols + c0
    if not (pace[own] < np.inf):
        cells[0] = own       # inside an impassable cell: that cell alone, no walk
        walk[0] = 0.0
        return
    zp = _point_z(elev, use_elev, nrows, ncols, x, y)
    k = 0
    for a in range(-reach, reach + 1):
        r = r0 + a
        for b in range(-reach, reach + 1):
            c = c0 + b
            if r < 0 or r >= nrows or c < 0 or c >= ncols:
                continue
            cell = r * ncols + c
            zc = elev[cell] if use_elev else np.nan
            if to_point:
                minutes = _walk_between(pace, nrows, ncols, cell_m, c + 0.5, r + 0.5, zc, x, y, zp, slope_limit,
                                        best_slope, decay)
            else:
                minutes = _walk_between(pace, nrows, ncols, cell_m, x, y, zp, c + 0.5, r + 0.5, zc, slope_limit,
                                        best_slope, decay)
            if not (minutes < np.inf):
                continue
            cells[k] = cell
            walk[k] = minutes
            k += 1


@numba.njit(cache=True, nogil=True)
def _seed_points(pace, elev, use_elev, nrows, ncols, cell_m, xs, ys, minutes, to_point, slope_limit,
                 best_slope, decay, out_m, out_p):
    """Scatter-min of point cost + walk over the cells each point joins (the first point among equals)."""
    cells = np.empty(9, np.int64)
    walk = np.empty(9, np.float64)
    for i in range(xs.shape[0]):
        m = minutes[i]
        if not (m < np.inf):
            continue
        _near_walks(pace, elev, use_elev, nrows, ncols, cell_m, xs[i], ys[i], to_point, slope_limit,
                    best_slope, decay, cells, walk, 1)
        for k in range(9):
            c = cells[k]
            if c < 0:
                continue
            v = m + walk[k]
            if v < out_m[c]:
                out_m[c] = v
                out_p[c] = i


@numba.njit(cache=True, nogil=True)
def _read_points(pace, elev, use_elev, nrows, ncols, cell_m, xs, ys, raster, to_point, slope_limit,
                 best_slope, decay, sx, sy, sm, scell, sorder, out_m, out_c, out_s):
    """Per point: the cheapest of raster[cell] + walk over the cells it joins, and of seed + straight walk
    over the seeds (``sx``, ``sy``, ``sm``) lying in those cells (``scell`` sorted, ``sorder`` the seeds in
    that order)."""
    cells = np.empty((2 * READ_REACH + 1) ** 2, np.int64)
    walk = np.empty((2 * READ_REACH + 1) ** 2, np.float64)
    ns = scell.shape[0]
    for i in range(xs.shape[0]):
        x = xs[i]
        y = ys[i]
        _near_walks(pace, elev, use_elev, nrows, ncols, cell_m, x, y, to_point, slope_limit,
                    best_slope, decay, cells, walk, READ_REACH)
        best = np.inf
        bc = -1
        bs = -1
        for k in range(cells.shape[0]):
            c = cells[k]
            if c < 0:
                continue
            v = raster[c] + walk[k]
            if v < best:
                best = v
                bc = c
        if ns > 0 and x >= 0.0 and x < ncols and y >= 0.0 and y < nrows:
            r0 = int(math.floor(y))
            c0 = int(math.floor(x))
            if pace[r0 * ncols + c0] < np.inf:
                zq = _point_z(elev, use_elev, nrows, ncols, x, y)
                for a in range(-READ_REACH, READ_REACH + 1):
                    r = r0 + a
                    for b in range(-READ_REACH, READ_REACH + 1):
                        c = c0 + b
                        if r < 0 or r >= nrows or c < 0 or c >= ncols:
                            continue
                        cell = r * ncols + c
                        j = np.searchsorted(scell, cell)
                        while j < ns and scell[j] == cell:
                            q = sorder[j]
                            j += 1
                            m = sm[q]
                            if not (m < np.inf):
                                continue
                            zs = _point_z(elev, use_elev, nrows, ncols, sx[q], sy[q])
                            if to_point:   # travelled from the seed to the point
                                w = _walk_between(pace, nrows, ncols, cell_m, sx[q], sy[q], zs, x, y, zq,
                                                  slope_limit, best_slope, decay)
                            else:
                                w = _walk_between(pace, nrows, ncols, cell_m, x, y, zq, sx[q], sy[q], zs,
                                                  slope_limit, best_slope, decay)
                            if m + w < best:
                                best = m + w
                                bc = -1
                                bs = q
        out_m[i] = best
        out_c[i] = bc
        out_s[i] = bs



def _points(col, row, shape, *others):
    col = np.ascontiguousarray(col, dtype=np.float64).ravel()
    row = np.ascontiguousarray(row, dtype=np.float64).ravel()
    if col.shape != row.shape or any(np.shape(o) != col.shape for o in others):
        raise OptionError(f"point arrays differ in length: {[np.shape(a) for a in (col, row, *others)]}")
    return col, row


def seed_points(flat_kmh, cell_m: float, col, row, minutes, elevation=None, direction: str = "to-hub",
                slope_limit: float = SLOPE_LIMIT) -> PointSeeds:
    """Seed rasters from exact points: each point's cost plus the walk to the cell centres it joins.

    Parameters
    ----------
    flat_kmh : ndarray of float, shape (rows, cols)
        Flat-ground speed per cell, km/h; 0 or NaN = impassable.
    cell_m : float
        Cell side, metres.
    col, row : array_like of float, shape (n,)
        Point positions in cell units (see the module notes: cell ``(r, c)``
        covers ``[c, c + 1) x [r, r + 1)``).  Points outside the grid are skipped.
    minutes : array_like of float, shape (n,)
        Cost at each point (e.g. network minutes to the hub); NaN or inf = skipped.
    elevation : ndarray of float, shape (rows, cols), optional
        Metres (NaN = unknown: the walk is costed as flat).
    direction : {"to-hub", "from-hub"}
        ``to-hub``: the walk is travelled from the cell centre to the point
        (the trip joins the network there); ``from-hub``: from the point.
    slope_limit : float

    Returns
    -------
    PointSeeds
        Ready for :func:`accumulate` (``minutes`` as ``seed_minutes``, ``point + 1``
        as ``seed_label``).

    Notes
    -----
    A point joins the centres of its own cell and the eight cells around
    it (fewer at the grid's edge), along straight walks costed as moves
    are: each piece at its cell's pace, divided by Tobler's slope factor
    for the rise from the point's elevation (bilinear between the four
    centres around it, else its own cell's) to the centre's.  A walk that
    crosses an impassable cell along any length is not made; a point in an
    impassable cell seeds that cell alone with its own cost.  So a point's
    own cell costs it at most the walk of half a cell diagonal at that
    cell's pace (on flat ground), and the cells next to a road get the
    straight walk to it.

    Examples
    --------
    >>> import numpy as np
    >>> s = seed_points(np.full((1, 3), 6.0), 100.0, [0.5], [0.5], [2.0])  # a point at a cell centre
    >>> s.minutes.tolist(), s.point.tolist()
    ([[2.0, 3.0, inf]], [[0, 0, -1]])
    """
    flat = np.asarray(flat_kmh, dtype=np.float64)
    if flat.ndim != 2:
        raise OptionError(f"speed raster must be 2-D, got shape {flat.shape}")
    _check_common(cell_m, direction, slope_limit)
    elevation = _check_elevation(elevation, flat.shape)
    m = np.ascontiguousarray(minutes, dtype=np.float64).ravel()
    col, row = _points(col, row, flat.shape, m)
    if np.any(m < 0):
        raise OptionError("point minutes must be zero or more (NaN or inf = skipped)")
    m = np.where(np.isfinite(m), m, np.inf)
    nrows, ncols = flat.shape
    out_m = np.full(nrows * ncols, np.inf)
    out_p = np.full(nrows * ncols, -1, dtype=np.int64)
    use_elev = elevation is not None
    _seed_points(_pace(flat), elevation.ravel() if use_elev else np.zeros(1), use_elev, nrows, ncols,
                 float(cell_m), col, row, m, direction == "to-hub", float(slope_limit), TOBLER_BEST_SLOPE,
                 TOBLER_DECAY, out_m, out_p)
    return PointSeeds(out_m.reshape(nrows, ncols), out_p.reshape(nrows, ncols))


def minutes_at_points(minutes, flat_kmh, cell_m: float, col, row, elevation=None, direction: str = "to-hub",
                      slope_limit: float = SLOPE_LIMIT, seed_col=None, seed_row=None, seed_minutes=None):
    """Read an accumulated surface at exact points: the cheapest nearby cell centre plus the walk to it.

    The mirror of :func:`seed_points` (the same walks, to the centres of the
    point's own cell and the 24 cells up to two rows and columns away, see
    :data:`READ_REACH`): ``to-hub`` walks from the point to the centre and
    goes on with the cell's trip; ``from-hub`` arrives at the centre and
    walks on to the point.  Given the seed points the surface was made from,
    a point also walks straight to any of them lying in those cells, so that
    next to a road or a hub the value is that of the point itself (at a seed
    point's own position, its own cost).

    Parameters
    ----------
    minutes : ndarray of float, shape (rows, cols)
        A surface, as :func:`accumulate` gives (NaN = unreachable).
    flat_kmh, cell_m, col, row, elevation, direction, slope_limit
        As for :func:`seed_points`.
    seed_col, seed_row, seed_minutes : array_like of float, shape (k,), optional
        The exact seed points (cell units) and their costs, as given to
        :func:`seed_points`.

    Returns
    -------
    point_minutes : ndarray of float64, shape (n,)
        NaN where nothing around the point is reachable (or it lies outside).
    cell : ndarray of int64, shape (n,)
        Flat (row-major) index of the cell the trip goes through; -1 = none
        (or a seed point reached straight).
    seed : ndarray of int64, shape (n,)
        The seed point reached straight; -1 = none (through a cell).
    """
    flat = np.asarray(flat_kmh, dtype=np.float64)
    surf = np.asarray(minutes, dtype=np.float64)
    if flat.ndim != 2 or surf.shape != flat.shape:
        raise OptionError(f"surface has shape {surf.shape}, speed raster {flat.shape}; they must match")
    _check_common(cell_m, direction, slope_limit)
    elevation = _check_elevation(elevation, flat.shape)
    col, row = _points(col, row, flat.shape)
    nrows, ncols = flat.shape
    if seed_col is None:
        sx = sy = sm = np.zeros(0)
    else:
        sm = np.ascontiguousarray(seed_minutes, dtype=np.float64).ravel()
        sx, sy = _points(seed_col, seed_row, flat.shape, sm)
        sm = np.where(np.isfinite(sm), sm, np.inf)
    inside = (sx >= 0) & (sx < ncols) & (sy >= 0) & (sy < nrows)
    scell = np.where(inside, np.floor(np.where(inside, sy, 0)).astype(np.int64) * ncols
                     + np.floor(np.where(inside, sx, 0)).astype(np.int64), -1)
    sorder = np.argsort(scell, kind="stable")
    out_m = np.empty(col.shape[0])
    out_c = np.empty(col.shape[0], dtype=np.int64)
    out_s = np.empty(col.shape[0], dtype=np.int64)
    use_elev = elevation is not None
    _read_points(_pace(flat), elevation.ravel() if use_elev else np.zeros(1), use_elev, nrows, ncols,
                 float(cell_m), col, row, np.where(np.isfinite(surf), surf, np.inf).ravel(),
                 direction == "from-hub", float(slope_limit), TOBLER_BEST_SLOPE, TOBLER_DECAY,
                 sx, sy, sm, scell[sorder], sorder.astype(np.int64), out_m, out_c, out_s)
    out_m[~np.isfinite(out_m)] = np.nan
    return out_m, out_c, out_s
