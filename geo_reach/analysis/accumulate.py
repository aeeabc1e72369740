"""Least-cost accumulation over a grid from seeded cells (a cost-distance surface).

One engine, :func:`accumulate`, runs Dijkstra's algorithm on the grid's
neighbour graph without building it: the neighbours of a cell are found by
index arithmetic inside a numba kernel with an indexed binary heap
(decrease-key), so the result is the exact shortest-path cost of the
discretised problem.  :func:`accumulate_reference` is the slow, obvious
version (``heapq`` over a dict, move geometry worked out from scratch) the
tests hold the kernel to.

Move set.  ``neighbours=16`` (the default) moves to the 8 cells around a cell
and to the 8 cells a knight's move away (two cells along one axis, one along
the other); ``neighbours=8`` to the 8 cells around only.  Straight walking is
overstated by at most ``1 / cos(g / 2)`` where ``g`` is the widest angle
between two neighbouring moves (the path to a cell combines the two moves
whose directions bracket it): 45 degrees for 8 neighbours (bound 1.0824),
atan(1/2) = 26.57 degrees for 16 (bound 1.0275).  The tests derive both from
the move geometry.

Move cost (minutes).  A move is the straight segment between two cell
centres, ``d`` metres long (``cell_m`` times 1, sqrt 2 or sqrt 5); each piece
of it is charged at the flat-ground pace of the cell it lies in, and the
whole move is divided by Tobler's slope factor::

    minutes = sum(piece_m * pace_cell) / slope_factor(slope)

where ``pace = 60 / (1000 * flat_kmh)`` minutes per metre.  An axis or
diagonal move lies half in each end cell (a diagonal crosses the two other
cells only at their shared corner), so it costs ``d (pace_a + pace_b) / 2``
(the convention of scikit-image's ``MCP_Geometric`` too); a knight move lies
a quarter in each of four cells: its two end cells and the two cells it
passes through (for a move of +1 row, +2 columns from ``(r, c)``: ``(r, c+1)``
and ``(r+1, c+1)``), so it costs ``d (pace_a + pace_1 + pace_2 + pace_b) / 4``.
``slope_factor`` is Tobler's speed ratio ``T(s)/T(0)`` (see :mod:`.friction`)
for the slope ``s = (z_to - z_from) / d`` in the direction of travel, taken
over the move's own length (so a knight move's rise is spread over
``sqrt 5`` cells), clipped to ``+-slope_limit``.  A move with a missing
elevation at either end is costed as flat.

Barriers.  Cells with speed 0 or NaN are impassable: nothing enters them, and
no move passes through one along any length (a knight move whose two
pass-through cells include an impassable one is not made).  A diagonal move
touches its two side cells only at a corner, so it may pass between two
impassable cells that meet at a corner (as in ``MCP_Geometric``); barriers
are rasterised with every touched cell marked
(:func:`~geo_reach.analysis.friction.rasterise_barriers`), which closes such
gaps for drawn barrier lines.  A seeded impassable cell keeps its seed cost
but spreads nowhere.

Direction.  Seeds are where the network is entered.  ``direction="to-hub"``
costs the trip from each cell *to* the network (the accumulation spreads
outward from the seeds, so a relaxation from a settled cell ``u`` to its
neighbour ``v`` is a move travelled from ``v`` to ``u``); ``"from-hub"``
costs the trip from the network out to each cell (travelled ``u`` to ``v``).
Without elevation both are the same.

Exact points.  :func:`seed_points` puts cost at exact positions (road
samples, hubs) instead of cell centres: each point seeds the centres of its
own cell and of the eight cells around it with its cost plus the straight
walk to each, costed as a move is (pieces at their cells' paces, Tobler on
the rise from the point's elevation, bilinear between the four centres
around it, to the centre's).  :func:`minutes_at_points` reads a surface at
exact positions with the same walks, a little farther: the cheapest of the
centres of the 25 cells up to two rows and columns away plus the walk to it,
or, given the seed points, a straight walk to one of those lying in the same
25 cells.  A point inside an impassable cell joins that cell alone, at no
walking cost (a road on a bridge seeds the bridge cell with the road's cost).

Contract for callers (walk legs off the network).  ``accumulate`` takes
rasters in row-major (north-up) order and a cell size; it never reads a
CRS.  Its minutes are least costs over the move graph above: with uniform
friction and no terrain they lie between the straight-line walking time and
that time times the move set's bound (1.0275 for 16 neighbours), and equal
it exactly along the move directions.  Positions passed to
:func:`seed_points` and :func:`minutes_at_points` are in *cell units*:
``col = (x - x_left) / cell_m``, ``row = (y_top - y) / cell_m`` (cell
``(r, c)`` covers ``[c, c + 1) x [r, r + 1)``, centre ``(c + 0.5, r + 0.5)``).

References
----------
.. [1] Dijkstra, E. W. (1959). A note on two problems in connexion with
   graphs. Numerische Mathematik 1, 269-271.
.. [2] Tobler, W. (1993). Three presentations on geographical analysis and
   modeling. NCGIA Technical Report 93-1.
"""

from __future__ import annotations

import heapq
import math
from dataclasses import dataclass

import numba
import numpy as np

from ..errors import OptionError
from .friction import SLOPE_LIMIT, TOBLER_BEST_SLOPE, TOBLER_DECAY

__all__ = ["Accumulated", "PointSeeds", "accumulate", "accumulate_reference", "seed_points",
           "minutes_at_points", "moves", "DIRECTIONS", "NEIGHBOURS", "MOVES_8", "KNIGHT_MOVES"]

#: Trip directions a surface can be costed for.
DIRECTIONS = ("to-hub", "from-hub")
#: Move sets a surface can use: 8 (axes and diagonals) or 16 (plus the knight moves).
NEIGHBOURS = (8, 16)
#: The 8-neighbour moves as (row, column) offsets: the axes, then the diagonals.
MOVES_8 = ((-1, 0), (1, 0), (0, -1), (0, 1), (-1, -1), (-1, 1), (1, -1), (1, 1))
#: The eight knight moves the 16-neighbour set adds.
KNIGHT_MOVES = ((-2, -1), (-2, 1), (-1, -2), (-1, 2), (1, -2), (1, 2), (2, -1), (2, 1))
#: Pieces of a walk shorter than this (cell sides) are ignored: a segment through a cell corner
#: touches the cells meeting there, it does not cross them.
_TOUCH = 1e-9
#: Cells (rows and columns away) a point being read joins: its own and those up to 2 away (25 cells).
#: Seeds join only their own and the 8 around (millions of them); a read point (thousands) walks
#: straight a little farther, which cuts the detour through a cell centre.
READ_REACH = 2


def moves(neighbours: int = 16) -> tuple:
    """The (row, column) offsets of a move set.

    >>> len(moves(8)), len(moves(16))
    (8, 16)
    """
    _check_neighbours(neighbours)
    return MOVES_8 if neighbours == 8 else MOVES_8 + KNIGHT_MOVES


def _check_neighbours(neighbours):
    if isinstance(neighbours, bool) or neighbours not in NEIGHBOURS:
        raise OptionError(f"neighbours {neighbours!r}: choose 8 (axes and diagonals) or 16 (also knight moves)",
                          key="neighbours")


@dataclass(frozen=True)
class Accumulated:
    """Result of :func:`accumulate`.

    Attributes
    ----------
    minutes : ndarray of float64, shape (rows, cols)
        Least cost from (``to-hub``: to) the seeds, minutes; NaN = unreachable.
    label : ndarray of int64, shape (rows, cols)
        The ``seed_label`` of the seed whose cost reached the cell; 0 = none.
        Where two seeds tie exactly, either may be given.
    """

    minutes: np.ndarray
    label: np.ndarray


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


# --------------------------------------------------------------------- kernel
@numba.njit(cache=True, nogil=True)
def _sift_up(hk, hi, pos, i):
    k = hk[i]
    it = hi[i]
    while i > 0:
        p = (i - 1) >> 1
        if hk[p] <= k:
            break
        hk[i] = hk[p]
        hi[i] = hi[p]
        pos[hi[i]] = i
        i = p
    hk[i] = k
    hi[i] = it
    pos[it] = i


@numba.njit(cache=True, nogil=True)
def _sift_down(hk, hi, pos, i, size):
    k = hk[i]
    it = hi[i]
    while True:
        c = 2 * i + 1
        if c >= size:
            break
        if c + 1 < size and hk[c + 1] < hk[c]:
            c += 1
        if hk[c] >= k:
            break
        hk[i] = hk[c]
        hi[i] = hi[c]
        pos[hi[i]] = i
        i = c
    hk[i] = k
    hi[i] = it
    pos[it] = i


def _move_table(neighbours: int, ncols: int):
    """Per move: row and column offsets, linear offset, length in cells, and the linear offsets of the
    two cells a knight move passes through (0 for the others), and a knight flag."""
    mv = moves(neighbours)
    dr = np.array([m[0] for m in mv], dtype=np.int64)
    dc = np.array([m[1] for m in mv], dtype=np.int64)
    knight = (np.abs(dr) + np.abs(dc)) == 3
    # pass-through cells of a knight move: one step along the long axis, then also the short one
    ar = np.where(np.abs(dr) == 2, dr // 2, 0)
    ac = np.where(np.abs(dc) == 2, dc // 2, 0)
    br = np.where(np.abs(dr) == 2, dr // 2, dr)
    bc = np.where(np.abs(dc) == 2, dc // 2, dc)
    ncols = np.int64(ncols)
    return (dr, dc, dr * ncols + dc, np.sqrt((dr * dr + dc * dc).astype(np.float64)),
            np.where(knight, ar * ncols + ac, 0), np.where(knight, br * ncols + bc, 0), knight)


@numba.njit(cache=True, nogil=True)
def _kernel(pace, elev, use_elev, dist, lab, nrows, ncols, cell_m, travel_sign, slope_limit,
            best_slope, decay, seed_order, hk, hi, pos, mdr, mdc, moff, mlen, ma, mb, mknight):
    """Dijkstra over the implicit move graph (8 or 16 neighbours, from the move table).

    ``dist`` holds the seed minutes on entry (inf = no seed) and the result on
    exit; ``lab`` the seed labels likewise.  The seeds are not put in the
    heap: ``seed_order`` lists them by increasing seed minutes and is merged
    with the heap, which so only ever holds the frontier of cells reached by
    a move.  ``pos`` is -1 (not in the heap), >= 0 (heap slot) or -2
    (settled).  ``travel_sign`` is +1 when the move u -> v is travelled
    u -> v (from-hub), -1 when travelled v -> u (to-hub).
    """
    n = nrows * ncols
    for i in range(n):
        pos[i] = -1
    size = 0
    ns = seed_order.shape[0]
    si = 0
    nm = mdr.shape[0]
    off_best = abs(best_slope)
    while size > 0 or si < ns:
        # the next cell to settle: the heap top or the next seed, whichever is cheaper
        if si < ns and (size == 0 or dist[seed_order[si]] <= hk[0]):
            u = seed_order[si]
            si += 1
            if pos[u] != -1:
                continue  # settled already, or reached by a move for less than its seed (it is in the heap)
            du = dist[u]
            pos[u] = -2
        else:
            u = hi[0]
            du = hk[0]
            pos[u] = -2
            size -= 1
            if size > 0:
                hk[0] = hk[size]
                hi[0] = hi[size]
                pos[hi[0]] = 0
                _sift_down(hk, hi, pos, 0, size)
        pu = pace[u]
        if not (pu < np.inf):
            continue  # seeded but impassable: keeps its cost, spreads nowhere
        ru = u // ncols
        cu = u - ru * ncols
        zu = elev[u] if use_elev else 0.0
        lu = lab[u]
        for k in range(nm):
            rv = ru + mdr[k]
            cv = cu + mdc[k]
            if rv < 0 or rv >= nrows or cv < 0 or cv >= ncols:
                continue
            v = u + moff[k]
            if pos[v] == -2:
                continue
            pv = pace[v]
            if not (pv < np.inf):
                continue
            step = cell_m * mlen[k]
            if mknight[k]:
                # a knight move lies a quarter in each of its end cells and the two cells it passes through
                pa = pace[u + ma[k]]
                pb = pace[u + mb[k]]
                if not (pa < np.inf and pb < np.inf):
                    continue
                cost = step * 0.25 * ((pu + pa) + (pb + pv))
            else:
                cost = step * 0.5 * (pu + pv)
            if use_elev:
                zv = elev[v]
                if zu == zu and zv == zv:  # both known (NaN != NaN)
                    s = travel_sign * (zv - zu) / step
                    if s > slope_limit:
                        s = slope_limit
                    elif s < -slope_limit:
                        s = -slope_limit
                    cost *= math.exp(decay * (abs(s - best_slope) - off_best))
            nd = du + cost
            if nd < dist[v]:
                dist[v] = nd
                lab[v] = lu
                p = pos[v]
                if p == -1:
                    hk[size] = nd
                    hi[size] = v
                    pos[v] = size
                    size += 1
                    _sift_up(hk, hi, pos, size - 1)
                else:
                    hk[p] = nd
                    _sift_up(hk, hi, pos, p)


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


# ------------------------------------------------------------------ validation
def _check(flat_kmh, seed_minutes, cell_m, seed_label, elevation, direction, slope_limit, neighbours=16):
    flat = np.asarray(flat_kmh, dtype=np.float64)
    if flat.ndim != 2:
        raise OptionError(f"speed raster must be 2-D, got shape {flat.shape}")
    seeds = np.asarray(seed_minutes, dtype=np.float64)
    if seeds.shape != flat.shape:
        raise OptionError(f"seed raster has shape {seeds.shape}, speed raster {flat.shape}; they must match")
    if np.any(seeds < 0):
        raise OptionError("seed minutes must be zero or more (NaN or inf = not a seed)")
    if seed_label is None:
        labels = np.where(np.isfinite(seeds), 1, 0).astype(np.int64)
    else:
        labels = np.asarray(seed_label)
        if labels.shape != flat.shape:
            raise OptionError(f"seed label raster has shape {labels.shape}, speed raster {flat.shape}")
        labels = labels.astype(np.int64, copy=False)
    _check_common(cell_m, direction, slope_limit, neighbours)
    elevation = _check_elevation(elevation, flat.shape)
    return flat, seeds, labels, elevation


def _check_common(cell_m, direction, slope_limit, neighbours=16):
    if not (np.isfinite(cell_m) and cell_m > 0):
        raise OptionError(f"cell size {cell_m!r} m must be a positive number")
    if direction not in DIRECTIONS:
        raise OptionError(f"unknown direction '{direction}'; choose one of {', '.join(DIRECTIONS)}")
    if not (np.isfinite(slope_limit) and slope_limit > 0):
        raise OptionError(f"slope limit {slope_limit!r} must be a positive number (rise over run)")
    _check_neighbours(neighbours)


def _check_elevation(elevation, shape):
    if elevation is None:
        return None
    elevation = np.asarray(elevation, dtype=np.float64)
    if elevation.shape != shape:
        raise OptionError(f"elevation raster has shape {elevation.shape}, speed raster {shape}")
    return elevation


def _pace(flat: np.ndarray) -> np.ndarray:
    """Minutes per metre per cell (inf = impassable), flattened."""
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where((flat > 0) & np.isfinite(flat), 0.06 / flat, np.inf).ravel()


def accumulate(flat_kmh, seed_minutes, cell_m: float, seed_label=None, elevation=None,
               direction: str = "to-hub", slope_limit: float = SLOPE_LIMIT, neighbours: int = 16) -> Accumulated:
    """Least-cost minutes from every cell to the nearest seed (or back).

    Parameters
    ----------
    flat_kmh : ndarray of float, shape (rows, cols)
        Flat-ground speed per cell, km/h; 0 or NaN = impassable.
    seed_minutes : ndarray of float, shape (rows, cols)
        Cost already spent at each seed cell, minutes (e.g. the network trip
        from the entry point to the nearest hub); NaN or inf = not a seed.
        A seed's own cost is kept unless a move reaches the cell for less.
    cell_m : float
        Cell side, metres (square cells, projected CRS).
    seed_label : ndarray of int, shape (rows, cols), optional
        A label per seed (e.g. 1-based hub number), carried to every cell the
        seed reaches.  Default: 1 at every seed.
    elevation : ndarray of float, shape (rows, cols), optional
        Metres; NaN = unknown (moves touching it are costed as flat).
    direction : {"to-hub", "from-hub"}
        Which way the trip is travelled (see module notes).
    slope_limit : float, default :data:`~.friction.SLOPE_LIMIT`
        Slopes steeper than this (rise/run) are clipped to it.
    neighbours : {16, 8}
        Move set: 16 (axes, diagonals and knight moves; straight walking
        overstated by at most 2.75 %) or 8 (axes and diagonals; at most
        8.24 %).

    Returns
    -------
    Accumulated
        ``minutes`` (float64, NaN = unreachable) and ``label`` (int64, 0 = none).

    Raises
    ------
    OptionError
        Shapes differ, negative seeds, bad ``cell_m``/``direction``/``slope_limit``/``neighbours``.

    Notes
    -----
    Time O(N log N) for N cells; memory about 40 bytes per cell besides the
    inputs (result, labels, heap keys and items, heap positions).  The first
    call compiles the kernel (a few seconds) and caches it on disk.  The
    move rules (pieces, barriers, slope per move) are in the module notes.

    Examples
    --------
    >>> import numpy as np
    >>> seeds = np.full((1, 3), np.inf); seeds[0, 0] = 0.0
    >>> r = accumulate(np.full((1, 3), 6.0), seeds, cell_m=100.0)
    >>> r.minutes.round(6).tolist()   # 6 km/h = 1 min per 100 m
    [[0.0, 1.0, 2.0]]
    """
    flat, seeds, labels, elevation = _check(flat_kmh, seed_minutes, cell_m, seed_label, elevation,
                                            direction, slope_limit, neighbours)
    nrows, ncols = flat.shape
    n = nrows * ncols
    pace = _pace(flat)
    dist = np.where(np.isfinite(seeds), seeds, np.inf).ravel()
    lab = np.where(np.isfinite(seeds), labels, 0).ravel().astype(np.int64, copy=False)
    idx = np.int32 if n < 2**31 - 1 else np.int64
    hk = np.empty(n, dtype=np.float64)
    hi = np.empty(n, dtype=idx)
    pos = np.empty(n, dtype=idx)
    use_elev = elevation is not None
    elev = elevation.ravel() if use_elev else np.zeros(1)
    sign = -1.0 if direction == "to-hub" else 1.0
    seeded = np.flatnonzero(np.isfinite(dist)).astype(idx)
    seed_order = seeded[np.argsort(dist[seeded], kind="stable")]
    _kernel(pace, elev, use_elev, dist, lab, nrows, ncols, float(cell_m), sign, float(slope_limit),
            TOBLER_BEST_SLOPE, TOBLER_DECAY, seed_order, hk, hi, pos, *_move_table(neighbours, ncols))
    del hk, hi, pos
    dist = dist.reshape(nrows, ncols)
    dist[np.isinf(dist)] = np.nan
    return Accumulated(dist, lab.reshape(nrows, ncols))


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


def _reference_moves(neighbours: int):
    """Moves written from their definition: every primitive lattice step (coprime offsets) of
    Chebyshev length 1 (8 neighbours) or up to 2 (16: adds the knight moves)."""
    reach = 1 if neighbours == 8 else 2
    return [(dr, dc) for dr in range(-reach, reach + 1) for dc in range(-reach, reach + 1)
            if (dr, dc) != (0, 0) and math.gcd(abs(dr), abs(dc)) == 1]


def _reference_pieces(dr: int, dc: int):
    """Cells the straight move from the centre of (0, 0) to the centre of (dr, dc) crosses, as
    (row offset, column offset, share of the move's length), from the crossings of cell edges."""
    from fractions import Fraction

    ts = {Fraction(0), Fraction(1)}
    for d in (dr, dc):
        if d:
            for k in range(-3, 3):      # cell edges lie half-way between centres
                t = Fraction(2 * k + 1, 2 * d)
                if 0 < t < 1:
                    ts.add(t)
    ts = sorted(ts)
    out = []
    for t0, t1 in zip(ts[:-1], ts[1:]):
        tm = (t0 + t1) / 2
        out.append((round(dr * tm), round(dc * tm), float(t1 - t0)))
    return out


def accumulate_reference(flat_kmh, seed_minutes, cell_m: float, seed_label=None, elevation=None,
                         direction: str = "to-hub", slope_limit: float = SLOPE_LIMIT,
                         neighbours: int = 16) -> Accumulated:
    """The slow, obvious version of :func:`accumulate` (same parameters and result).

    Plain Python: a dict of settled costs and :mod:`heapq` with lazy
    deletion; the moves and the cells each crosses are worked out from their
    geometry rather than tabulated.  For tests on small grids only.
    """
    flat, seeds, labels, elevation = _check(flat_kmh, seed_minutes, cell_m, seed_label, elevation,
                                            direction, slope_limit, neighbours)
    rows, cols = flat.shape
    move_list = [(dr, dc, _reference_pieces(dr, dc)) for dr, dc in _reference_moves(neighbours)]

    def passable(r, c):
        s = flat[r, c]
        return math.isfinite(s) and s > 0

    def move_minutes(a, b, pieces):
        """Minutes to travel between a and b, in the trip's direction; None if a piece is impassable."""
        (ra, ca), (rb, cb) = a, b
        d = cell_m * math.hypot(ra - rb, ca - cb)
        minutes = 0.0
        for pr, pc, share in pieces:
            r, c = ra + pr, ca + pc
            if not passable(r, c):
                return None
            minutes += share * d * 60.0 / (1000.0 * flat[r, c])  # minutes per metre times metres
        if elevation is not None:
            za, zb = elevation[ra, ca], elevation[rb, cb]
            if math.isfinite(za) and math.isfinite(zb):
                # The search goes a -> b; the traveller goes b -> a on the trip to the hub.
                rise = (zb - za) if direction == "from-hub" else (za - zb)
                slope = max(-slope_limit, min(slope_limit, rise / d))
                tobler = 6.0 * math.exp(-3.5 * abs(slope + 0.05))
                tobler_flat = 6.0 * math.exp(-3.5 * 0.05)
                minutes = minutes * tobler_flat / tobler
        return minutes

    best = {}
    label = {}
    heap = []
    counter = 0
    for r in range(rows):
        for c in range(cols):
            if math.isfinite(seeds[r, c]):
                heapq.heappush(heap, (float(seeds[r, c]), counter, (r, c), int(labels[r, c])))
                counter += 1
    while heap:
        cost, _, cell, lab = heapq.heappop(heap)
        if cell in best:
            continue
        best[cell] = cost
        label[cell] = lab
        r, c = cell
        if not passable(r, c):
            continue
        for dr, dc, pieces in move_list:
            nb = (r + dr, c + dc)
            if not (0 <= nb[0] < rows and 0 <= nb[1] < cols) or nb in best:
                continue
            m = move_minutes(cell, nb, pieces)
            if m is None:
                continue
            heapq.heappush(heap, (cost + m, counter, nb, lab))
            counter += 1
    minutes = np.full((rows, cols), np.nan)
    out_label = np.zeros((rows, cols), dtype=np.int64)
    for (r, c), v in best.items():
        minutes[r, c] = v
        out_label[r, c] = label[(r, c)]
    return Accumulated(minutes, out_label)
